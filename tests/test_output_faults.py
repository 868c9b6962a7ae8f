"""Faults on the way out: permissions, links, output mistakes, open and locked books, signals.

Every refusal here is exit status 2 with one line on stderr and no traceback, and the
workbook keeps its bytes. Cases that need a second process (a refresh held just before
it swaps its file in, killed, stopped or raced) run ``python -m sheetfit`` through a small
driver that pauses there until told to go on; every wait on a process is bounded
(``_DEADLINE`` seconds) and polls, never sleeps a guessed time.

The tests run as root in CI, where a read-only file or folder can still be written.
A read-only *book* is refused by policy from its mode bits (no write bit for anyone), so
those tests run as whoever runs them. The read-only *folder* cases run the refresh as the
unprivileged user ``nobody`` when the tests run as root (directly otherwise), since a
folder's mode is no refusal for root.
"""

from __future__ import annotations

import contextlib
import errno
import os
import pwd
import select
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
import time
import zipfile
from collections.abc import Iterator
from pathlib import Path

import pytest
from books import line_rows, make_book

import sheetfit.writer.target as target_mod
from sheetfit.cli import main

#: Upper bound (seconds) on any wait for a child process: start-up imports numpy and scipy.
_DEADLINE = 120.0
_NAMES = {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$9"}
_REPO = Path(__file__).resolve().parents[1]

# A refresh that stops just before its finished temporary file is moved into place, says
# so on stdout ("paused <temp path>") and goes on when a line arrives on stdin.
_DRIVER = """
import sys
import sheetfit.writer.target as target
real = target._swap_in
def paused(tmp, dest):
    print("paused", tmp, flush=True)
    sys.stdin.readline()
    return real(tmp, dest)
target._swap_in = paused
from sheetfit.cli import main
sys.exit(main(sys.argv[1:]))
"""


def _book(folder: Path, name: str = "book.xlsx") -> Path:
    return make_book(folder / name, {"Data": line_rows(8)}, _NAMES)


def _owned_sheets(path: Path) -> list[str]:
    with zipfile.ZipFile(path) as z:
        wb = z.read("xl/workbook.xml").decode()
    return [t for t in ("sf index", "sf a coef", "sf a fitted", "sf a resid") if t in wb]


def _refused(rc: int, err: str, *phrases: str) -> None:
    """Exit 2, exactly one line on stderr, no traceback, the expected phrases in it."""
    assert rc == 2, err
    assert "Traceback" not in err
    line = err.strip()
    assert line.count("\n") == 0, err
    assert line.startswith("sheetfit: refused: "), err
    for phrase in phrases:
        assert phrase in line, (phrase, line)


def _run(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str]:
    rc = main(["refresh", *args])
    return rc, capsys.readouterr().err


def _ours(folder: Path) -> list[str]:
    """sheetfit's hidden files in a folder (temporary files, lock files)."""
    return sorted(n for n in os.listdir(folder) if n.startswith(".sheetfit-"))


# --- 1. permissions --------------------------------------------------------------------


@pytest.mark.parametrize("mode", [0o644, 0o664, 0o640, 0o600])
def test_refresh_keeps_the_permission_bits(tmp_path: Path, capsys, mode: int) -> None:
    """The refreshed book has the original mode, not the temporary file's 0600."""
    p = _book(tmp_path)
    os.chmod(p, mode)
    rc, err = _run(capsys, str(p))
    assert rc == 0, err
    assert stat.S_IMODE(os.stat(p).st_mode) == mode
    assert _owned_sheets(p) == ["sf index", "sf a coef", "sf a fitted", "sf a resid"]
    assert _ours(tmp_path) == []


@pytest.mark.skipif(os.geteuid() != 0, reason="giving a file to another owner needs root")
def test_refresh_keeps_owner_and_group(tmp_path: Path, capsys) -> None:
    """Run by root on someone else's book, the new file keeps that owner and group."""
    nobody = pwd.getpwnam("nobody")
    p = _book(tmp_path)
    os.chown(p, nobody.pw_uid, nobody.pw_gid)
    rc, err = _run(capsys, str(p))
    assert rc == 0, err
    st = os.stat(p)
    assert (st.st_uid, st.st_gid) == (nobody.pw_uid, nobody.pw_gid)


def test_new_output_file_gets_the_usual_mode(tmp_path: Path, capsys) -> None:
    """A new --out file is created like any new file: 0666 less the umask (here 022)."""
    p = _book(tmp_path)
    old = os.umask(0o022)
    try:
        rc, err = _run(capsys, str(p), "--out", str(tmp_path / "new.xlsx"))
    finally:
        os.umask(old)
    assert rc == 0, err
    assert stat.S_IMODE(os.stat(tmp_path / "new.xlsx").st_mode) == 0o644


def test_read_only_book_is_refused(tmp_path: Path, capsys) -> None:
    """No write bit for anyone: refused (by policy, so also for root), bytes and mode kept."""
    p = _book(tmp_path)
    os.chmod(p, 0o444)
    before = p.read_bytes()
    rc, err = _run(capsys, str(p))
    _refused(rc, err, "book.xlsx: the workbook is read-only", "use --out, or --force")
    assert p.read_bytes() == before
    assert stat.S_IMODE(os.stat(p).st_mode) == 0o444
    assert _ours(tmp_path) == []


def test_read_only_book_is_replaced_with_force_and_stays_read_only(tmp_path: Path,
                                                                   capsys) -> None:
    """--force replaces it; the new file is read-only like the one it replaced."""
    p = _book(tmp_path)
    os.chmod(p, 0o444)
    rc, err = _run(capsys, str(p), "--force")
    assert rc == 0, err
    assert stat.S_IMODE(os.stat(p).st_mode) == 0o444
    assert "sf a coef" in _owned_sheets(p)


def test_read_only_book_can_be_written_elsewhere(tmp_path: Path, capsys) -> None:
    """--out leaves a read-only book alone and is not refused for it."""
    p = _book(tmp_path)
    os.chmod(p, 0o444)
    before = p.read_bytes()
    rc, err = _run(capsys, str(p), "--out", str(tmp_path / "out.xlsx"))
    assert rc == 0, err
    assert p.read_bytes() == before


# --- 2. symbolic links -----------------------------------------------------------------


def test_symlinked_book_refreshes_its_target_and_keeps_the_link(tmp_path: Path,
                                                                capsys) -> None:
    """The link stays a link to the same place; the file it points to is refreshed, and
    the temporary and lock files live (and go) beside that file, not beside the link."""
    real_dir, link_dir = tmp_path / "real", tmp_path / "links"
    real_dir.mkdir()
    link_dir.mkdir()
    p = _book(real_dir)
    os.chmod(p, 0o664)
    link = link_dir / "book.xlsx"
    link.symlink_to(p)
    rc, err = _run(capsys, str(link))
    assert rc == 0, err
    assert link.is_symlink() and os.readlink(link) == str(p)
    assert stat.S_ISREG(os.lstat(p).st_mode)
    assert stat.S_IMODE(os.stat(p).st_mode) == 0o664
    assert "sf a coef" in _owned_sheets(p)
    assert os.listdir(link_dir) == ["book.xlsx"]
    assert os.listdir(real_dir) == ["book.xlsx"]


# --- 3. --out mistakes and folders that cannot be written -------------------------------


def test_out_into_a_missing_folder_is_refused(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    before = p.read_bytes()
    out = tmp_path / "no such folder" / "out.xlsx"
    rc, err = _run(capsys, str(p), "--out", str(out))
    _refused(rc, err, "does not exist", "create it first, or choose another --out")
    assert not out.parent.exists()
    assert p.read_bytes() == before


def test_out_onto_an_existing_folder_is_refused(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    before = p.read_bytes()
    folder = tmp_path / "results"
    folder.mkdir()
    rc, err = _run(capsys, str(p), "--out", str(folder))
    _refused(rc, err, "this is a folder, not a file", f"--out {folder / 'book.xlsx'}")
    assert os.listdir(folder) == []
    assert p.read_bytes() == before


def test_out_onto_a_read_only_file_needs_force(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    out = tmp_path / "out.xlsx"
    out.write_bytes(b"keep me")
    os.chmod(out, 0o444)
    rc, err = _run(capsys, str(p), "--out", str(out))
    _refused(rc, err, "the file is read-only", "--force")
    assert out.read_bytes() == b"keep me"
    rc, err = _run(capsys, str(p), "--out", str(out), "--force")
    assert rc == 0, err
    assert "sf a coef" in _owned_sheets(out)


# Run as root, drop to the given uid and gid once everything is imported (the Python
# installation may sit where that user cannot read), then run the command line.
_DROP_DRIVER = """
import encodings.cp437, os, sys
import sheetfit.cli, sheetfit.refresh
uid, gid = int(sys.argv[1]), int(sys.argv[2])
os.setgroups([]); os.setgid(gid); os.setuid(uid)
sys.exit(sheetfit.cli.main(sys.argv[3:]))
"""


@contextlib.contextmanager
def _unprivileged_folder() -> Iterator[tuple[Path, list[str]]]:
    """A folder another user can reach, and the command that runs sheetfit as that user.

    As root: the refresh drops to ``nobody`` (skipped if there is no such user); otherwise
    it runs as the current user, whose read-only folders really are read-only.
    """
    base = Path(tempfile.mkdtemp(prefix="sheetfit-ro-", dir="/tmp"))
    os.chmod(base, 0o755)
    command = [sys.executable, "-m", "sheetfit"]
    try:
        if os.geteuid() == 0:
            try:
                nobody = pwd.getpwnam("nobody")
            except KeyError:
                pytest.skip("running as root and there is no user 'nobody' to drop to")
            command = [sys.executable, "-c", _DROP_DRIVER, str(nobody.pw_uid),
                       str(nobody.pw_gid)]
        yield base, command
    finally:
        for folder, _dirs, _files in os.walk(base):
            os.chmod(folder, 0o755)
        shutil.rmtree(base)


def _sheetfit_as(command: list[str], cwd: Path, *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*command, "refresh", *args], cwd=cwd, capture_output=True,
                          text=True, timeout=_DEADLINE, check=False)


def test_in_place_refresh_in_a_read_only_folder_is_refused() -> None:
    """A folder the user cannot write in: exit 2 with what to do (run unprivileged)."""
    with _unprivileged_folder() as (base, command):
        folder = base / "locked"
        folder.mkdir()
        p = _book(folder)
        os.chmod(p, 0o666)
        os.chmod(folder, 0o555)
        before = p.read_bytes()
        run = _sheetfit_as(command, base, str(p))
        _refused(run.returncode, run.stderr, "cannot write in the folder",
                 "that holds the workbook", "use --out")
        assert p.read_bytes() == before
        assert os.listdir(folder) == ["book.xlsx"]


def test_out_into_a_read_only_folder_is_refused() -> None:
    with _unprivileged_folder() as (base, command):
        p = _book(base)
        os.chmod(p, 0o644)
        folder = base / "locked"
        folder.mkdir(mode=0o555)
        os.chmod(folder, 0o555)
        before = p.read_bytes()
        run = _sheetfit_as(command, base, str(p), "--out", str(folder / "out.xlsx"))
        _refused(run.returncode, run.stderr, "cannot write in the folder",
                 "choose another --out")
        assert os.listdir(folder) == []
        assert p.read_bytes() == before


@pytest.mark.parametrize(("call", "code", "phrase"), [
    ("fsync", errno.ENOSPC, "no room to write the workbook"),
    ("replace", errno.EACCES, "cannot write the workbook in the folder"),
    ("replace", errno.EIO, "cannot write the workbook (Input/output error)"),
])
def test_os_errors_while_writing_are_refusals(tmp_path: Path, capsys, monkeypatch,
                                              call: str, code: int, phrase: str) -> None:
    """An OS error during the write (disk full, permission, I/O): exit 2 saying what to do,
    the book keeps its bytes, no temporary or lock file is left."""
    p = _book(tmp_path)
    before = p.read_bytes()

    def fail(*_args: object, **_kwargs: object) -> None:
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(target_mod.os, call, fail)
    rc, err = _run(capsys, str(p))
    monkeypatch.undo()
    _refused(rc, err, phrase)
    assert p.read_bytes() == before
    assert os.listdir(tmp_path) == ["book.xlsx"]


# --- 4. a spreadsheet program has the book open ---------------------------------------


@pytest.mark.parametrize("lock_name", [".~lock.book.xlsx#", "~$book.xlsx"])
def test_open_workbook_is_refused_unless_forced(tmp_path: Path, capsys,
                                                lock_name: str) -> None:
    """A program's lock file beside the book: refused in place; --out and --force go on."""
    p = _book(tmp_path)
    (tmp_path / lock_name).write_text("someone,host,2026\n")
    before = p.read_bytes()
    rc, err = _run(capsys, str(p))
    _refused(rc, err, "open in a spreadsheet program", lock_name,
             "close the workbook first, or use --out")
    assert p.read_bytes() == before
    rc, err = _run(capsys, str(p), "--out", str(tmp_path / "out.xlsx"))
    assert rc == 0, err
    assert p.read_bytes() == before
    rc, err = _run(capsys, str(p), "--force")
    assert rc == 0, err
    assert "sf a coef" in _owned_sheets(p)
    assert (tmp_path / lock_name).read_text() == "someone,host,2026\n"


# --- 5.-6. other processes: concurrent refreshes, kills and stop signals ----------------


class _Paused:
    """A refresh in its own process, held just before it moves its finished file in."""

    def __init__(self, cwd: Path, *args: str):
        self.proc = subprocess.Popen(
            [sys.executable, "-c", _DRIVER, "refresh", *args], cwd=cwd,
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, bufsize=0,
        )
        self.temp = Path(self._line().split(" ", 1)[1])

    def _line(self) -> str:
        """The first stdout line, waiting at most _DEADLINE seconds."""
        assert self.proc.stdout is not None and self.proc.stderr is not None
        fd, got, deadline = self.proc.stdout.fileno(), b"", time.monotonic() + _DEADLINE
        while b"\n" not in got:
            left = deadline - time.monotonic()
            if left <= 0:
                self.proc.kill()
                raise AssertionError(f"the driver did not pause within {_DEADLINE} s")
            if select.select([fd], [], [], min(left, 1.0))[0]:
                chunk = os.read(fd, 4096)
                if not chunk:  # end of output: it ended without pausing
                    _out, err = self.proc.communicate(timeout=_DEADLINE)
                    raise AssertionError(f"the driver ended without pausing: {err!r}")
                got += chunk
        return got.split(b"\n", 1)[0].decode()

    def go_on(self) -> tuple[int, str]:
        _out, err = self.proc.communicate(b"\n", timeout=_DEADLINE)
        return self.proc.returncode, err.decode()

    def finish(self) -> tuple[int, str]:
        _out, err = self.proc.communicate(timeout=_DEADLINE)
        return self.proc.returncode, err.decode()


def _sheetfit(cwd: Path, *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "sheetfit", "refresh", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=_DEADLINE, check=False)


def test_second_refresh_is_refused_while_the_first_holds_the_book(tmp_path: Path) -> None:
    """Two processes: the second gives up after --wait 0.5 s without touching the book or
    the first one's temporary file; once the first is done, a refresh goes through."""
    p = _book(tmp_path)
    before = p.read_bytes()
    first = _Paused(tmp_path, str(p))
    try:
        assert first.temp.exists() and (tmp_path / ".sheetfit-lock-book.xlsx").exists()
        second = _sheetfit(tmp_path, str(p), "--wait", "0.5")
        _refused(second.returncode, second.stderr,
                 "another sheetfit is refreshing this book", "waited 0.5 s")
        assert p.read_bytes() == before
        assert first.temp.exists()
    finally:
        rc, err = first.go_on()
    assert rc == 0, err
    assert "sf a coef" in _owned_sheets(p)
    again = _sheetfit(tmp_path, str(p))
    assert again.returncode == 0, again.stderr
    assert _ours(tmp_path) == []


def test_second_refresh_waits_for_the_first(tmp_path: Path) -> None:
    """With time to wait, the second refresh starts after the first has finished (it is
    still running when the first is let go) and both succeed, one after the other."""
    p = _book(tmp_path)
    first = _Paused(tmp_path, str(p))
    second = subprocess.Popen([sys.executable, "-m", "sheetfit", "refresh", str(p),
                               "--wait", str(_DEADLINE)], cwd=tmp_path,
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert second.poll() is None
        rc, err = first.go_on()
        assert rc == 0, err
        out, err = second.communicate(timeout=_DEADLINE)
    finally:
        if second.poll() is None:
            second.kill()
    assert second.returncode == 0, err
    assert out.startswith(f"refreshed {p}")
    assert "sf a coef" in _owned_sheets(p)
    assert _ours(tmp_path) == []


def test_killed_refresh_leaves_files_the_next_refresh_removes(tmp_path: Path) -> None:
    """SIGKILL cannot be cleaned up after: the temp and lock files stay, the book keeps its
    bytes. The next refresh removes that book's stale temp file (and its lock file), but
    not another book's nor anything not sheetfit's."""
    p = _book(tmp_path)
    before = p.read_bytes()
    other = tmp_path / ".sheetfit-other.xlsx.abcd1234.tmp"
    other.write_bytes(b"another book's")
    mine = tmp_path / "notes.tmp"
    mine.write_bytes(b"the user's")
    first = _Paused(tmp_path, str(p))
    first.proc.kill()
    first.finish()
    assert first.proc.returncode == -signal.SIGKILL
    assert p.read_bytes() == before
    assert first.temp.exists() and (tmp_path / ".sheetfit-lock-book.xlsx").exists()
    run = _sheetfit(tmp_path, str(p))
    assert run.returncode == 0, run.stderr
    assert not first.temp.exists()
    assert _ours(tmp_path) == [other.name]
    assert other.read_bytes() == b"another book's" and mine.read_bytes() == b"the user's"


@pytest.mark.parametrize(("sig", "status", "name"), [
    (signal.SIGTERM, 143, "SIGTERM"),
    (signal.SIGINT, 130, "SIGINT"),
])
def test_stop_signal_cleans_up(tmp_path: Path, sig: int, status: int, name: str) -> None:
    """SIGTERM like SIGINT: exit 128 + signal, one line, the temp and lock files removed,
    the book keeps its bytes."""
    p = _book(tmp_path)
    before = p.read_bytes()
    first = _Paused(tmp_path, str(p))
    assert first.temp.exists()
    first.proc.send_signal(sig)
    rc, err = first.finish()
    assert rc == status, err
    assert "Traceback" not in err
    assert err.strip() == f"sheetfit: stopped by {name}; the workbook was not changed"
    assert p.read_bytes() == before
    assert os.listdir(tmp_path) == ["book.xlsx"]


# --- 7. backup -------------------------------------------------------------------------


def test_backup_keeps_the_previous_file(tmp_path: Path, capsys) -> None:
    """--backup: the file being replaced is kept, byte for byte and with its mode, as
    NAME.before-refresh.xlsx; each refresh keeps the one before it."""
    p = _book(tmp_path)
    os.chmod(p, 0o640)
    original = p.read_bytes()
    kept = tmp_path / "book.before-refresh.xlsx"
    rc = main(["refresh", str(p), "--backup"])
    out = capsys.readouterr().out
    assert rc == 0
    assert f"the previous file is kept as {kept}" in out
    assert kept.read_bytes() == original
    assert stat.S_IMODE(os.stat(kept).st_mode) == 0o640
    first = p.read_bytes()
    assert first != original and "sf a coef" in _owned_sheets(p)
    rc, err = _run(capsys, str(p), "--backup")
    assert rc == 0, err
    assert kept.read_bytes() == first
    assert sorted(os.listdir(tmp_path)) == ["book.before-refresh.xlsx", "book.xlsx"]


def test_backup_with_nothing_to_replace_writes_none(tmp_path: Path, capsys) -> None:
    """--out to a new file replaces nothing, so there is nothing to keep."""
    p = _book(tmp_path)
    rc, err = _run(capsys, str(p), "--out", str(tmp_path / "new.xlsx"), "--backup")
    assert rc == 0, err
    assert sorted(os.listdir(tmp_path)) == ["book.xlsx", "new.xlsx"]


def test_backup_name_taken_by_a_folder_is_refused(tmp_path: Path, capsys) -> None:
    p = _book(tmp_path)
    before = p.read_bytes()
    (tmp_path / "book.before-refresh.xlsx").mkdir()
    rc, err = _run(capsys, str(p), "--backup")
    _refused(rc, err, "the backup name book.before-refresh.xlsx is taken by a folder")
    assert p.read_bytes() == before
