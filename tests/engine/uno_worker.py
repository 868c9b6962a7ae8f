"""Recalculation worker: drives one headless LibreOffice over UNO for the test helper.

Runs under the *system* interpreter (the one that can ``import uno``), never under the
project's interpreter. It speaks line-delimited JSON: one request object per line on
stdin, one reply object per line on the protocol channel (the original stdout; the
process's fd 1 is pointed at stderr so stray prints cannot corrupt the channel).

Requests carry ``id`` and ``op``; replies echo ``id`` and carry ``ok`` plus either
the result fields or ``error`` (a message with the worker's traceback).

Ops: ``ping``, ``recalculate`` (``path``), ``shutdown``; ``run_command`` (open a book
in a window, dispatch a command URL there, read sheets back) and ``set_setting`` for the
extension's test; ``sleep`` (``seconds``) and
``crash`` (``code``) exist so the helper's timeout and crash paths can be tested.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import shutil
import sys
import tempfile
import time
import traceback
from typing import Any, TextIO

import uno  # type: ignore[import-not-found]
from com.sun.star.beans import PropertyValue  # type: ignore[import-not-found]

# The address helpers live beside this script (engine/addresses.py, shared with the
# cached-value reader); this script runs under the system Python, so put tests/ on the path.
_TESTS = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
if _TESTS not in sys.path:
    sys.path.insert(0, _TESTS)

from engine.addresses import column_letters

FORMULA_CONTENT = 16  # com.sun.star.sheet.CellFlags.FORMULA
ERROR_RESULT = 4  # com.sun.star.sheet.FormulaResult.ERROR


def _used_area(sheet: Any) -> list[list[Any]]:
    """Cell values of a sheet from A1 to the end of its used area."""
    cursor = sheet.createCursor()
    cursor.gotoEndOfUsedArea(False)
    end = cursor.getRangeAddress()
    block = sheet.getCellRangeByPosition(0, 0, end.EndColumn, end.EndRow)
    return [list(row) for row in block.getDataArray()]


def prop(name: str, value: Any) -> Any:
    p = PropertyValue()
    p.Name = name
    p.Value = value
    return p


class Worker:
    """One UNO connection to a running soffice and the requests served over it."""

    def __init__(self, pipe: str, workdir: str, out: TextIO) -> None:
        self.pipe = pipe
        self.workdir = workdir
        self.out = out
        self.desktop: Any = None
        self.ctx: Any = None

    def connect(self, timeout: float) -> None:
        local = uno.getComponentContext()
        resolver = local.ServiceManager.createInstanceWithContext(
            "com.sun.star.bridge.UnoUrlResolver", local
        )
        url = f"uno:pipe,name={self.pipe};urp;StarOffice.ComponentContext"
        deadline = time.monotonic() + timeout
        while True:
            try:
                ctx = resolver.resolve(url)
                break
            except Exception as exc:  # NoConnectException until soffice listens
                if time.monotonic() > deadline:
                    raise RuntimeError(
                        f"could not connect to soffice on pipe {self.pipe!r} "
                        f"within {timeout:.0f} s: {exc}"
                    ) from exc
                time.sleep(0.05)
        self.ctx = ctx
        self.desktop = ctx.ServiceManager.createInstanceWithContext(
            "com.sun.star.frame.Desktop", ctx
        )

    def send(self, obj: dict[str, Any]) -> None:
        self.out.write(json.dumps(obj, allow_nan=False) + "\n")
        self.out.flush()

    # -- ops -------------------------------------------------------------------------

    def op_ping(self, req: dict[str, Any]) -> dict[str, Any]:
        return {"pid": os.getpid()}

    def op_sleep(self, req: dict[str, Any]) -> dict[str, Any]:
        time.sleep(float(req["seconds"]))
        return {}

    def op_crash(self, req: dict[str, Any]) -> dict[str, Any]:
        sys.stderr.write("worker: crashing on request\n")
        sys.stderr.flush()
        os._exit(int(req.get("code", 3)))

    def op_recalculate(self, req: dict[str, Any]) -> dict[str, Any]:
        source = os.path.abspath(req["path"])
        if not os.path.isfile(source):
            raise FileNotFoundError(f"no such workbook: {source}")
        # Load a private copy: nothing (no lock file, no backup) can appear beside the
        # caller's file, whatever the engine does.
        tmp = tempfile.mkdtemp(prefix="book-", dir=self.workdir)
        try:
            copy = os.path.join(tmp, "book" + os.path.splitext(source)[1])
            shutil.copyfile(source, copy)
            return self._recalculate_copy(copy)
        finally:
            shutil.rmtree(tmp, ignore_errors=True)

    def _recalculate_copy(self, copy: str) -> dict[str, Any]:
        t0 = time.monotonic()
        args = (
            prop("Hidden", True),
            prop("ReadOnly", True),
            prop("MacroExecutionMode", 0),  # NEVER_EXECUTE
            prop("UpdateDocMode", 0),  # NO_UPDATE: never fetch external links
        )
        doc = self.desktop.loadComponentFromURL(uno.systemPathToFileUrl(copy), "_blank", 0, args)
        if doc is None:
            raise RuntimeError("soffice returned no document (load failed)")
        try:
            if not hasattr(doc, "calculateAll"):
                raise RuntimeError("the file did not load as a spreadsheet")
            t1 = time.monotonic()
            doc.calculateAll()
            t2 = time.monotonic()
            sheets = [self._read_sheet(doc.Sheets.getByIndex(i)) for i in range(doc.Sheets.Count)]
            t3 = time.monotonic()
        finally:
            doc.close(True)
        return {
            "sheets": sheets,
            "seconds": {"load": t1 - t0, "calculate": t2 - t1, "read": t3 - t2},
        }

    def _read_sheet(self, sheet: Any) -> dict[str, Any]:
        errors: set[tuple[int, int]] = set()
        for ra in sheet.queryFormulaCells(ERROR_RESULT).getRangeAddresses():
            for col in range(ra.StartColumn, ra.EndColumn + 1):
                for row in range(ra.StartRow, ra.EndRow + 1):
                    errors.add((col, row))
        cells: list[list[Any]] = []
        for ra in sheet.queryContentCells(FORMULA_CONTENT).getRangeAddresses():
            block = sheet.getCellRangeByPosition(
                ra.StartColumn, ra.StartRow, ra.EndColumn, ra.EndRow
            )
            data = block.getDataArray()
            formulas = block.getFormulaArray()
            letters = [column_letters(c) for c in range(ra.StartColumn, ra.EndColumn + 1)]
            for i, (data_row, formula_row) in enumerate(zip(data, formulas)):
                row = ra.StartRow + i
                for j, (value, formula) in enumerate(zip(data_row, formula_row)):
                    col = ra.StartColumn + j
                    address = f"{letters[j]}{row + 1}"
                    if (col, row) in errors:
                        cell = sheet.getCellByPosition(col, row)
                        # getString() gives "#DIV/0!" etc., or "Err:502" for codes
                        # that have no spreadsheet error literal.
                        cells.append([address, None, cell.getString(), cell.getError(), formula])
                    else:
                        cells.append([address, value, None, 0, formula])
        return {"name": sheet.getName(), "cells": cells}

    def op_run_command(self, req: dict[str, Any]) -> dict[str, Any]:
        t0 = time.monotonic()
        args = (
            prop("Hidden", True),
            prop("MacroExecutionMode", 0),  # NEVER_EXECUTE
            prop("UpdateDocMode", 0),  # NO_UPDATE: never fetch external links
        )
        path = req.get("path")
        url = "private:factory/scalc" if path is None else uno.systemPathToFileUrl(path)
        doc = self.desktop.loadComponentFromURL(url, "_blank", 0, args)
        if doc is None:
            raise RuntimeError("soffice returned no document (load failed)")
        frame = doc.getCurrentController().getFrame()
        try:
            for sheet, address, value in req.get("edits", []):
                doc.getSheets().getByName(sheet).getCellRangeByName(address).setValue(value)
            if req.get("active"):
                controller = doc.getCurrentController()
                controller.setActiveSheet(doc.getSheets().getByName(req["active"]))
            helper = self.ctx.ServiceManager.createInstanceWithContext(
                "com.sun.star.frame.DispatchHelper", self.ctx
            )
            t1 = time.monotonic()
            event = helper.executeDispatch(frame, req["url"], "", 0, ())
            t2 = time.monotonic()
            # The command may have put a new document in the window (a reload).
            controller = frame.getController()
            doc = controller.getModel() if controller is not None else doc
            sheets = doc.getSheets()
            values = {}
            for name in req.get("read", []):
                if not sheets.hasByName(name):
                    continue
                values[name] = _used_area(sheets.getByName(name))
            state = getattr(event, "State", None)
            result = getattr(event, "Result", None)
            return {
                "state": state,
                "result": result if isinstance(result, (str, int, float, bool)) else None,
                "active": controller.getActiveSheet().getName() if controller else None,
                "sheets": [sheets.getByIndex(i).getName() for i in range(sheets.getCount())],
                "values": values,
                "seconds": {"load": t1 - t0, "command": t2 - t1, "read": time.monotonic() - t2},
            }
        finally:
            with contextlib.suppress(Exception):
                frame.getController().getModel().close(True)
            with contextlib.suppress(Exception):
                doc.close(True)

    def op_set_setting(self, req: dict[str, Any]) -> dict[str, Any]:
        provider = self.ctx.ServiceManager.createInstanceWithContext(
            "com.sun.star.configuration.ConfigurationProvider", self.ctx
        )
        access = provider.createInstanceWithArguments(
            "com.sun.star.configuration.ConfigurationUpdateAccess",
            (prop("nodepath", req["nodepath"]),),
        )
        access.setPropertyValue(req["name"], req["value"])
        access.commitChanges()
        return {}

    def op_shutdown(self, req: dict[str, Any]) -> dict[str, Any]:
        self.terminate_office()
        return {}

    def terminate_office(self) -> None:
        if self.desktop is None:
            return
        desktop, self.desktop = self.desktop, None
        # The bridge is torn down as soffice exits, so terminate() may raise.
        with contextlib.suppress(Exception):
            desktop.terminate()

    # -- loop ------------------------------------------------------------------------

    def serve(self, requests: TextIO) -> None:
        for line in requests:
            if not line.strip():
                continue
            req_id: Any = None
            try:
                req = json.loads(line)
                req_id = req.get("id")
                handler = getattr(self, "op_" + str(req.get("op")), None)
                if handler is None:
                    raise ValueError(f"unknown op {req.get('op')!r}")
                reply = handler(req)
                self.send({"id": req_id, "ok": True, **reply})
                if req.get("op") == "shutdown":
                    return
            except Exception as exc:  # noqa: BLE001 - every failure goes to the caller
                self.send(
                    {
                        "id": req_id,
                        "ok": False,
                        "error": f"{type(exc).__name__}: {exc}",
                        "traceback": traceback.format_exc(),
                    }
                )
        # stdin closed: the test process went away; do not leave soffice behind.
        self.terminate_office()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pipe", required=True)
    parser.add_argument("--workdir", required=True)
    parser.add_argument("--connect-timeout", type=float, default=60.0)
    args = parser.parse_args(argv)

    out = os.fdopen(os.dup(sys.stdout.fileno()), "w", encoding="utf-8")
    os.dup2(sys.stderr.fileno(), sys.stdout.fileno())
    worker = Worker(args.pipe, args.workdir, out)
    try:
        worker.connect(args.connect_timeout)
    except Exception as exc:  # noqa: BLE001 - reported to the caller, then exit
        worker.send({"id": 0, "ok": False, "error": str(exc), "traceback": traceback.format_exc()})
        return 2
    worker.send({"id": 0, "ok": True, "ready": True, "pid": os.getpid()})
    worker.serve(sys.stdin)
    return 0


if __name__ == "__main__":
    sys.exit(main())
