"""The ``_xlfn.`` prefix of dotted function names in formulas written to a file.

Functions with dotted names need the prefix in the file, or engines show #NAME?
(docs/engine-facts.md, F1). Only functions sheet plans may use are listed.
"""

from __future__ import annotations

import re

__all__ = ["with_prefixes"]

_DOTTED = re.compile(
    r"(?<![\w.])((?:STDEV|VAR)\.[PS]|T\.(?:DIST(?:\.2T|\.RT)?|INV(?:\.2T)?)|F\.(?:DIST|INV)(?:\.RT)?"
    r"|NORM\.S?\.?(?:DIST|INV)|CHISQ\.(?:DIST|INV)(?:\.RT)?|PERCENTILE\.(?:INC|EXC)"
    r"|QUARTILE\.(?:INC|EXC)|MODE\.SNGL|RANK\.EQ|CONFIDENCE\.T)\("
)


def with_prefixes(formula: str) -> str:
    """The formula (without its '=') with ``_xlfn.`` before each dotted function, once."""
    if "_xlfn." in formula or "." not in formula:
        return formula
    return _DOTTED.sub(r"_xlfn.\1(", formula)
