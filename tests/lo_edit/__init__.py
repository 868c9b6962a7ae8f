"""Edit cells of a book in LibreOffice and save it, as a user would (test helper).

``edit_in_libreoffice(src, out, edits)`` runs this file under the Python that can import
``uno`` (``engine.locate``): it starts a headless soffice on a private profile, loads
``src``, types each value into its cell (numbers as numbers, text as text), recalculates
(Calc does so after an edit; ``calculateAll`` makes it certain), and stores the book as
xlsx at ``out``.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

Edits = list[tuple[str, str, Any]]  # (sheet, cell such as "B5", value)


def edit_in_libreoffice(src: Path, out: Path, edits: Edits) -> Path:
    """Type ``edits`` into a copy of ``src`` in LibreOffice and save it as ``out``."""
    import pytest
    from engine.locate import INSTALL_HINT, find_engine

    info = find_engine()
    if info is None:
        if os.environ.get("CI") == "true":
            pytest.fail(f"LibreOffice is required: {INSTALL_HINT}", pytrace=False)
        pytest.skip(f"LibreOffice is required: {INSTALL_HINT}")
    done = subprocess.run(
        [info.python, __file__, info.soffice, str(src), str(out), json.dumps(edits)],
        capture_output=True, text=True, timeout=240, check=False,
    )
    assert done.returncode == 0 and out.exists(), done.stderr[-2000:]
    return out


def _run(soffice: str, src: str, out: str, edits: Edits) -> None:
    import uno  # type: ignore[import-not-found]
    from com.sun.star.beans import PropertyValue  # type: ignore[import-not-found]

    def prop(name: str, value: Any) -> Any:
        p = PropertyValue()
        p.Name, p.Value = name, value
        return p

    with tempfile.TemporaryDirectory() as base:
        pipe = f"sheetfit_edit_{os.getpid()}"
        office = subprocess.Popen(
            [soffice, f"-env:UserInstallation={Path(base, 'profile').as_uri()}", "--headless",
             "--invisible", "--norestore", "--nolockcheck", "--nodefault", "--nologo",
             f"--accept=pipe,name={pipe};urp;"],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            env={**os.environ, "SAL_USE_VCLPLUGIN": "svp"}, start_new_session=True,
        )
        try:
            local = uno.getComponentContext()
            resolver = local.ServiceManager.createInstanceWithContext(
                "com.sun.star.bridge.UnoUrlResolver", local)
            deadline = time.monotonic() + 120
            while True:
                try:
                    ctx = resolver.resolve(f"uno:pipe,name={pipe};urp;StarOffice.ComponentContext")
                    break
                except Exception:
                    if time.monotonic() > deadline:
                        raise
                    time.sleep(0.1)
            desktop = ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop",
                                                                   ctx)
            copy = Path(base, "book.xlsx")
            copy.write_bytes(Path(src).read_bytes())
            doc = desktop.loadComponentFromURL(uno.systemPathToFileUrl(str(copy)), "_blank", 0,
                                               (prop("Hidden", True),))
            for sheet, cell, value in edits:
                target = doc.Sheets.getByName(sheet).getCellRangeByName(cell)
                if isinstance(value, (int, float)):
                    target.setValue(float(value))
                else:
                    target.setString(str(value))
            doc.calculateAll()
            doc.storeToURL(uno.systemPathToFileUrl(str(Path(out).resolve())),
                           (prop("FilterName", "Calc MS Excel 2007 XML"),))
            doc.close(True)
            try:
                desktop.terminate()
            except Exception as exc:  # noqa: BLE001 - the bridge closes as soffice quits
                print(f"terminate: {exc}", file=sys.stderr)
        finally:
            try:
                office.wait(timeout=30)
            except subprocess.TimeoutExpired:
                office.kill()
                office.wait()


if __name__ == "__main__":
    _run(sys.argv[1], sys.argv[2], sys.argv[3], json.loads(sys.argv[4]))
