"""Write the service's OpenAPI schema to docs/openapi.json (tests/test_serve.py checks it).

    python scripts/write_openapi.py
"""

from __future__ import annotations

import json
from pathlib import Path

from sheetfit.serve import ServeConfig, create_app

OUT = Path(__file__).resolve().parents[1] / "docs" / "openapi.json"


def main() -> None:
    schema = create_app(ServeConfig(token="schema-only-token-unused")).openapi()
    OUT.write_text(json.dumps(schema, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
