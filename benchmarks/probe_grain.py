"""Probe (run by hand): does a region's fine texture tell a metal face from a cast shadow on paper?

For each photographed render of the tuned set, measured at its first part's thickness (or without one,
``--no-thickness``), the regions the measurement found (as the 'shadow only' check sees them) and the cast
shadows beside them are read with :func:`scanmass.segment.grain.grain_texture`: the fine detail's spread on
log luma over the paper's (``fine``), the structure tensor's coherence over the region (``coh``) and its local
median (``lcoh``), with the region's level over the paper (``lvl``). Each found region is named by the nearest
truth part's material (the render's truth file) and marked ``shadow-only`` where the result names it so; the cast
shadow beside a part is the paper within a shadow's reach (:func:`~scanmass.segment.shadow.shadow_band_px` at the
unknown thickness's bound), more than 3 px from any found region and below :data:`SHADOW_LEVEL` of the paper.
The last lines give each class's least, median and largest value of every measure.

Usage::

    PYTHONPATH=$PWD python -m benchmarks.probe_grain                  # every photographed render
    PYTHONPATH=$PWD python -m benchmarks.probe_grain --only dev-lens-window-steel4-t20 window-nylon-t0
    PYTHONPATH=$PWD python -m benchmarks.probe_grain --no-white-faces --only window-nylon-t0
        # the white faces' search off: white parts' shadows alone then stay regions named 'shadow only'

Never run it on the held-out set to choose a rule (it reads the truth files).
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
from collections import defaultdict
from pathlib import Path
from typing import Any

import cv2
import numpy as np
from shapely.geometry import Polygon

import scanmass
from scanmass.errors import ScanmassError
from scanmass.pipeline import flow, photo_shadows
from scanmass.pipeline.part_terms import UNKNOWN_THICKNESS_MM
from scanmass.segment.grain import GrainTexture, grain_texture
from scanmass.segment.shadow import shadow_band_px

ROOT = Path(__file__).resolve().parents[1]
#: Largest level (share of the paper's median luma) of a pixel beside a part read as its cast shadow.
SHADOW_LEVEL = 0.75
#: Rec. 709 luma weights (ITU-R BT.709) on linear colour.
LUMA = np.array([0.2126, 0.7152, 0.0722], np.float32)


def _truth(folder: Path, name: str) -> tuple[dict, list[dict]]:
    import json

    truth = json.loads((folder / f"{name}.json").read_text())
    parts = []
    for p in truth["parts"]:
        poly = Polygon(p["outline_mm"], p["holes_mm"])  # shapely: the reference centroid
        parts.append(
            {"material": p["material"], "shape": p["shape"], "t": p["thickness_mm"], "c": poly.centroid.coords[0]}
        )
    return truth, parts


def _mask(scale: Any, part: Any, box: tuple[int, int, int, int]) -> np.ndarray:
    """The part's mask (holes cleared) in the box (x0, y0, x1, y1) of the image."""
    x0, y0, x1, y1 = box
    m = np.zeros((y1 - y0, x1 - x0), np.uint8)
    ring = scale.plane_map.to_px(np.asarray(part.outline_mm, float)) - [x0, y0]
    cv2.fillPoly(m, [np.round(ring).astype(np.int32)], 1)
    for h in part.holes:
        if h.outline_mm is not None:
            hole = scale.plane_map.to_px(np.asarray(h.outline_mm, float)) - [x0, y0]
            cv2.fillPoly(m, [np.round(hole).astype(np.int32)], 0)
    return m.astype(bool)


def read_regions(
    image: Any, scale: Any, result: Any, colour: np.ndarray, named: str
) -> list[tuple[Any, str, GrainTexture, float]]:
    """Per found region: (part, 'face' / 'shadow-only' / 'cast-shadow', texture, level over the paper)."""
    lut = np.asarray(image.to_linear, dtype=np.float32)
    luma = lut[colour] @ LUMA
    band_px = shadow_band_px(UNKNOWN_THICKNESS_MM, scale.plane_map.mm_per_px)
    h_px, w_px = luma.shape
    full = (0, 0, w_px, h_px)
    parts = [p for p in result.parts if p.outline_mm is not None]
    every = np.zeros((h_px, w_px), bool)
    for p in parts:
        every |= _mask(scale, p, full)
    reach_k = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * int(band_px) + 1,) * 2)
    reach_all = cv2.dilate(every.astype(np.uint8), reach_k).astype(bool)
    near_all = cv2.dilate(every.astype(np.uint8), np.ones((7, 7), np.uint8)).astype(bool)
    out = []
    for p in parts:
        ring = scale.plane_map.to_px(np.asarray(p.outline_mm, float))
        pad = int(band_px) + 30
        x0, y0 = np.maximum(np.floor(ring.min(axis=0)).astype(int) - pad, 0)
        x1, y1 = np.ceil(ring.max(axis=0)).astype(int) + pad
        box = (int(x0), int(y0), int(min(x1, w_px)), int(min(y1, h_px)))
        sl = np.s_[box[1] : box[3], box[0] : box[2]]
        mask = _mask(scale, p, box)
        paper = ~reach_all[sl]
        if paper.sum() < 100:
            continue
        paper_level = float(np.median(luma[sl][paper]))
        kind = "shadow-only" if f"part {p.label} (" in named else "face"
        tex = grain_texture(luma[sl], mask, paper)
        if tex is not None:
            out.append((p, kind, tex, float(np.median(luma[sl][mask])) / paper_level))
        own_reach = cv2.dilate(mask.astype(np.uint8), reach_k).astype(bool)
        shadow = own_reach & ~near_all[sl] & (luma[sl] < SHADOW_LEVEL * paper_level)
        tex = grain_texture(luma[sl], shadow, paper, edge_px=1)
        if tex is not None:
            out.append((p, "cast-shadow", tex, float(np.median(luma[sl][shadow])) / paper_level))
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--dir", type=Path, default=ROOT / "tests" / "data" / "reallight")
    ap.add_argument("--only", nargs="*", default=None, help="render names (no suffix)")
    ap.add_argument("--no-thickness", action="store_true", help="measure without the thickness")
    ap.add_argument("--no-white-faces", action="store_true", help="turn the white faces' search off")
    args = ap.parse_args(argv)
    names = args.only or sorted(p.stem for p in args.dir.glob("*.jpg"))
    original = flow._shadows_only
    seen: list[Any] = []

    def spy(image, scale, result, colour, thickness_mm=None, white=frozenset()):  # type: ignore[no-untyped-def]
        said = original(image, scale, result, colour, thickness_mm, white)
        if colour is not None:
            named = " ".join(w for w in said if w.startswith("shadow only:"))
            seen.append(read_regions(image, scale, result, colour, named))
        return said

    flow._shadows_only = spy  # type: ignore[assignment]
    if args.no_white_faces:
        photo_shadows.white_faces = lambda *a, **k: []  # type: ignore[assignment]
    classes: dict[str, list[tuple[float, float, float, float]]] = defaultdict(list)
    print(f"{'render':30s} {'class':28s} {'label':>5s} {'px':>6s} {'lvl':>6s} {'fine':>7s} {'coh':>5s} {'lcoh':>5s}")
    for name in names:
        truth, parts = _truth(args.dir, name)
        if truth["kind"] != "photo":
            continue
        seen.clear()
        try:
            scanmass.measure(args.dir / f"{name}.jpg", thickness_mm=None if args.no_thickness else parts[0]["t"])
        except ScanmassError as exc:
            print(f"{name:30s} refused: {str(exc)[:80]}")
        for part, kind, tex, level in seen[-1] if seen else []:
            near = min(parts, key=lambda q: math.dist(q["c"], part.centroid_mm))
            cls = f"{kind} {near['material']}"
            classes[cls].append((level, tex.fine, tex.coherence, tex.local_coherence))
            print(
                f"{name:30s} {cls:28s} {part.label:5d} {tex.pixels:6d} {level:6.3f} {tex.fine:7.2f} "
                f"{tex.coherence:5.2f} {tex.local_coherence:5.2f}"
            )
    print("\nper class: least / median / largest")
    for cls, rows in sorted(classes.items()):
        cols = list(zip(*rows))
        text = "  ".join(
            f"{lab} {min(c):.2f}/{statistics.median(c):.2f}/{max(c):.2f}"
            for lab, c in zip(("lvl", "fine", "coh", "lcoh"), cols)
        )
        print(f"{cls:28s} n={len(rows):3d}  {text}")
    flow._shadows_only = original  # type: ignore[assignment]
    return 0


if __name__ == "__main__":
    sys.exit(main())
