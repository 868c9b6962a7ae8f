"""The sheetfit command inside LibreOffice Calc: "Refresh sheetfit models".

A UNO protocol handler for the command URL ``org.sheetfit.calc:refresh`` (the menu item
and toolbar button in Addons.xcu dispatch it). It runs in LibreOffice's own Python, which
is not the Python sheetfit is installed in, so it calls sheetfit the way a person would:
the ``sheetfit`` command line, as a child process, on the saved file. Nothing of
sheetfit is reimplemented here; this file only saves, calls, reports and reloads.

Which program it runs, first that is set:
1. the setting ``org.sheetfit.calc.Settings/Command`` (Tools > Options > LibreOffice >
   Advanced > Open Expert Configuration, search "sheetfit");
2. the environment variable ``SHEETFIT_COMMAND`` as LibreOffice was started with it;
3. ``sheetfit`` on PATH.
A value is a path or a command line split as a POSIX shell would
("/opt/venv/bin/python -m sheetfit"). A value that is set but names no program is
reported, never passed over for the next one.

The dispatch also reports its outcome to a caller that asks for one (XNotifyingDispatch):
State SUCCESS with "refreshed PATH", or FAILURE with the message the box showed.
"""

from __future__ import annotations

import contextlib
import os
import shlex
import shutil
import subprocess

import uno  # type: ignore[import-not-found]
import unohelper  # type: ignore[import-not-found]
from com.sun.star.frame import (  # type: ignore[import-not-found]
    XDispatchProvider,
    XNotifyingDispatch,
)
from com.sun.star.lang import XInitialization, XServiceInfo  # type: ignore[import-not-found]

IMPLEMENTATION = "org.sheetfit.calc.RefreshHandler"
SERVICES = ("com.sun.star.frame.ProtocolHandler",)
PROTOCOL = "org.sheetfit.calc:"
COMMAND = "refresh"
SETTINGS_PATH = "/org.sheetfit.calc.Settings"
SETTING_NAME = "org.sheetfit.calc.Settings/Command"
ENV_NAME = "SHEETFIT_COMMAND"
TITLE = "sheetfit"
#: how long one refresh may take before the command gives up waiting (the child is killed)
REFRESH_TIMEOUT = 900.0
#: the import filters whose files are .xlsx workbooks sheetfit can read
XLSX_FILTERS = ("Calc MS Excel 2007 XML", "Calc Office Open XML")

HOW_TO_SET = (
    "Set the full path of the sheetfit program (for example /home/you/.venv/bin/sheetfit) in "
    "Tools > Options > LibreOffice > Advanced > Open Expert Configuration: search for "
    f"'sheetfit' and edit {SETTING_NAME}; or set the environment variable {ENV_NAME} "
    "before starting LibreOffice."
)

_SUCCESS = 0  # com.sun.star.frame.DispatchResultState.SUCCESS
_FAILURE = 1  # com.sun.star.frame.DispatchResultState.FAILURE


class Refusal(Exception):
    """Something the user can fix; the message is shown as it is."""


# -- plain steps (no UNO objects) ---------------------------------------------------------


def resolve_command(configured: str, environ: dict[str, str]) -> list[str]:
    """The program to run as an argument list, from the setting, the environment or PATH."""
    for source, text in (
        (f"the setting {SETTING_NAME}", configured),
        (f"the environment variable {ENV_NAME}", environ.get(ENV_NAME, "")),
    ):
        if not text.strip():
            continue
        try:
            argv = shlex.split(text)
        except ValueError as exc:
            raise Refusal(f"{source} ({text!r}) cannot be read as a command: {exc}. "
                          f"{HOW_TO_SET}") from exc
        program = shutil.which(argv[0], path=environ.get("PATH"))
        if program is None:
            raise Refusal(f"sheetfit was not found: {argv[0]!r}, from {source}, is not a "
                          f"program that can be run. {HOW_TO_SET}")
        return [program, *argv[1:]]
    program = shutil.which("sheetfit", path=environ.get("PATH"))
    if program is None:
        raise Refusal(f"sheetfit was not found: no program named sheetfit on PATH, and "
                      f"neither {SETTING_NAME} nor {ENV_NAME} is set. {HOW_TO_SET}")
    return [program]


def child_environment(environ: dict[str, str]) -> dict[str, str]:
    """The environment for sheetfit: LibreOffice's own, less what points Python at
    LibreOffice's interpreter (sheetfit runs in its own)."""
    return {k: v for k, v in environ.items() if k not in ("PYTHONHOME", "PYTHONPATH")}


def run_sheetfit(command: list[str], path: str, environ: dict[str, str]) -> None:
    """Refresh the workbook at ``path`` in place with the sheetfit command line.

    ``--force``: the workbook is open in this LibreOffice (its lock file is ours), has just
    been saved, and is reloaded afterwards; the read-only case is refused before this.
    """
    argv = [*command, "refresh", "--force", path]
    try:
        done = subprocess.run(
            argv,
            stdin=subprocess.DEVNULL,
            capture_output=True,
            text=True,
            errors="replace",
            timeout=REFRESH_TIMEOUT,
            env=child_environment(environ),
            check=False,
        )
    except subprocess.TimeoutExpired as exc:
        raise Refusal(f"sheetfit did not finish within {REFRESH_TIMEOUT:.0f} seconds and was "
                      "stopped; the workbook was not changed.") from exc
    except OSError as exc:
        raise Refusal(f"sheetfit could not be started ({command[0]}): {exc.strerror or exc}. "
                      f"{HOW_TO_SET}") from exc
    said = done.stderr.strip()
    if done.returncode == 0:
        return
    if done.returncode == 2:  # a refusal: sheetfit's own plain-words line(s)
        raise Refusal(said or "sheetfit refused the workbook (no reason given).")
    raise Refusal(f"sheetfit stopped with exit status {done.returncode}; the workbook was "
                  f"not changed.\n{said[-2000:]}")


def check_location(url: str, filter_name: str, readonly: bool) -> str:
    """The workbook's file path, or a refusal saying what to do first."""
    if not url:
        raise Refusal("This workbook has not been saved yet. Save it as an Excel 2007-365 "
                      "workbook (.xlsx) first (File > Save As), then refresh again.")
    if not url.startswith("file:"):
        raise Refusal("This workbook is not a file on this computer; sheetfit refreshes "
                      "local .xlsx files only. Save a copy on this computer first.")
    path = uno.fileUrlToSystemPath(url)
    if not path.lower().endswith(".xlsx") or filter_name not in XLSX_FILTERS:
        raise Refusal(f"This workbook is saved as {os.path.basename(path)!r} "
                      f"({filter_name or 'unknown format'}); sheetfit refreshes .xlsx workbooks "
                      "only. Save it as Excel 2007-365 (.xlsx) with File > Save As, then "
                      "refresh again.")
    if readonly or not os.access(path, os.W_OK):
        raise Refusal("This workbook is open read-only or its file cannot be written; "
                      "sheetfit writes the refreshed sheets into the file. Open a copy you "
                      "can edit.")
    return path


# -- the handler --------------------------------------------------------------------------


def _prop(name: str, value: object) -> object:
    p = uno.createUnoStruct("com.sun.star.beans.PropertyValue")
    p.Name = name
    p.Value = value
    return p


class RefreshHandler(unohelper.Base, XInitialization, XDispatchProvider, XNotifyingDispatch,
                     XServiceInfo):
    def __init__(self, ctx: object) -> None:
        self.ctx = ctx
        self.frame = None

    # UNO interface methods keep UNO's names. XInitialization: the frame the command runs in
    def initialize(self, args: tuple) -> None:
        if args:
            self.frame = args[0]

    # XServiceInfo
    def getImplementationName(self) -> str:
        return IMPLEMENTATION

    def supportsService(self, name: str) -> bool:
        return name in SERVICES

    def getSupportedServiceNames(self) -> tuple:
        return SERVICES

    # XDispatchProvider
    def queryDispatch(self, url, target, flags):
        if url.Protocol == PROTOCOL and url.Path == COMMAND:
            return self
        return None

    def queryDispatches(self, requests):
        return tuple(self.queryDispatch(r.FeatureURL, r.FrameName, r.SearchFlags)
                     for r in requests)

    # XDispatch / XNotifyingDispatch
    def dispatch(self, url, args) -> None:
        self._refresh()

    def dispatchWithNotification(self, url, args, listener) -> None:
        state, message = self._refresh()
        if listener is not None:
            event = uno.createUnoStruct("com.sun.star.frame.DispatchResultEvent")
            event.Source = self
            event.State = state
            event.Result = message
            listener.dispatchFinished(event)

    def addStatusListener(self, listener, url) -> None:
        event = uno.createUnoStruct("com.sun.star.frame.FeatureStateEvent")
        event.Source = self
        event.FeatureURL = url
        event.IsEnabled = True
        event.Requery = False
        listener.statusChanged(event)

    def removeStatusListener(self, listener, url) -> None:
        pass

    # the command --------------------------------------------------------------------

    def _refresh(self) -> tuple[int, str]:
        try:
            path = self._refresh_or_refuse()
        except Refusal as exc:
            self._message(str(exc))
            return _FAILURE, str(exc)
        except Exception as exc:  # noqa: BLE001 - a UNO error must not pass silently
            message = f"The refresh could not be completed: {type(exc).__name__}: {exc}"
            self._message(message)
            return _FAILURE, message
        return _SUCCESS, f"refreshed {path}"

    def _refresh_or_refuse(self) -> str:
        if self.frame is None:
            raise Refusal("There is no open workbook to refresh.")
        doc = self.frame.getController().getModel()
        if doc is None or not doc.supportsService("com.sun.star.sheet.SpreadsheetDocument"):
            raise Refusal("Refresh sheetfit models works on a spreadsheet; open the .xlsx "
                          "workbook in Calc first.")
        filter_name = next((a.Value for a in doc.getArgs() if a.Name == "FilterName"), "")
        path = check_location(doc.getLocation() if doc.hasLocation() else "",
                              str(filter_name or ""), bool(doc.isReadonly()))
        command = resolve_command(self._configured_command(), dict(os.environ))
        if doc.isModified():
            doc.store()  # same file, same format: no "keep format" question through the API
        sheet = self.frame.getController().getActiveSheet().getName()
        run_sheetfit(command, path, dict(os.environ))
        self._reload(doc, sheet)
        return path

    def _configured_command(self) -> str:
        smgr = self.ctx.getServiceManager()
        provider = smgr.createInstanceWithContext(
            "com.sun.star.configuration.ConfigurationProvider", self.ctx)
        try:
            access = provider.createInstanceWithArguments(
                "com.sun.star.configuration.ConfigurationAccess",
                (_prop("nodepath", SETTINGS_PATH),))
        except Exception:  # noqa: BLE001 - no schema (extension half-installed): unset
            return ""
        return str(access.getPropertyValue("Command") or "")

    def _reload(self, doc: object, sheet: str) -> None:
        """Load the refreshed file into the same window in place of ``doc``; back to ``sheet``.

        (The frame loads it, rather than ``.uno:Reload``, so the new document is in place
        when this returns, and a hidden document stays hidden.)
        """
        keep = [_prop(a.Name, a.Value) for a in doc.getArgs()
                if a.Name in ("FilterName", "Hidden", "MacroExecutionMode", "UpdateDocMode")]
        url = doc.getLocation()
        new = self.frame.loadComponentFromURL(url, "_self", 0, tuple(keep))
        if new is None:
            raise Refusal("The workbook was refreshed, but could not be opened again here; "
                          "open it again with File > Recent Documents.")
        sheets = new.getSheets()
        if sheets.hasByName(sheet):
            new.getCurrentController().setActiveSheet(sheets.getByName(sheet))

    def _message(self, text: str) -> None:
        """A message box over the document window (returns at once when headless)."""
        with contextlib.suppress(Exception):  # no window to show it on: the caller still gets it
            toolkit = self.ctx.getServiceManager().createInstanceWithContext(
                "com.sun.star.awt.Toolkit", self.ctx)
            parent = self.frame.getContainerWindow() if self.frame is not None else None
            box = toolkit.createMessageBox(
                parent, uno.Enum("com.sun.star.awt.MessageBoxType", "WARNINGBOX"),
                1, TITLE, text)  # 1: com.sun.star.awt.MessageBoxButtons.BUTTONS_OK
            box.execute()
            box.dispose()


g_ImplementationHelper = unohelper.ImplementationHelper()
g_ImplementationHelper.addImplementation(RefreshHandler, IMPLEMENTATION, SERVICES)
