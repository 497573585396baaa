"""Probe (run by hand): where does the foot of a seen side wall show, and does it give the thickness?

A raised part's side wall facing the camera shows as a band between the top face's edge and the wall's foot
on the paper; :func:`scanmass.pipeline.photo_thickness.wall_thickness` reads its width where the paper beside
the foot is clear of shadow (``PAPER_BESIDE``). Where the wall is in shade its foot meets the part's own cast
shadow. This script measures each photographed render of the tuned set without a thickness, takes the
segmentation the wall reader sees, and reads every part's wall again in variants:

``base``   the reader as it is (the paper beside the wall must be clear of shadow);
``shade``  the same score on every profile, the shaded ones too (luma only);
``tint``   every profile; the gradient is the larger of the luma's and the paper-likeness's (the distance of the
           linear colour's chromaticity from the paper's, whose step marks where the paper's tint ends: a shadow
           keeps the paper's tint, a wall has its material's);
``shaded`` only the profiles ``base`` drops (the foot in shade), scored as ``tint``;
``grain``  every profile; the gradient is the larger of the luma's and that of the paper's grain (the linear level
           less its 1 px blur, over the level: a wall is smooth along its length, paper in shade grainy);
``grainsh`` as ``grain``, the shaded profiles only;
``sharp``  every profile, each less its 2 px blur (``SHARP_BLUR_PX``): the wall's two edges are as sharp as the
           lens makes them, a shadow's outer edge is a penumbra and drops out;
``sharpsh`` as ``sharp``, the shaded profiles only;
``foot``   the library's third try (``_one_part`` with ``sharp_px``: ``sharp`` where at least
           ``MIN_WALL_VERTICES`` profiles are in shade, the whole wall and its stretches agreeing).

For each part it prints the truth's thickness (the render's truth file), each variant's reading +- its sigma
and its error in sigmas, and the share of profiles in shade. Never run it on the held-out set to choose a rule
(it reads the truth files).

Usage::

    PYTHONPATH=$PWD python -m benchmarks.probe_wall_foot [NAME ...] [--variants base sharp foot] [--json F]
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path
from typing import Any

import cv2
import numpy as np
from scipy.ndimage import gaussian_filter1d

import scanmass
from scanmass.pipeline import flow
from scanmass.pipeline import photo_thickness as pt

ROOT = Path(__file__).resolve().parents[1]
TUNED = ROOT / "tests" / "data" / "reallight"
VARIANTS = ("base", "shade", "tint", "shaded", "grain", "grainsh", "sharp", "sharpsh", "foot")


def grain_image(grey: np.ndarray, table: np.ndarray) -> np.ndarray:
    """The paper's grain: |linear - its 1 px blur| over the local level, smoothed, as uint8 (0-255 for 0-1)."""
    lin = table[grey]
    blur = cv2.GaussianBlur(lin, (0, 0), 1.0)
    rel = cv2.GaussianBlur(np.abs(lin - blur), (0, 0), 1.5) / np.maximum(cv2.GaussianBlur(lin, (0, 0), 1.5), 0.02)
    return np.clip(np.round(rel * 255.0 / 0.5), 0, 255).astype(np.uint8)


def _foot(
    grey: np.ndarray, table: np.ndarray, scale: Any, part: Any, tops: list
) -> tuple[float | None, float, float, str]:
    """The library's third try (:func:`scanmass.pipeline.photo_thickness._one_part` with ``sharp_px``)."""
    one = pt._one_part(grey, table, scale, part, tops, sharp_px=pt.SHARP_BLUR_PX)
    return one.thickness_mm, one.sigma_mm, 0.0, one.reason


def _read(
    grey: np.ndarray,
    colour: np.ndarray | None,
    table: np.ndarray,
    scale: Any,
    part: Any,
    tops: list,
    variant: str,
    grain: np.ndarray,
) -> tuple[float | None, float, float, str]:
    """One part's wall read in one variant: (thickness or None, sigma, share of profiles in shade, reason)."""
    pm = scale.plane_map
    rings = pt._rings(part)
    x_mm = np.vstack(rings)
    n_mm = np.vstack([pt._smooth_normals(r, 0) for r in rings])
    p0 = pm.to_px(x_mm)
    d = pm.to_px(x_mm + 0.05 * n_mm) - p0
    n_px = d / np.maximum(np.linalg.norm(d, axis=1), 1e-12)[:, None]
    bands = np.empty((len(pt.THICKNESS_GRID_MM), len(x_mm)))
    for i, top_seen in enumerate(tops):
        seen = pt.apply_h(top_seen, x_mm)
        bands[i] = -np.sum(n_px * (pm.to_px(seen) - p0), axis=1)
    near = bands[-1] > 2 * pt.MIN_BAND_PX
    if np.count_nonzero(near) < pt.MIN_WALL_VERTICES:
        return None, 0.0, 0.0, "few"
    bands, p0, n_px = bands[:, near], p0[near], n_px[near]
    reach = float(bands[-1].max()) + 3.0
    s_px = np.arange(-reach, reach + 1e-9, pt.PROFILE_STEP_PX)
    pts = p0[:, None, :] - s_px[None, :, None] * n_px[:, None, :]
    if pm.undistort is not None:
        flat = pts.reshape(-1, 2)
        pts = (2.0 * flat - pm.undistort(flat)).reshape(pts.shape)
    pts32 = pts.astype(np.float32)
    prof = pt._linear_profiles(grey, table, pts32)
    k_out = int(round(2.0 / pt.PROFILE_STEP_PX))
    outside = prof[:, :k_out].mean(axis=1)
    clear = outside >= pt.PAPER_BESIDE * np.percentile(outside, 90)
    shade_share = float(1.0 - np.mean(clear))
    every = np.ones_like(clear)
    keep = {"base": clear, "shade": every, "tint": every, "shaded": ~clear, "grain": every, "grainsh": ~clear}.get(
        variant, every
    )
    keep = ~clear if variant == "sharpsh" else keep
    if np.count_nonzero(keep) < pt.MIN_WALL_VERTICES:
        return None, 0.0, shade_share, "kept few"
    kept = prof[keep]
    if variant in ("sharp", "sharpsh"):  # a soft edge (a shadow's penumbra) is taken out with the 2 px blur
        kept = kept - gaussian_filter1d(kept, pt.SHARP_BLUR_PX / pt.PROFILE_STEP_PX, axis=1, mode="nearest")
    grad = np.abs(np.gradient(kept, pt.PROFILE_STEP_PX, axis=1))
    grad /= grad.max(axis=1, keepdims=True) + 1e-9
    if variant in ("tint", "shaded") and colour is not None:
        rgb = np.stack([pt._linear_profiles(colour[..., c], table, pts32) for c in (2, 1, 0)], axis=-1)[keep]
        chrom = rgb / np.maximum(rgb.sum(axis=-1, keepdims=True), 1e-6)
        paper = np.median(chrom[clear[keep]][:, :k_out].reshape(-1, 3), axis=0) if clear[keep].any() else None
        if paper is None:
            paper = np.median(chrom[:, :k_out].reshape(-1, 3), axis=0)
        like = np.linalg.norm(chrom - paper, axis=-1)
        g2 = np.abs(np.gradient(like, pt.PROFILE_STEP_PX, axis=1))
        g2 /= g2.max(axis=1, keepdims=True) + 1e-9
        grad = np.maximum(grad, g2)
    if variant in ("grain", "grainsh"):
        rough = pt._linear_profiles(grain, np.arange(256, dtype=np.float32) / 255.0, pts32)[keep]
        g3 = np.abs(np.gradient(rough, pt.PROFILE_STEP_PX, axis=1))
        g3 /= g3.max(axis=1, keepdims=True) + 1e-9
        grad = np.maximum(grad, g3)
    bands = bands[:, keep]
    curve, starts = pt._score_table(grad, s_px, bands).curve()
    peak, prominence = pt._peak_of(curve)
    band = float(np.median(bands[peak]))
    if peak in (0, len(curve) - 1) or prominence < pt.MIN_PROMINENCE:
        return None, 0.0, shade_share, f"no peak (prom {prominence:.3f})"
    if band < pt.MIN_BAND_PX:
        return None, 0.0, shade_share, f"band {band:.1f}px"
    t = max(pt._vertex_mm(curve, peak) - pt.READ_EXCESS_MM, float(pt.THICKNESS_GRID_MM[0]))
    width = pt.half_height_width_mm(curve, peak, prominence)
    sigma = math.hypot(width / 2.355, pt.SIGMA_SHARE * t + pt.SIGMA_FLOOR_MM)
    return t, sigma, shade_share, f"prom {prominence:.3f}"


def probe(name: str, variants: tuple[str, ...] = VARIANTS) -> list[dict]:
    """Every part of one render: truth, the reader's own estimate and each variant's reading."""
    truth = json.loads((TUNED / f"{name}.json").read_text())
    if truth["kind"] != "photo":
        return []
    seen: dict[str, Any] = {}
    original = flow.wall_thickness

    def spy(image: Any, scale: Any, result: Any) -> list:
        out = original(image, scale, result)
        if "image" not in seen:
            seen.update(image=image, scale=scale, parts=list(result.parts), out=out)
        return out

    flow.wall_thickness = spy
    try:
        scanmass.measure(TUNED / f"{name}.jpg")
    except scanmass.ScanmassError as exc:
        print(f"{name}: {exc}")
        return []
    finally:
        flow.wall_thickness = original
    if "image" not in seen:
        return []
    image, scale, parts = seen["image"], seen["scale"], seen["parts"]
    if scale.camera_matrix is None:
        return []
    table = np.asarray(image.to_linear, np.float32)
    colour = cv2.imread(str(TUNED / f"{name}.jpg"), cv2.IMREAD_COLOR)
    tops = pt._tops_seen(scale)
    grain = grain_image(image.grey, table)
    rows = []
    for tp in truth["parts"]:
        from shapely.geometry import Polygon

        poly = Polygon(tp["outline_mm"], tp["holes_mm"])
        c = (poly.centroid.x, poly.centroid.y)
        part = min(parts, key=lambda q: math.dist(q.centroid_mm, c), default=None)
        if part is None or math.dist(part.centroid_mm, c) > 0.25 * math.sqrt(poly.area):
            continue
        if part.outline_mm is None or any(h.outline_mm is None for h in part.holes):
            continue
        own = next((w for w in seen["out"] if w.label == part.label), None)
        row = {
            "render": name,
            "shape": tp["shape"],
            "material": tp["material"],
            "light": truth["light"]["style"],
            "t": tp["thickness_mm"],
            "own": None if own is None or own.thickness_mm is None else [own.thickness_mm, own.sigma_mm, own.cue],
        }
        for v in variants:
            if v == "foot":
                t, s, _, why = _foot(image.grey, table, scale, part, tops)
            else:
                t, s, shade, why = _read(image.grey, colour, table, scale, part, tops, v, grain)
                row["shade_share"] = shade
            row[v] = [t, s, why]
        rows.append(row)
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("names", nargs="*")
    ap.add_argument("--json")
    ap.add_argument("--variants", nargs="+", default=list(VARIANTS), choices=VARIANTS)
    args = ap.parse_args()
    names = args.names or sorted(p.stem for p in TUNED.glob("*.json"))
    rows: list[dict] = []
    for name in names:
        got = probe(name, tuple(args.variants))
        for r in got:
            cells = []
            for v in args.variants:
                t, s, why = r[v]
                cells.append(
                    f"{v} " + (f"{t:.2f}+-{s:.2f} ({(t - r['t']) / s:+.1f}s)" if t is not None else f"- {why}")
                )
            own = r["own"]
            print(
                f"{name:32s} {r['shape']:9s} {r['material'][:6]:6s} t={r['t']:<4} shade {r.get('shade_share', math.nan):.2f} own "
                + (f"{own[0]:.2f}+-{own[1]:.2f}" if own else "-")
                + " | "
                + " | ".join(cells),
                flush=True,
            )
        rows += got
    for v in args.variants:
        read = [r for r in rows if r[v][0] is not None]
        errs = np.array([abs(r[v][0] - r["t"]) for r in read])
        sig = np.array([abs(r[v][0] - r["t"]) / r[v][1] for r in read])
        if len(read):
            print(
                f"{v:7s}: read {len(read)}/{len(rows)}, median |err| {np.median(errs):.2f} mm, worst {errs.max():.2f} mm, "
                f"max {sig.max():.1f} sigma, beyond 3 sigma {int(np.sum(sig > 3))}"
            )
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))


if __name__ == "__main__":
    main()
