"""The bench page in a real browser: headless Chromium at a phone's viewport, through selenium.

Opens the page with its access token (a server started with ``--lan`` but listening on
127.0.0.1 only), chooses the scale, uploads a rendered photo of a plate on the marker mat,
waits for the result, checks the table's area and centroid against the truth within the
stated uncertainty, downloads the DXF and reads it back with ezdxf. Screenshots go to
test-artifacts/ (git-ignored) and the test's tmp_path. Needs Debian's chromium and
chromium-driver and the selenium package; skipped with the reason when any is missing.
"""

from __future__ import annotations

import re
import shutil
import time
from pathlib import Path

import pytest

pytest.importorskip("starlette", reason="the serve extra is not installed (pip install scanmass[serve])")
webdriver = pytest.importorskip("selenium.webdriver", reason="selenium is not installed (pip install selenium)")

from _browser import ARTIFACTS, skip_without_chromium, start_chromium  # noqa: E402

skip_without_chromium()

from _serve_helpers import mat_photo_jpeg, plate_truth, running_server  # noqa: E402

#: A phone's viewport in CSS pixels (a 6.1-inch phone held upright), device pixel ratio 2.
PHONE = {"width": 390, "height": 844, "pixelRatio": 2.0}


@pytest.fixture(scope="module")
def phone(tmp_path_factory):
    downloads = tmp_path_factory.mktemp("downloads")
    driver = start_chromium(
        tmp_path_factory.mktemp("chromium-profile"),
        mobile={"deviceMetrics": PHONE, "userAgent": "Mozilla/5.0 (Linux; Android 14) Mobile scanmass-test"},
    )
    driver.execute_cdp_cmd("Browser.setDownloadBehavior", {"behavior": "allow", "downloadPath": str(downloads)})
    driver.downloads = downloads
    yield driver
    driver.quit()


def _console_errors(driver) -> list[str]:
    return [e["message"] for e in driver.get_log("browser") if e["level"] == "SEVERE"]


def _wait(predicate, timeout_s: float, what: str):
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        value = predicate()
        if value:
            return value
        time.sleep(0.2)
    raise AssertionError(f"timed out waiting for {what}")


def test_measure_from_a_phone(phone, tmp_path):
    from selenium.webdriver.support.ui import Select

    photo = tmp_path / "plate-on-mat.jpg"
    photo.write_bytes(mat_photo_jpeg())
    store = tmp_path / "store"
    store.mkdir()
    with running_server(store, "--lan", "--workers", "1") as (_proc, base, banner):
        token = re.search(r"access token: (\S+)", banner).group(1)
        assert f"{base}/?token={token}" in banner

        phone.get(base + "/")  # without the token: refused, nothing shown
        assert "access token required" in phone.find_element("tag name", "body").text
        assert not phone.find_elements("tag name", "form")
        phone.get_log("browser")  # drop the refusals logged so far

        phone.get(f"{base}/?token={token}")
        assert phone.current_url == base + "/"  # the token left the address bar
        assert phone.execute_script("return window.innerWidth;") == PHONE["width"]
        form = phone.find_element("id", "upload")
        assert form.size["width"] <= PHONE["width"]
        Select(phone.find_element("name", "scale")).select_by_value("mat")
        for name in ("printed_x", "printed_y"):
            field = phone.find_element("name", name)
            field.clear()
            field.send_keys("100.0")
        phone.find_element("name", "label").send_keys("plate on the mat")
        phone.find_element("id", "photo").send_keys(str(photo))
        phone.find_element("id", "send").click()

        _wait(lambda: re.search(r"/jobs/\d+$", phone.current_url), 60, "the job page")
        _wait(lambda: phone.find_elements("css selector", "#parts tr.part-row"), 120, "the result table")
        rows = phone.find_elements("css selector", "#parts tr.part-row")
        assert len(rows) == 1
        cell = {k: rows[0].find_element("css selector", f"td.{k}") for k in ("area", "cx", "cy")}
        value = {k: float(c.get_attribute("data-value")) for k, c in cell.items()}
        u = {k: float(c.get_attribute("data-u")) for k, c in cell.items()}
        t = plate_truth()  # area and centroid from shapely (tests/polygon_truth.py)
        assert abs(value["area"] - t["area"]) <= 3 * u["area"]
        assert abs(value["cx"] - t["centroid"][0]) <= 3 * u["cx"]
        assert abs(value["cy"] - t["centroid"][1]) <= 3 * u["cy"]
        assert "±" in cell["area"].text  # the uncertainty is shown beside the value
        overlay = phone.find_element("css selector", "img.overlay")
        assert phone.execute_script("return arguments[0].complete && arguments[0].naturalWidth;", overlay) > 0
        warnings = phone.find_elements("css selector", "ul.warnings")
        if warnings:  # in plain sight: above the picture
            assert warnings[0].location["y"] < overlay.location["y"]

        shot = tmp_path / "serve-page.png"
        phone.save_screenshot(str(shot))
        ARTIFACTS.mkdir(exist_ok=True)
        shutil.copy(shot, ARTIFACTS / "serve-page.png")

        phone.find_element("id", "download-dxf").click()
        dxf = _wait(lambda: [p for p in phone.downloads.glob("*.dxf")], 60, "the DXF download")[0]
        _wait(lambda: dxf.stat().st_size > 0 and not list(phone.downloads.glob("*.crdownload")), 30, "the file")
        import ezdxf

        doc = ezdxf.readfile(dxf)
        assert doc.header["$INSUNITS"] == 4  # millimetres (DXF reference, $INSUNITS)
        radii = sorted(round(e.dxf.radius, 1) for e in doc.modelspace() if e.dxftype() == "CIRCLE")
        assert radii == [5.0, 8.0]  # the plate's holes (tests/_serve_helpers.py)
        assert dxf.name.startswith("plate_on_the_mat-")

        # the settings are remembered on the device
        phone.get(base + "/")
        assert phone.find_element("name", "printed_x").get_attribute("value") == "100.0"
        assert Select(phone.find_element("name", "scale")).first_selected_option.get_attribute("value") == "mat"
        assert _console_errors(phone) == []
        resources = phone.execute_script("return performance.getEntriesByType('resource').map(e => e.name);")
        assert all(r.startswith(base) or r.startswith("data:") for r in resources)


def test_demo_photo_with_mass_and_history(phone, tmp_path):
    """The demo's gusset photo with its material and thickness; the screenshot kept for the README."""
    from selenium.webdriver.support.ui import Select

    from scanmass.cli.demo import demo_photos, make_samples
    from scanmass.mass.materials import load_materials

    (demo,) = demo_photos()
    samples = Path(__file__).resolve().parent.parent / "samples"
    photo = samples / demo.file
    if not photo.is_file():  # installed from a wheel: render the scenario's files
        make_samples(tmp_path / "samples")
        photo = tmp_path / "samples" / demo.file
    store = tmp_path / "store"
    store.mkdir()
    with running_server(store, "--workers", "1") as (_proc, base, _banner):
        phone.get(base + "/")
        Select(phone.find_element("name", "scale")).select_by_value("mat")
        for name, value in (
            ("printed_x", demo.printed_x_mm),
            ("printed_y", demo.printed_y_mm),
            ("thickness", demo.thickness_mm),
            ("thickness_tol", demo.thickness_u_mm),
        ):
            field = phone.find_element("name", name)
            field.clear()
            field.send_keys(str(value))
        Select(phone.find_element("name", "material")).select_by_value(demo.material)
        phone.find_element("name", "label").send_keys("Wrenfield chainstay gusset")
        phone.find_element("id", "photo").send_keys(str(photo))
        phone.find_element("id", "send").click()
        _wait(lambda: phone.find_elements("css selector", "#parts tr.part-row"), 120, "the result table")
        (outer, holes) = demo.parts[0]
        t = plate_truth_of(outer, holes)  # shapely (tests/polygon_truth.py)
        area = phone.find_element("css selector", "td.area")
        assert abs(float(area.get_attribute("data-value")) - t["area"]) <= 3 * float(area.get_attribute("data-u"))
        mass = phone.find_element("css selector", "td.mass")
        # mass = density x area x thickness (the material table's density)
        density_g_mm3 = load_materials()[demo.material].density_g_mm3
        expected = density_g_mm3 * t["area"] * demo.thickness_mm
        assert abs(float(mass.get_attribute("data-value")) - expected) <= 3 * float(mass.get_attribute("data-u"))
        ARTIFACTS.mkdir(exist_ok=True)
        phone.save_screenshot(str(ARTIFACTS / "serve-demo.png"))

        phone.get(base + "/history")
        items = phone.find_elements("css selector", "li.history-item")
        assert len(items) == 1 and "Wrenfield chainstay gusset" in items[0].text and " g" in items[0].text
        thumb = items[0].find_element("css selector", "img.thumb")
        assert phone.execute_script("return arguments[0].complete && arguments[0].naturalWidth;", thumb) > 0
        assert _console_errors(phone) == []


def plate_truth_of(outer, holes) -> dict:
    from polygon_truth import truth

    return truth(outer, holes)
