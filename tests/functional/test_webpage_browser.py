"""The web page in a real browser: Chromium (through Selenium) against the real gunicorn.

Each view's form is filled in and sent as a person would; the numbers the page shows are
compared with the JSON API's answer to the same request, sent with requests. One browser
session serves the whole module. Every view is also saved as a screenshot: into
``SCREENSHOT_DIR`` when it is set (``docs/screenshots`` for the README), else a temporary
folder.

Without Chromium and chromedriver these tests are skipped with one line saying how to
install them, except under ``CI=true``, where a missing browser fails.
"""

from __future__ import annotations

import hashlib
import json
import os
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
import requests
from openpyxl import load_workbook

from tests.functional.browser import HOW_TO_INSTALL, browser_paths, chromium, full_page_screenshot
from tests.functional.servers import ROOT, Server, running_server

pytestmark = [pytest.mark.functional, pytest.mark.browser]

WAIT_SECONDS = 30
WIDE = 1100
NARROW = 360
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
POPULATION_CSV = ROOT / "examples" / "harbour-lane-purchase-orders.csv"
RECEIVABLES_CSV = ROOT / "examples" / "kestrel-receivables.csv"
LEDGER_CSV = ROOT / "examples" / "kestrel-receivables-ledger.csv"
KEY = "harbour-lane-page-7c41"


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    with running_server(tmp_path_factory.mktemp("page-server"), workers=2) as running:
        yield running


@pytest.fixture(scope="module")
def downloads(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("downloads")


@pytest.fixture(scope="module")
def screenshots(tmp_path_factory: pytest.TempPathFactory) -> Path:
    chosen = os.environ.get("SCREENSHOT_DIR")
    return Path(chosen) if chosen else tmp_path_factory.mktemp("screenshots")


@pytest.fixture(scope="module")
def browser(tmp_path_factory: pytest.TempPathFactory, downloads: Path) -> Iterator[Any]:
    if browser_paths() is None:
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true and Chromium or chromedriver is missing: " + HOW_TO_INSTALL)
        pytest.skip("browser tests skipped: " + HOW_TO_INSTALL)
    with chromium(tmp_path_factory.mktemp("profile"), downloads, width=WIDE) as session:
        session.set_script_timeout(WAIT_SECONDS)
        yield session


# ------------------------------------------------------------------------------ helpers


def wait_for(condition: Callable[[], Any], what: str) -> Any:
    deadline = time.monotonic() + WAIT_SECONDS
    while True:
        value = condition()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.05)


LOADS = iter(range(1, 1_000_000))


def open_view(browser: Any, server: Server, view: str) -> None:
    """The page loaded afresh (a new query string, so not a jump within the page), at a view."""
    browser.set_window_size(WIDE, 900)
    browser.get(f"{server.url}/?load={next(LOADS)}#{view}")
    wait_for(lambda: browser.execute_script(
        "return !document.getElementById(arguments[0]).hidden", view), f"view {view}")


def fill(browser: Any, values: dict[str, str]) -> None:
    """Type each value into the control with that id, replacing what it held."""
    for control_id, value in values.items():
        element = browser.find_element("id", control_id)
        if element.tag_name == "select":
            browser.execute_script(
                "arguments[0].value = arguments[1];"
                "arguments[0].dispatchEvent(new Event('change'));", element, value)
        elif element.get_attribute("type") == "file":
            element.send_keys(value)
        else:
            element.clear()
            element.send_keys(value)


def result_of(browser: Any, form_selector: str) -> Any:
    return browser.execute_script(
        "return document.querySelector(arguments[0]).nextElementSibling;", form_selector)


def press(browser: Any, form_selector: str, button_text: str) -> Any:
    """Click the form's button with that text; the form's result region once it has answered."""
    result = result_of(browser, form_selector)
    browser.execute_script("arguments[0].replaceChildren();", result)
    form = browser.find_element("css selector", form_selector)
    buttons = [b for b in form.find_elements("tag name", "button") if b.text == button_text]
    assert buttons, f"no button {button_text!r}"
    buttons[0].click()
    wait_for(lambda: browser.execute_script(
        "return arguments[0].querySelector('.result-heading, .problem, a.download');", result),
        f"the answer to {button_text!r}")
    return result


def value_shown(result: Any, label: str) -> str:
    """The text of the top answer table's row with that heading."""
    row = f"tr[th[normalize-space()='{label}']]"
    cell = result.find_element("xpath", f".//table[contains(@class, 'values')]/tbody/{row}/td")
    return str(cell.text).strip()


def api(server: Server, path: str, body: dict[str, Any], **kwargs: Any) -> Any:
    response = requests.post(f"{server.url}{path}", json=body, timeout=30, **kwargs)
    assert response.status_code == 200, response.text
    return response.json()


def api_upload(server: Server, path: str, file: Path, body: dict[str, Any]) -> Any:
    with file.open("rb") as handle:
        response = requests.post(f"{server.url}{path}", timeout=30, files={
            "file": (file.name, handle),
            "request": ("request.json", json.dumps(body), "application/json"),
        })
    assert response.status_code == 200, response.text
    return response.json()


def downloaded(folder: Path, name: str, before: float) -> Path:
    def ready() -> Path | None:
        path = folder / name
        if path.exists() and path.stat().st_mtime >= before - 1 and not list(
            folder.glob("*.crdownload")
        ):
            return path
        return None

    found: Path = wait_for(ready, f"the download {name}")
    return found


def shot(browser: Any, folder: Path, name: str, width: int = WIDE) -> None:
    browser.execute_script("window.scrollTo(0, 0);")
    full_page_screenshot(browser, folder / f"{name}.png", width)
    browser.set_window_size(WIDE, 900)


# Every element with text of its own, its colour against the first opaque background behind
# it: the contrast ratio of WCAG 2.2 (success criterion 1.4.3, AA), with its definition of
# relative luminance; large text (24 px, or 18.66 px bold) needs 3:1, other text 4.5:1.
LOW_CONTRAST = """
const rgb = (text) => text.match(/[\\d.]+/g).map(Number);
const channel = (c) => {
  c /= 255;
  return c <= 0.04045 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4;
};
const luminance = ([r, g, b]) => 0.2126 * channel(r) + 0.7152 * channel(g) + 0.0722 * channel(b);
const background = (el) => {
  for (let node = el; node; node = node.parentElement) {
    const colour = rgb(getComputedStyle(node).backgroundColor);
    if (colour.length < 4 || colour[3] === 1) return colour.slice(0, 3);
  }
  return [255, 255, 255];
};
const low = [];
for (const el of document.querySelectorAll("body *")) {
  const own = Array.from(el.childNodes).some((n) => n.nodeType === 3 && n.textContent.trim());
  if (!own || !el.getClientRects().length || el.closest("[hidden]")) continue;
  const style = getComputedStyle(el);
  const [a, b] = [luminance(rgb(style.color).slice(0, 3)), luminance(background(el))];
  const ratio = (Math.max(a, b) + 0.05) / (Math.min(a, b) + 0.05);
  const size = parseFloat(style.fontSize);
  const large = size >= 24 || (size >= 18.66 && Number(style.fontWeight) >= 700);
  if (ratio < (large ? 3 : 4.5)) {
    low.push(`${el.tagName} "${el.textContent.trim().slice(0, 40)}" ${ratio.toFixed(2)}`);
  }
}
return low;
"""


def low_contrast(browser: Any) -> list[str]:
    found: list[str] = browser.execute_script(LOW_CONTRAST)
    return found


def plain(number: float) -> str:
    """A number as the page writes it (JavaScript's String(), like Python's repr)."""
    return repr(number) if isinstance(number, float) else str(number)


# ------------------------------------------------------------------------------ views


def test_size_view_shows_the_plan_and_its_curve(
    browser: Any, server: Server, screenshots: Path
) -> None:
    open_view(browser, server, "size")
    fill(browser, {"size-population-size": "4200",
                   "size-population-label": "Harbour Lane purchase orders, Q3 2026",
                   "size-tolerable": "0.05", "size-expected": "0.01", "size-confidence": "0.95"})
    result = press(browser, "#size form", "Size the test")
    expected = api(server, "/v1/sample-size", {
        "population": {"size": 4200, "label": "Harbour Lane purchase orders, Q3 2026"},
        "tolerable_rate": 0.05, "expected_rate": 0.01, "confidence": 0.95})
    assert value_shown(result, "Sample size") == str(expected["sample_size"])
    assert value_shown(result, "Allowed deviations") == str(expected["allowed_deviations"])
    assert value_shown(result, "Risk of overreliance") == plain(expected["risk_of_overreliance"])
    assert result.find_element("css selector", ".summary").text == expected["summary"]
    chart = wait_for(lambda: browser.execute_script(
        "const img = arguments[0].querySelector('img.chart');"
        "return img && img.complete && img.naturalWidth > 0 ? img : null;", result),
        "the plan's curve")
    assert chart.get_attribute("src").startswith("blob:")
    assert low_contrast(browser) == []
    shot(browser, screenshots, "size")


def test_markdown_is_the_services_block_with_a_copy_button(browser: Any, server: Server) -> None:
    open_view(browser, server, "size")
    fill(browser, {"size-population-size": "", "size-tolerable": "0.05",
                   "size-expected": "0", "size-confidence": "0.95"})
    result = press(browser, "#size form", "Markdown for the workpaper")
    block = requests.post(f"{server.url}/v1/sample-size", timeout=30,
                          json={"tolerable_rate": 0.05, "expected_rate": 0, "confidence": 0.95},
                          headers={"Accept": "text/markdown"}).text
    assert result.find_element("tag name", "textarea").get_attribute("value") == block
    copy = next(b for b in result.find_elements("tag name", "button") if b.text == "Copy")
    copy.click()
    wait_for(lambda: "Copied" in result.text, "the copy to be confirmed")


def test_an_invalid_field_shows_the_services_message_beside_it(
    browser: Any, server: Server, screenshots: Path
) -> None:
    open_view(browser, server, "size")
    fill(browser, {"size-tolerable": "5", "size-expected": "0.01"})
    press(browser, "#size form", "Size the test")
    refused = requests.post(f"{server.url}/v1/sample-size", timeout=30,
                            json={"tolerable_rate": 5, "expected_rate": 0.01, "confidence": 0.95})
    assert refused.status_code == 422
    message = " ".join(refused.json()["errors"]["tolerable_rate"])
    field = browser.find_element("id", "size-tolerable")
    assert field.get_attribute("aria-invalid") == "true"
    note = browser.find_element("id", field.get_attribute("aria-describedby").split()[-1])
    assert note.text == f"tolerable_rate: {message}"
    # Beside its field: in the same block, right after the input.
    assert note.find_element("xpath", "..").find_element("tag name", "input").get_attribute(
        "id") == "size-tolerable"
    assert browser.switch_to.active_element.get_attribute("id") == "size-tolerable"
    assert low_contrast(browser) == []
    shot(browser, screenshots, "error")


def test_select_from_ranges_and_download_the_test_sheet(
    browser: Any, server: Server, downloads: Path, screenshots: Path
) -> None:
    open_view(browser, server, "select")
    fill(browser, {"select-ranges": "5001-5400", "select-exclude": "5013, 5207",
                   "select-size": "50", "select-seed": "harbour-lane-2026-q4",
                   "select-attributes": "approved before release\nthree-way match"})
    result = press(browser, "#select form", "Select")
    expected = api(server, "/v1/selection", {
        "population": {"ranges": [{"first": 5001, "last": 5400}], "exclude": [5013, 5207]},
        "sample_size": 50, "seed": "harbour-lane-2026-q4",
        "attributes": ["approved before release", "three-way match"]})
    assert value_shown(result, "Items") == ", ".join(str(i) for i in expected["items"])
    assert value_shown(result, "Selection fingerprint") == expected["selection_fingerprint"]
    shot(browser, screenshots, "select")

    started = time.time()
    press(browser, "#select form", "Download test sheet (XLSX)")
    sheet = downloaded(downloads, "test-sheet.xlsx", started)
    book = load_workbook(sheet)
    tests = book["Tests"]
    header = [cell.value for cell in tests[1]]
    items = [row[header.index("item")] for row in tests.iter_rows(min_row=2, values_only=True)]
    assert items == expected["items"]
    assert "three-way match: result" in header


def test_evaluate_the_completed_test_sheet(
    browser: Any, server: Server, downloads: Path, tmp_path: Path, screenshots: Path
) -> None:
    sheet = downloads / "test-sheet.xlsx"
    if not sheet.exists():
        pytest.skip("needs the test sheet downloaded by the selection test")
    book = load_workbook(sheet)
    tests = book["Tests"]
    header = [cell.value for cell in tests[1]]
    column = {name: header.index(name) + 1 for name in header}
    for row in range(2, tests.max_row + 1):
        tests.cell(row, column["approved before release: result"], "passed")
        tests.cell(row, column["three-way match: result"],
                   "deviation" if tests.cell(row, column["draw"]).value == 8 else "passed")
    completed = tmp_path / "harbour-lane-completed.xlsx"
    book.save(completed)

    open_view(browser, server, "evaluate")
    fill(browser, {"sheet-file": str(completed),
                   "sheet-rates": "approved before release = 0.1\nthree-way match = 0.1",
                   "sheet-confidence": "0.95"})
    result = press(browser, "form[data-multipart]", "Evaluate the sheet")
    expected = api_upload(server, "/v1/evaluation", completed, {
        "confidence": 0.95,
        "tolerable_rates": {"approved before release": 0.1, "three-way match": 0.1}})
    shown = result.find_elements(
        "xpath", ".//tr[th[normalize-space()='Upper deviation limit']]/td")
    assert [cell.text for cell in shown] == [
        plain(e["upper_deviation_limit"]) for e in expected["evaluations"]]
    deviations = result.find_elements(
        "xpath", ".//tr[th[normalize-space()='Deviations found']]/td")
    assert [cell.text for cell in deviations] == ["0", "1"]
    shot(browser, screenshots, "evaluate-sheet")

    started = time.time()
    press(browser, "form[data-multipart]", "Download the sheet with its evaluation")
    evaluated = load_workbook(downloaded(downloads, "evaluated-test-sheet.xlsx", started))
    assert "Evaluation" in evaluated.sheetnames
    assert "Tests" in evaluated.sheetnames


def test_evaluate_from_counts(browser: Any, server: Server, screenshots: Path) -> None:
    open_view(browser, server, "evaluate")
    fill(browser, {"eval-population-size": "4200", "eval-sample-size": "93",
                   "eval-deviations": "1", "eval-confidence": "0.95", "eval-tolerable": "0.05"})
    result = press(browser, "#evaluate form:not([data-multipart])", "Evaluate")
    expected = api(server, "/v1/evaluation", {
        "population": {"size": 4200}, "sample_size": 93, "deviations": 1,
        "confidence": 0.95, "tolerable_rate": 0.05})
    assert value_shown(result, "Upper deviation limit") == plain(expected["upper_deviation_limit"])
    assert value_shown(result, "Conclusion") == expected["conclusion"]
    shot(browser, screenshots, "evaluate")


def test_select_from_an_uploaded_population_file_and_download_csv(
    browser: Any, server: Server, downloads: Path
) -> None:
    open_view(browser, server, "select")
    browser.find_element("css selector", "input[name='population-kind'][value='file']").click()
    fill(browser, {"select-file": str(POPULATION_CSV), "select-id-column": "doc_no",
                   "select-size": "5", "select-seed": "harbour-lane-2026-q3",
                   "select-attributes": ""})
    result = press(browser, "#select form", "Select")
    expected = api_upload(server, "/v1/selection", POPULATION_CSV, {
        "population": {"file": {"id_column": "doc_no"}}, "sample_size": 5,
        "seed": "harbour-lane-2026-q3", "method": "random"})
    assert value_shown(result, "Items") == ", ".join(expected["items"])
    assert value_shown(result, "Population size") == str(expected["population_size"])

    started = time.time()
    press(browser, "#select form", "Download CSV")
    text = downloaded(downloads, "selection.csv", started).read_text(encoding="utf-8-sig")
    for item in expected["items"]:
        assert item in text


def test_select_from_listed_identifiers(browser: Any, server: Server) -> None:
    open_view(browser, server, "select")
    browser.find_element("css selector", "input[name='population-kind'][value='items']").click()
    identifiers = [f"NW-INV-{n:05d}" for n in range(1, 41)]
    fill(browser, {"select-items": "\n".join(identifiers), "select-size": "6",
                   "select-seed": "northwind-invoices-2026", "select-attributes": ""})
    result = press(browser, "#select form", "Select")
    expected = api(server, "/v1/selection", {
        "population": {"items": identifiers}, "sample_size": 6,
        "seed": "northwind-invoices-2026", "method": "random"})
    assert value_shown(result, "Items") == ", ".join(expected["items"])


def test_estimation_sizes(browser: Any, server: Server, screenshots: Path) -> None:
    open_view(browser, server, "estimate")
    fill(browser, {"est-margin": "0.05", "est-confidence": "0.95", "est-anticipated": "0.1",
                   "est-population-size": "4200"})
    result = press(browser, "#estimate form", "Find the sample sizes")
    expected = api(server, "/v1/estimation/sample-size", {
        "margin": 0.05, "confidence": 0.95, "anticipated_rate": 0.1,
        "population": {"size": 4200}})
    rows = result.find_elements("xpath", ".//table[caption[normalize-space()='Rows']]/tbody/tr")
    shown = [(r.find_elements("tag name", "td")[0].text, r.find_elements("tag name", "td")[1].text)
             for r in rows]
    assert shown == [(row["method"], str(row["sample_size"])) for row in expected["rows"]]
    shot(browser, screenshots, "estimate")


def test_monetary_plan_selection_and_evaluation(
    browser: Any, server: Server, screenshots: Path
) -> None:
    open_view(browser, server, "monetary")
    plan = press(browser, "form[data-operation='/v1/monetary/sample-size']", "Plan the sample")
    expected_plan = api(server, "/v1/monetary/sample-size", {
        "book_value": "2500000.00", "tolerable_misstatement": "125000.00",
        "expected_misstatement": "0", "confidence": 0.95})
    assert value_shown(plan, "Sample size") == str(expected_plan["sample_size"])
    assert value_shown(plan, "Sampling interval") == expected_plan["sampling_interval"]

    fill(browser, {"mus-items-file": str(RECEIVABLES_CSV)})
    wait_for(lambda: browser.find_element("id", "mus-items").get_attribute("value"),
             "the items read from the file")
    fill(browser, {"mus-select-size": "8", "mus-seed": "kestrel-valley-ar-2026-12"})
    selection = press(browser, "form[data-operation='/v1/monetary/selection']", "Select")
    lines = RECEIVABLES_CSV.read_text(encoding="utf-8").splitlines()[1:]
    population = [dict(zip(("id", "amount"), line.split(",")[:2], strict=True))
                  for line in lines if line]
    expected_selection = api(server, "/v1/monetary/selection", {
        "population": population, "sample_size": 8, "seed": "kestrel-valley-ar-2026-12",
        "method": "fixed_interval"})
    assert value_shown(selection, "Selection fingerprint") == (
        expected_selection["selection_fingerprint"])

    fill(browser, {"mev-size": "93", "mev-method": "cell", "mev-misstatements":
                   "KV-1187, 3120.00, 2496.00\nKV-2043, 880.40, 440.20\nKV-3310, 1500.00, 1650.00"})
    evaluation = press(
        browser, "form[data-operation='/v1/monetary/evaluation']:not([data-multipart])",
        "Evaluate")
    expected_evaluation = api(server, "/v1/monetary/evaluation", {
        "book_value": "2500000.00", "sample_size": 93, "selection_method": "cell",
        "confidence": 0.95, "tolerable_misstatement": "125000.00", "misstatements": [
            {"id": "KV-1187", "book_amount": "3120.00", "audited_amount": "2496.00"},
            {"id": "KV-2043", "book_amount": "880.40", "audited_amount": "440.20"},
            {"id": "KV-3310", "book_amount": "1500.00", "audited_amount": "1650.00"}]})
    assert value_shown(evaluation, "Net most likely misstatement") == (
        expected_evaluation["net_most_likely_misstatement"])
    assert evaluation.find_element("css selector", ".summary").text == (
        expected_evaluation["summary"])
    wait_for(lambda: browser.execute_script(
        "const img = arguments[0].querySelector('img.chart');"
        "return img && img.complete && img.naturalWidth > 0;", evaluation), "the limits chart")
    shot(browser, screenshots, "monetary")


def test_monetary_test_sheet_from_a_ledger_file_and_back(
    browser: Any, server: Server, downloads: Path, tmp_path: Path, screenshots: Path
) -> None:
    selection_form = "form[data-operation='/v1/monetary/selection']"
    sheet_form = "form[data-operation='/v1/monetary/evaluation'][data-multipart]"
    open_view(browser, server, "monetary")
    browser.find_element(
        "css selector", f"{selection_form} input[name='population-kind'][value='file']").click()
    fill(browser, {"mus-ledger": str(LEDGER_CSV), "mus-ledger-id": "invoice",
                   "mus-ledger-amount": "balance", "mus-select-size": "8",
                   "mus-seed": "kestrel-valley-ar-2026-12"})
    request = {"population": {"file": {"id_column": "invoice", "amount_column": "balance"}},
               "sample_size": 8, "seed": "kestrel-valley-ar-2026-12", "method": "fixed_interval"}
    selection = press(browser, selection_form, "Select")
    expected = api_upload(server, "/v1/monetary/selection", LEDGER_CSV, request)
    assert value_shown(selection, "Selection fingerprint") == expected["selection_fingerprint"]

    started = time.time()
    press(browser, selection_form, "Download test sheet (XLSX)")
    book = load_workbook(downloaded(downloads, "monetary-test-sheet.xlsx", started))
    tests = book["Tests"]
    at = {cell.value: cell.column for cell in tests[1]}
    for row in range(2, tests.max_row + 1):
        tests.cell(row, at["audited amount"], tests.cell(row, at["book amount"]).value)
    # The first item was found 500.00 short.
    tests.cell(2, at["audited amount"], float(tests.cell(2, at["book amount"]).value) - 500)
    completed = tmp_path / "kestrel-completed.xlsx"
    book.save(completed)

    fill(browser, {"mus-sheet-file": str(completed), "mus-sheet-tolerable": "20000.00"})
    evaluation = press(browser, sheet_form, "Evaluate the sheet")
    expected_evaluation = api_upload(server, "/v1/monetary/evaluation", completed, {
        "tolerable_misstatement": "20000.00", "confidence": 0.95})
    assert expected_evaluation["overstatement"]["known_misstatement"] == "500.00"
    assert value_shown(evaluation, "Net most likely misstatement") == (
        expected_evaluation["net_most_likely_misstatement"])
    assert evaluation.find_element("css selector", ".summary").text == (
        expected_evaluation["summary"])
    wait_for(lambda: browser.execute_script(
        "const img = arguments[0].querySelector('img.chart');"
        "return img && img.complete && img.naturalWidth > 0;", evaluation), "the limits chart")
    shot(browser, screenshots, "monetary-sheet")

    started = time.time()
    press(browser, sheet_form, "Download the sheet with its evaluation")
    evaluated = load_workbook(downloaded(downloads, "evaluated-monetary-test-sheet.xlsx", started))
    assert {"Tests", "Evaluation"} <= set(evaluated.sheetnames)


def test_any_operation_from_the_contract(browser: Any, server: Server, screenshots: Path) -> None:
    open_view(browser, server, "any")
    spec = requests.get(f"{server.url}/openapi.json", timeout=30).json()
    posts = [path for path, item in spec["paths"].items() if "post" in item]
    wait_for(lambda: len(browser.find_elements("css selector", "#any-operation option"))
             == len(posts), "every operation in the list")
    fill(browser, {"any-operation": "/v1/plans/periodic"})
    body = browser.find_element("id", "any-body")
    body.clear()
    body.send_keys('{"frequency": "monthly", "tolerable_rate": 0.1, "confidence": 0.95}')
    result = press(browser, "#any-form", "Send")
    expected = api(server, "/v1/plans/periodic",
                   {"frequency": "monthly", "tolerable_rate": 0.1, "confidence": 0.95})
    assert value_shown(result, "Occurrences") == str(expected["occurrences"])
    assert result.find_element("css selector", ".summary").text == expected["summary"]
    assert result.find_elements("css selector", ".warnings li")
    assert low_contrast(browser) == []
    shot(browser, screenshots, "any")

    # An operation that takes a file: its written starting request, and the file uploaded.
    fill(browser, {"any-operation": "/v1/populations/profile"})
    wait_for(lambda: browser.find_element("id", "any-file-field").is_displayed(), "the file field")
    request = json.loads(browser.find_element("id", "any-body").get_attribute("value"))
    fill(browser, {"any-file": str(POPULATION_CSV)})
    result = press(browser, "#any-form", "Send")
    expected = api_upload(server, "/v1/populations/profile", POPULATION_CSV, request)
    assert result.find_element("css selector", ".summary").text == expected["summary"]


def test_keyboard_only_and_a_narrow_screen(browser: Any, server: Server, screenshots: Path) -> None:
    from selenium.webdriver.common.keys import Keys

    open_view(browser, server, "size")
    tab = browser.find_element("css selector", ".tabs a[href='#estimate']")
    browser.execute_script("arguments[0].focus();", tab)
    outline = browser.execute_script(
        "return getComputedStyle(document.activeElement).outlineStyle;")
    assert outline == "solid", "focus must be visible"
    browser.switch_to.active_element.send_keys(Keys.ENTER)
    wait_for(lambda: browser.switch_to.active_element.get_attribute("id") == "estimate-heading",
             "the view's heading to take the focus")
    # Tab to the margin, type, Tab on to the submit button, and press Enter.
    active = browser.switch_to.active_element
    for _ in range(10):
        active.send_keys(Keys.TAB)
        active = browser.switch_to.active_element
        if active.get_attribute("id") == "est-margin":
            break
    assert active.get_attribute("id") == "est-margin"
    active.send_keys(Keys.CONTROL, "a")
    active.send_keys("0.04", Keys.ENTER)
    result = result_of(browser, "#estimate form")
    wait_for(lambda: result.find_elements("css selector", ".result-heading"), "the answer")
    exact = api(server, "/v1/estimation/sample-size", {"margin": 0.04, "confidence": 0.95})
    assert str(exact["rows"][0]["sample_size"]) in result.text

    browser.set_window_size(NARROW, 800)
    browser.get(f"{server.url}/#select")
    wait_for(lambda: browser.execute_script("return !document.getElementById('select').hidden"),
             "the selection view")
    fill(browser, {"select-seed": "northwind-po-2026-q3"})
    browser.find_element("css selector", "#select button[type='submit']").click()
    result = result_of(browser, "#select form")
    wait_for(lambda: result.find_elements("css selector", ".result-heading"), "the selection")
    width = browser.execute_script("return document.documentElement.scrollWidth")
    assert width <= browser.execute_script("return window.innerWidth")
    shot(browser, screenshots, "narrow", width=NARROW)


def test_reference_renders_every_operation_from_local_files(
    browser: Any, server: Server, screenshots: Path
) -> None:
    browser.set_window_size(WIDE, 900)
    browser.get(f"{server.url}/docs")
    spec = requests.get(f"{server.url}/openapi.json", timeout=30).json()
    operations = sum(len(item) for item in spec["paths"].values())
    wait_for(lambda: len(browser.find_elements("css selector", ".opblock")) == operations,
             "every operation in the reference")
    loaded = browser.execute_script(
        "return performance.getEntriesByType('resource').map(e => e.name);")
    assert all(url.startswith(server.url) for url in loaded), loaded
    browser.save_screenshot(str(screenshots / "docs.png"))


def test_no_policy_violation_or_script_error_was_logged(browser: Any, server: Server) -> None:
    problems = [entry for entry in browser.get_log("browser") if entry["level"] == "SEVERE"
                and "status of 4" not in entry["message"]]
    assert problems == []


def test_with_api_keys_the_page_asks_once_and_keeps_the_key_in_memory(
    browser: Any, tmp_path: Path
) -> None:
    digest = "sha256:" + hashlib.sha256(KEY.encode()).hexdigest()
    with running_server(tmp_path, env={"SAMPLING_API_KEYS": digest}, workers=1) as locked:
        open_view(browser, locked, "size")
        fill(browser, {"size-tolerable": "0.05", "size-expected": "0"})
        browser.find_element("css selector", "#size button[type='submit']").click()
        wait_for(lambda: browser.find_element("id", "key-panel").is_displayed(),
                 "the request for a key")
        assert browser.switch_to.active_element.get_attribute("id") == "api-key"
        browser.switch_to.active_element.send_keys(KEY)
        browser.find_element("css selector", "#key-form button").click()
        result = result_of(browser, "#size form")
        wait_for(lambda: result.find_elements("css selector", ".result-heading"),
                 "the answer sent again with the key")
        expected = api(locked, "/v1/sample-size", {"tolerable_rate": 0.05, "expected_rate": 0,
                                                   "confidence": 0.95},
                       headers={"Authorization": f"Bearer {KEY}"})
        assert value_shown(result, "Sample size") == str(expected["sample_size"])
        # Asked once: a second request goes with the key kept in memory.
        fill(browser, {"size-tolerable": "0.1"})
        again = press(browser, "#size form", "Size the test")
        assert value_shown(again, "Tolerable rate") == "0.1"
        assert not browser.find_element("id", "key-panel").is_displayed()
        # Never in the address, a cookie or the browser's storage.
        assert KEY not in browser.current_url
        assert browser.get_cookies() == []
        stored = browser.execute_script(
            "return JSON.stringify(localStorage) + JSON.stringify(sessionStorage);")
        assert KEY not in stored
        assert KEY not in locked.log()
