"""Where and how a refreshed workbook is written: the target file, its checks, lock and swap.

One job: put finished bytes on disk in place of a file without losing anything.

- :func:`destination` decides which file is written and refuses, before any work, what
  the user can fix: a read-only or open workbook (unless ``force``), a missing or
  read-only folder, a folder given as the output file. A symbolic link is followed: the
  file it points to is refreshed, in its own folder, and the link stays as it is.
- :func:`exclusive` holds an OS lock (``flock``) on a lock file of our own beside the
  target, ``.sheetfit-lock-NAME``, so two refreshes of one book never interleave; the
  second waits a bounded time, then is refused. Holding it, it removes temporary files
  that a killed refresh of the same target left (``.sheetfit-NAME.XXXXXXXX.tmp``), and it
  deletes the lock file when done.
- :func:`replacing` yields a temporary file beside the target; when the block succeeds it
  gives the file the replaced file's permission bits (and owner and group where allowed),
  syncs it, keeps the previous file as a backup if asked, and renames it into place. On
  any failure the temporary file is removed and the target keeps its bytes. OS errors come
  out as :class:`~sheetfit.errors.OutputError` (a refusal saying what to do).

Why a lock file of our own rather than a lock on the workbook: the workbook is replaced
by rename, so a lock on it is a lock on the old inode and a refresh starting after the
rename would lock the new one unhindered; locking a spreadsheet program's file could also
interfere with that program. The lock file's name never changes and it is never renamed;
a process that wins the lock checks that the name still points at the file it locked
(the previous holder deletes it while holding it) and otherwise tries again.
"""

from __future__ import annotations

import errno
import fcntl
import os
import re
import secrets
import stat
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from sheetfit.errors import BookBusyError, Context, OutputError, PackageError, SheetfitError
from sheetfit.stopping import not_now

__all__ = [
    "DEFAULT_WAIT",
    "Destination",
    "app_lock_files",
    "backup_path",
    "destination",
    "exclusive",
    "lock_path",
    "plain",
    "replacing",
    "stale_temps",
]

#: Seconds a refresh waits for another refresh of the same book before it is refused.
DEFAULT_WAIT = 30.0
_POLL = 0.05
_LOCK_PREFIX = ".sheetfit-lock-"
_TEMP_PREFIX = ".sheetfit-"
_TEMP_TOKEN = 8
_TEMP_ALPHABET = "abcdefghijklmnopqrstuvwxyz0123456789"
_BACKUP_INFIX = ".before-refresh"


@dataclass(frozen=True)
class Destination:
    """The file a refresh writes, as the user named it and as it really is."""

    #: as the user named it (may be a symbolic link)
    named: Path
    #: the file that is written (links followed); its folder holds temp, lock and backup
    path: Path
    #: whether a file is there now (it is replaced; its mode, owner and group are kept)
    exists: bool
    #: keep the file being replaced as :func:`backup_path` before replacing it
    backup: bool = False

    @property
    def folder(self) -> Path:
        return self.path.parent


def backup_path(path: Path) -> Path:
    """Where ``--backup`` keeps the previous file: ``costs.xlsx`` -> ``costs.before-refresh.xlsx``."""
    return path.with_name(f"{path.stem}{_BACKUP_INFIX}{path.suffix}")


def lock_path(path: Path) -> Path:
    """sheetfit's own lock file for a target: ``.sheetfit-lock-NAME`` beside it."""
    return path.with_name(f"{_LOCK_PREFIX}{path.name}")


def app_lock_files(path: Path) -> list[Path]:
    """The lock files spreadsheet programs leave beside an open workbook, in the two forms
    sheetfit checks: ``.~lock.NAME#`` and ``~$NAME``."""
    return [path.with_name(f".~lock.{path.name}#"), path.with_name(f"~${path.name}")]


def _temp_pattern(path: Path) -> re.Pattern[str]:
    return re.compile(
        re.escape(f"{_TEMP_PREFIX}{path.name}.") + f"[{_TEMP_ALPHABET}]{{{_TEMP_TOKEN}}}"
        + re.escape(".tmp")
    )


def stale_temps(path: Path) -> list[Path]:
    """sheetfit's temporary files for this target in its folder (regular files only)."""
    pattern = _temp_pattern(path)
    found = []
    try:
        names = os.listdir(path.parent)
    except OSError:
        return []
    for name in names:
        if pattern.fullmatch(name):
            p = path.parent / name
            try:
                if stat.S_ISREG(os.lstat(p).st_mode):
                    found.append(p)
            except OSError:
                continue
    return sorted(found)


def _refuse(message: str, path: Path | str, hint: str | None = None,
            busy: bool = False) -> OutputError:
    cls = BookBusyError if busy else OutputError
    return cls(message, Context(file=str(path)), hint=hint)


def _writable_folder(folder: Path) -> bool:
    return os.access(folder, os.W_OK | os.X_OK)


def _read_only(path: Path, st: os.stat_result) -> bool:
    """No write bit for anyone (a policy: root may write anyway), or none for this user."""
    return not (st.st_mode & 0o222) or not os.access(path, os.W_OK)


def _check_open_elsewhere(named: Path, real: Path, shown: str, hint: str) -> None:
    for candidate in dict.fromkeys(app_lock_files(named) + app_lock_files(real)):
        if os.path.lexists(candidate):
            raise _refuse(
                f"the workbook is open in a spreadsheet program (its lock file "
                f"{candidate.name} is there)",
                shown,
                hint=hint,
                busy=True,
            )


def destination(book: str | Path, out: str | Path | None = None, *, force: bool = False,
                backup: bool = False) -> Destination:
    """The file a refresh of ``book`` writes (``out``, or the book itself), checked up front.

    Raises OutputError (PackageError when the book itself cannot be opened in place) for
    what the user can fix; ``force`` allows replacing a read-only file or one that a
    spreadsheet program has open.
    """
    book = Path(book)
    in_place = out is None
    named = Path(out) if out is not None else book
    if out is not None and os.path.exists(named) and os.path.exists(book):
        try:
            in_place = os.path.samefile(named, book)
        except OSError:
            in_place = False
    real = Path(os.path.realpath(named))
    shown = str(named) if not in_place else str(book)
    st: os.stat_result | None
    try:
        st = os.stat(real)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise _refuse(f"cannot look at the file ({exc.strerror})", shown) from exc
    if in_place and st is None:
        raise PackageError("cannot open the file (No such file or directory)",
                           Context(file=str(book)))
    if st is not None and stat.S_ISDIR(st.st_mode):
        if in_place:
            raise PackageError("this is a folder, not a workbook", Context(file=str(book)),
                               hint="give the .xlsx file inside it")
        raise _refuse("this is a folder, not a file", shown,
                      hint=f"give a file name, e.g. --out {named / book.name}")
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise _refuse("this is not a regular file", shown, hint="choose another --out")
    folder = real.parent
    if not folder.is_dir():
        raise _refuse(f"the folder {folder} does not exist", shown,
                      hint="create it first, or choose another --out")
    if not _writable_folder(folder):
        if in_place:
            raise _refuse(f"cannot write in the folder {folder} that holds the workbook", shown,
                          hint="use --out to write the refreshed workbook elsewhere")
        raise _refuse(f"cannot write in the folder {folder}", shown,
                      hint="choose another --out")
    if st is not None and not force:
        if _read_only(real, st):
            raise _refuse(
                "the workbook is read-only" if in_place else "the file is read-only", shown,
                hint=("use --out, or --force to replace it" if in_place
                      else "choose another --out, or --force to replace it"),
            )
        _check_open_elsewhere(
            named, real, shown,
            hint=("close the workbook first, or use --out (--force refreshes it anyway)"
                  if in_place else "close it first, or choose another --out"),
        )
    if backup and st is not None:
        kept = backup_path(real)
        if os.path.isdir(kept):
            raise _refuse(f"the backup name {kept.name} is taken by a folder", shown,
                          hint="rename that folder, or refresh without --backup")
    return Destination(named=named, path=real, exists=st is not None, backup=backup)


def plain(target: str | Path) -> Destination:
    """A destination without the up-front checks (links followed, existing mode kept)."""
    named = Path(target)
    real = Path(os.path.realpath(named))
    return Destination(named=named, path=real, exists=real.is_file())


def _os_refusal(exc: OSError, dest: Destination, doing: str) -> OutputError:
    why = exc.strerror or str(exc)
    where = dest.folder
    if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        return _refuse(f"cannot {doing} in the folder {where} ({why})", dest.named,
                       hint="choose another --out, or check the folder's permissions")
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return _refuse(f"no room to {doing} in the folder {where} ({why})", dest.named,
                       hint="free some space, or choose another --out")
    if exc.errno == errno.ENOENT:
        return _refuse(f"the folder {where} went away while writing ({why})", dest.named,
                       hint="check the folder, or choose another --out")
    return _refuse(f"cannot {doing} ({why})", dest.named,
                   hint="check the folder and the disk, or choose another --out")


@contextmanager
def exclusive(dest: Destination, wait: float = DEFAULT_WAIT) -> Iterator[None]:
    """Hold sheetfit's lock on ``dest`` for the block; wait up to ``wait`` seconds for it.

    Raises OutputError when another sheetfit still holds it after ``wait`` seconds. While
    held, temporary files of earlier, killed refreshes of the same target are removed.
    """
    lock = lock_path(dest.path)
    deadline = time.monotonic() + max(wait, 0.0)
    while True:
        try:
            fd = os.open(lock, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC | os.O_NOFOLLOW, 0o666)
        except OSError as exc:
            raise _os_refusal(exc, dest, "create the lock file") from exc
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            if time.monotonic() >= deadline:
                raise _refuse(
                    "another sheetfit is refreshing this book", dest.named,
                    hint=f"let it finish, then refresh again (waited {wait:g} s)", busy=True,
                ) from None
            time.sleep(_POLL)
            continue
        except BaseException:
            os.close(fd)
            raise
        try:
            here = os.stat(lock, follow_symlinks=False)
            held = os.fstat(fd)
            current = (here.st_dev, here.st_ino) == (held.st_dev, held.st_ino)
        except FileNotFoundError:
            current = False
        if current:
            break
        os.close(fd)  # the previous holder deleted it after we opened it: try again
    try:
        for old in stale_temps(dest.path):
            old.unlink(missing_ok=True)
        yield
    finally:
        try:
            os.unlink(lock)
        except OSError:
            pass
        os.close(fd)


def _create_temp(path: Path) -> tuple[int, Path]:
    """A new empty file ``.sheetfit-NAME.XXXXXXXX.tmp`` beside ``path``, mode 0666 less umask."""
    for _ in range(100):
        token = "".join(secrets.choice(_TEMP_ALPHABET) for _ in range(_TEMP_TOKEN))
        tmp = path.with_name(f"{_TEMP_PREFIX}{path.name}.{token}.tmp")
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC, 0o666)
        except FileExistsError:
            continue
        return fd, tmp
    raise FileExistsError(errno.EEXIST, "no free temporary file name", str(path.parent))


def _take_over(fd: int, st: os.stat_result) -> None:
    """Give the open file ``fd`` the owner, group and permission bits of ``st``."""
    if (st.st_uid, st.st_gid) != (os.geteuid(), os.getegid()):
        try:
            os.fchown(fd, st.st_uid, st.st_gid)
        except PermissionError:
            try:  # an ordinary user may still give it the group, if a member of it
                os.fchown(fd, -1, st.st_gid)
            except PermissionError:
                pass
    os.fchmod(fd, stat.S_IMODE(st.st_mode))


def _sync_folder(folder: Path) -> None:
    try:
        dfd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(dfd)
    except OSError:
        pass
    finally:
        os.close(dfd)


def _keep_backup(dest: Destination) -> None:
    """Copy the file about to be replaced to its backup name, atomically, mode kept."""
    kept = backup_path(dest.path)
    fd, tmp = _create_temp(dest.path)
    try:
        with os.fdopen(fd, "wb") as fh, open(dest.path, "rb") as src:
            while chunk := src.read(1 << 20):
                fh.write(chunk)
            fh.flush()
            _take_over(fh.fileno(), os.fstat(src.fileno()))
            os.fsync(fh.fileno())
        os.replace(tmp, kept)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def _swap_in(tmp: Path, dest: Destination) -> None:
    """The last step: backup if asked, then rename the finished file over the target."""
    with not_now():
        if dest.backup and dest.exists:
            _keep_backup(dest)
        os.replace(tmp, dest.path)
        _sync_folder(dest.folder)


@contextmanager
def replacing(dest: Destination) -> Iterator[BinaryIO]:
    """A temporary file to write the new bytes into; on success it replaces the target.

    Raises OutputError for an OS error on the way (the target keeps its bytes).
    """
    try:
        fd, tmp = _create_temp(dest.path)
    except OSError as exc:
        raise _os_refusal(exc, dest, "write a temporary file") from exc
    try:
        with os.fdopen(fd, "wb") as fh:
            yield fh
            fh.flush()
            if dest.exists:
                try:
                    _take_over(fh.fileno(), os.stat(dest.path))
                except FileNotFoundError:
                    pass
            os.fsync(fh.fileno())
        _swap_in(tmp, dest)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        if isinstance(exc, SheetfitError):
            raise
        raise _os_refusal(exc, dest, "write the workbook") from exc
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
