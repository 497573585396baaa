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

from .load import LoadedImage
from .measurement import Measurement

__all__ = ["render_overlay", "encode_png", "OVERLAY_MAX_SIDE_PX"]

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


def _matrix(measurement: Measurement) -> np.ndarray:
    matrix = measurement.scale.extra.get("px_to_mm") if measurement.scale.extra else None
    if matrix is None:
        s = measurement.scale.mm_per_px
        h = measurement.source.height_px
        matrix = [[s, 0, 0.5 * s], [0, -s, (h - 0.5) * s], [0, 0, 1]]
    return np.asarray(matrix, dtype=float)


def _to_px(inv: np.ndarray, pts_mm: np.ndarray) -> np.ndarray:
    pts = np.asarray(pts_mm, float).reshape(-1, 2)
    h = pts @ inv[:, :2].T + inv[:, 2]
    return h[:, :2] / h[:, 2:3]


def render_overlay(image: LoadedImage, measurement: Measurement, *, max_side_px: int = OVERLAY_MAX_SIDE_PX) -> np.ndarray:
    """Draw the measurement over the image.

    Parameters
    ----------
    image : LoadedImage
        The measured image.
    measurement : Measurement
        Its result; outlines are mapped back to pixels through the scale's matrix.
    max_side_px : int
        Longest side of the picture; larger images are reduced first.

    Returns
    -------
    (H, W, 3) uint8 ndarray
        BGR picture (OpenCV order), ready for :func:`encode_png`.
    """
    height, width = image.grey.shape
    zoom = min(1.0, max_side_px / max(height, width))
    grey = image.grey
    if grey.dtype != np.uint8:
        grey = (grey >> 8).astype(np.uint8)
    if zoom < 1.0:
        grey = cv2.resize(grey, (max(1, round(width * zoom)), max(1, round(height * zoom))), interpolation=cv2.INTER_AREA)
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
    for part in measurement.parts:
        if part.outline_mm is not None:
            cv2.polylines(canvas, [pts_int(_to_px(inv, part.outline_mm))], True, _CUT if part.cut else _OUTLINE, lw, cv2.LINE_AA, shift)
        for hole in part.holes:
            if hole.outline_mm is not None:
                cv2.polylines(canvas, [pts_int(_to_px(inv, hole.outline_mm))], True, _HOLE, lw, cv2.LINE_AA, shift)
            c = _to_px(inv, [hole.circle_centre_mm])[0]
            cv2.drawMarker(canvas, tuple(int(v) for v in np.round((c + 0.5) * zoom - 0.5)), _HOLE, cv2.MARKER_CROSS, 6 * lw + 4, lw)
        centre = _to_px(inv, [part.centroid_mm])[0]
        # principal axes through the centroid: the I2 axis (long direction) is drawn
        # +-2 radii of gyration about the I1 axis long, the I1 axis +-2 of the other
        for length_mm, ang, colour in ((2.0 * part.gyration_1_mm, part.principal_angle_deg, _AXIS_MAJOR),
                                       (2.0 * part.gyration_2_mm, part.principal_angle_deg + 90.0, _AXIS_MINOR)):
            d = np.array([math.cos(math.radians(ang)), math.sin(math.radians(ang))]) * length_mm
            ends = _to_px(inv, [np.array(part.centroid_mm) - d, np.array(part.centroid_mm) + d])
            cv2.line(canvas, *[tuple(int(v) for v in p) for p in pts_int(ends).reshape(-1, 2)], colour, lw, cv2.LINE_AA, shift)
        cpx = tuple(int(v) for v in np.round((centre + 0.5) * zoom - 0.5))
        cv2.drawMarker(canvas, cpx, (0, 0, 0), cv2.MARKER_TILTED_CROSS, 10 * lw + 8, lw + 2)
        cv2.drawMarker(canvas, cpx, _CENTROID, cv2.MARKER_TILTED_CROSS, 10 * lw + 8, lw)
        bbox = part.bbox_mm
        label_px = _to_px(inv, [[bbox[0], bbox[3]]])[0] * zoom
        text = f"{part.label}"
        org = (int(label_px[0]), max(int(label_px[1]) - 6 * lw, 20))
        cv2.putText(canvas, text, org, font, font_scale * 1.2, (255, 255, 255), 4 * lw, cv2.LINE_AA)
        cv2.putText(canvas, text, org, font, font_scale * 1.2, _TEXT, 2 * lw, cv2.LINE_AA)

    # scale bar: a round length near a fifth of the width
    width_mm = canvas.shape[1] / zoom * mm_per_px
    bar_mm = _round_length(width_mm / 5)
    bar_px = bar_mm / mm_per_px * zoom
    x0, y0 = int(0.03 * canvas.shape[1]), int(canvas.shape[0] - 0.04 * canvas.shape[0])
    cv2.rectangle(canvas, (x0 - 4 * lw, y0 - int(30 * font_scale) - 6 * lw), (x0 + int(bar_px) + 4 * lw, y0 + 6 * lw), (255, 255, 255), -1)
    cv2.line(canvas, (x0, y0), (x0 + int(round(bar_px)), y0), (0, 0, 0), 3 * lw)
    cv2.putText(canvas, f"{bar_mm:g} mm", (x0, y0 - 8 * lw), font, font_scale, _TEXT, lw + 1, cv2.LINE_AA)
    _legend(canvas, font, font_scale, lw)
    return canvas


def _legend(canvas: np.ndarray, font: int, font_scale: float, lw: int) -> None:
    items = [("outline", _OUTLINE), ("hole", _HOLE), ("centroid", _CENTROID), ("I2 axis (long)", _AXIS_MAJOR), ("I1 axis", _AXIS_MINOR)]
    line_h = int(28 * font_scale) + 4
    w = int(200 * font_scale) + 40
    x0 = canvas.shape[1] - w - 10
    y0 = 10
    cv2.rectangle(canvas, (x0, y0), (x0 + w, y0 + line_h * len(items) + 10), (255, 255, 255), -1)
    for i, (name, colour) in enumerate(items):
        y = y0 + 10 + line_h * i + line_h // 2
        cv2.line(canvas, (x0 + 8, y), (x0 + 34, y), colour, 3 * lw)
        cv2.putText(canvas, name, (x0 + 42, y + int(8 * font_scale)), font, font_scale * 0.8, _TEXT, max(1, lw), cv2.LINE_AA)


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
