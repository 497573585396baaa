"""Designed parts for tests and benchmarks: the entities a designer drew, and their polygon.

Each :class:`Design` holds the drawn entities (lines, arcs, circles) of the outer ring
and the holes, exactly, and renders them to polygons fine enough (chord-to-arc gap
under 0.1 um) for :func:`scanmass.testing.scans.render_scan`. The designed values are
the truth a fit is checked against.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from scanmass.outputs.primitives import Entity, ring_points
from scanmass.testing.scans import SynthPart, rotate

__all__ = ["Design", "plate", "obround", "d_shape", "l_bracket", "tab", "all_designs"]

_STEP_MM = 0.01


@dataclass
class Design:
    """A designed part: outer entities (counter-clockwise) and round holes (x, y, d)."""

    name: str
    outer: list[Entity]
    holes: list[tuple[float, float, float]] = field(default_factory=list)

    @property
    def entity_count(self) -> int:
        return len(self.outer) + len(self.holes)

    def counts(self) -> dict[str, int]:
        out = {"line": 0, "arc": 0, "circle": len(self.holes)}
        for e in self.outer:
            out[e.kind] += 1
        return out

    def synth(self, *, angle_deg: float = 0.0, about_mm: tuple[float, float] = (0.0, 0.0)) -> SynthPart:
        """The part as a polygon scene (holes as fine circles), optionally rotated."""
        outer = _dense(self.outer)
        holes = [_circle_poly(x, y, 0.5 * d)[::-1] for x, y, d in self.holes]
        if angle_deg:
            outer = rotate(outer, angle_deg, about_mm=about_mm)
            holes = [rotate(h, angle_deg, about_mm=about_mm) for h in holes]
        return SynthPart(outer, holes)


def _dense(entities: list[Entity]) -> np.ndarray:
    # chord-to-arc gap r (1 - cos(step / 2r)) < 1e-7 mm for r >= 1 mm at 0.01 mm steps
    return ring_points(entities, _STEP_MM)


def _circle_poly(x: float, y: float, r: float) -> np.ndarray:
    n = max(64, math.ceil(2 * math.pi * r / _STEP_MM))
    a = np.linspace(0, 2 * math.pi, n, endpoint=False)
    return np.column_stack([x + r * np.cos(a), y + r * np.sin(a)])


def _line(a: tuple[float, float], b: tuple[float, float]) -> Entity:
    return Entity("line", a, b)


def _arc(c: tuple[float, float], r: float, a0: float, a1: float, ccw: bool = True) -> Entity:
    p0 = (c[0] + r * math.cos(math.radians(a0)), c[1] + r * math.sin(math.radians(a0)))
    p1 = (c[0] + r * math.cos(math.radians(a1)), c[1] + r * math.sin(math.radians(a1)))
    return Entity("arc", p0, p1, c, r, ccw)


def plate(x0: float, y0: float, w: float, h: float, r: float = 0.0, holes=()) -> Design:
    """Rectangular plate, corners sharp or rounded with radius r (tangent arcs)."""
    if r <= 0:
        pts = [(x0, y0), (x0 + w, y0), (x0 + w, y0 + h), (x0, y0 + h)]
        return Design("plate", [_line(pts[k], pts[(k + 1) % 4]) for k in range(4)], list(holes))
    x1, y1 = x0 + w, y0 + h
    ents = [
        _line((x0 + r, y0), (x1 - r, y0)),
        _arc((x1 - r, y0 + r), r, -90, 0),
        _line((x1, y0 + r), (x1, y1 - r)),
        _arc((x1 - r, y1 - r), r, 0, 90),
        _line((x1 - r, y1), (x0 + r, y1)),
        _arc((x0 + r, y1 - r), r, 90, 180),
        _line((x0, y1 - r), (x0, y0 + r)),
        _arc((x0 + r, y0 + r), r, 180, 270),
    ]
    return Design("rounded plate", ents, list(holes))


def obround(cx: float, cy: float, length: float, width: float, holes=()) -> Design:
    """Slot-shaped plate: two lines and two tangent half circles."""
    r = 0.5 * width
    a = 0.5 * length - r
    ents = [
        _line((cx - a, cy - r), (cx + a, cy - r)),
        _arc((cx + a, cy), r, -90, 90),
        _line((cx + a, cy + r), (cx - a, cy + r)),
        _arc((cx - a, cy), r, 90, 270),
    ]
    return Design("obround", ents, list(holes))


def d_shape(cx: float, cy: float, r: float, flat: float, holes=()) -> Design:
    """Circle with a flat at distance ``flat`` below the centre: one line, one arc, sharp joints."""
    half = math.degrees(math.acos(flat / r))
    ents = [_arc((cx, cy), r, -90 + half, 270 - half)]
    ents.append(_line(ents[0].end_mm, ents[0].start_mm))
    return Design("d-shape", ents, list(holes))


def l_bracket(x0: float, y0: float, w: float, h: float, t: float, fillet: float, holes=()) -> Design:
    """L bracket with an inner fillet (a concave tangent arc) and sharp outer corners."""
    f = fillet
    ents = [
        _line((x0, y0), (x0 + w, y0)),
        _line((x0 + w, y0), (x0 + w, y0 + t)),
        _line((x0 + w, y0 + t), (x0 + t + f, y0 + t)),
        _arc((x0 + t + f, y0 + t + f), f, 270, 180, ccw=False),
        _line((x0 + t, y0 + t + f), (x0 + t, y0 + h)),
        _line((x0 + t, y0 + h), (x0, y0 + h)),
        _line((x0, y0 + h), (x0, y0)),
    ]
    return Design("L bracket", ents, list(holes))


def tab(x0: float, y0: float, w: float, length: float, hole_d: float) -> Design:
    """Tab with a half-round end and a concentric hole: three lines and a tangent arc."""
    r = 0.5 * w
    cx, cy = x0 + length - r, y0 + r
    ents = [
        _line((x0, y0), (cx, y0)),
        _arc((cx, cy), r, -90, 90),
        _line((cx, y0 + w), (x0, y0 + w)),
        _line((x0, y0 + w), (x0, y0)),
    ]
    return Design("tab", ents, [(cx, cy, hole_d)])


def all_designs() -> list[Design]:
    """The designed parts of the tests and the benchmark (sizes in mm)."""
    return [
        plate(10, 10, 60, 30, holes=[(20, 20, 6.6), (60, 30, 9.0)]),
        plate(10, 10, 50, 40, r=5, holes=[(15, 15, 4.5), (55, 15, 4.5), (55, 45, 4.5), (15, 45, 4.5)]),
        obround(40, 25, 60, 20, holes=[(20, 25, 5.5), (60, 25, 5.5)]),
        d_shape(30, 30, 20, 12, holes=[(30, 30, 8.0)]),
        l_bracket(10, 10, 50, 40, 8, 4, holes=[(40, 14, 3.4), (14, 35, 3.4)]),
        tab(10, 10, 20, 45, 6.6),
    ]
