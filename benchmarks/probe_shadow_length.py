"""Probe (run by hand): can a photo's cast shadows give a part's thickness when ``--thickness`` is not given?

One light at elevation ``e`` casts a shadow ``t / tan(e)`` long behind a part ``t`` thick, so within one photo
the shadows' lengths over the parts' thicknesses should agree, and a part whose side walls could not be read
would take its thickness from another part's read one. This script prints, per photographed render of the tuned
set (no thickness given), each part's own shadow sweep as the first segmentation found it (the sweep of
:func:`scanmass.segment.castshadow.shadow_cut` within the reach of an 8 mm part's shadow, the reach the cut uses
without a thickness): its direction, its length L, the truth's thickness t (the render's truth file), L / t
and the thickness read from the walls, if any. ``--given NAME MM...`` measures one render at given thicknesses
instead, to show how far the figures move when the cut runs at a thickness that is not the part's;
``--cut-at NAME MM...`` measures it without a thickness, with the shadow cut decided as at each of those
thicknesses (the plane map not lifted), to show whether the cut alone depends on the thickness.

Usage::

    PYTHONPATH=$PWD python -m benchmarks.probe_shadow_length              # every photographed render
    PYTHONPATH=$PWD python -m benchmarks.probe_shadow_length --given dev-window-steel-t0 2 4 6 8
    PYTHONPATH=$PWD python -m benchmarks.probe_shadow_length --cut-at dev-window-steel-t0 2 4 6 8

Never run it on the held-out set to choose a rule (it reads the truth files).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path
from typing import Any

import numpy as np
from shapely.geometry import Polygon

import scanmass
from scanmass.errors import ScanmassError
from scanmass.pipeline import flow
from scanmass.pipeline.photo_checks import _part_crop
from scanmass.pipeline.photo_shadow_cut import _cut_once, _decide_cuts
from scanmass.segment.castshadow import shadow_cut
from scanmass.segment.shadow import SHADOW_FRACTION, shadow_band_px, shadow_risk

ROOT = Path(__file__).resolve().parents[1]
#: The thickness (mm) whose shadow's reach bounds the sweep: the cut's own bound without a thickness
#: (:data:`scanmass.pipeline.photo_shadow_cut.SHADOW_CUT_UNKNOWN_THICKNESS_MM`).
REACH_THICKNESS_MM = 8.0


def own_sweeps(image: Any, scale: Any, result: Any, colour: np.ndarray) -> list[tuple[tuple[float, float], Any]]:
    """Each part's centroid (mm) and its own shadow sweep (a ``ShadowCut`` found by a sweep)."""
    mm_per_px = scale.plane_map.mm_per_px
    band_px = shadow_band_px(REACH_THICKNESS_MM, mm_per_px)
    lut = np.asarray(image.to_linear, dtype=np.float32)
    out = []
    for part in result.parts:
        crop = _part_crop(image, scale, part, int(band_px) + 16)
        if crop is None:
            continue
        (x0, y0, x1, y1), mask, _ = crop
        codes = colour[y0:y1, x0:x1].astype(np.intp)
        colour_lin = lut[codes]
        risk = shadow_risk(colour_lin, mask, band_px)
        if risk is None or risk.fraction < SHADOW_FRACTION:
            continue
        step = (lut[np.minimum(codes + 1, len(lut) - 1)] - lut[codes]).mean(axis=2) / float(np.mean(risk.paper_rgb))
        cut = shadow_cut(colour_lin, mask, risk.paper_rgb, band_px, code_step=step)
        if cut is not None and cut.direction is not None and cut.length_px is not None:
            out.append(((float(part.centroid_mm[0]), float(part.centroid_mm[1])), cut))
    return out


def truth_parts(truth: dict) -> list[dict]:
    """A photo render's parts: shape, thickness, area and centroid (shapely, from the truth's outlines)."""
    parts = []
    for p in truth["parts"]:
        poly = Polygon(p["outline_mm"], p["holes_mm"])
        parts.append(
            {"shape": p["shape"], "t": p["thickness_mm"], "area": poly.area, "c": (poly.centroid.x, poly.centroid.y)}
        )
    return parts


def probe_lengths(folder: Path) -> None:
    """Per render: each part's sweep direction, length, L / t and wall reading."""
    seen: list[list[tuple[tuple[float, float], Any, float]]] = []
    original = flow._cut_cast_shadows

    def spy(image, masked, scale, result, thickness_mm, colour, *args, **kwargs):  # type: ignore[no-untyped-def]
        if thickness_mm is None and colour is not None:
            seen.append([(c, cut, scale.plane_map.mm_per_px) for c, cut in own_sweeps(image, scale, result, colour)])
        return original(image, masked, scale, result, thickness_mm, colour, *args, **kwargs)

    flow._cut_cast_shadows = spy  # type: ignore[assignment]
    try:
        for path in sorted(folder.glob("*.json")):
            truth = json.loads(path.read_text())
            if truth.get("kind") != "photo":
                continue
            seen.clear()
            try:
                m = scanmass.measure(path.with_suffix(".jpg"))
            except ScanmassError as exc:
                print(f"{path.stem}: {str(exc)[:90]}")
                continue
            read = m.settings.get("thickness_estimate", {}).get("parts", {})
            rows = []
            for centroid, cut, mm_per_px in seen[0] if seen else []:
                tp = min(truth_parts(truth), key=lambda p: math.dist(p["c"], centroid))
                q = min(m.parts, key=lambda q: math.dist(q.centroid_mm, centroid))
                est = read.get(str(q.label))
                wall = "-" if est is None else f"{est['thickness_mm']:.2f}"
                length = cut.length_px * mm_per_px
                rows.append(
                    f"{tp['shape']} t={tp['t']:g} dir=({cut.direction[0]:+.2f},{cut.direction[1]:+.2f}) "
                    f"L={length:.1f} mm L/t={length / tp['t']:.2f} read={wall}"
                )
            print(f"{path.stem} ({truth['light']['style']}): " + (" | ".join(rows) or "no sweep"), flush=True)
    finally:
        flow._cut_cast_shadows = original  # type: ignore[assignment]


def probe_given(folder: Path, name: str, thicknesses: list[float]) -> None:
    """One render measured without a thickness and at each given one: every part's area error and its sigmas."""
    truth = json.loads((folder / f"{name}.json").read_text())
    for t in [None, *thicknesses]:
        m = scanmass.measure(folder / f"{name}.jpg", **({} if t is None else {"thickness_mm": t}))
        cells = []
        for tp in truth_parts(truth):
            q = min(m.parts, key=lambda q: math.dist(q.centroid_mm, tp["c"]))
            err = q.area_mm2 - tp["area"]
            cells.append(
                f"{tp['shape']} t={tp['t']:g}: {100 * err / tp['area']:+.2f} % ({abs(err) / q.area_u_mm2:.1f} sigma)"
            )
        print(f"given {'none' if t is None else f'{t:g} mm'}: " + " | ".join(cells), flush=True)


def probe_cut_at(folder: Path, name: str, thicknesses: list[float]) -> None:
    """One render without a thickness: every part's area error with the cut decided as at each thickness."""
    truth = json.loads((folder / f"{name}.json").read_text())
    trials: list[Any] = []
    original = flow._cut_cast_shadows

    def spy(image, masked, scale, result, thickness_mm, colour, remeasure, thickness_u, probe):  # type: ignore[no-untyped-def]
        out = original(image, masked, scale, result, thickness_mm, colour, remeasure, thickness_u, probe)
        if thickness_mm is None and colour is not None and not trials:
            trials.append(out[0])
            for t in thicknesses:
                trials.append(
                    _cut_once(masked, scale, result, _decide_cuts(image, masked, scale, result, t, colour), probe)[0]
                )
        return out

    flow._cut_cast_shadows = spy  # type: ignore[assignment]
    try:
        scanmass.measure(folder / f"{name}.jpg")
    finally:
        flow._cut_cast_shadows = original  # type: ignore[assignment]
    for t, m in zip([None, *thicknesses], trials):
        cells = []
        for tp in truth_parts(truth):
            near = [q for q in m.parts if math.dist(q.centroid_mm, tp["c"]) < 0.25 * q.caliper_max_mm]
            q = min(near, key=lambda q: math.dist(q.centroid_mm, tp["c"])) if near else None
            cells.append(
                f"{tp['shape']} t={tp['t']:g}: "
                + ("missed" if q is None else f"{100 * (q.area_mm2 - tp['area']) / tp['area']:+.2f} %")
            )
        print(f"cut as at {'none (8 mm reach)' if t is None else f'{t:g} mm'}: " + " | ".join(cells), flush=True)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dir", type=Path, default=ROOT / "tests" / "data" / "reallight")
    ap.add_argument("--given", nargs="+", metavar=("NAME", "MM"), help="a render's name and thicknesses to give")
    ap.add_argument("--cut-at", nargs="+", metavar=("NAME", "MM"), help="a render's name and thicknesses to cut at")
    args = ap.parse_args(argv)
    if args.cut_at:
        probe_cut_at(args.dir, args.cut_at[0], [float(v) for v in args.cut_at[1:]])
    elif args.given:
        probe_given(args.dir, args.given[0], [float(v) for v in args.given[1:]])
    else:
        probe_lengths(args.dir)
    return 0


if __name__ == "__main__":
    sys.exit(main())
