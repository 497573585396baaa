"""Printable marker mats: layouts, PNG and PDF rendering, layout JSON.

A mat is a sheet of paper with a ring of square fiducial markers (OpenCV ArUco,
dictionary ``DICT_5X5_250``) around a plain *clear area* where parts are laid, two
100 mm check bars (one along x, one along y) to verify the printer's scale with a
caliper, and a short legend. Every coordinate is in millimetres in the *mat frame*
of DESIGN.md: origin at the printed page's lower-left corner, x to the right, y up.

Each standard layout owns a block of :data:`IDS_PER_LAYOUT` marker ids, so the ids a
photo shows say which mat it is (see :func:`layout_for_ids`).

Marker corners follow OpenCV's order for a marker as printed: top-left, top-right,
bottom-right, bottom-left (clockwise on the page); each corner is the outer corner of
the marker's black border.
"""

from __future__ import annotations

import json
import math
import os
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, cast

import numpy as np

from scanmass.errors import OptionError, ScaleError
from scanmass.raster import coverage, srgb_encode
from scanmass.readfile import MAX_JSON_BYTES, read_regular_text

__all__ = [
    "DICTIONARY",
    "IDS_PER_LAYOUT",
    "LAYOUT_NAMES",
    "MAT_SCHEMA",
    "Marker",
    "CheckBar",
    "MatLayout",
    "make_mat",
    "load_layout",
    "layout_for_ids",
    "mat_dark_rectangles",
    "render_mat_png",
    "calibration_dir",
]

#: OpenCV ArUco dictionary of every scanmass mat (5 x 5 data bits, 250 ids).
DICTIONARY = "DICT_5X5_250"
#: Marker ids reserved per standard layout: layout k uses ids 40 k ... 40 k + 39.
IDS_PER_LAYOUT = 40
#: Identifier of the layout JSON document.
MAT_SCHEMA = "scanmass.mat/1"
#: Cells across a marker: 5 data cells plus a one-cell black border on each side.
MARKER_CELLS = 7

MM_PER_INCH = 25.4
_PT_PER_MM = 72.0 / MM_PER_INCH

# Paper sizes (width, height) in mm, portrait. ISO 216:2007 table 1 (A4 210 x 297,
# A3 297 x 420); ANSI/ASME Y14.1-2020 table 1, size A / US Letter 8.5 x 11 in.
_PAPER_MM = {"a4": (210.0, 297.0), "a3": (297.0, 420.0), "letter": (8.5 * MM_PER_INCH, 11.0 * MM_PER_INCH)}
# Marker cell size per paper: 2.5 mm keeps A4/Letter markers at 17.5 mm; A3 photos
# have coarser pixels, so its cells are larger.
_CELL_MM = {"a4": 2.5, "a3": 3.5, "letter": 2.5}
_BLOCKS = ["a4-portrait", "a4-landscape", "a3-portrait", "a3-landscape", "letter-portrait", "letter-landscape"]
#: Names of the standard layouts, in id-block order.
LAYOUT_NAMES = tuple(_BLOCKS)

_MARGIN_MM = 8.0  # page edge to the marker ring (inside most printers' printable area)
_GAP_MM = 4.0  # quiet zone between markers and anything else
_BAR_MM = 2.0  # check bar thickness
_BAR_LENGTH_MM = 100.0
_LABEL_MM = 3.0  # room for a line of small text
_MARK_MM = 6.0  # length of the clear area's corner marks
_MARK_W_MM = 0.4


@dataclass(frozen=True)
class Marker:
    """One printed marker: its id and its four outer corners in mm (mat frame).

    ``corners_mm`` is (4, 2): top-left, top-right, bottom-right, bottom-left as printed.
    """

    id: int
    corners_mm: np.ndarray = field(repr=False)


@dataclass(frozen=True)
class CheckBar:
    """A printed check bar: a solid bar whose nominal end-to-end length is ``length_mm``."""

    axis: str
    start_mm: tuple[float, float]
    end_mm: tuple[float, float]
    width_mm: float
    length_mm: float = _BAR_LENGTH_MM

    def rectangle_mm(self) -> tuple[float, float, float, float]:
        """The bar as [xmin, ymin, xmax, ymax] in mm."""
        (x0, y0), (x1, y1) = self.start_mm, self.end_mm
        half = 0.5 * self.width_mm
        if self.axis == "x":
            return (min(x0, x1), y0 - half, max(x0, x1), y0 + half)
        return (x0 - half, min(y0, y1), x0 + half, max(y0, y1))


@dataclass(frozen=True)
class MatLayout:
    """Everything printed on a mat, in mm in the mat frame.

    Attributes
    ----------
    name : str
        Layout name, e.g. ``"a4-portrait"``.
    page_mm : (float, float)
        Page width and height.
    dictionary : str
        OpenCV ArUco dictionary name.
    cell_mm : float
        Side of one marker cell; a marker is 7 cells across.
    markers : tuple of Marker
    check_bars : tuple of CheckBar
        The x bar and the y bar.
    clear_area_mm : (xmin, ymin, xmax, ymax)
        Where parts go; nothing is printed inside it.
    legend : tuple of str
        The printed instructions.
    """

    name: str
    page_mm: tuple[float, float]
    dictionary: str
    cell_mm: float
    markers: tuple[Marker, ...]
    check_bars: tuple[CheckBar, ...]
    clear_area_mm: tuple[float, float, float, float]
    legend: tuple[str, ...]

    @property
    def ids(self) -> np.ndarray:
        """Marker ids, (M,) int."""
        return np.array([m.id for m in self.markers], dtype=int)

    @property
    def corners_mm(self) -> np.ndarray:
        """All marker corners, (M, 4, 2) float, in the order of :attr:`markers`."""
        return np.stack([m.corners_mm for m in self.markers])

    def marker_corners(self, ids: np.ndarray) -> np.ndarray:
        """Corners (K, 4, 2) of the markers with the given ids (each must be on this mat)."""
        table = {m.id: m.corners_mm for m in self.markers}
        return np.stack([table[int(i)] for i in ids]) if len(ids) else np.zeros((0, 4, 2))

    def bar(self, axis: str) -> CheckBar:
        """The check bar along ``axis`` (``"x"`` or ``"y"``)."""
        return next(b for b in self.check_bars if b.axis == axis)

    def to_dict(self) -> dict[str, Any]:
        """The layout as a JSON-ready dictionary (the layout file's content)."""
        return {
            "schema": MAT_SCHEMA,
            "name": self.name,
            "frame": "mm; origin at the page's lower-left corner, x to the right, y up",
            "page_mm": list(self.page_mm),
            "dictionary": self.dictionary,
            "marker_cells": MARKER_CELLS,
            "cell_mm": self.cell_mm,
            "corner_order": ["top-left", "top-right", "bottom-right", "bottom-left"],
            "markers": [{"id": m.id, "corners_mm": np.round(m.corners_mm, 6).tolist()} for m in self.markers],
            "check_bars": [
                {
                    "axis": b.axis,
                    "start_mm": list(b.start_mm),
                    "end_mm": list(b.end_mm),
                    "width_mm": b.width_mm,
                    "length_mm": b.length_mm,
                }
                for b in self.check_bars
            ],
            "clear_area_mm": list(self.clear_area_mm),
            "legend": list(self.legend),
        }

    def to_json(self) -> str:
        """The layout file's text."""
        return json.dumps(self.to_dict(), indent=1)

    @classmethod
    def from_dict(cls, data: dict[str, Any], *, path: str | None = None) -> MatLayout:
        """Rebuild a layout from :meth:`to_dict` output; raises ScaleError if it is not one."""
        if not isinstance(data, dict) or data.get("schema") != MAT_SCHEMA:
            raise ScaleError(
                f"not a scanmass mat layout (schema {MAT_SCHEMA!r} expected); write one with 'scanmass mat'", path=path
            )
        try:
            markers = tuple(
                Marker(int(m["id"]), np.asarray(m["corners_mm"], dtype=float).reshape(4, 2)) for m in data["markers"]
            )
            bars = tuple(
                CheckBar(
                    b["axis"], tuple(b["start_mm"]), tuple(b["end_mm"]), float(b["width_mm"]), float(b["length_mm"])
                )
                for b in data["check_bars"]
            )
            layout = cls(
                name=str(data["name"]),
                page_mm=cast(tuple[float, float], tuple(float(v) for v in data["page_mm"])),
                dictionary=str(data["dictionary"]),
                cell_mm=float(data["cell_mm"]),
                markers=markers,
                check_bars=bars,
                clear_area_mm=cast(tuple[float, float, float, float], tuple(float(v) for v in data["clear_area_mm"])),
                legend=tuple(data.get("legend", ())),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise ScaleError(
                f"mat layout file is incomplete ({exc}); write it again with 'scanmass mat'", path=path
            ) from None
        if layout.dictionary != DICTIONARY or len(markers) < 4:
            raise ScaleError(
                f"mat layout uses {layout.dictionary} with {len(markers)} markers; scanmass reads {DICTIONARY} mats with 4 or more markers",
                path=path,
            )
        return layout


def _side_positions(start: float, stop: float, size: float, pitch: float) -> np.ndarray:
    """Evenly spaced marker origins from ``start`` to ``stop - size``, about ``pitch`` apart."""
    n = max(2, int(math.floor((stop - start - size) / pitch)) + 1)
    return np.round(np.linspace(start, stop - size, n), 2)


def _square(x0: float, y0: float, side: float) -> np.ndarray:
    """Corners TL, TR, BR, BL of the square with lower-left corner (x0, y0)."""
    return np.array([[x0, y0 + side], [x0 + side, y0 + side], [x0 + side, y0], [x0, y0]], dtype=float)


def make_mat(layout: str = "a4-portrait") -> MatLayout:
    """The standard mat layout of the given name.

    Parameters
    ----------
    layout : str
        One of :data:`LAYOUT_NAMES`: ``{a4, a3, letter}-{portrait, landscape}``.

    Returns
    -------
    MatLayout

    Raises
    ------
    OptionError
        Unknown layout name.

    References
    ----------
    .. [1] ISO 216:2007, Writing paper and certain classes of printed matter --
       Trimmed sizes -- A and B series, and indication of machine direction.
    .. [2] ANSI/ASME Y14.1-2020, Decimal inch drawing sheet size and format (size A,
       8.5 x 11 in).
    .. [3] S. Garrido-Jurado et al., "Automatic generation and detection of highly
       reliable fiducial markers under occlusion", Pattern Recognition 47(6),
       2280-2292, 2014 (the ArUco markers).

    Examples
    --------
    >>> mat = make_mat("a4-portrait")
    >>> mat.page_mm, len(mat.markers), mat.markers[0].id
    ((210.0, 297.0), 24, 0)
    >>> mat.clear_area_mm
    (38.5, 38.5, 180.5, 251.5)
    """
    key = str(layout).strip().lower()
    if key not in _BLOCKS:
        raise OptionError(f"unknown mat layout {layout!r}; choose one of {', '.join(_BLOCKS)}")
    paper, orientation = key.split("-")
    w, h = _PAPER_MM[paper]
    if orientation == "landscape":
        w, h = h, w
    cell = _CELL_MM[paper]
    side = MARKER_CELLS * cell
    pitch = 2.0 * side
    m = _MARGIN_MM
    xs = _side_positions(m, w - m, side, pitch)
    ys = _side_positions(m, h - m, side, pitch)
    origins = [(x, m) for x in xs]  # bottom row, left to right
    origins += [(w - m - side, y) for y in ys[1:]]  # right column, upwards
    origins += [(x, h - m - side) for x in xs[-2::-1]]  # top row, right to left
    origins += [(m, y) for y in ys[-2:0:-1]]  # left column, downwards
    first = _BLOCKS.index(key) * IDS_PER_LAYOUT
    if len(origins) > IDS_PER_LAYOUT:  # cannot happen for the standard sizes
        raise OptionError(f"layout {key} would need {len(origins)} markers")
    markers = tuple(Marker(first + k, _square(x, y, side)) for k, (x, y) in enumerate(origins))

    xi0, yi0, xi1, yi1 = m + side, m + side, w - m - side, h - m - side  # inside of the ring
    strip = _GAP_MM + _BAR_MM + _LABEL_MM  # bar strips along the bottom and the left
    bar_x = CheckBar(
        "x",
        (xi0 + strip + _GAP_MM, yi0 + _GAP_MM + 0.5 * _BAR_MM),
        (xi0 + strip + _GAP_MM + _BAR_LENGTH_MM, yi0 + _GAP_MM + 0.5 * _BAR_MM),
        _BAR_MM,
    )
    bar_y = CheckBar(
        "y",
        (xi0 + _GAP_MM + 0.5 * _BAR_MM, yi0 + strip + _GAP_MM),
        (xi0 + _GAP_MM + 0.5 * _BAR_MM, yi0 + strip + _GAP_MM + _BAR_LENGTH_MM),
        _BAR_MM,
    )
    nice = {"a4": "A4", "a3": "A3", "letter": "US Letter"}[paper]
    legend = (
        f"scanmass measuring mat, {nice} {orientation} (markers {first}-{first + len(markers) - 1})",
        "Print at 100 % (actual size). Check: each black bar is 100.0 mm",
        "end to end; give caliper readings as --check-bar-x and --check-bar-y.",
        "Lay parts flat inside the corner marks; keep all markers in view.",
    )
    clear = (
        xi0 + strip + _GAP_MM,
        yi0 + strip + _GAP_MM,
        xi1 - _GAP_MM,
        yi1 - _GAP_MM - len(legend) * _LABEL_MM - _GAP_MM,
    )
    return MatLayout(
        name=key,
        page_mm=(float(w), float(h)),
        dictionary=DICTIONARY,
        cell_mm=cell,
        markers=markers,
        check_bars=(bar_x, bar_y),
        clear_area_mm=cast(tuple[float, float, float, float], tuple(float(v) for v in np.round(clear, 3))),
        legend=legend,
    )


def load_layout(source: str | os.PathLike) -> MatLayout:
    """A standard layout by name, or a layout JSON file written by :func:`scanmass.outputs.scale_files.write_layout_json`."""
    text = os.fspath(source)
    if str(text).strip().lower() in _BLOCKS:
        return make_mat(str(text))
    path = Path(text)
    if not path.is_file():
        raise OptionError(f"mat {text!r} is neither a layout name ({', '.join(_BLOCKS)}) nor a layout JSON file")
    text_read = read_regular_text(
        path, error=ScaleError, what="mat layout", fix="write it again with 'scanmass mat'", max_bytes=MAX_JSON_BYTES
    )
    try:
        data = json.loads(text_read)
    except json.JSONDecodeError as exc:
        raise ScaleError(
            f"cannot read the mat layout ({exc}); write it again with 'scanmass mat'", path=str(path)
        ) from None
    return MatLayout.from_dict(data, path=str(path))


def layout_for_ids(ids: np.ndarray | list[int], *, path: str | None = None) -> MatLayout:
    """The standard layout whose id block holds the detected marker ids.

    Raises
    ------
    ScaleError
        The ids belong to no scanmass layout, or to more than one.
    """
    ids = np.asarray(ids, dtype=int).ravel()
    blocks = ids // IDS_PER_LAYOUT
    known = blocks < len(_BLOCKS)
    if not known.any():
        raise ScaleError(
            f"the photo shows ArUco markers {sorted(set(ids.tolist()))[:6]} that belong to no scanmass mat; "
            "print a mat with 'scanmass mat' or give its layout file with --mat LAYOUT.json",
            path=path,
        )
    values, counts = np.unique(blocks[known], return_counts=True)
    if len(values) > 1 and np.sort(counts)[-2] >= 2:
        names = ", ".join(_BLOCKS[v] for v in values)
        raise ScaleError(f"the photo shows markers of several mats ({names}); photograph one mat at a time", path=path)
    layout = make_mat(_BLOCKS[int(values[np.argmax(counts)])])
    return layout


def mat_dark_rectangles(layout: MatLayout) -> list[np.ndarray]:
    """Every printed dark area except text, as (4, 2) counter-clockwise rectangles in mm.

    Marker cells are merged into horizontal runs; includes the check bars and the
    clear area's corner marks.
    """
    import cv2

    dictionary = cv2.aruco.getPredefinedDictionary(getattr(cv2.aruco, layout.dictionary))
    rects: list[np.ndarray] = []
    cell = layout.cell_mm
    for marker in layout.markers:
        bits = cv2.aruco.generateImageMarker(dictionary, marker.id, MARKER_CELLS, borderBits=1)  # 0 = black
        x0 = float(marker.corners_mm[:, 0].min())
        y_top = float(marker.corners_mm[:, 1].max())
        for r in range(MARKER_CELLS):
            row = bits[r] == 0
            c = 0
            while c < MARKER_CELLS:
                if not row[c]:
                    c += 1
                    continue
                c1 = c
                while c1 < MARKER_CELLS and row[c1]:
                    c1 += 1
                rects.append(_rect(x0 + c * cell, y_top - (r + 1) * cell, x0 + c1 * cell, y_top - r * cell))
                c = c1
    for bar in layout.check_bars:
        rects.append(_rect(*bar.rectangle_mm()))
    rects.extend(_corner_marks(layout.clear_area_mm))
    return rects


def _rect(x0: float, y0: float, x1: float, y1: float) -> np.ndarray:
    return np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)


def _corner_marks(clear: tuple[float, float, float, float]) -> list[np.ndarray]:
    """L-shaped marks just outside each corner of the clear area (never inside it)."""
    x0, y0, x1, y1 = clear
    d, w, n = 1.5, _MARK_W_MM, _MARK_MM
    out = []
    for cx, cy, sx, sy in ((x0, y0, -1, -1), (x1, y0, 1, -1), (x1, y1, 1, 1), (x0, y1, -1, 1)):
        ex, ey = cx + sx * d, cy + sy * d  # the mark's corner, outside the clear area
        # leg along x (towards the clear area's side) and leg along y
        xa, xb = sorted((ex, ex - sx * n))
        ya, yb = sorted((ey, ey + sy * w))
        out.append(_rect(xa, ya, xb, yb))
        xa, xb = sorted((ex, ex + sx * w))
        ya, yb = sorted((ey + sy * w, ey - sy * n))
        out.append(_rect(xa, ya, xb, yb))
    return out


def _text_items(layout: MatLayout) -> list[tuple[float, float, float, float, str]]:
    """Text to print: (x_mm, y_mm baseline start, size_mm, angle_deg, text)."""
    items = []
    bx, by = layout.bar("x"), layout.bar("y")
    size = 2.2
    rx = bx.rectangle_mm()
    items.append((rx[0], rx[3] + 0.9, size, 0.0, "X check bar: 100.0 mm end to end"))
    ry = by.rectangle_mm()
    items.append((ry[2] + 0.9 + size, ry[1], size, 90.0, "Y check bar: 100.0 mm end to end"))
    x0, _, _, y1 = layout.clear_area_mm
    top = y1 + _GAP_MM + len(layout.legend) * _LABEL_MM
    for k, line in enumerate(layout.legend):
        items.append((x0, top - (k + 1) * _LABEL_MM + 0.6, size if k else 2.6, 0.0, line))
    return items


def render_mat_png(layout: MatLayout, dpi: float = 300.0) -> np.ndarray:
    """Render the mat as an 8-bit grey image at ``dpi`` (sRGB-encoded, white paper).

    Pixel (column i, row j) covers x in [i s, (i + 1) s] and y in [(H - j - 1) s,
    (H - j) s] with s = 25.4 / dpi mm (DESIGN.md's pixel-centre formula), so a marker
    edge at x mm falls at the pixel edge x / s. Dark areas are drawn with their exact
    pixel coverage (anti-aliased in linear light); text is drawn by pillow.

    Parameters
    ----------
    layout : MatLayout
    dpi : float
        Resolution; 300 to 600 suits office printers.

    Returns
    -------
    (H, W) uint8 ndarray
        H = round(page height / s), W = round(page width / s).
    """
    if not (math.isfinite(dpi) and 20.0 <= dpi <= 2400.0):
        raise OptionError(f"mat dpi {dpi!r} must be between 20 and 2400, e.g. --dpi 300")
    s = MM_PER_INCH / dpi
    w_px, h_px = int(round(layout.page_mm[0] / s)), int(round(layout.page_mm[1] / s))
    cov = coverage(mat_dark_rectangles(layout), shape=(h_px, w_px), mm_per_px=s)
    linear = 1.0 - cov
    text_alpha = _text_layer(layout, (h_px, w_px), s)
    linear *= 1.0 - text_alpha
    return np.rint(srgb_encode(linear) * 255.0).astype(np.uint8)


def _text_layer(layout: MatLayout, shape: tuple[int, int], s: float) -> np.ndarray:
    from PIL import Image, ImageDraw, ImageFont

    h_px, w_px = shape
    layer = Image.new("L", (w_px, h_px), 0)
    for x_mm, y_mm, size_mm, angle, text in _text_items(layout):
        size_px = max(6, int(round(size_mm / s * 1.25)))
        font = ImageFont.load_default(size=size_px)
        left, top, right, bottom = font.getbbox(text)
        tile = Image.new("L", (int(right) + 2, int(bottom) + 2), 0)
        ImageDraw.Draw(tile).text((0, 0), text, fill=255, font=font)
        ascent = font.getmetrics()[0]  # type: ignore[union-attr]  # load_default(size=) gives a FreeTypeFont
        if angle:
            tile = tile.rotate(angle, expand=True)
            # baseline start (x_mm, y_mm) is the bottom-left of the rotated text; its top (ascent) faces -x
            col = int(round(x_mm / s)) - ascent
            row = h_px - int(round(y_mm / s)) - tile.size[1]
        else:
            col = int(round(x_mm / s))
            row = h_px - int(round(y_mm / s)) - ascent
        layer.paste(tile, (col, row), tile)
    return np.asarray(layer, dtype=np.float64) / 255.0


# ----------------------------------------------------------------------------- PDF


def _pdf_text(text: str) -> str:
    return (
        text.replace("\\", "\\\\")
        .replace("(", "\\(")
        .replace(")", "\\)")
        .encode("latin-1", "replace")
        .decode("latin-1")
    )


def mat_pdf_bytes(layout: MatLayout) -> bytes:
    """The mat as a one-page PDF whose MediaBox is the page size in points (1 pt = 1/72 in).

    Drawn in millimetres (a ``cm`` scale of 72 / 25.4), origin at the page's lower-left
    corner like the mat frame; dark areas are filled rectangles, text uses the standard
    Helvetica font (no embedding needed). The catalog asks viewers to print without
    scaling (``/PrintScaling /None``).

    References
    ----------
    .. [1] ISO 32000-1:2008, Document management -- Portable document format -- Part 1:
       PDF 1.7, sections 7.5 (file structure), 8.5 (path painting), 9.4 (text objects),
       9.6.2.2 (standard Type 1 fonts) and 12.2 (viewer preferences).
    """
    w_pt, h_pt = (v * _PT_PER_MM for v in layout.page_mm)
    ops = [f"{_PT_PER_MM:.9f} 0 0 {_PT_PER_MM:.9f} 0 0 cm", "0 g"]
    for r in mat_dark_rectangles(layout):
        x0, y0 = r.min(axis=0)
        x1, y1 = r.max(axis=0)
        ops.append(f"{x0:.4f} {y0:.4f} {x1 - x0:.4f} {y1 - y0:.4f} re f")
    for x_mm, y_mm, size_mm, angle, text in _text_items(layout):
        size = size_mm * 1.0  # font size in mm units (cap height about 0.7 of it)
        if angle:
            ops.append(f"BT /F1 {size:.3f} Tf 0 1 -1 0 {x_mm:.3f} {y_mm:.3f} Tm ({_pdf_text(text)}) Tj ET")
        else:
            ops.append(f"BT /F1 {size:.3f} Tf 1 0 0 1 {x_mm:.3f} {y_mm:.3f} Tm ({_pdf_text(text)}) Tj ET")
    content = zlib.compress(("\n".join(ops) + "\n").encode("latin-1"), 9)
    objects = [
        b"<< /Type /Catalog /Pages 2 0 R /ViewerPreferences << /PrintScaling /None >> >>",
        b"<< /Type /Pages /Kids [3 0 R] /Count 1 >>",
        (
            f"<< /Type /Page /Parent 2 0 R /MediaBox [0 0 {w_pt:.4f} {h_pt:.4f}] "
            f"/Resources << /Font << /F1 5 0 R >> >> /Contents 4 0 R >>"
        ).encode("ascii"),
        b"<< /Length "
        + str(len(content)).encode("ascii")
        + b" /Filter /FlateDecode >>\nstream\n"
        + content
        + b"\nendstream",
        b"<< /Type /Font /Subtype /Type1 /BaseFont /Helvetica /Encoding /WinAnsiEncoding >>",
        (f"<< /Title ({_pdf_text('scanmass mat ' + layout.name)}) /Producer (scanmass) >>").encode("latin-1"),
    ]
    out = bytearray(b"%PDF-1.6\n%\xe2\xe3\xcf\xd3\n")
    offsets = []
    for k, body in enumerate(objects, start=1):
        offsets.append(len(out))
        out += f"{k} 0 obj\n".encode("ascii") + body + b"\nendobj\n"
    xref = len(out)
    out += f"xref\n0 {len(objects) + 1}\n0000000000 65535 f \n".encode("ascii")
    for off in offsets:
        out += f"{off:010d} 00000 n \n".encode("ascii")
    out += (f"trailer\n<< /Size {len(objects) + 1} /Root 1 0 R /Info 6 0 R >>\nstartxref\n{xref}\n%%EOF\n").encode(
        "ascii"
    )
    return bytes(out)


def calibration_dir() -> Path | None:
    """The repository's calibration/ folder when scanmass runs from a checkout, else None."""
    candidate = Path(__file__).resolve().parents[2] / "calibration"
    return candidate if candidate.is_dir() else None
