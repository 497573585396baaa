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
from pathlib import Path
from typing import Any

import numpy as np

from scanmass.errors import ResultFormatError

__all__ = [
    "SCHEMA",
    "SourceInfo",
    "ScaleInfo",
    "Hole",
    "Part",
    "Measurement",
    "CSV_COLUMNS",
    "read_result",
]

#: Schema identifier written into every result document; bump the number on an
#: incompatible change of the keys.
SCHEMA = "scanmass.result/1"

_OUTLINE_DECIMALS = 5


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
    return value


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


@dataclass
class Part:
    """Section properties of one part (a plane lamina with holes).

    Second moments are about centroidal axes parallel to x and y; ``ixy_mm4`` is the
    product of area. ``i1_mm4 >= i2_mm4`` are the principal moments and
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
    outline_mm: np.ndarray | None = field(default=None, repr=False)


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
            d = {f.name: getattr(part, f.name) for f in fields(part) if f.name not in ("holes", "outline_mm")}
            d["holes"] = []
            for hole in part.holes:
                h = {f.name: getattr(hole, f.name) for f in fields(hole) if f.name != "outline_mm"}
                if outlines:
                    h["outline_mm"] = _ring_to_list(hole.outline_mm)
                d["holes"].append(h)
            if outlines:
                d["outline_mm"] = _ring_to_list(part.outline_mm)
            parts.append(d)
        doc = {
            "schema": self.schema,
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
        if schema != SCHEMA:
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
                holes = []
                for h in p.pop("holes", []):
                    h = dict(h)
                    h["outline_mm"] = _ring_from_list(h.get("outline_mm"))
                    for key in ("centroid_mm", "centroid_u_mm", "circle_centre_mm", "circle_centre_u_mm"):
                        h[key] = _tuple(h[key])
                    holes.append(Hole(**h))
                p["outline_mm"] = _ring_from_list(p.get("outline_mm"))
                for key in ("centroid_mm", "centroid_u_mm", "bbox_mm"):
                    p[key] = _tuple(p[key])
                parts.append(Part(holes=holes, **p))
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
            schema=schema,
        )

    @classmethod
    def from_json(cls, text: str, *, path: str | None = None) -> Measurement:
        """Parse a result document from JSON text."""
        try:
            doc = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ResultFormatError(
                f"not valid JSON ({exc.msg} at line {exc.lineno}); pass a file written by 'scanmass measure --json'",
                path=path,
            ) from None
        return cls.from_dict(doc, path=path)

    def csv_rows(self) -> list[dict[str, Any]]:
        """One flat row per part with the main figures (see :data:`CSV_COLUMNS`)."""
        rows = []
        for p in self.parts:
            row = {
                "file": self.source.path or "",
                "part": p.label,
                "area_mm2": p.area_mm2,
                "area_u_mm2": p.area_u_mm2,
                "centroid_x_mm": p.centroid_mm[0],
                "centroid_y_mm": p.centroid_mm[1],
                "centroid_x_u_mm": p.centroid_u_mm[0],
                "centroid_y_u_mm": p.centroid_u_mm[1],
                "perimeter_mm": p.perimeter_mm,
                "ixx_mm4": p.ixx_mm4,
                "iyy_mm4": p.iyy_mm4,
                "ixy_mm4": p.ixy_mm4,
                "ixx_u_mm4": p.ixx_u_mm4,
                "iyy_u_mm4": p.iyy_u_mm4,
                "ixy_u_mm4": p.ixy_u_mm4,
                "i1_mm4": p.i1_mm4,
                "i2_mm4": p.i2_mm4,
                "principal_angle_deg": p.principal_angle_deg,
                "polar_mm4": p.polar_mm4,
                "modulus_top_mm3": p.modulus_top_mm3,
                "modulus_bottom_mm3": p.modulus_bottom_mm3,
                "modulus_right_mm3": p.modulus_right_mm3,
                "modulus_left_mm3": p.modulus_left_mm3,
                "bbox_xmin_mm": p.bbox_mm[0],
                "bbox_ymin_mm": p.bbox_mm[1],
                "bbox_xmax_mm": p.bbox_mm[2],
                "bbox_ymax_mm": p.bbox_mm[3],
                "caliper_max_mm": p.caliper_max_mm,
                "caliper_min_mm": p.caliper_min_mm,
                "convex_area_mm2": p.convex_area_mm2,
                "holes": len(p.holes),
                "hole_diameters_mm": " ".join(f"{h.diameter_mm:.4f}" for h in p.holes),
                "mass_g": p.mass_g,
                "mass_u_g": p.mass_u_g,
                "warnings": " | ".join(self.warnings),
            }
            rows.append(_clean(row))
        return rows

    def to_csv(self) -> str:
        """The CSV text: a header and one row per part."""
        buf = io.StringIO()
        writer = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator="\n")
        writer.writeheader()
        for row in self.csv_rows():
            writer.writerow({k: ("" if row.get(k) is None else row.get(k)) for k in CSV_COLUMNS})
        return buf.getvalue()


def _tuple(value: Any) -> tuple[float, ...]:
    return tuple(float("nan") if v is None else float(v) for v in value)


#: Column order of the per-part CSV.
CSV_COLUMNS = [
    "file",
    "part",
    "area_mm2",
    "area_u_mm2",
    "centroid_x_mm",
    "centroid_y_mm",
    "centroid_x_u_mm",
    "centroid_y_u_mm",
    "perimeter_mm",
    "ixx_mm4",
    "iyy_mm4",
    "ixy_mm4",
    "ixx_u_mm4",
    "iyy_u_mm4",
    "ixy_u_mm4",
    "i1_mm4",
    "i2_mm4",
    "principal_angle_deg",
    "polar_mm4",
    "modulus_top_mm3",
    "modulus_bottom_mm3",
    "modulus_right_mm3",
    "modulus_left_mm3",
    "bbox_xmin_mm",
    "bbox_ymin_mm",
    "bbox_xmax_mm",
    "bbox_ymax_mm",
    "caliper_max_mm",
    "caliper_min_mm",
    "convex_area_mm2",
    "holes",
    "hole_diameters_mm",
    "mass_g",
    "mass_u_g",
    "warnings",
]


def read_result(path: str | os.PathLike[str]) -> Measurement:
    """Read a result document (JSON written by ``scanmass measure --json``).

    Raises
    ------
    ResultFormatError
        The file is missing, unreadable, not JSON, or of another schema; the message
        names the file.
    """
    name = os.fspath(path)
    p = Path(name)
    if not p.exists():
        raise ResultFormatError("file not found; pass a result JSON written by 'scanmass measure --json'", path=name)
    if not p.is_file():
        raise ResultFormatError("is not a file; pass a result JSON written by 'scanmass measure --json'", path=name)
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ResultFormatError(
            "is not UTF-8 text; pass a result JSON written by 'scanmass measure --json'", path=name
        ) from None
    except OSError as exc:
        raise ResultFormatError(f"cannot be read ({exc.strerror}); check its permissions", path=name) from None
    return Measurement.from_json(text, path=name)
