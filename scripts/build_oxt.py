"""Package the LibreOffice Calc extension (extension/libreoffice/) as build/sheetfit.oxt.

Run from anywhere:  python scripts/build_oxt.py [OUT]
The bytes depend only on the sources: entries sorted by path, every timestamp
1980-01-01 00:00, one permission mode, one compression level. The extension's version
(description.xml) must equal the package version in pyproject.toml, or nothing is built.
"""

from __future__ import annotations

import re
import sys
import tomllib
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SOURCE = ROOT / "extension" / "libreoffice"
DEFAULT_OUT = ROOT / "build" / "sheetfit.oxt"
#: the earliest time a zip entry can carry; fixed so a rebuild gives the same bytes
FIXED_TIME = (1980, 1, 1, 0, 0, 0)
#: rw-r--r-- regular file, in the zip entry's Unix attribute bits
FILE_MODE = (0o100644 << 16)


def sources(root: Path = SOURCE) -> list[Path]:
    """The files that go into the package, sorted by their path inside it."""
    found = [
        p for p in root.rglob("*")
        if p.is_file()
        and "__pycache__" not in p.parts
        and not any(part.startswith(".") for part in p.relative_to(root).parts)
    ]
    return sorted(found, key=lambda p: p.relative_to(root).as_posix())


def check_version(root: Path = SOURCE) -> str:
    """The extension's version, after checking it equals the package's."""
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    wanted = project["project"]["version"]
    text = (root / "description.xml").read_text(encoding="utf-8")
    found = re.search(r'<version\s+value="([^"]+)"', text)
    if found is None or found.group(1) != wanted:
        raise SystemExit(
            f"build_oxt: description.xml has version {found.group(1) if found else 'none'}, "
            f"pyproject.toml has {wanted}; make them equal"
        )
    return wanted


def build(out: Path = DEFAULT_OUT, root: Path = SOURCE) -> Path:
    """Write the .oxt and return its path."""
    check_version(root)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".tmp")
    with zipfile.ZipFile(tmp, "w") as zf:
        for path in sources(root):
            info = zipfile.ZipInfo(path.relative_to(root).as_posix(), date_time=FIXED_TIME)
            info.external_attr = FILE_MODE
            info.create_system = 3  # Unix, so the mode bits above are read as such
            info.compress_type = zipfile.ZIP_DEFLATED
            zf.writestr(info, path.read_bytes(), compresslevel=9)
    tmp.replace(out)
    return out


def main(argv: list[str]) -> int:
    out = Path(argv[0]).resolve() if argv else DEFAULT_OUT
    print(build(out))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
