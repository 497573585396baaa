"""The overlay picture: the scan with each measured outline, hole, label, centroid,
principal axes and a scale bar drawn on it.

Colours come from the Okabe-Ito palette, chosen to stay distinguishable for readers
with the common colour-vision deficiencies.

References
----------
.. [1] M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures and
   presentations that are friendly to colorblind people", 2008.
"""

from __future__ import annotations

import math

import cv2
import numpy as np
from numpy.typing import ArrayLike

from scanmass.load.decode import LoadedImage
from scanmass.measurement import Measurement
from scanmass.names import INCH_MM, check_units
from scanmass.scale.planemap import PlaneMap

__all__ = ["render_overlay", "encode_png", "legend_items", "OVERLAY_MAX_SIDE_PX"]

#: Overlays of larger images are drawn on a reduced copy with this longest side.
OVERLAY_MAX_SIDE_PX = 2400

# Okabe-Ito colours, as BGR for OpenCV
_OUTLINE = (178, 114, 0)  # blue  #0072B2
_HOLE = (0, 94, 213)  # vermillion #D55E00
_CENTROID = (66, 228, 240)  # yellow #F0E442
_AXIS_MAJOR = (115, 158, 0)  # bluish green #009E73
_AXIS_MINOR = (167, 121, 204)  # reddish purple #CC79A7
_TEXT = (0, 0, 0)
_CUT = (0, 159, 230)  # orange #E69F00
_MARKER_USED = (233, 180, 86)  # sky blue #56B4E9
_MARKER_REJECTED = _HOLE  # vermillion, as drawn before; named in the legend when present
_ELLIPSE = (0, 0, 0)  # black


def _matrix(measurement: Measurement) -> np.ndarray:
    matrix = measurement.scale.extra.get("px_to_mm") if measurement.scale.extra else None
    if matrix is None:  # an older document: the scan frame of its resolution
        return PlaneMap.from_dpi(25.4 / measurement.scale.mm_per_px, height_px=measurement.source.height_px).matrix
    return np.asarray(matrix, dtype=float)


def _to_px(inv: np.ndarray, pts_mm: ArrayLike) -> np.ndarray:
    pts = np.asarray(pts_mm, float).reshape(-1, 2)
    h = pts @ inv[:, :2].T + inv[:, 2]
    return h[:, :2] / h[:, 2:3]


#: A scale bar is drawn on the picture only where the scale varies less than this across it.
SCALE_BAR_MAX_VARIATION = 0.01


def _scale_variation(matrix: np.ndarray, width: int, height: int) -> float:
    """Relative spread of the local mm per px over the image corners and centre (0 for a scan)."""
    pts = np.array([[0, 0], [width, 0], [0, height], [width, height], [width / 2, height / 2]], float)

    def to_mm(p: np.ndarray) -> np.ndarray:
        h = np.column_stack([p, np.ones(len(p))]) @ matrix.T
        return h[:, :2] / h[:, 2:3]

    step = np.linalg.norm(to_mm(pts + [1.0, 0.0]) - to_mm(pts), axis=1)
    step_y = np.linalg.norm(to_mm(pts + [0.0, 1.0]) - to_mm(pts), axis=1)
    local = np.concatenate([step, step_y])
    return float(local.max() / local.min() - 1.0) if local.min() > 0 else math.inf


def render_overlay(
    image: LoadedImage, measurement: Measurement, *, max_side_px: int = OVERLAY_MAX_SIDE_PX, units: str = "mm"
) -> np.ndarray:
    """Draw the measurement over the image.

    Parameters
    ----------
    image : LoadedImage
        The measured image.
    measurement : Measurement
        Its result; outlines are mapped back to pixels through the scale's matrix.
    max_side_px : int
        Longest side of the picture; larger images are reduced first.
    units : {"mm", "in"}
        Units of the hole diameters and the scale bar written on the picture.

    Returns
    -------
    (H, W, 3) uint8 ndarray
        BGR picture (OpenCV order), ready for :func:`encode_png`.
    """
    check_units(units)
    unit_mm = INCH_MM if units == "in" else 1.0
    height, width = image.grey.shape
    zoom = min(1.0, max_side_px / max(height, width))
    grey = image.grey
    if grey.dtype != np.uint8:
        grey = (grey >> 8).astype(np.uint8)
    if zoom < 1.0:
        grey = cv2.resize(
            grey, (max(1, round(width * zoom)), max(1, round(height * zoom))), interpolation=cv2.INTER_AREA
        )
    # lighten the picture so that the drawing stands out
    canvas = cv2.cvtColor((grey.astype(np.float32) * 0.55 + 110).astype(np.uint8), cv2.COLOR_GRAY2BGR)
    inv = np.linalg.inv(_matrix(measurement))
    side = max(canvas.shape[:2])
    lw = max(1, int(round(side / 900)))
    font = cv2.FONT_HERSHEY_SIMPLEX
    font_scale = max(0.5, side / 1800)
    shift = 4  # sub-pixel drawing: coordinates in 1/16 px
    k = 1 << shift

    def pts_int(pts_px: np.ndarray) -> np.ndarray:
        return np.round((pts_px + 0.5) * zoom * k - 0.5 * k).astype(np.int32).reshape(-1, 1, 2)

    mm_per_px = measurement.scale.mm_per_px
    seen = {"rejected": False, "clipped": False, "axes": False, "ellipse": 0.0}
    for marker in (measurement.scale.extra or {}).get("markers_px", []) or []:
        corners = np.asarray(marker.get("corners", []), float)
        if corners.shape == (4, 2):
            used = marker.get("used", True)
            seen["rejected"] = seen["rejected"] or not used
            colour = _MARKER_USED if used else _MARKER_REJECTED
            cv2.polylines(canvas, [pts_int(corners)], True, colour, lw + 1, cv2.LINE_AA, shift)
    for part in measurement.parts:
        seen["clipped"] = seen["clipped"] or part.cut
        if part.outline_mm is not None:
            cv2.polylines(
                canvas,
                [pts_int(_to_px(inv, part.outline_mm))],
                True,
                _CUT if part.cut else _OUTLINE,
                lw,
                cv2.LINE_AA,
                shift,
            )
        for ring in part.pieces_mm:  # a part found in pieces: its other pieces, as measured
            cv2.polylines(
                canvas, [pts_int(_to_px(inv, ring))], True, _CUT if part.cut else _OUTLINE, lw, cv2.LINE_AA, shift
            )
        for hole in part.holes:
            if hole.outline_mm is not None:
                cv2.polylines(canvas, [pts_int(_to_px(inv, hole.outline_mm))], True, _HOLE, lw, cv2.LINE_AA, shift)
            c = _to_px(inv, [hole.circle_centre_mm])[0]
            cxy = tuple(int(v) for v in np.round((c + 0.5) * zoom - 0.5))
            cv2.drawMarker(canvas, cxy, _HOLE, cv2.MARKER_CROSS, 6 * lw + 4, lw)
            r_px = 0.5 * hole.diameter_mm / mm_per_px * zoom
            _text(
                canvas,
                f"D{hole.diameter_mm / unit_mm:.{2 if units == 'mm' else 3}f}",
                (int(cxy[0] + 0.75 * r_px + 4), int(cxy[1] - 0.75 * r_px - 4)),
                font,
                font_scale * 0.7,
                lw,
            )
        centre = _to_px(inv, [part.centroid_mm])[0]
        # principal axes through the centroid: the I2 axis (long direction) is drawn
        # +-2 radii of gyration about the I1 axis long, the I1 axis +-2 of the other
        axes_drawn: tuple[tuple[float, float, tuple[int, int, int]], ...] = (
            (2.0 * part.gyration_1_mm, part.principal_angle_deg, _AXIS_MAJOR),
            (2.0 * part.gyration_2_mm, part.principal_angle_deg + 90.0, _AXIS_MINOR),
        )
        if not part.principal_axes_defined:  # a near-round part: its axes are undefined, not drawn
            axes_drawn = ()
        seen["axes"] = seen["axes"] or bool(axes_drawn)
        for length_mm, ang, colour in axes_drawn:
            d = np.array([math.cos(math.radians(ang)), math.sin(math.radians(ang))]) * length_mm
            ends = _to_px(inv, [np.array(part.centroid_mm) - d, np.array(part.centroid_mm) + d])
            p1, p2 = (tuple(int(v) for v in p) for p in pts_int(ends).reshape(-1, 2))
            cv2.line(canvas, p1, p2, colour, lw, cv2.LINE_AA, shift)
        cpx = tuple(int(v) for v in np.round((centre + 0.5) * zoom - 0.5))
        cv2.drawMarker(canvas, cpx, (0, 0, 0), cv2.MARKER_TILTED_CROSS, 10 * lw + 8, lw + 2)
        cv2.drawMarker(canvas, cpx, _CENTROID, cv2.MARKER_TILTED_CROSS, 10 * lw + 8, lw)
        # the centroid's 1-sigma ellipse, enlarged by a power of ten until it can be seen
        ux, uy = (abs(v) / mm_per_px * zoom for v in part.centroid_u_mm)
        if math.isfinite(ux) and math.isfinite(uy) and max(ux, uy) > 0:
            enlarge = 10.0 ** max(0, math.ceil(math.log10(8.0 * lw / max(ux, uy))))
            seen["ellipse"] = max(seen["ellipse"], enlarge)
            axes = (max(1, int(round(ux * enlarge))), max(1, int(round(uy * enlarge))))
            cv2.ellipse(canvas, cpx, axes, 0, 0, 360, _ELLIPSE, lw, cv2.LINE_AA)
        bbox = part.bbox_mm
        label_px = _to_px(inv, [[bbox[0], bbox[3]]])[0] * zoom
        text = f"{part.label} (in {1 + len(part.pieces_mm)} pieces)" if part.pieces_mm else f"{part.label}"
        org = (int(label_px[0]), max(int(label_px[1]) - 6 * lw, 20))
        cv2.putText(canvas, text, org, font, font_scale * 1.2, (255, 255, 255), 4 * lw, cv2.LINE_AA)
        cv2.putText(canvas, text, org, font, font_scale * 1.2, _TEXT, 2 * lw, cv2.LINE_AA)

    # scale bar: a round length near a fifth of the width, only where one length holds
    # across the picture (a tilted photo's scale varies: the bar goes on the top view)
    top = bool((measurement.scale.extra or {}).get("markers_px")) and (measurement.scale.extra or {}).get(
        "clear_area_mm"
    )
    uniform = _scale_variation(_matrix(measurement), width, height) < SCALE_BAR_MAX_VARIATION
    if uniform:
        _scale_bar(canvas, canvas.shape[1] / zoom * mm_per_px, zoom / mm_per_px, units, font, font_scale, lw)
    markers = bool((measurement.scale.extra or {}).get("markers_px"))
    _legend(canvas, font, font_scale, lw, markers, seen)
    if top:
        view = _top_view(image, measurement, canvas.shape[0], lw)
        if not uniform:
            xmin, ymin, xmax, ymax = (float(v) for v in measurement.scale.extra["clear_area_mm"])
            px_per_mm = canvas.shape[0] / (ymax - ymin)
            _scale_bar(view, view.shape[1] / px_per_mm, px_per_mm, units, font, font_scale, lw)
        canvas = np.hstack([canvas, view])
    return canvas


def _scale_bar(
    canvas: np.ndarray, width_mm: float, px_per_mm: float, units: str, font: int, font_scale: float, lw: int
) -> None:
    """A bar of a round length (1-2-5 series, in mm or inches) in the lower-left corner."""
    unit_mm = INCH_MM if units == "in" else 1.0
    bar = _round_length(width_mm / 5 / unit_mm)
    bar_px = bar * unit_mm * px_per_mm
    x0, y0 = int(0.03 * canvas.shape[1]), int(canvas.shape[0] - 0.04 * canvas.shape[0])
    cv2.rectangle(
        canvas,
        (x0 - 4 * lw, y0 - int(30 * font_scale) - 6 * lw),
        (x0 + int(bar_px) + 4 * lw, y0 + 6 * lw),
        (255, 255, 255),
        -1,
    )
    cv2.line(canvas, (x0, y0), (x0 + int(round(bar_px)), y0), (0, 0, 0), 3 * lw)
    cv2.putText(canvas, f"{bar:g} {units}", (x0, y0 - 8 * lw), font, font_scale, _TEXT, lw + 1, cv2.LINE_AA)


def _top_view(image: LoadedImage, measurement: Measurement, height_px: int, lw: int) -> np.ndarray:
    """The mat's clear area seen from straight above (for looking only; nothing is measured
    on it), with the outlines drawn in the mat frame."""
    xmin, ymin, xmax, ymax = (float(v) for v in measurement.scale.extra["clear_area_mm"])
    px_per_mm = height_px / (ymax - ymin)
    width_px = max(1, int(round((xmax - xmin) * px_per_mm)))
    # mm -> top-view pixel (y down), composed with pixel -> mm
    to_view = np.array([[px_per_mm, 0, -xmin * px_per_mm - 0.5], [0, -px_per_mm, ymax * px_per_mm - 0.5], [0, 0, 1]])
    grey = image.grey if image.grey.dtype == np.uint8 else (image.grey >> 8).astype(np.uint8)
    view = cv2.warpPerspective(grey, to_view @ _matrix(measurement), (width_px, height_px), flags=cv2.INTER_AREA)
    view = cv2.cvtColor((view.astype(np.float32) * 0.55 + 110).astype(np.uint8), cv2.COLOR_GRAY2BGR)
    k = 16

    def pts(ring_mm: np.ndarray) -> np.ndarray:
        h = np.column_stack([np.asarray(ring_mm, float), np.ones(len(ring_mm))]) @ to_view.T
        return np.round(h[:, :2] * k).astype(np.int32).reshape(-1, 1, 2)

    for part in measurement.parts:
        if part.outline_mm is not None:
            cv2.polylines(view, [pts(part.outline_mm)], True, _OUTLINE, lw, cv2.LINE_AA, 4)
        for ring in part.pieces_mm:
            cv2.polylines(view, [pts(ring)], True, _OUTLINE, lw, cv2.LINE_AA, 4)
        for hole in part.holes:
            if hole.outline_mm is not None:
                cv2.polylines(view, [pts(hole.outline_mm)], True, _HOLE, lw, cv2.LINE_AA, 4)
        c = pts(np.array([part.centroid_mm]))[0, 0] // k
        cv2.drawMarker(view, (int(c[0]), int(c[1])), _CENTROID, cv2.MARKER_TILTED_CROSS, 10 * lw + 8, lw)
    cv2.line(view, (0, 0), (0, height_px - 1), (255, 255, 255), 3 * lw)
    _text(
        view,
        "top view of the clear area",
        (10 + 3 * lw, int(30 * max(0.5, height_px / 1800))),
        cv2.FONT_HERSHEY_SIMPLEX,
        max(0.5, height_px / 1800),
        lw,
    )
    return view


def _text(canvas: np.ndarray, text: str, org: tuple[int, int], font: int, scale: float, lw: int) -> None:
    """Dark text with a light halo, readable on any background."""
    cv2.putText(canvas, text, org, font, scale, (255, 255, 255), 3 * lw + 1, cv2.LINE_AA)
    cv2.putText(canvas, text, org, font, scale, _TEXT, max(1, lw), cv2.LINE_AA)


def legend_items(markers: bool = False, seen: dict | None = None) -> list[tuple[str, tuple[int, int, int]]]:
    """The legend's lines: (words, BGR colour) for each kind of mark drawn, in the colour drawn.

    ``seen`` says what was drawn: ``clipped`` parts, ``rejected`` markers, principal ``axes``,
    and the centroid ``ellipse``'s enlargement factor (0 when none was drawn).
    """
    seen = seen or {}
    items = [("outline", _OUTLINE)]
    if seen.get("clipped"):
        items.append(("clipped by the image edge", _CUT))
    items += [("hole (D = diameter)", _HOLE), ("centroid", _CENTROID)]
    if seen.get("ellipse"):
        enlarge = seen["ellipse"]
        words = "" if enlarge == 1 else f", enlarged {enlarge:g} times"
        items.append((f"centroid 1 sigma ellipse{words}", _ELLIPSE))
    if seen.get("axes", True):
        items += [("I2 axis (long direction)", _AXIS_MAJOR), ("I1 axis", _AXIS_MINOR)]
    if markers:
        items.append(("mat marker used", _MARKER_USED))
    if seen.get("rejected"):
        items.append(("mat marker rejected", _MARKER_REJECTED))
    return items


def _legend(
    canvas: np.ndarray, font: int, font_scale: float, lw: int, markers: bool = False, seen: dict | None = None
) -> None:
    """Draw the legend (:func:`legend_items`) in the top right corner."""
    items = legend_items(markers, seen)
    line_h = int(28 * font_scale) + 4
    w = int(max(len(name) for name, _ in items) * 14 * font_scale) + 50
    x0 = canvas.shape[1] - w - 10
    y0 = 10
    cv2.rectangle(canvas, (x0, y0), (x0 + w, y0 + line_h * len(items) + 10), (255, 255, 255), -1)
    for i, (name, colour) in enumerate(items):
        y = y0 + 10 + line_h * i + line_h // 2
        cv2.line(canvas, (x0 + 8, y), (x0 + 34, y), colour, 3 * lw)
        cv2.putText(
            canvas, name, (x0 + 42, y + int(8 * font_scale)), font, font_scale * 0.8, _TEXT, max(1, lw), cv2.LINE_AA
        )


def _round_length(value: float) -> float:
    """The largest 1-2-5 series length not above ``value``."""
    if value <= 0:
        return 1.0
    exp = math.floor(math.log10(value))
    for m in (5, 2, 1):
        if m * 10**exp <= value:
            return float(m * 10**exp)
    return float(10**exp)


def encode_png(picture: np.ndarray) -> bytes:
    """PNG bytes of a BGR picture."""
    ok, buf = cv2.imencode(".png", picture)
    if not ok:  # pragma: no cover - OpenCV always encodes uint8 BGR
        raise RuntimeError("PNG encoding failed")
    return buf.tobytes()
