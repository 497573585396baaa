"""Probe (run by hand): where a photographed part's outline runs off the truth's, edge by edge (issue 11).

For each part of a photographed render of the tuned set, measured at its own thickness, the outer outline is
laid over the truth's (shapely) and each segment of the truth's outline gets the mean offset of
the measured outline within :data:`BAND_MM` of it (mm, + outwards: excess less missing, over the edge's length).
Each edge is classed by two facts of the scene read from the render's truth file, not from the code under test:

- ``light``: the cosine between the edge's outward normal and the way from the light to the edge's middle
  (on the mat; the largest over the render's lights): ``away`` above +:data:`FACING_COS` (the cast shadow lies
  along it), ``lit`` below -:data:`FACING_COS`, else ``along``;
- ``wall``: the width (mm, on the mat) of the side wall facing the camera the edge shows: a pinhole camera at
  ``C`` sees the top edge of a part ``t`` thick over the foot point ``P`` at ``P + t / (C_z - t) (P - C_xy)``
  (similar triangles, common practice), so the wall shows where that parallax points against the edge's
  outward normal, as wide as its component along it; ``seen`` where wider than :data:`SEEN_WALL_MM`.

It prints, per part, the outer outline's area error and each class's length and mean offset, and the edges.
``--json F`` writes the same to a file. Stop 31 (branch coreband31) used it to find where the band the cast
shadow's core leaves lies on the brackets farband does not reach (docs/benchmark-history.md).

Usage::

    PYTHONPATH=$PWD python -m benchmarks.probe_edge_bands dev-spot-brass2-t27 dev-lens-window-steel2-t16

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
from shapely.geometry import LineString, Polygon
from shapely.ops import unary_union

import scanmass
from scanmass.errors import ScanmassError

REALLIGHT = Path(__file__).resolve().parent.parent / "tests" / "data" / "reallight"
#: As tests/test_reallight_corners.py: an edge faces away from the light (or towards it) where its outward
#: normal's cosine with the way from the light is above 0.3 (below -0.3).
FACING_COS = 0.3
#: Width (mm) of the band each side of an edge whose area differences are laid to it (tests/test_reallight_corners.py).
BAND_MM = 3.0
#: Least width (mm on the mat) of a wall facing the camera counted as seen: a third of these renders' pixel
#: (0.3-0.4 mm), under what the outline's sub-pixel edge resolves.
SEEN_WALL_MM = 0.1
#: Shortest truth edge (mm) listed on its own (a round outline's segments count in their classes only).
MIN_EDGE_MM = 2.0


def camera_xyz(truth: dict[str, Any]) -> np.ndarray:
    """The camera's place (mm, the mat's frame) of a photographed render, from its truth file's camera block.

    As benchmarks/render_reallight.py places it: ``height_mm`` from the target along the direction tilted
    ``tilt_deg`` from the vertical towards ``tilt_dir_deg`` (counter-clockwise from the mat's +x).
    """
    cam = truth["camera"]
    t, d = math.radians(cam["tilt_deg"]), math.radians(cam["tilt_dir_deg"])
    h = float(cam["height_mm"])
    offset = h * np.array([math.sin(t) * math.cos(d), math.sin(t) * math.sin(d), math.cos(t)])
    return np.asarray(cam["target_mm"], float) + offset


def seen_wall_mm(foot: np.ndarray, normal: np.ndarray, camera: np.ndarray, thickness_mm: float) -> float:
    """Width (mm, on the mat) of the side wall a pinhole camera at ``camera`` sees at ``foot`` (outward ``normal``).

    The top edge over ``foot`` is seen on the mat at ``foot + t / (C_z - t) * (foot - C_xy)`` (similar triangles);
    the wall shows where that parallax points into the part, as wide as its component along the normal; 0 where
    the top edge hides it.

    >>> seen_wall_mm(np.array([0.0, 0.0]), np.array([1.0, 0.0]), np.array([100.0, 0.0, 300.0]), 3.0)
    1.0101010101010102
    >>> seen_wall_mm(np.array([0.0, 0.0]), np.array([-1.0, 0.0]), np.array([100.0, 0.0, 300.0]), 3.0)
    0.0
    """
    parallax = thickness_mm / (camera[2] - thickness_mm) * (np.asarray(foot, float) - camera[:2])
    return max(0.0, -float(parallax @ np.asarray(normal, float)))


def edge_classes(truth: dict[str, Any], part: dict[str, Any]) -> list[dict[str, Any]]:
    """The truth outline's segments with their class to the light and the camera (a round outline's short ones too)."""
    outline = Polygon(part["outline_mm"])
    ring = np.asarray(outline.exterior.coords)[:-1]
    sign = 1.0 if outline.exterior.is_ccw else -1.0
    lights = [np.asarray(light["location_m"][:2], float) * 1000.0 for light in truth["light"]["lights"]]
    camera = camera_xyz(truth)
    edges = []
    for a, b in zip(ring, np.roll(ring, -1, axis=0)):
        d = b - a
        length = float(np.linalg.norm(d))
        if length < 1e-9:
            continue
        normal = sign * np.array([d[1], -d[0]]) / length  # outwards
        mid = 0.5 * (a + b)
        away = max(float(-(normal @ (q - mid)) / np.linalg.norm(q - mid)) for q in lights)
        wall = max(seen_wall_mm(p, normal, camera, float(part["thickness_mm"])) for p in (a, mid, b))
        side = "away" if away > FACING_COS else ("lit" if away < -FACING_COS else "along")
        edges.append({"a": a, "b": b, "length": length, "away": away, "wall_mm": wall, "side": side})
    return edges


def edge_offsets(measured: Polygon, truth_outline: Polygon, edges: list[dict[str, Any]]) -> list[float]:
    """Mean offset (mm, + outwards) of ``measured`` from ``truth_outline`` within :data:`BAND_MM` of each edge."""
    excess, missing = measured.difference(truth_outline), truth_outline.difference(measured)
    out = []
    for e in edges:
        zone = LineString([e["a"], e["b"]]).buffer(BAND_MM, cap_style=2)
        out.append((excess.intersection(zone).area - missing.intersection(zone).area) / e["length"])
    return out


def class_offsets(edges: list[dict[str, Any]], offsets: list[float], measured: Polygon, truth_outline: Polygon):
    """Per class (``side`` / ``seen`` or ``hidden`` wall): total length (mm) and mean offset (mm) over it."""
    groups: dict[str, list[int]] = {}
    for i, e in enumerate(edges):
        key = f"{e['side']}/{'seen' if e['wall_mm'] > SEEN_WALL_MM else 'hidden'}"
        groups.setdefault(key, []).append(i)
    excess, missing = measured.difference(truth_outline), truth_outline.difference(measured)
    out = {}
    for key, idx in sorted(groups.items()):
        zone = unary_union([LineString([edges[i]["a"], edges[i]["b"]]).buffer(BAND_MM, cap_style=2) for i in idx])
        length = sum(edges[i]["length"] for i in idx)
        out[key] = (length, (excess.intersection(zone).area - missing.intersection(zone).area) / length)
    return out


def probe(name: str, folder: Path = REALLIGHT) -> list[dict[str, Any]]:
    """Each part of render ``name`` measured at its own thickness: its outer outline's error and edges' offsets."""
    truth = json.loads((folder / f"{name}.json").read_text())
    rows = []
    for part in truth["parts"]:
        m = scanmass.measure(folder / f"{name}.jpg", thickness_mm=part["thickness_mm"])
        t_outline = Polygon(part["outline_mm"])  # shapely: the truth's outer outline
        c = np.asarray(Polygon(part["outline_mm"], part["holes_mm"]).centroid.coords[0])
        if not m.parts:
            rows.append({"render": name, "shape": part["shape"], "found": False})
            continue
        got = min(m.parts, key=lambda q: float(np.hypot(*(np.asarray(q.centroid_mm) - c))))
        if got.outline_mm is None:
            rows.append({"render": name, "shape": part["shape"], "found": False})
            continue
        measured = Polygon(np.asarray(got.outline_mm)).buffer(0)
        edges = edge_classes(truth, part)
        offsets = edge_offsets(measured, t_outline, edges)
        rows.append(
            {
                "render": name,
                "shape": part["shape"],
                "found": True,
                "thickness_mm": part["thickness_mm"],
                "outer_area_pct": 100.0 * (measured.area / t_outline.area - 1.0),
                "classes": {
                    k: [round(v[0], 1), round(v[1], 3)]
                    for k, v in class_offsets(edges, offsets, measured, t_outline).items()
                },
                "edges": [
                    {
                        "length": round(e["length"], 1),
                        "side": e["side"],
                        "away": round(e["away"], 2),
                        "wall_mm": round(e["wall_mm"], 3),
                        "offset_mm": round(o, 3),
                    }
                    for e, o in zip(edges, offsets)
                    if e["length"] >= MIN_EDGE_MM
                ],
            }
        )
    return rows


def main(argv: list[str] | None = None) -> int:
    """Print each named render's parts' edge offsets by class (and write them with ``--json``)."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("names", nargs="+", help="render names of the tuned set (no extension)")
    ap.add_argument("--dir", type=Path, default=REALLIGHT, help="folder of the renders and their truth files")
    ap.add_argument("--edges", action="store_true", help="print every edge, not only the classes")
    ap.add_argument("--json", type=Path, help="write the rows to this file")
    args = ap.parse_args(argv)
    rows = []
    for name in args.names:
        try:
            rows += probe(name, args.dir)
        except (ScanmassError, FileNotFoundError) as exc:
            print(f"{name}: {exc}", file=sys.stderr)
            return 2
    for r in rows:
        if not r["found"]:
            print(f"{r['render']} {r['shape']}: not found")
            continue
        classes = "  ".join(f"{k} {v[0]:.0f} mm {v[1]:+.3f}" for k, v in r["classes"].items())
        print(f"{r['render']} {r['shape']} t={r['thickness_mm']}: outer {r['outer_area_pct']:+.2f} %  {classes}")
        if args.edges:
            for e in r["edges"]:
                print(
                    f"    {e['length']:5.1f} mm {e['side']:5s} cos {e['away']:+.2f} wall {e['wall_mm']:.2f} mm"
                    f"  offset {e['offset_mm']:+.3f} mm"
                )
    if args.json:
        tmp = args.json.with_suffix(args.json.suffix + ".tmp")
        tmp.write_text(json.dumps(rows, indent=1))
        tmp.replace(args.json)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
