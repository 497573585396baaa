"""The held-out path-traced renders: do the real-light rules generalise to scenes they were not tuned on?

``tests/data/reallight-holdout`` holds Cycles renders made exactly as the tuned set
(``tests/data/reallight``) but from new scenes (``benchmarks/render_reallight.py --holdout``):
brass in soft and window light and under the spot at 25 degrees, black plastic in window and mixed
light at a tilt, a steel gasket under the spot at a tilt, steel in mixed light, black and steel
parts through the distorting lens, an 8 mm steel disc, white nylon in soft and window light, and scans under lamps at 30 and 45 degrees. They are never used to tune the rules; a render that fails the
promise is marked ``xfail(strict=True)`` with its measured figures, not fixed by tuning.

The promise checked (issue 11's targets for every part): every part found and nothing else
reported as a part; each part's area, centroid and hole diameters within 3 stated sigma of the
truth, and none more than 5 sigma off -- a figure between 3 and 5 sigma only where a warning
names the part; a hole not measured only where a warning names the part. Truth: the outlines
the renderer extruded (the render's truth JSON), their area and centroid from shapely.
"""

from __future__ import annotations

import json
import math

import pytest
from _reallight_truth import REALLIGHT, REALLIGHT_HOLDOUT, truth_render

import scanmass
from scanmass.errors import ScanmassError

RENDERS = sorted(p.name for p in REALLIGHT_HOLDOUT.glob("*.json")) if REALLIGHT_HOLDOUT.exists() else []

#: (render, thickness given) -> why it fails the promise, with the figures measured (bench_reallight --holdout).
_MIXED_STEEL_CAM = (
    "brushed-steel cam (4 mm) in mixed warm and cool light at 10 degrees: its sparkling face is found as two "
    "pieces (about 460 and 35 mm2 of 992 mm2) whose strip is the face's grain, merged into one part and warned "
    "('part N: found in pieces', term 'fragments'): {area} % in area ({sigma} sigma), but its bright half is not "
    "found at all, so the centroid lies {dist} mm off (covered, under 0.6 sigma) and the test counts the cam not found"
)
_LENS_WINDOW_STEEL = (
    "brushed steel (gasket 4 mm, cam 2 mm) in window light at 20 degrees through the distorting lens, without the "
    "thickness: the cam's face holds its bore, so is no shadow alone (branch nothick19; was refused as 'only 2 "
    "region(s) that look like cast shadows'): reported at +7.37 %, 0.2 sigma (bench_reallight); the gasket "
    "is still named 'shadow only' and not reported, so the gasket is missed (branch nylon30 alone took a smooth "
    "patch of its lit steel face for a white part's top face with that region as its piece, -78.9 % at 12.3 "
    "sigma; nylonguard30's guard refuses such a face: the pieces do not fit a white part's)"
)
KNOWN_FAILING: dict[tuple[str, bool], str] = {
    ("hold-lens-window-steel-t20.json", True): "brushed steel (gasket 4 mm, cam 2 mm) in window light at 20 degrees "
    "through the distorting lens, with the thickness: the faces are wider than a 2 mm part's shadow can be, so with "
    "2 mm both parts are reported (cam +11.7 % at 0.4 sigma, gasket +45.9 % at 0.8 sigma, warned 'cast shadow'); "
    "with 4 mm the gasket's face (1040 mm2, not wider than a 4 mm part's shadow at 15 degrees) is still named "
    "'shadow only' and not reported, so the gasket is missed (nylon30 alone: -79.4 % at 12.4 sigma, taken as a "
    "white face's piece; refused again by nylonguard30's guard)",
    ("hold-lens-window-steel-t20.json", False): _LENS_WINDOW_STEEL,
    ("hold-window-thick-t0.json", True): "8 mm brushed-steel disc in window light at 0 degrees (Filmic): the tone "
    "curve the markers show (0.08 px into the ink) moves the dark parts' rings out, the cast-shadow cut then leaves "
    "1220 mm2 (-8.6 %; +19.8 % at 0.4 sigma without the move) whose face reads as darkened paper (depth 0.12), and "
    "the result names it 'shadow only: do not use their figures', so the disc is not reported",
    ("hold-mixed-steel-t10.json", True): _MIXED_STEEL_CAM.format(area="-49.3", sigma="1.0", dist="9.7"),
    ("hold-mixed-steel-t10.json", False): _MIXED_STEEL_CAM.format(area="-45.0", sigma="0.9", dist="9.0"),
}


def _named(part_label: int, warnings: list[str]) -> bool:
    """A warning names the part (the wording of scanmass's warnings: 'part 2 (...)' or ' 2 (')."""
    return any(f" {part_label} (" in w or f"part {part_label} " in w for w in warnings)


def _promise_failures(name: str, given: bool) -> list[str]:
    """What the measurement of one held-out render breaks of the promise (empty: kept)."""
    truth, parts = truth_render(REALLIGHT_HOLDOUT, name)
    image = REALLIGHT_HOLDOUT / truth["image"]
    kwargs: dict = {}
    if truth["kind"] == "scan":
        kwargs["dpi"] = 25.4 * max(truth["camera"]["size_px"]) / truth["camera"]["ortho_scale_mm"]
    runs = sorted({p["t"] for p in parts}) if given else [None]
    failures = []
    for thickness in runs:
        try:
            m = scanmass.measure(image, thickness_mm=thickness, **kwargs)
        except ScanmassError as exc:
            failures.append(f"t={thickness}: refused: {exc}")
            continue
        # a region the result itself names as a cast shadow alone is not reported as a part
        # (as bench_reallight counts it): "do not use their figures"
        said = " ".join(w for w in m.warnings if w.startswith("shadow only:"))
        m.parts = [q for q in m.parts if f"part {q.label} (" not in said]
        if len(m.parts) != len(parts):
            failures.append(f"t={thickness}: {len(m.parts)} parts reported, {len(parts)} in the scene")
        for tp in parts:
            if thickness is not None and tp["t"] != thickness:
                continue
            part = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["centroid"]), default=None)
            if part is None or math.dist(part.centroid_mm, tp["centroid"]) >= 8.0:
                failures.append(f"{tp['shape']} t={tp['t']}: not found")
                continue
            sigmas = {"area": abs(part.area_mm2 - tp["area"]) / part.area_u_mm2}
            for axis, c, t, u in zip("xy", part.centroid_mm, tp["centroid"], part.centroid_u_mm):
                sigmas[f"centroid {axis}"] = abs(c - t) / u
            warned = _named(part.label, m.warnings)
            for k, (centre, diameter) in enumerate(tp["holes"]):
                near = [h for h in part.holes if math.dist(h.circle_centre_mm, centre) < 2.0]
                if not near:
                    if not warned:
                        failures.append(f"{tp['shape']} t={tp['t']}: hole {k} missed without a warning")
                    continue
                hole = min(near, key=lambda h: math.dist(h.circle_centre_mm, centre))
                sigmas[f"hole {k}"] = abs(hole.diameter_mm - diameter) / hole.diameter_u_mm
            worst = max(sigmas, key=sigmas.__getitem__)
            figures = (
                f"{tp['shape']} t={tp['t']}: area {100 * (part.area_mm2 / tp['area'] - 1):+.2f} %, "
                f"centroid {math.dist(part.centroid_mm, tp['centroid']):.3f} mm, {worst} {sigmas[worst]:.1f} sigma"
            )
            if sigmas[worst] > 5.0:
                failures.append(figures + " (beyond 5 sigma)")
            elif sigmas[worst] > 3.0 and not warned:
                failures.append(figures + " (beyond 3 sigma, no warning names the part)")
    return failures


@pytest.mark.slow
@pytest.mark.parametrize(
    "name, given",
    [
        pytest.param(n, g, marks=pytest.mark.xfail(reason=KNOWN_FAILING[(n, g)], strict=True))
        if (n, g) in KNOWN_FAILING
        else (n, g)
        for n in RENDERS
        for g in (True, False)
    ],
)
def test_held_out_render_keeps_the_promise(name, given):
    """Every part found, nothing extra, every figure honest (see the module's docstring)."""
    failures = _promise_failures(name, given)
    assert not failures, failures


def test_held_out_set_is_complete_and_new():
    """Each truth file has its image, and no held-out part repeats a tuned scene's part and placement
    (the tuned set's truth files, tests/data/reallight), so the held-out figures are not the tuned ones."""
    if not RENDERS:
        pytest.skip("tests/data/reallight-holdout not in this checkout")
    tuned = set()
    for tf in REALLIGHT.glob("*.json"):
        for p in json.loads(tf.read_text())["parts"]:
            pl = p.get("placement", {})
            tuned.add((p["shape"], p["material"], p["thickness_mm"], pl.get("x_mm"), pl.get("y_mm")))
    for name in RENDERS:
        truth = json.loads((REALLIGHT_HOLDOUT / name).read_text())
        assert name.startswith("hold-") and (REALLIGHT_HOLDOUT / truth["image"]).exists(), name
        assert not (REALLIGHT / name).exists(), name
        for p in truth["parts"]:
            pl = p.get("placement", {})
            key = (p["shape"], p["material"], p["thickness_mm"], pl.get("x_mm"), pl.get("y_mm"))
            assert key not in tuned, (name, key)
