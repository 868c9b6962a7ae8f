"""Checks a package passes before anything in it is used: sizes, names, damage, DTDs.

Two steps, both run by :func:`~sheetfit.reader.package.open_package`:

- :func:`check_directory`, from the zip's central directory alone (nothing inflated):
  part names that differ only in case (part names ignore case), the stated total
  uncompressed size and each member's compression ratio (zip bombs);
- :func:`scan_members`, one streaming read of every member: its CRC-32 (a damaged
  member is found here, not while writing), a DTD or entity declaration in a part
  sheetfit parses, and how much cell text the shared strings expand to.

Caps (stated in README, "Limits"):

- ``MAX_TOTAL``: 2 GiB uncompressed for the whole package. A 200,000-row × 5-column
  book is about 40 MB uncompressed, a 20 MB book about 100 MB.
- ``MAX_RATIO``: 200:1 for a member above ``RATIO_FROM`` (1 MiB) uncompressed.
  Spreadsheet XML written by applications and libraries compresses 3:1 to 30:1 (sheet
  XML of numbers about 5:1); deflate itself cannot exceed about 1030:1.
- ``MAX_SHARED_TEXT``: 256 MiB of cell text from shared strings (each string's size
  times the cells showing it, summed over the worksheets). The value reader keeps one
  copy of a shared string per cell (two, counting the Python side), so a small package
  whose cells all show one long string would otherwise take gigabytes.

The zip module stops inflating a member at its stated size and then checks the CRC,
so a member cannot inflate to more than the central directory says.
"""

from __future__ import annotations

import codecs
import re
import zipfile
import zlib
from array import array
from collections.abc import Iterable, Iterator

from sheetfit.errors import Context, PackageError

__all__ = [
    "MAX_RATIO",
    "MAX_SHARED_TEXT",
    "MAX_TOTAL",
    "RATIO_FROM",
    "check_directory",
    "damaged",
    "read_member",
    "scan_members",
]

MAX_TOTAL = 2 << 30
MAX_RATIO = 200
RATIO_FROM = 1 << 20
MAX_SHARED_TEXT = 256 << 20

_CHUNK = 1 << 20
_HEAD = 64 << 10  # a DTD sits in the prolog, before the root element
_CARRY = 64 << 10  # a string cell's <v> lies within this many characters of its t="s"
_RESAVE = "open and re-save the book in a spreadsheet application"
_SI = re.compile(rb"<(?:[\w.-]+:)?si[\s>/]")
# A cell showing a shared string: t="s" (any quotes and spacing; an attribute merely
# ending in "t" with the value "s" counts too, which only overstates), then at most a
# formula, then the string's index. Matched on UTF-8 bytes: about 0.3 s per 100 MB.
_STRING_CELL = re.compile(
    rb"t\s*=\s*[\"']s[\"'][^>]*>\s*"
    rb"(?:<(?:[\w.-]+:)?f\b[^>]*/>\s*|<(?:[\w.-]+:)?f\b[^>]*>[^<]*</(?:[\w.-]+:)?f>\s*)?"
    rb"<(?:[\w.-]+:)?v>\s*(\d+)\s*<"
)
_DTD = re.compile(r"<!(?:DOCTYPE|ENTITY)\b")


def _mib(n: int) -> str:
    return f"{n / (1 << 20):,.0f} MiB"


def damaged(member: str, file: str, why: str) -> PackageError:
    """The refusal for a member that cannot be read back as stored."""
    return PackageError(f"member {member} is damaged ({why})", Context(file=file), hint=_RESAVE)


def check_directory(zf: zipfile.ZipFile, file: str) -> None:
    """Refuse from the central directory alone: case-duplicate names, sizes beyond the caps."""
    seen: dict[str, str] = {}
    total = 0
    for info in zf.infolist():
        key = info.filename.lower()
        if key in seen:
            other = seen[key]
            what = "twice" if other == info.filename else f"as {other} and {info.filename}"
            raise PackageError(
                f"the package holds the part {other} {what}; part names ignore case, so "
                "it is ambiguous which one is meant",
                Context(file=file),
                hint=_RESAVE,
            )
        seen[key] = info.filename
        if info.flag_bits & 0x1:
            raise PackageError(
                f"member {info.filename} is encrypted inside the zip archive",
                Context(file=file),
                hint=_RESAVE,
            )
        total += info.file_size
        if info.file_size > RATIO_FROM and info.file_size > MAX_RATIO * max(info.compress_size, 1):
            ratio = info.file_size / max(info.compress_size, 1)
            raise PackageError(
                f"member {info.filename} would inflate {ratio:,.0f}-fold to "
                f"{_mib(info.file_size)} (sheetfit reads members up to {MAX_RATIO}:1 "
                f"above 1 MiB): this looks like a zip bomb",
                Context(file=file),
                hint="if the book is genuine, " + _RESAVE,
            )
    if total > MAX_TOTAL:
        raise PackageError(
            f"the package would inflate to {_mib(total)}, more than sheetfit reads "
            f"({_mib(MAX_TOTAL)})",
            Context(file=file),
            hint="move the data sheetfit needs into a smaller book",
        )


def _chunks(zf: zipfile.ZipFile, info: zipfile.ZipInfo, file: str) -> Iterator[bytes]:
    """The member's bytes in chunks, read once; a damaged member is a PackageError."""
    try:
        with zf.open(info) as fh:
            while chunk := fh.read(_CHUNK):
                yield chunk
    except zipfile.BadZipFile as exc:
        why = "CRC mismatch" if "CRC" in str(exc) else str(exc)
        raise damaged(info.filename, file, why) from None
    except (zlib.error, EOFError) as exc:
        raise damaged(info.filename, file, f"corrupt compressed data: {exc}") from None
    except NotImplementedError as exc:
        raise damaged(info.filename, file, f"unsupported zip feature: {exc}") from None


def read_member(zf: zipfile.ZipFile, name: str, file: str) -> bytes:
    """One member's bytes; a damaged member is a PackageError naming it."""
    return b"".join(_chunks(zf, zf.getinfo(name), file))


def _decoder(head: bytes) -> codecs.IncrementalDecoder:
    if head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        return codecs.getincrementaldecoder("utf-16")(errors="replace")
    if head.startswith(b"<\x00"):
        return codecs.getincrementaldecoder("utf-16-le")(errors="replace")
    if head.startswith(b"\x00<"):
        return codecs.getincrementaldecoder("utf-16-be")(errors="replace")
    return codecs.getincrementaldecoder("utf-8-sig")(errors="replace")


def _utf8_chunks(chunks: Iterable[bytes]) -> Iterator[bytes]:
    """The chunks as UTF-8: passed through, or re-encoded from a UTF-16 part."""
    it = iter(chunks)
    first = next(it, b"")
    if not first.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE, b"<\x00", b"\x00<")):
        yield first
        yield from it
        return
    dec = _decoder(first[:4])
    yield dec.decode(first).encode("utf-8")
    for chunk in it:
        yield dec.decode(chunk).encode("utf-8")
    yield dec.decode(b"", final=True).encode("utf-8")


def _string_sizes(chunks: Iterable[bytes]) -> array[int]:
    """The size (UTF-8 bytes, markup included: an upper bound) of each shared string."""
    starts = array("q")
    carry, offset = b"", 0
    for text in _utf8_chunks(chunks):
        buf = carry + text
        keep = max(0, len(buf) - 16)
        for m in _SI.finditer(buf):
            if m.start() < keep:
                starts.append(offset + m.start())
        carry, offset = buf[keep:], offset + keep
    if not starts:  # no <si> at all: nothing to size
        return array("q")
    end = offset + len(carry)
    return array("q", [b - a for a, b in zip(starts, [*starts[1:], end], strict=True)])


def _dtd_in(head: bytes) -> bool:
    return _DTD.search(_decoder(head[:4]).decode(head[:_HEAD])) is not None


def scan_members(
    zf: zipfile.ZipFile,
    file: str,
    parsed: set[str],
    worksheets: set[str],
    shared_strings: str | None,
) -> None:
    """Read every member once (CRC checked); refuse DTDs and runaway shared text.

    ``parsed`` are the members sheetfit parses as XML, ``worksheets`` those the value
    reader may read cells from, ``shared_strings`` the shared-strings member (names
    as stored, any case).
    """
    parsed = {p.lower() for p in parsed}
    worksheets = {w.lower() for w in worksheets}
    sizes: array[int] = array("q")
    sst = shared_strings.lower() if shared_strings else None
    infos = zf.infolist()
    for info in infos:
        if info.filename.lower() == sst:
            sizes = _string_sizes(_checked(zf, info, file, parsed))
    expanded = 0
    for info in infos:
        key = info.filename.lower()
        if key == sst:
            continue
        chunks = _checked(zf, info, file, parsed)
        if key in worksheets and len(sizes):
            expanded += _shared_text(chunks, sizes)
            if expanded > MAX_SHARED_TEXT:
                raise PackageError(
                    f"the cells of the worksheets show more than {_mib(MAX_SHARED_TEXT)} of "
                    f"text from the shared strings ({info.filename} and before); sheetfit "
                    "does not read books that large",
                    Context(file=file),
                    hint="remove long text repeated across many cells, or move the data "
                    "sheetfit needs into a smaller book",
                )
        else:
            for _ in chunks:
                pass


def _checked(
    zf: zipfile.ZipFile, info: zipfile.ZipInfo, file: str, parsed: set[str]
) -> Iterator[bytes]:
    """The member's chunks; for a part sheetfit parses, its prolog checked for a DTD first."""
    chunks = _chunks(zf, info, file)
    if info.filename.lower() not in parsed:
        yield from chunks
        return
    head = b""
    for chunk in chunks:
        if len(head) < _HEAD:
            head += chunk
            if len(head) < _HEAD:
                continue
            if _dtd_in(head):
                raise _dtd_refusal(info.filename, file)
            yield head
        else:
            yield chunk
    if len(head) < _HEAD:
        if _dtd_in(head):
            raise _dtd_refusal(info.filename, file)
        if head:
            yield head


def _dtd_refusal(member: str, file: str) -> PackageError:
    return PackageError(
        f"part {member} carries a DTD or entity declaration, which sheetfit does not read",
        Context(file=file),
        hint=_RESAVE,
    )


def _shared_text(chunks: Iterable[bytes], sizes: array[int]) -> int:
    """Bytes of shared-string text (UTF-8) the string cells of one worksheet show."""
    total, carry, n = 0, b"", len(sizes)
    for text in _utf8_chunks(chunks):
        buf = carry + text
        keep = max(0, len(buf) - _CARRY)
        for m in _STRING_CELL.finditer(buf):
            if m.start() >= keep:
                break
            i = int(m.group(1))
            if i < n:
                total += sizes[i]
        carry = buf[keep:]
    for m in _STRING_CELL.finditer(carry):
        i = int(m.group(1))
        if i < n:
            total += sizes[i]
    return total
