"""The task-pane add-in manifest (extension/taskpane/manifest.xml).

The platform's XSD schemas could not be had from the package registries this project
reaches (tests/reference/README.md, "Task-pane manifest schema", says which packages were
looked at), so this is not a schema validation. It checks that the file is well-formed
and what the manifest format requires as remembered from the platform's published
manifest reference (from memory, not checked against the schema): the root element and
namespace of schema version 1.1 with ``xsi:type="TaskPaneApp"``, the required elements
in the schema's sequence order, a GUID ``Id``, a ``Version`` of at most four dot-separated
numbers, the ``DisplayName`` (125) and ``Description`` (250) length limits, https
addresses, a ``Workbook`` host and one of the permission levels a task pane may ask for.
"""

from __future__ import annotations

import re
from pathlib import Path
from urllib.parse import urlsplit

from defusedxml import ElementTree

import sheetfit

MANIFEST = Path(__file__).resolve().parents[1] / "extension" / "taskpane" / "manifest.xml"
NS = "{http://schemas.microsoft.com/office/appforoffice/1.1}"
XSI_TYPE = "{http://www.w3.org/2001/XMLSchema-instance}type"
#: the OfficeApp children in the schema's sequence order (from memory)
ORDER = ["Id", "AlternateId", "Version", "ProviderName", "DefaultLocale", "DisplayName",
         "Description", "IconUrl", "HighResolutionIconUrl", "SupportUrl", "AppDomains",
         "Hosts", "Requirements", "DefaultSettings", "Permissions", "AllowSnapshot",
         "VersionOverrides"]
REQUIRED = ["Id", "Version", "ProviderName", "DefaultLocale", "DisplayName", "Description",
            "IconUrl", "Hosts", "DefaultSettings", "Permissions"]
TASKPANE_PERMISSIONS = {"Restricted", "ReadDocument", "ReadAllDocument", "WriteDocument",
                        "ReadWriteDocument"}


def _root():  # type: ignore[no-untyped-def]
    return ElementTree.parse(MANIFEST).getroot()


def test_root_is_a_task_pane_app_of_schema_1_1() -> None:
    root = _root()
    assert root.tag == NS + "OfficeApp"
    assert root.get(XSI_TYPE) == "TaskPaneApp"


def test_required_elements_in_schema_order() -> None:
    names = [child.tag.removeprefix(NS) for child in _root()]
    assert all(tag in ORDER for tag in names), names
    assert names == sorted(names, key=ORDER.index)
    assert len(names) == len(set(names))
    assert [n for n in REQUIRED if n not in names] == []


def test_values_are_within_the_format() -> None:
    root = _root()
    text = {child.tag.removeprefix(NS): (child.text or "").strip() for child in root}
    value = {child.tag.removeprefix(NS): child.get("DefaultValue") for child in root}
    assert re.fullmatch(r"[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}",
                        text["Id"])
    assert re.fullmatch(r"\d{1,5}(\.\d{1,5}){0,3}", text["Version"])
    assert text["Version"].split(".")[:3] == sheetfit.__version__.split(".")
    assert text["DefaultLocale"] == "en-US"
    assert 0 < len(value["DisplayName"] or "") <= 125
    assert 0 < len(value["Description"] or "") <= 250
    assert text["Permissions"] in TASKPANE_PERMISSIONS
    hosts = [h.get("Name") for h in root.iter(NS + "Host")]
    assert hosts == ["Workbook"]
    sources = [s.get("DefaultValue") for s in root.iter(NS + "SourceLocation")]
    assert len(sources) == 1


def test_every_address_is_https_on_this_computer() -> None:
    root = _root()
    urls = [e.get("DefaultValue") for e in root.iter()
            if e.tag.removeprefix(NS) in ("IconUrl", "HighResolutionIconUrl", "SourceLocation")]
    assert len(urls) == 3
    for url in urls:
        parts = urlsplit(url or "")
        assert parts.scheme == "https", url  # the platform loads add-in pages over https only
        assert parts.hostname == "localhost" and parts.port == 8443, url
        assert len(url or "") <= 2048
