"""The LibreOffice Calc extension (extension/libreoffice/, packaged by scripts/build_oxt.py).

Without an engine: the package is built with the same bytes every time, from the files
its manifest names, at the package's version. With LibreOffice (marked ``engine``): the
.oxt is installed with ``unopkg add`` into a fresh temporary user profile, a headless
soffice starts from a copy of that profile (the engine helper in tests/engine/, with
``SHEETFIT_COMMAND`` pointing at this environment's sheetfit), a copy of an example book
is opened through UNO, the command URL is dispatched in its window, and the cells of the
document the window shows afterwards are read back through UNO and compared with the
command line's refresh of the same input.
"""

from __future__ import annotations

import contextlib
import importlib.util
import json
import os
import pwd
import re
import shutil
import subprocess
import sys
import tempfile
import time
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import openpyxl
import pytest
from books import make_book
from defusedxml import ElementTree
from engine.locate import INSTALL_HINT, EngineInfo, find_engine
from engine.process import Engine

import sheetfit

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_books" / "delivery_costs.xlsx"
SOURCE = ROOT / "extension" / "libreoffice"
COMMAND_URL = "org.sheetfit.calc:refresh"
SETTINGS = "/org.sheetfit.calc.Settings"
SHEETFIT = Path(sys.executable).parent / "sheetfit"


def _outside_venv_path() -> str:
    """PATH without this virtual environment's bin folder.

    With an activated venv first on PATH (as .ci/run has it), soffice with the Python
    extension installed aborts at start with a DeploymentException (measured here:
    exit 134 after 0.4 s; the same test passes with the folder left out). LibreOffice
    is started from a desktop, not from inside a venv: the test starts it that way and
    reaches sheetfit through SHEETFIT_COMMAND, as a user does.
    """
    venv_bin = str(Path(sys.executable).parent)
    return os.pathsep.join(p for p in os.environ.get("PATH", "").split(os.pathsep)
                           if p and p.rstrip("/") != venv_bin.rstrip("/"))
#: the refresh time written on the index sheet differs between two refreshes
STAMP = re.compile(r"\d{4}-\d{2}-\d{2} \d{2}:\d{2}:\d{2} UTC")
MANIFEST_NS = "{http://openoffice.org/2001/manifest}"
SUCCESS, FAILURE = 0, 1  # com.sun.star.frame.DispatchResultState


def _build_module() -> Any:
    spec = importlib.util.spec_from_file_location("build_oxt", ROOT / "scripts" / "build_oxt.py")
    if spec is None or spec.loader is None:
        raise RuntimeError("scripts/build_oxt.py cannot be loaded")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


build_oxt = _build_module()


# -- the package, no engine ---------------------------------------------------------------


def test_build_gives_the_same_bytes_and_the_manifest_files(tmp_path: Path) -> None:
    first = build_oxt.build(tmp_path / "a" / "sheetfit.oxt")
    second = build_oxt.build(tmp_path / "b" / "sheetfit.oxt")
    assert first.read_bytes() == second.read_bytes()
    with zipfile.ZipFile(first) as zf:
        infos = zf.infolist()
        names = [i.filename for i in infos]
        assert names == sorted(names)
        assert {i.date_time for i in infos} == {(1980, 1, 1, 0, 0, 0)}
        assert not [n for n in names if "__pycache__" in n or n.endswith(".pyc")]
        for info in infos:  # every XML part parses
            if info.filename.endswith((".xml", ".xcu", ".xcs")):
                ElementTree.fromstring(zf.read(info))
        manifest = ElementTree.fromstring(zf.read("META-INF/manifest.xml"))
        listed = {e.get(MANIFEST_NS + "full-path") for e in manifest.iter(MANIFEST_NS + "file-entry")}
        assert listed and listed <= set(names), listed - set(names)
        description = zf.read("description.xml").decode()
    assert f'<version value="{sheetfit.__version__}"/>' in description


def test_build_refuses_a_version_other_than_the_package(tmp_path: Path) -> None:
    copy = tmp_path / "src"
    shutil.copytree(SOURCE, copy)
    text = (copy / "description.xml").read_text(encoding="utf-8")
    (copy / "description.xml").write_text(
        text.replace(f'value="{sheetfit.__version__}"', 'value="9.9.9"'), encoding="utf-8"
    )
    with pytest.raises(SystemExit, match="9.9.9"):
        build_oxt.build(tmp_path / "x.oxt", copy)
    assert not (tmp_path / "x.oxt").exists()


def test_command_url_is_the_one_the_handler_serves() -> None:
    addons = (SOURCE / "registry" / "Addons.xcu").read_text(encoding="utf-8")
    handlers = (SOURCE / "registry" / "ProtocolHandler.xcu").read_text(encoding="utf-8")
    script = (SOURCE / "sheetfit_refresh.py").read_text(encoding="utf-8")
    assert addons.count(f"<value>{COMMAND_URL}</value>") == 2  # menu item and toolbar button
    assert "<value>org.sheetfit.calc:*</value>" in handlers
    assert 'IMPLEMENTATION = "org.sheetfit.calc.RefreshHandler"' in script
    assert 'oor:name="org.sheetfit.calc.RefreshHandler"' in handlers
    assert 'PROTOCOL = "org.sheetfit.calc:"' in script and 'COMMAND = "refresh"' in script


# -- in LibreOffice -----------------------------------------------------------------------


def _unavailable(message: str) -> None:
    """Fail in CI (where LibreOffice must be installed), skip elsewhere."""
    if os.environ.get("CI") == "true":
        pytest.fail(message, pytrace=False)
    pytest.skip(message)


def _unopkg(info: EngineInfo) -> str:
    beside = Path(info.soffice).resolve().with_name("unopkg")
    found = str(beside) if os.access(beside, os.X_OK) else shutil.which("unopkg")
    if found is None:
        _unavailable(f"unopkg (LibreOffice's extension installer) is required: {INSTALL_HINT}")
    return str(found)


def _install(info: EngineInfo, oxt: Path, base: Path) -> Path:
    """``unopkg add`` the .oxt into a new user profile under ``base``; return the profile.

    unopkg refuses a per-user install as root, so as root it runs as ``nobody`` (the
    folder is handed to that user first); the profile is only copied from afterwards.
    """
    profile = base / "profile"
    command = [_unopkg(info), "add", f"-env:UserInstallation={profile.as_uri()}", str(oxt)]
    drop: dict[str, Any] = {}
    if os.geteuid() == 0:
        try:
            nobody = pwd.getpwnam("nobody")
        except KeyError:
            _unavailable("running as root and there is no user 'nobody' to run unopkg as")
        for path in (base, oxt):
            os.chown(path, nobody.pw_uid, nobody.pw_gid)
        drop = {"user": nobody.pw_uid, "group": nobody.pw_gid, "extra_groups": []}
    done = subprocess.run(
        command,
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=180,
        env={**os.environ, "HOME": str(base), "PATH": _outside_venv_path()},
        check=False,
        **drop,
    )
    if done.returncode != 0:
        raise RuntimeError(f"unopkg add failed ({done.returncode}):\n{done.stdout}\n{done.stderr}")
    return profile


@pytest.fixture(scope="module")
def calc() -> Iterator[Engine]:
    """A headless LibreOffice whose user profile has the extension installed by unopkg."""
    info = find_engine()
    if info is None:
        _unavailable(f"LibreOffice Calc is required in CI: {INSTALL_HINT}")
        return
    if not os.access(SHEETFIT, os.X_OK):
        raise RuntimeError(f"no sheetfit command beside this Python: {SHEETFIT}")
    base = Path(tempfile.mkdtemp(prefix="sheetfit-oxt-"))  # in /tmp: 'nobody' can enter
    os.chmod(base, 0o755)
    try:
        oxt = build_oxt.build(base / "sheetfit.oxt")
        profile = _install(info, oxt, base)
        with Engine(info, profile_template=profile,
                    env={"SHEETFIT_COMMAND": str(SHEETFIT), "PATH": _outside_venv_path()},
                    timeout=180.0) as running:
            yield running
    finally:
        shutil.rmtree(base, ignore_errors=True)


def _cli_refresh(book: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([str(SHEETFIT), "refresh", str(book)], stdin=subprocess.DEVNULL,
                          capture_output=True, text=True, timeout=180, check=False)


def _normal(value: Any) -> Any:
    if value is None or value == "":
        return None
    if isinstance(value, (bool, int, float)):
        return float(value)
    return STAMP.sub("<time>", str(value))


def _cells_from_uno(rows: list[list[Any]]) -> dict[tuple[int, int], Any]:
    return {(r, c): _normal(v) for r, row in enumerate(rows) for c, v in enumerate(row)
            if _normal(v) is not None}


def _cached_cells(book: Path) -> dict[str, dict[tuple[int, int], Any]]:
    """Each owned sheet's cells as saved (formula cells: their cached values)."""
    wb = openpyxl.load_workbook(book, data_only=True, read_only=True)
    try:
        return {
            ws.title: {(cell.row - 1, cell.column - 1): _normal(cell.value)
                       for row in ws.iter_rows() for cell in row
                       if getattr(cell, "value", None) is not None and _normal(cell.value) is not None}
            for ws in wb.worksheets if ws.title.startswith("sf ")
        }
    finally:
        wb.close()


def _formula_cells(book: Path) -> dict[str, set[tuple[int, int]]]:
    wb = openpyxl.load_workbook(book, read_only=True)
    try:
        return {
            ws.title: {(cell.row - 1, cell.column - 1) for row in ws.iter_rows() for cell in row
                       if isinstance(getattr(cell, "value", None), str)
                       and cell.value.startswith("=")}
            for ws in wb.worksheets if ws.title.startswith("sf ")
        }
    finally:
        wb.close()


def _assert_same(shown: dict[str, list[list[Any]]], book: Path) -> None:
    """The cells LibreOffice shows equal the saved values of ``book``'s owned sheets.

    Numbers: exactly, except formula cells, within the suite's recalculation tolerance
    (1e-9 relative, 1e-12 absolute; tests/engine/compare.py) in case LibreOffice
    recalculates a formula on load instead of showing its cached value.
    """
    want = _cached_cells(book)
    formulas = _formula_cells(book)
    assert shown and set(shown) <= set(want), (sorted(shown), sorted(want))
    for title, rows in shown.items():
        got = _cells_from_uno(rows)
        assert got.keys() == want[title].keys(), title
        for key, value in want[title].items():
            if isinstance(value, float) and key in formulas[title]:
                assert abs(got[key] - value) <= max(1e-9 * abs(value), 1e-12), (title, key)
            else:
                assert got[key] == value, (title, key, got[key], value)


def _owned(names: list[str]) -> list[str]:
    return [n for n in names if n.startswith("sf ")]


@pytest.mark.engine
def test_command_refreshes_the_open_book_as_the_cli_does(calc: Engine, tmp_path: Path) -> None:
    ours, theirs = tmp_path / "ext" / "delivery.xlsx", tmp_path / "cli" / "delivery.xlsx"
    for path in (ours, theirs):
        path.parent.mkdir()
        shutil.copyfile(EXAMPLE, path)
    done = _cli_refresh(theirs)
    assert done.returncode == 0, done.stderr
    expected = list(_cached_cells(theirs))
    assert "sf bykm coef" in expected and "sf route coef" in expected

    t0 = time.monotonic()
    reply = calc.run_command(ours, COMMAND_URL, active="Plan", read=expected)
    print(f"dispatch to reloaded document: {reply['seconds']['command']:.2f} s; "
          f"whole request {time.monotonic() - t0:.2f} s")
    assert (reply["state"], reply["result"]) == (SUCCESS, f"refreshed {ours}")
    assert reply["active"] == "Plan"  # the view stays on the sheet the user was on
    assert _owned(reply["sheets"]) == expected
    # What the window shows is the command line's refresh of the same input ...
    _assert_same(reply["values"], theirs)
    # ... and is the file on disk (saved values of the refreshed book).
    _assert_same(reply["values"], ours)
    coef = reply["values"]["sf route coef"]
    head = next(i for i, row in enumerate(coef) if row[0] == "term")
    assert [row[0] for row in coef[head + 1:head + 4]] == ["intercept", "stops", "km driven"]
    assert not list(ours.parent.glob(".~lock.*")) and not list(ours.parent.glob(".sheetfit*"))


@pytest.mark.engine
def test_an_edit_is_saved_and_refreshed_again(calc: Engine, tmp_path: Path) -> None:
    book = tmp_path / "delivery.xlsx"
    shutil.copyfile(EXAMPLE, book)
    first = calc.run_command(book, COMMAND_URL, read=["sf bykm coef"])
    assert first["state"] == SUCCESS, first["result"]
    # Triple one month's km (D3) in the open document: the command must save that edit
    # (LibreOffice writes the .xlsx, owned sheets included) before sheetfit reads the file.
    wb = openpyxl.load_workbook(book, read_only=True)
    km = float(wb["Deliveries"]["D3"].value)
    wb.close()
    second = calc.run_command(book, COMMAND_URL, edits=[("Deliveries", "D3", 3 * km)],
                              read=["sf bykm coef", "Deliveries"])
    assert second["state"] == SUCCESS, second["result"]
    assert second["values"]["Deliveries"][2][3] == 3 * km
    assert second["values"]["sf bykm coef"] != first["values"]["sf bykm coef"]
    # The command line on the book LibreOffice saved gives the numbers the window shows.
    again = tmp_path / "again.xlsx"
    shutil.copyfile(book, again)
    done = _cli_refresh(again)
    assert done.returncode == 0, done.stderr
    _assert_same({"sf bykm coef": second["values"]["sf bykm coef"]}, again)


@pytest.mark.engine
def test_refusal_is_shown_and_the_book_is_untouched(calc: Engine, tmp_path: Path) -> None:
    book = make_book(tmp_path / "bad.xlsx",
                     {"Data": [["cost", "units"], [1, 2], [2, 3], [4, 4]],
                      "Opts": [["method", "guesswork"]]},
                     {"sf_m_y": "Data!$A$1:$A$4", "sf_m_x": "Data!$B$1:$B$4",
                      "sf_m_opts": "Opts!$A$1:$B$1"})
    before = book.read_bytes()
    copy = tmp_path / "cli" / "bad.xlsx"  # the same name: the refusal names the file
    copy.parent.mkdir()
    shutil.copyfile(book, copy)
    done = _cli_refresh(copy)
    assert done.returncode == 2
    reply = calc.run_command(book, COMMAND_URL, read=[])
    assert reply["state"] == FAILURE
    assert reply["result"] == done.stderr.strip()
    assert "guesswork" in reply["result"]
    assert book.read_bytes() == before


@pytest.mark.engine
def test_unsaved_and_other_formats_are_refused_in_plain_words(
    calc: Engine, tmp_path: Path
) -> None:
    never_saved = calc.run_command(None, COMMAND_URL)
    assert never_saved["state"] == FAILURE
    assert "has not been saved yet" in never_saved["result"]
    assert ".xlsx" in never_saved["result"]

    text = tmp_path / "costs.csv"
    text.write_text("cost,units\n1,2\n2,3\n", encoding="utf-8")
    other = calc.run_command(text, COMMAND_URL)
    assert other["state"] == FAILURE
    assert "'costs.csv'" in other["result"] and ".xlsx workbooks only" in other["result"]
    assert text.read_text(encoding="utf-8") == "cost,units\n1,2\n2,3\n"


@pytest.mark.engine
def test_the_setting_chooses_the_program(calc: Engine, tmp_path: Path) -> None:
    book = tmp_path / "delivery.xlsx"
    shutil.copyfile(EXAMPLE, book)
    before = book.read_bytes()
    try:
        calc.set_setting(SETTINGS, "Command", str(tmp_path / "no-such" / "sheetfit"))
        missing = calc.run_command(book, COMMAND_URL)
        assert missing["state"] == FAILURE
        assert "sheetfit was not found" in missing["result"]
        assert "org.sheetfit.calc.Settings/Command" in missing["result"]
        assert "SHEETFIT_COMMAND" in missing["result"]
        assert book.read_bytes() == before
        # A command line (split as a shell would) in the setting wins over SHEETFIT_COMMAND.
        calc.set_setting(SETTINGS, "Command", f"'{sys.executable}' -m sheetfit")
        ran = calc.run_command(book, COMMAND_URL, read=["sf route coef"])
        assert ran["state"] == SUCCESS, ran["result"]
        assert "sf route coef" in ran["values"]
    finally:
        with contextlib.suppress(Exception):
            calc.set_setting(SETTINGS, "Command", "")


_STEPS = r"""
import json, sys
sys.path.insert(0, sys.argv[1])
import sheetfit_refresh as ext
case, arg = sys.argv[2], json.loads(sys.argv[3])
try:
    if case == "resolve":
        out = ext.resolve_command(arg["configured"], arg["environ"])
    elif case == "run":
        ext.REFRESH_TIMEOUT = arg.get("timeout", ext.REFRESH_TIMEOUT)
        out = ext.run_sheetfit(arg["command"], arg["path"], arg["environ"])
    elif case == "location":
        out = ext.check_location(arg["url"], arg["filter"], arg["readonly"])
    else:
        out = sorted(ext.child_environment(arg))
    print(json.dumps({"ok": out}))
except ext.Refusal as exc:
    print(json.dumps({"refusal": str(exc)}))
"""


def _fake(folder: Path, name: str, body: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text("#!/bin/sh\n" + body + "\n", encoding="utf-8")
    path.chmod(0o755)
    return path


@pytest.mark.engine
def test_plain_steps_under_libreoffices_python(tmp_path: Path) -> None:
    """The handler's steps that need no running office, in the Python that runs them."""
    info = find_engine()
    if info is None:
        _unavailable(f"LibreOffice's Python with uno is required in CI: {INSTALL_HINT}")
        return

    def step(case: str, arg: Any) -> dict[str, Any]:
        done = subprocess.run([info.python, "-c", _STEPS, str(SOURCE), case, json.dumps(arg)],
                              capture_output=True, text=True, timeout=60, check=True)
        return dict(json.loads(done.stdout))

    empty = tmp_path / "empty"
    empty.mkdir()
    bare = {"PATH": str(empty)}
    said = step("resolve", {"configured": "", "environ": bare})["refusal"]
    assert "no program named sheetfit on PATH" in said and "SHEETFIT_COMMAND" in said
    said = step("resolve", {"configured": "", "environ": {**bare, "SHEETFIT_COMMAND": "/no/sf"}})
    assert "'/no/sf', from the environment variable SHEETFIT_COMMAND" in said["refusal"]
    said = step("resolve", {"configured": "'unclosed", "environ": bare})["refusal"]
    assert "cannot be read as a command" in said
    found = _fake(tmp_path / "bin", "sheetfit", "exit 0")
    on_path = {"PATH": str(found.parent)}
    assert step("resolve", {"configured": "", "environ": on_path}) == {"ok": [str(found)]}
    # The setting wins over the environment variable, and keeps its arguments.
    both = {**on_path, "SHEETFIT_COMMAND": "/no/sf"}
    assert step("resolve", {"configured": f"{found} -v", "environ": both}) == {
        "ok": [str(found), "-v"]}

    book = str(tmp_path / "b.xlsx")
    seen = tmp_path / "argv"
    ok = _fake(tmp_path / "ok", "sheetfit", f'printf "%s\\n" "$@" > {seen}; exit 0')
    assert step("run", {"command": [str(ok)], "path": book, "environ": on_path}) == {"ok": None}
    assert seen.read_text().splitlines() == ["refresh", "--force", book]
    refused = _fake(tmp_path / "no", "sheetfit", 'echo "sheetfit: refused: b.xlsx, plain" >&2; exit 2')
    assert step("run", {"command": [str(refused)], "path": book, "environ": on_path}) == {
        "refusal": "sheetfit: refused: b.xlsx, plain"}
    fault = _fake(tmp_path / "fault", "sheetfit", 'echo "sheetfit: internal fault" >&2; exit 1')
    said = step("run", {"command": [str(fault)], "path": book, "environ": on_path})["refusal"]
    assert "exit status 1" in said and "sheetfit: internal fault" in said
    slow = _fake(tmp_path / "slow", "sheetfit", f"exec {shutil.which('sleep')} 30")
    t0 = time.monotonic()
    said = step("run", {"command": [str(slow)], "path": book, "environ": on_path,
                        "timeout": 1.0})["refusal"]
    assert "did not finish within 1 seconds and was stopped" in said
    assert time.monotonic() - t0 < 25  # the child was killed at the limit, not waited for

    xlsx = "Calc MS Excel 2007 XML"
    url = (tmp_path / "b.xlsx").as_uri()
    (tmp_path / "b.xlsx").write_bytes(b"")
    assert step("location", {"url": url, "filter": xlsx, "readonly": False}) == {"ok": book}
    said = step("location", {"url": url, "filter": xlsx, "readonly": True})["refusal"]
    assert "read-only" in said
    said = step("location", {"url": "https://host/b.xlsx", "filter": xlsx,
                             "readonly": False})["refusal"]
    assert "not a file on this computer" in said
    said = step("location", {"url": url, "filter": "calc8", "readonly": False})["refusal"]
    assert ".xlsx workbooks only" in said
    assert step("environment", {"PYTHONHOME": "/x", "PYTHONPATH": "/y", "HOME": "/h"}) == {
        "ok": ["HOME"]}
