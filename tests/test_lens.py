"""Lens profiles: calibration recovers a known focal length and k1 from rendered views of the
mat, and measuring with the profile removes the distortion's error.

Check values: the camera the views are rendered with (f = 1500 px, principal point at the
image centre, k1 = -0.05 in OpenCV's radial model, as documented for cv::calibrateCamera
and cv::projectPoints); part truth from shapely (reference library).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from PIL import Image
from polygon_truth import truth
from typer.testing import CliRunner

from scanmass import measure
from scanmass.cli.app import app
from scanmass.errors import OptionError, ScaleError
from scanmass.outputs.scale_files import save_lens_profile
from scanmass.scale.lens import LensProfile, calibrate_lens, load_lens_profile
from scanmass.scale.mat import make_mat
from scanmass.testing.photos import PhotoParts, make_camera, render_photo
from scanmass.testing.scans import circle, rectangle

#: every test here needs the module's rendered views (about 10 s to make and calibrate)
pytestmark = pytest.mark.slow

MAT = make_mat("a4-portrait")
K1 = -0.05
F_PX = 1500.0
VIEWS = [(25, 0, 85), (30, 90, 95), (20, 180, 80), (35, 270, 90), (15, 45, 100), (28, 135, 75)]


@pytest.fixture(scope="module")
def views(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lens")
    paths = []
    for i, (tilt, az, roll) in enumerate(VIEWS):
        cam = make_camera(tilt_deg=tilt, tilt_dir_deg=az, roll_deg=roll, distance_mm=330.0, f_px=F_PX, k1=K1)
        path = folder / f"view{i}.png"
        Image.fromarray(render_photo(MAT, [], cam, seed=i)).save(path)
        paths.append(path)
    return folder, paths


@pytest.fixture(scope="module")
def profile(views):
    return calibrate_lens(views[1])


def test_calibration_recovers_focal_length_and_k1(profile):
    k = profile.camera_matrix
    assert k[0, 0] == pytest.approx(F_PX, rel=2e-3) and k[1, 1] == pytest.approx(F_PX, rel=2e-3)
    assert k[0, 2] == pytest.approx(799.5, abs=1.0) and k[1, 2] == pytest.approx(599.5, abs=1.0)
    assert profile.dist_coeffs[0] == pytest.approx(K1, abs=2e-3)
    assert profile.rms_px < 0.1
    assert profile.photos == 6 and profile.image_size == (1600, 1200)


def test_profile_round_trip_and_point_correction(profile, tmp_path):
    path = save_lens_profile(profile, tmp_path / "lens.json")
    back = load_lens_profile(path)
    assert np.allclose(back.camera_matrix, profile.camera_matrix) and np.allclose(back.dist_coeffs, profile.dist_coeffs)
    pts = np.array([[10.0, 20.0], [800.0, 600.0], [1590.0, 1190.0]])
    assert np.allclose(back.undistort_points(back.distort_points(pts)), pts, atol=1e-6)
    with pytest.raises(OptionError, match="made for 1600 x 1200 px photos, this one is 1200 x 1600 px"):
        back.check_image(1200, 1600)
    (tmp_path / "bad.json").write_text("{}")
    with pytest.raises(OptionError, match="not a scanmass lens profile"):
        load_lens_profile(tmp_path / "bad.json")


def test_lens_profile_must_be_a_small_regular_file(tmp_path):
    import os

    from _deadline import deadline

    with pytest.raises(OptionError, match="lens profile not found"):
        load_lens_profile(tmp_path / "missing.json")
    fifo = tmp_path / "fifo.json"
    os.mkfifo(fifo)
    with deadline(10, "reading a FIFO as a lens profile blocked"), pytest.raises(OptionError, match="FIFO"):
        load_lens_profile(fifo)
    big = tmp_path / "big.json"
    with open(big, "wb") as fh:
        fh.truncate((1 << 24) + 1)  # sparse: larger than any profile
    with pytest.raises(OptionError, match="lens profile"):
        load_lens_profile(big)
    with pytest.raises(OptionError, match="lens profile"):
        load_lens_profile(tmp_path)  # a folder


@pytest.mark.parametrize("tilt", [0.0, 30.0])
def test_measuring_with_and_without_the_profile(profile, tilt, tmp_path):
    part = PhotoParts(rectangle(70.0, 90.0, 80.0, 50.0, angle_deg=17.0), [circle(100.0, 115.0, 8.0, 256)])
    t = truth(part.outer_mm, part.holes_mm)
    cam = make_camera(tilt_deg=tilt, tilt_dir_deg=30.0, roll_deg=80.0, distance_mm=360.0, f_px=F_PX, k1=K1)
    img = render_photo(MAT, [part], cam, seed=int(tilt) + 1)
    m = measure(img, lens=profile, printed_x_mm=100.0, printed_y_mm=100.0)
    p = m.parts[0]
    assert p.area_mm2 == pytest.approx(t["area"], rel=1e-3)
    assert math.dist(p.centroid_mm, t["centroid"]) < 0.05
    assert p.ixx_mm4 == pytest.approx(t["ixx"], rel=3e-3)
    assert abs(p.area_mm2 - t["area"]) <= 3 * p.area_u_mm2
    assert m.scale.terms["lens"] > 0 and m.scale.extra["lens_profile"] is None  # given as an object, not a file
    # without the profile the corners bow: k1, k2 are estimated from the mat's own corners
    # (scanmass.scale.selfcal), with a warning; the targets hold (area 0.3 %, centroid 0.05 mm)
    own = measure(img, printed_x_mm=100.0, printed_y_mm=100.0)
    q = own.parts[0]
    assert any(w.startswith("lens distortion estimated from the mat's markers") for w in own.warnings)
    assert q.area_mm2 == pytest.approx(t["area"], rel=3e-3) and abs(q.area_mm2 - t["area"]) <= 3 * q.area_u_mm2
    assert math.dist(q.centroid_mm, t["centroid"]) < 0.05
    assert q.holes[0].diameter_mm == pytest.approx(16.0, abs=0.1)  # circle(100, 115, 8) above: 16 mm across


def test_too_few_photos_and_cli(views, tmp_path):
    with pytest.raises(ScaleError, match="at least 5 photos"):
        calibrate_lens(views[1][:3])
    out = tmp_path / "p.json"
    res = CliRunner().invoke(app, ["lens", *map(str, views[1][:5]), "--json", str(out)])
    assert res.exit_code == 0, res.output
    assert isinstance(load_lens_profile(out), LensProfile)
    res = CliRunner().invoke(app, ["lens", str(views[1][0])])
    assert res.exit_code == 1 and "at least 5 photos" in res.output
