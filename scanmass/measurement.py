"""Result dataclasses and the JSON/CSV result document.

Everything here is in millimetres (mm, mm2, mm3, mm4), grams and degrees, in the
frames of DESIGN.md: x to the right, y up, angles counter-clockwise. A value's
standard uncertainty (1 sigma) sits beside it with the suffix ``_u``.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from dataclasses import asdict, dataclass, field, fields
from typing import Any

import numpy as np

from scanmass.errors import ResultFormatError
from scanmass.names import FIGURES, check_units, unit_suffix
from scanmass.readfile import display_path, escape_text, read_regular_text

__all__ = [
    "SCHEMA",
    "SourceInfo",
    "ScaleInfo",
    "Hole",
    "Part",
    "Measurement",
    "CSV_COLUMNS",
    "csv_columns",
    "read_result",
]

#: Schema identifier written into every result document; bump the number on an
#: incompatible change of the keys. Version 2 (scanmass 0.x, issue 10): the CSV's
#: ``holes`` count became ``hole_count``, the uncertainties of radii of gyration, section
#: moduli and widths were added, ``units`` and ``principal_axes_defined`` are written.
SCHEMA = "scanmass.result/2"

#: Older schemas whose documents still read (their keys are a subset of this one's).
READABLE_SCHEMAS = ("scanmass.result/1", SCHEMA)

#: What the JSON document's numbers are in, written into every document as ``units``.
JSON_UNITS = {
    "length": "mm",
    "area": "mm2",
    "section_modulus": "mm3",
    "second_moment": "mm4",
    "angle": "deg",
    "mass": "g",
    "note": "the JSON is always in millimetres; --units in changes only what people read (tables, CSV, report)",
}

#: A principal direction is reported as undefined when its standard uncertainty exceeds this.
AXES_UNDEFINED_U_DEG = 10.0

_OUTLINE_DECIMALS = 5

#: Part fields written as rings (or lists of them), not as figures.
_RINGS = ("holes", "outline_mm", "pieces_mm")

#: Largest result JSON read (bytes); a 2000-part result with outlines is a few tens of MB.
MAX_RESULT_BYTES = 1 << 29


def _clean(value: Any) -> Any:
    """Turn numpy scalars/arrays and tuples into plain JSON values; NaN -> None."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return _clean(value.tolist())
    if isinstance(value, (np.floating, float)):
        f = float(value)
        return None if not math.isfinite(f) else f
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, str):
        return escape_text(value)  # undecodable bytes of file names as \xNN: strict JSON/CSV readers accept it
    return value


def _label(value: Any, what: str) -> int:
    """A part or hole label: a whole number (``2`` or ``2.0``), else a ValueError."""
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not float(value).is_integer():
        raise ValueError(f"{what} label {value!r} is not a whole number")
    return int(value)


def _ring_to_list(ring: np.ndarray | None) -> list[list[float]] | None:
    if ring is None:
        return None
    arr = np.round(np.asarray(ring, dtype=float), _OUTLINE_DECIMALS)
    return arr.tolist()


def _ring_from_list(data: Any) -> np.ndarray | None:
    if data is None:
        return None
    arr = np.asarray(data, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise ResultFormatError(
            "an outline is not a list of [x, y] pairs; re-create the result with 'scanmass measure'"
        )
    return arr


@dataclass
class SourceInfo:
    """Where a measurement came from."""

    path: str | None
    sha256: str | None
    width_px: int
    height_px: int
    format: str | None = None
    mode: str | None = None
    bit_depth: int | None = None
    orientation_applied: int | None = None


@dataclass
class ScaleInfo:
    """The pixel-to-millimetre scale source and its quality.

    ``mm_per_px_rel_u`` is the relative standard uncertainty of the scale
    (e.g. 0.001 for 0.1 %). ``terms`` holds named relative-uncertainty parts.
    """

    method: str
    mm_per_px: float
    mm_per_px_rel_u: float
    dpi: float | None = None
    note: str = ""
    reprojection_rms_px: float | None = None
    reprojection_rms_mm: float | None = None
    terms: dict[str, float] = field(default_factory=dict)
    extra: dict[str, Any] = field(default_factory=dict)


@dataclass
class Hole:
    """One hole of a part: its own area and centroid, and a fitted circle."""

    label: int
    area_mm2: float
    area_u_mm2: float
    centroid_mm: tuple[float, float]
    centroid_u_mm: tuple[float, float]
    perimeter_mm: float
    circle_centre_mm: tuple[float, float]
    circle_centre_u_mm: tuple[float, float]
    diameter_mm: float
    diameter_u_mm: float
    roundness_mm: float
    outline_mm: np.ndarray | None = field(default=None, repr=False)
    #: 1-sigma of ``perimeter_mm``: the part perimeter's terms for this ring alone (NaN in
    #: documents written before it was stated)
    perimeter_u_mm: float = math.nan


@dataclass
class Part:
    """Section properties of one part (a flat plate with holes).

    Second moments are about centroidal axes parallel to x and y; ``ixy_mm4`` is the
    product moment of area; ``polar_mm4`` the polar second moment Ip = Ixx + Iyy (not the
    torsion constant). ``i1_mm4 >= i2_mm4`` are the principal moments and
    ``principal_angle_deg`` in [0, 180) is the direction of the I2 axis.
    Section moduli are elastic, one per extreme fibre: ``modulus_top_mm3`` =
    Ixx / (ymax - yc), ``modulus_bottom_mm3`` = Ixx / (yc - ymin),
    ``modulus_right_mm3`` = Iyy / (xmax - xc), ``modulus_left_mm3`` = Iyy / (xc - xmin).
    """

    label: int
    area_mm2: float
    area_u_mm2: float
    perimeter_mm: float
    perimeter_u_mm: float
    centroid_mm: tuple[float, float]
    centroid_u_mm: tuple[float, float]
    ixx_mm4: float
    iyy_mm4: float
    ixy_mm4: float
    ixx_u_mm4: float
    iyy_u_mm4: float
    ixy_u_mm4: float
    i1_mm4: float
    i2_mm4: float
    i1_u_mm4: float
    i2_u_mm4: float
    principal_angle_deg: float
    principal_angle_u_deg: float
    polar_mm4: float
    polar_u_mm4: float
    gyration_x_mm: float
    gyration_y_mm: float
    gyration_1_mm: float
    gyration_2_mm: float
    modulus_top_mm3: float
    modulus_bottom_mm3: float
    modulus_right_mm3: float
    modulus_left_mm3: float
    bbox_mm: tuple[float, float, float, float]
    caliper_max_mm: float
    caliper_min_mm: float
    convex_area_mm2: float
    holes: list[Hole] = field(default_factory=list)
    cut: bool = False
    uncertainty_terms: dict[str, dict[str, float]] = field(default_factory=dict)
    mass_g: float | None = None
    mass_u_g: float | None = None
    mass: dict[str, Any] | None = None
    gyration_x_u_mm: float | None = None
    gyration_y_u_mm: float | None = None
    gyration_1_u_mm: float | None = None
    gyration_2_u_mm: float | None = None
    modulus_top_u_mm3: float | None = None
    modulus_bottom_u_mm3: float | None = None
    modulus_right_u_mm3: float | None = None
    modulus_left_u_mm3: float | None = None
    caliper_max_u_mm: float | None = None
    caliper_min_u_mm: float | None = None
    outline_mm: np.ndarray | None = field(default=None, repr=False)
    filled_holes: int = 0
    filled_hole_area_mm2: float = 0.0
    #: The outer rings (mm, counter-clockwise) of the part's other pieces where it was found in
    #: pieces and merged: ``outline_mm`` is then its largest piece only, and the figures count
    #: every piece (empty for a part found whole; left out of the result document when empty)
    pieces_mm: list[np.ndarray] = field(default_factory=list, repr=False)

    def __post_init__(self) -> None:
        for name, value in derived_uncertainties(self).items():
            if getattr(self, name) is None:
                setattr(self, name, value)

    @property
    def principal_axes_defined(self) -> bool:
        """False for a near-round part, whose principal directions the measurement cannot tell.

        The axes are undefined when the angle is not finite, its standard uncertainty
        exceeds :data:`AXES_UNDEFINED_U_DEG`, or I1 − I2 is within twice the larger
        uncertainty of I1 and I2.
        """
        angle, u = self.principal_angle_deg, self.principal_angle_u_deg
        if angle is None or not math.isfinite(angle) or u is None or not math.isfinite(u):
            return False
        if u > AXES_UNDEFINED_U_DEG:
            return False
        spread = self.i1_mm4 - self.i2_mm4
        return bool(spread > 2.0 * max(self.i1_u_mm4 or 0.0, self.i2_u_mm4 or 0.0, 1e-12 * abs(self.i1_mm4)))


def derived_uncertainties(part: Part) -> dict[str, float]:
    """Standard uncertainties of radii of gyration, section moduli and widths.

    Propagated to first order from the figures' own terms in ``uncertainty_terms``
    (edge, threshold, scale), term by term, then root-sum-squared. Within the edge and
    threshold terms the correlation of the two inputs (e.g. I and A in k = √(I/A)) is
    not recorded, so their relative uncertainties are added (the worst case); the scale
    term is exact (k scales as s, Z as s³, a width as s). The threshold offset of the
    boundary, d = u_threshold(A) / P, moves a width by 2d and an extreme fibre by d; the
    edge noise of one boundary point is taken as the noise over the edge slope of a
    Gaussian-blurred step (√(2π)·σ_blur·noise, in pixels).

    Returns an empty dict when the part carries no terms (e.g. built by hand).
    """
    terms = part.uncertainty_terms or {}
    edge, thr, scl = (terms.get(k) or {} for k in ("edge", "threshold", "scale"))
    inputs = terms.get("inputs") or {}
    area, perim = part.area_mm2, part.perimeter_mm
    if not (edge and thr and scl) or not (area and perim and area > 0 and perim > 0):
        return {}
    try:
        offset_mm = float(thr.get("area_mm2", 0.0)) / perim
        rel = float(scl.get("area_mm2", 0.0)) / (2.0 * area)
        offset_px = float(inputs.get("offset_px") or 0.0)
        mm_per_px = offset_mm / offset_px if offset_px > 0 else 0.0
        point_mm = math.sqrt(2.0 * math.pi) * max(float(inputs.get("blur_px") or 0.0), 0.5)
        point_mm *= float(inputs.get("noise_rel") or 0.0) * mm_per_px
    except (TypeError, ValueError, ZeroDivisionError):
        return {}

    def ratio(term: dict, key: str, value: float) -> float:
        u = term.get(key)
        return abs(float(u)) / abs(value) if u is not None and value else 0.0

    out: dict[str, float] = {}
    for stem, i_key, i_val in (
        ("gyration_x", "ixx_mm4", part.ixx_mm4),
        ("gyration_y", "iyy_mm4", part.iyy_mm4),
        ("gyration_1", "i1_mm4", part.i1_mm4),
        ("gyration_2", "i2_mm4", part.i2_mm4),
    ):
        k = getattr(part, f"{stem}_mm")
        if not (k and math.isfinite(k)):
            continue
        parts = [0.5 * k * (ratio(t, i_key, i_val) + ratio(t, "area_mm2", area)) for t in (edge, thr)]
        out[f"{stem}_u_mm"] = math.sqrt(sum(x * x for x in parts) + (rel * k) ** 2)
    xmin, ymin, xmax, ymax = part.bbox_mm
    xc, yc = part.centroid_mm
    for stem, i_key, i_val, c, c_key in (
        ("modulus_top", "ixx_mm4", part.ixx_mm4, ymax - yc, "centroid_y_mm"),
        ("modulus_bottom", "ixx_mm4", part.ixx_mm4, yc - ymin, "centroid_y_mm"),
        ("modulus_right", "iyy_mm4", part.iyy_mm4, xmax - xc, "centroid_x_mm"),
        ("modulus_left", "iyy_mm4", part.iyy_mm4, xc - xmin, "centroid_x_mm"),
    ):
        z = getattr(part, f"{stem}_mm3")
        if not (z and math.isfinite(z) and c > 0):
            continue
        u_c_edge = math.hypot(point_mm, float(edge.get(c_key, 0.0)))
        u_c_thr = offset_mm + float(thr.get(c_key, 0.0))
        e = abs(z) * (ratio(edge, i_key, i_val) + u_c_edge / c)
        t = abs(z) * (ratio(thr, i_key, i_val) + u_c_thr / c)
        out[f"{stem}_u_mm3"] = math.sqrt(e * e + t * t + (3.0 * rel * z) ** 2)
    for stem in ("caliper_max", "caliper_min"):
        w = getattr(part, f"{stem}_mm")
        if w and math.isfinite(w):
            out[f"{stem}_u_mm"] = math.sqrt(2.0 * point_mm**2 + (2.0 * offset_mm) ** 2 + (rel * w) ** 2)
    return out


@dataclass
class Measurement:
    """The result of measuring one image: its scale, its parts and any warnings."""

    source: SourceInfo
    scale: ScaleInfo
    parts: list[Part]
    warnings: list[str] = field(default_factory=list)
    cut_parts: list[dict[str, Any]] = field(default_factory=list)
    settings: dict[str, Any] = field(default_factory=dict)
    material: dict[str, Any] | None = None
    schema: str = SCHEMA

    # -- serialisation -------------------------------------------------------
    def to_dict(self, *, outlines: bool = True) -> dict[str, Any]:
        """Return the result document as plain JSON-ready values."""
        parts = []
        for part in self.parts:
            d = {f.name: getattr(part, f.name) for f in fields(part) if f.name not in _RINGS}
            d["holes"] = []
            for hole in part.holes:
                h = {f.name: getattr(hole, f.name) for f in fields(hole) if f.name != "outline_mm"}
                if outlines:
                    h["outline_mm"] = _ring_to_list(hole.outline_mm)
                d["holes"].append(h)
            d["principal_axes_defined"] = part.principal_axes_defined
            if outlines:
                d["outline_mm"] = _ring_to_list(part.outline_mm)
                if part.pieces_mm:
                    d["pieces_mm"] = [_ring_to_list(r) for r in part.pieces_mm]
            parts.append(d)
        doc = {
            "schema": self.schema,
            "units": JSON_UNITS,
            "source": asdict(self.source),
            "scale": asdict(self.scale),
            "settings": self.settings,
            "material": self.material,
            "parts": parts,
            "cut_parts": self.cut_parts,
            "warnings": list(self.warnings),
        }
        return _clean(doc)

    def to_json(self, *, indent: int | None = 1, outlines: bool = True) -> str:
        """Serialise to a JSON string (the result document).

        The structure is indented for reading; outlines (long lists of vertices) are
        written compactly, one list per line, which keeps large results fast to write.
        """
        doc = self.to_dict(outlines=False)
        if not outlines:
            return json.dumps(doc, indent=indent, allow_nan=False)
        rings: list[np.ndarray | None] = []

        def slot(ring: np.ndarray | None) -> str:
            rings.append(ring)
            return f"@@outline{len(rings) - 1}@@"

        for part_doc, part in zip(doc["parts"], self.parts):
            for hole_doc, hole in zip(part_doc["holes"], part.holes):
                hole_doc["outline_mm"] = slot(hole.outline_mm)
            part_doc["outline_mm"] = slot(part.outline_mm)
            if part.pieces_mm:
                part_doc["pieces_mm"] = [slot(r) for r in part.pieces_mm]
        text = json.dumps(doc, indent=indent, allow_nan=False)
        for k, ring in enumerate(rings):
            compact = json.dumps(_ring_to_list(ring), separators=(",", ":"), allow_nan=False)
            text = text.replace(f'"@@outline{k}@@"', compact, 1)
        return text

    @classmethod
    def from_dict(cls, doc: dict[str, Any], *, path: str | None = None) -> Measurement:
        """Rebuild a Measurement from a result document, checking its schema."""
        if not isinstance(doc, dict) or "schema" not in doc:
            raise ResultFormatError(
                "not a scanmass result document (no 'schema' key); create one with 'scanmass measure --json'", path=path
            )
        schema = str(doc["schema"])
        if not schema.startswith("scanmass.result/"):
            raise ResultFormatError(
                f"schema {schema!r} is not a scanmass result; create one with 'scanmass measure --json'", path=path
            )
        if schema not in READABLE_SCHEMAS:
            raise ResultFormatError(
                f"result schema {schema!r} is not supported by this version (expects {SCHEMA!r}); re-measure the image",
                path=path,
            )
        try:
            source = SourceInfo(**doc["source"])
            scale = ScaleInfo(**doc["scale"])
            parts = []
            for p in doc["parts"]:
                p = dict(p)
                p.pop("principal_axes_defined", None)
                holes = []
                for h in p.pop("holes", []):
                    h = dict(h)
                    h["outline_mm"] = _ring_from_list(h.get("outline_mm"))
                    h["label"] = _label(h.get("label"), "hole")
                    for key in ("centroid_mm", "centroid_u_mm", "circle_centre_mm", "circle_centre_u_mm"):
                        h[key] = _tuple(h[key])
                    if h.get("perimeter_u_mm") is None:  # not stated (older documents): NaN
                        h["perimeter_u_mm"] = math.nan
                    holes.append(Hole(**h))
                p["outline_mm"] = _ring_from_list(p.get("outline_mm"))
                pieces = p.get("pieces_mm") or []  # absent in documents of parts found whole, or older
                if not isinstance(pieces, list):
                    raise ValueError("pieces_mm is not a list of outlines")
                p["pieces_mm"] = [r for r in map(_ring_from_list, pieces) if r is not None]
                p["label"] = _label(p.get("label"), "part")
                for key in ("centroid_mm", "centroid_u_mm", "bbox_mm"):
                    p[key] = _tuple(p[key])
                parts.append(Part(holes=holes, **p))
        except ResultFormatError as exc:  # a malformed outline: name the file
            if path and not exc.path:
                raise ResultFormatError(str(exc), path=path) from None
            raise
        except (KeyError, TypeError, ValueError) as exc:
            raise ResultFormatError(
                f"result document is incomplete or malformed ({exc}); re-measure the image", path=path
            ) from None
        return cls(
            source=source,
            scale=scale,
            parts=parts,
            warnings=list(doc.get("warnings", [])),
            cut_parts=list(doc.get("cut_parts", [])),
            settings=dict(doc.get("settings", {})),
            material=doc.get("material"),
        )

    @classmethod
    def from_json(cls, text: str, *, path: str | None = None) -> Measurement:
        """Parse a result document from JSON text."""
        try:
            doc = json.loads(text)
        except RecursionError:
            raise ResultFormatError(
                "JSON nested too deeply to be a result document; pass a file written by 'scanmass measure --json'",
                path=path,
            ) from None
        except json.JSONDecodeError as exc:
            raise ResultFormatError(
                f"not valid JSON ({exc.msg} at line {exc.lineno}); pass a file written by 'scanmass measure --json'",
                path=path,
            ) from None
        return cls.from_dict(doc, path=path)

    def csv_rows(self, units: str = "mm") -> list[dict[str, Any]]:
        """One flat row per part with the main figures (see :func:`csv_columns`).

        ``units`` ``"in"`` gives lengths in inches (areas in², ...), the columns named so
        (``area_in2``); the figures and their names come from :data:`scanmass.names.FIGURES`.
        """
        check_units(units)
        rows = []
        for p in self.parts:
            row: dict[str, Any] = {"file": self.source.path or "", "part": p.label}
            for fig in FIGURES:
                row[fig.key(units)] = fig.value(p, units)
                if fig.u_attr is not None:
                    row[fig.u_key(units)] = fig.u(p, units)
            if not p.principal_axes_defined:
                row["principal_angle_deg"] = None
            scale = 1.0 if units == "mm" else 1.0 / 25.4
            suffix = unit_suffix("length", units)
            row[f"hole_diameters_{suffix}"] = " ".join(f"{h.diameter_mm * scale:.5g}" for h in p.holes)
            # 1 for an outline found whole, K for one found in K pieces (blank: no outline in the document)
            row["outline_pieces"] = None if p.outline_mm is None else 1 + len(p.pieces_mm)
            row["scale_method"] = self.scale.method
            row["warnings"] = " | ".join(self.warnings)
            rows.append(_clean(row))
        return rows

    def to_csv(self, units: str = "mm") -> str:
        """The CSV text: a header and one row per part (lengths in ``units``, mm or in)."""
        columns = csv_columns(units)
        buf = io.StringIO()
        writer = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
        writer.writeheader()
        for row in self.csv_rows(units):
            writer.writerow({k: ("" if row.get(k) is None else row.get(k)) for k in columns})
        return buf.getvalue()


def _tuple(value: Any) -> tuple[float, ...]:
    return tuple(float("nan") if v is None else float(v) for v in value)


def csv_columns(units: str = "mm") -> list[str]:
    """Column order of the per-part CSV in ``units`` (from :data:`scanmass.names.FIGURES`)."""
    cols = ["file", "part"]
    for fig in FIGURES:
        cols.append(fig.key(units))
        if fig.u_attr is not None:
            cols.append(fig.u_key(units))
    return [*cols, f"hole_diameters_{unit_suffix('length', units)}", "outline_pieces", "scale_method", "warnings"]


#: Column order of the per-part CSV (millimetres).
CSV_COLUMNS = csv_columns()


def read_result(path: str | os.PathLike[str]) -> Measurement:
    """Read a result document (JSON written by ``scanmass measure --json``).

    Raises
    ------
    ResultFormatError
        The file is missing, unreadable, not JSON, or of another schema; the message
        names the file.
    """
    name = display_path(path)
    text = read_regular_text(
        path,
        error=ResultFormatError,
        what="result JSON file",
        fix="pass a result JSON written by 'scanmass measure --json'",
        max_bytes=MAX_RESULT_BYTES,
    )
    return Measurement.from_json(text, path=name)
