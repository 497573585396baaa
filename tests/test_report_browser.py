"""The HTML report and summary in a real browser (headless Chromium through selenium).

Checks: the page loads with no console errors, every part row is displayed, every
embedded image decodes (naturalWidth > 0), nothing is fetched from the network, the
summary table sorts; screenshots go to test-artifacts/ (git-ignored).

Needs the Debian packages chromium and chromium-driver and the selenium package;
skipped with the reason when any is missing.
"""

from __future__ import annotations

import base64
import io
import re
from pathlib import Path

import _exact_results as E
import pytest
from PIL import Image

webdriver = pytest.importorskip("selenium.webdriver", reason="selenium is not installed (pip install selenium)")

from _browser import ARTIFACTS, skip_without_chromium, start_chromium  # noqa: E402

skip_without_chromium()

from scanmass.outputs.report import render_summary, write_report  # noqa: E402

# Records errors the page raises before the test can look (installed by CDP so it runs
# ahead of every page script).
_ERROR_HOOK = """
window.__pageErrors = [];
window.addEventListener('error', function (e) {
  window.__pageErrors.push(String(e.message || (e.target && (e.target.src || e.target.href)) || e));
}, true);
"""


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    driver = start_chromium(tmp_path_factory.mktemp("chromium-profile"), "--window-size=1200,1600")
    driver.execute_cdp_cmd("Page.addScriptToEvaluateOnNewDocument", {"source": _ERROR_HOOK})
    yield driver
    driver.quit()


def _open(driver, path: Path) -> None:
    driver.get_log("browser")  # drop anything logged before this page
    driver.get(path.resolve().as_uri())


def _console_errors(driver) -> list[str]:
    logged = [e["message"] for e in driver.get_log("browser") if e["level"] == "SEVERE"]
    return logged + list(driver.execute_script("return window.__pageErrors || [];"))


def _external_requests(driver) -> list[str]:
    names = driver.execute_script(
        "return performance.getEntriesByType('resource').map(function (e) { return e.name; });"
    )
    return [n for n in names if not n.startswith(("data:", "file:"))]


def _screenshot(driver, name: str) -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    height = driver.execute_script("return document.documentElement.scrollHeight;")
    driver.set_window_size(1200, min(int(height) + 40, 12000))
    out = ARTIFACTS / name
    driver.save_screenshot(str(out))
    driver.set_window_size(1200, 1600)
    return out


def _png(w: int, h: int) -> bytes:
    buf = io.BytesIO()
    Image.new("RGB", (w, h), (230, 159, 0)).save(buf, format="PNG")
    return buf.getvalue()


def test_report_in_browser(browser, tmp_path):
    first = E.sample_measurement(warnings=["one <warning> & more"])
    second = E.make_measurement([E.slot_part(), E.l_part(5)], path="scans/slot.png")
    json_path = tmp_path / "second.json"
    json_path.write_text(second.to_json())
    page = write_report([first, json_path], tmp_path / "report.html", overlays={1: _png(320, 200)})
    _open(browser, page)

    assert browser.title == "scanmass measurement report"
    assert _console_errors(browser) == []
    assert _external_requests(browser) == []

    rows = browser.find_elements("css selector", "tr.part-row")
    expected = [str(p.label) for p in first.parts] + [str(p.label) for p in second.parts]
    assert [r.get_attribute("data-part") for r in rows] == expected
    assert all(r.is_displayed() for r in rows)
    assert len(browser.find_elements("css selector", "div.part")) == len(expected)

    images = browser.find_elements("css selector", "img")
    assert len(images) == 1
    for img in images:
        assert browser.execute_script("return arguments[0].complete && arguments[0].naturalWidth;", img) == 320
    # the inline outline drawing of the first image is laid out with a size
    svg = browser.find_element("css selector", "svg.outlines")
    assert svg.size["width"] > 100 and svg.size["height"] > 50
    assert "one <warning> & more" in browser.find_element("css selector", "ul.warnings").text

    shot = _screenshot(browser, "report.png")
    assert Image.open(shot).size[0] > 0

    # Printing honours the stylesheet's @page size: A4 is 210 x 297 mm (ISO 216)
    # = 595.3 x 841.9 pt at 72 pt per inch.
    pdf = base64.b64decode(browser.execute_cdp_cmd("Page.printToPDF", {"preferCSSPageSize": True})["data"])
    (ARTIFACTS / "report.pdf").write_bytes(pdf)
    boxes = {tuple(round(float(v)) for v in m.split()) for m in re.findall(rb"/MediaBox\s*\[([^\]]+)\]", pdf)}
    assert boxes == {(0, 0, 595, 842)}, boxes


def test_summary_in_browser_sorts(browser, tmp_path):
    rows = E.sample_measurement(path="scans/a.png").csv_rows()
    rows += E.make_measurement([E.slot_part(), E.l_part(5)], path="scans/b.png").csv_rows()
    page = tmp_path / "summary.html"
    page.write_text(render_summary(rows, [{"file": "scans/c.png", "reason": "no scale"}]), encoding="utf-8")
    _open(browser, page)
    assert _console_errors(browser) == []
    assert _external_requests(browser) == []
    assert len(browser.find_elements("css selector", "#all-parts tbody tr")) == len(rows)

    header = browser.find_element("css selector", 'th[data-key="area_mm2"]')
    col = [h.get_attribute("data-key") for h in browser.find_elements("css selector", "#all-parts th")].index(
        "area_mm2"
    )

    def column() -> list[float]:
        return [
            float(v)
            for v in browser.execute_script(
                "var c = arguments[0];"
                "return Array.from(document.querySelectorAll('#all-parts tbody tr')).map(function (r) {"
                " return r.cells[c].getAttribute('data-value'); });",
                col,
            )
        ]

    header.click()
    assert column() == sorted(r["area_mm2"] for r in rows)
    assert header.get_attribute("aria-sort") == "ascending"
    header.click()
    assert column() == sorted((r["area_mm2"] for r in rows), reverse=True)
    assert _console_errors(browser) == []
    _screenshot(browser, "summary.png")


def test_checks_catch_a_broken_page(browser, tmp_path):
    # The harness itself: a script error and an image that does not decode must show up.
    page = tmp_path / "broken.html"
    page.write_text(
        '<!DOCTYPE html><html><head><link rel="icon" href="data:,"><title>x</title></head><body>'
        '<img id="bad" src="data:image/png;base64,iVBORw0KGgo=">'
        "<script>undefinedFunction();</script></body></html>"
    )
    _open(browser, page)
    errors = _console_errors(browser)
    assert any("undefinedFunction" in e for e in errors)
    img = browser.find_element("id", "bad")
    assert browser.execute_script("return arguments[0].naturalWidth;", img) == 0


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    from scanmass.cli.demo import run_demo

    out = tmp_path_factory.mktemp("demo")
    run_demo(out)
    return out / "report.html"


#: The demo's report must stay small enough to mail (issue 10: it was 6.5 MB).
DEMO_REPORT_MAX_BYTES = 2_000_000


def test_demo_report_shows_balance_and_assembly(browser, demo_report):
    assert demo_report.stat().st_size < DEMO_REPORT_MAX_BYTES
    _open(browser, demo_report)
    assert _console_errors(browser) == []
    assert _external_requests(browser) == []
    # the fan plate fails G 6.3 at 6000 rpm (demo.toml): said at the top and in its section
    top = browser.find_element("css selector", "p.verdict[data-verdict]")
    assert top.is_displayed() and "Balance fail" in top.text and "G 6.3" in top.text
    section = browser.find_element("css selector", "section.balance")
    assert section.get_attribute("data-verdict") == "fail" and "FAIL" in section.text
    assert "Permissible" in section.text and "Static unbalance U" in section.text
    assembly = browser.find_element("css selector", "section.assembly")
    assert "rear-carrier side frame" in assembly.text and "Centre of mass x" in assembly.text
    assert len(assembly.find_elements("css selector", "table.members tbody tr")) >= 2
    # every embedded overlay decodes, and warnings sit beside the picture
    for img in browser.find_elements("css selector", "img"):
        assert browser.execute_script("return arguments[0].complete && arguments[0].naturalWidth;", img) > 0
    assert browser.find_elements("css selector", "div.top div.warnings-box")
    _screenshot(browser, "demo-report.png")
