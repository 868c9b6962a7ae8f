"""The page at / end to end in headless Chromium (Debian's, driven by Playwright for Python;
never `playwright install`), against the real service on loopback: token, upload, the
models, refresh with its phases, download; a refusal in plain words; keyboard only.

The screenshots are kept as test artefacts under build/artefacts/ (the path is printed).
"""

from __future__ import annotations

import os
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any, NoReturn

import pytest
from books import line_rows, make_book
from serving import NOW, TOKEN, serving

try:  # the assertions that wait; without playwright the browser fixture skips (or fails in CI)
    from playwright.sync_api import expect
except ImportError:  # pragma: no cover
    expect = None

from sheetfit.refresh import refresh

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_books" / "delivery_costs.xlsx"
ARTEFACTS = ROOT / "build" / "artefacts"
CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
HINT = "apt-get install -y --no-install-recommends chromium"
#: Longest wait for anything on the page, in milliseconds.
WAIT = 20_000


def _unavailable(message: str) -> NoReturn:
    """Fail in CI (where the browser must be installed), skip elsewhere."""
    if os.environ.get("CI") == "true":
        pytest.fail(message, pytrace=False)
    pytest.skip(message)


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    if not CHROMIUM.exists():
        _unavailable(f"the page tests need Debian's Chromium at {CHROMIUM}: {HINT}")
    if expect is None:
        _unavailable("the page tests need Playwright for Python: pip install -e '.[test]'")
    from playwright.sync_api import sync_playwright

    expect.set_options(timeout=WAIT)

    with sync_playwright() as p:
        running = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield running
        running.close()


@pytest.fixture(scope="module")
def base() -> Iterator[str]:
    with serving() as url:
        yield url


@pytest.fixture
def page(browser: Any, base: str) -> Iterator[Any]:
    context = browser.new_context(accept_downloads=True, viewport={"width": 1100,
                                                                   "height": 900})
    context.set_default_timeout(WAIT)
    tab = context.new_page()
    tab.goto(base + "/")
    yield tab
    context.close()


def _shot(page: Any, name: str, capsys: pytest.CaptureFixture[str]) -> Path:
    """Keep a full-page screenshot and say where, past pytest's capture (so CI logs show it)."""
    ARTEFACTS.mkdir(parents=True, exist_ok=True)
    path = ARTEFACTS / name
    page.screenshot(path=str(path), full_page=True)
    with capsys.disabled():
        print(f"\nscreenshot of the page: {path}")
    return path


def _give_token(page: Any, token: str = TOKEN) -> None:
    page.get_by_label("Token printed by").fill(token)
    page.get_by_role("button", name="Use this token").click()


def test_upload_see_models_refresh_and_download(page: Any, tmp_path: Path,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    expected = tmp_path / "cli.xlsx"
    refresh(EXAMPLE, expected, NOW)  # the CLI's core, at the service's fixed time

    _give_token(page)
    page.get_by_label("Choose an .xlsx workbook").set_input_files(str(EXAMPLE))
    route = page.locator("article", has=page.get_by_role("heading", name="route — least "
                                                                        "squares"))
    route.wait_for()
    text = route.inner_text()
    assert "delivery cost from stops, km driven" in text
    assert "rows used 35, left out 1, rows to predict 3" in text
    assert "intercept 5308.56, stops 2.10574, km driven 0.419553" in text
    assert "extrapolated, read with care" in text  # the caution
    settings = route.get_by_role("table").inner_text()
    assert re.search(r"intercept\s+yes\s+the workbook", settings)
    assert re.search(r"degree\s+1\s+default", settings)
    assert page.locator("article").count() == 2
    assert "2 models declared" in page.get_by_role("status").inner_text()

    page.get_by_role("button", name="Refresh the workbook").click()
    link = page.get_by_role("link", name="Download delivery_costs-refreshed.xlsx")
    link.wait_for()
    assert page.locator("#phases li.done").count() == 4
    assert page.locator("#phases").inner_text().count("(done)") == 4  # said, not only shown
    with page.expect_download() as caught:
        link.click()
    got = tmp_path / "downloaded.xlsx"
    caught.value.save_as(str(got))
    assert caught.value.suggested_filename == "delivery_costs-refreshed.xlsx"
    assert got.read_bytes() == expected.read_bytes()
    assert "Refreshed at 2026-03-31 18:00:00 UTC" in page.get_by_role("status").inner_text()
    _shot(page, "page.png", capsys)


def test_a_refused_book_is_explained_in_plain_words(page: Any, tmp_path: Path,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    book = make_book(tmp_path / "book.xlsx", {"Data": line_rows(8)},
                     {"sf_a_y": "Data!$A$1:$A$9", "sf_a_x": "Data!$B$1:$B$5"})
    _give_token(page)
    page.get_by_label("Choose an .xlsx workbook").set_input_files(str(book))
    alert = page.get_by_role("alert")
    alert.wait_for()
    text = alert.inner_text()
    assert "This workbook was not used" in text
    assert "file book.xlsx, defined name sf_a_x, sheet 'Data', cell B1:B5" in text
    assert page.get_by_role("button", name="Refresh the workbook").is_disabled()
    _shot(page, "page-refusal.png", capsys)


def test_a_wrong_token_is_said_so(page: Any) -> None:
    _give_token(page, "not-the-token-0123456789")
    page.get_by_label("Choose an .xlsx workbook").set_input_files(str(EXAMPLE))
    expect(page.get_by_role("status")).to_contain_text("The token was not accepted")


def test_keyboard_alone_reaches_everything_in_order(page: Any, tmp_path: Path) -> None:
    """Tab order: skip link, token, its button, the file input; Enter keeps the token and
    refreshes; focus lands on the download link when the book is ready."""
    order = []
    for _ in range(4):
        page.keyboard.press("Tab")
        order.append(page.evaluate("document.activeElement.id || "
                                   "document.activeElement.className"))
    assert order == ["skip", "token", "token-save", "book"]
    page.focus("#token")
    page.keyboard.type(TOKEN)
    page.keyboard.press("Enter")  # submits the token form; focus moves to the file input
    expect(page.locator("#book")).to_be_focused()
    page.set_input_files("#book", str(EXAMPLE))  # the file dialog itself is the system's
    page.locator("#refresh:not([disabled])").wait_for()
    page.focus("#refresh")
    page.keyboard.press("Enter")
    expect(page.locator("#download")).to_be_focused()
    with page.expect_download() as caught:
        page.keyboard.press("Enter")
    caught.value.save_as(str(tmp_path / "by-keyboard.xlsx"))
    assert (tmp_path / "by-keyboard.xlsx").stat().st_size > 0


def test_dropping_a_book_on_the_drop_zone_reads_it(page: Any) -> None:
    import base64

    _give_token(page)
    data = base64.b64encode(EXAMPLE.read_bytes()).decode()
    dropped = page.evaluate_handle(
        """(b64) => {
             const bytes = Uint8Array.from(atob(b64), (c) => c.charCodeAt(0));
             const dt = new DataTransfer();
             dt.items.add(new File([bytes], "delivery_costs.xlsx"));
             return dt;
           }""", data)
    page.dispatch_event("#drop", "dragover", {"dataTransfer": dropped})
    assert "over" in (page.get_attribute("#drop", "class") or "")  # the zone shows it
    page.dispatch_event("#drop", "drop", {"dataTransfer": dropped})
    expect(page.locator("article")).to_have_count(2)
    assert "over" not in (page.get_attribute("#drop", "class") or "")
    expect(page.get_by_role("status")).to_contain_text("2 models declared")
