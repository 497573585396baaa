"""Pixel-to-millimetre maps of the measured plane (what the "scale" stage produces).

A :class:`PlaneMap` takes pixel coordinates in the OpenCV convention — ``x_px`` the
column, ``y_px`` the row counted from the top, pixel centres at integers — to
millimetres in a right-handed frame with y up (DESIGN.md). The y flip is part of the
map's matrix; :mod:`scanmass.mapping` is the one stage that applies it to a part.

Everything a map carries is a typed field: the sampled maps of a fitted homography
(:class:`PlaneMapSample`) and, for photos, what was found (:class:`PhotoScaleInfo`),
which :meth:`PlaneMap.details` writes as the result document's ``scale.extra``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.options import DEFAULT_DPI_REL_U, check_dpi

__all__ = [
    "PlaneMap",
    "PlaneMapSample",
    "PixelCorrection",
    "PhotoScaleInfo",
    "MatDetails",
    "SheetDetails",
    "MarkerUse",
    "PrinterCheck",
    "ThicknessCorrection",
    "DEFAULT_DPI_REL_U",
    "check_dpi",
    "project",
]

#: A correction of pixel points applied before a map's matrix: (N, 2) px -> (N, 2) px
#: (a lens's undistortion, or the footprint of a raised part's top face).
PixelCorrection = Callable[[np.ndarray], np.ndarray]


def project(matrix: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Apply a 3x3 projective matrix to (N, 2) points."""
    h = points @ matrix[:, :2].T + matrix[:, 2]
    return h[:, :2] / h[:, 2:3]


@dataclass(frozen=True)
class PlaneMapSample:
    """One sampled pixel -> mm map (for the scale term of the uncertainty).

    Attributes
    ----------
    matrix : (3, 3) ndarray
        The sampled homography.
    correction : callable, optional
        Its own pixel correction (a lens's, or a raised face's with a sampled focal
        length and thickness).
    """

    matrix: np.ndarray
    correction: PixelCorrection | None = None

    def to_mm(self, points_px: np.ndarray | list) -> np.ndarray:
        """Map (N, 2) pixel points to (N, 2) millimetres through this sample."""
        pts = np.asarray(points_px, dtype=float).reshape(-1, 2)
        if self.correction is not None:
            pts = self.correction(pts)
        return project(self.matrix, pts)


@dataclass(frozen=True)
class MarkerUse:
    """A marker found in a photo: its id, refined corners (px) and whether the fit used it."""

    id: int
    corners_px: np.ndarray
    used: bool


@dataclass(frozen=True)
class PrinterCheck:
    """The print's scale: from caliper readings of the check bars (``done``) or nominal."""

    done: bool
    x_factor: float
    y_factor: float


@dataclass(frozen=True)
class MatDetails:
    """What a marker mat's fit found."""

    layout: str
    markers_used: int
    markers_detected: int
    markers_on_mat: int
    corner_noise_px: float
    printer_check: PrinterCheck
    markers: tuple[MarkerUse, ...]
    clear_area_mm: tuple[float, float, float, float]
    misfit_mm: float


@dataclass(frozen=True)
class SheetDetails:
    """What a plain sheet's fit found."""

    sheet: str
    sheet_mm: tuple[float, float]
    sheet_tolerance_mm: float
    corners_px: np.ndarray


@dataclass(frozen=True)
class ThicknessCorrection:
    """The raised face's correction: its height above the plane and the parallax at the centre."""

    height_mm: float
    height_u_mm: float
    parallax_at_centre_mm: float


@dataclass(frozen=True)
class PhotoScaleInfo:
    """A photo's scale source and camera, as found (reported in ``scale.extra``)."""

    target: MatDetails | SheetDetails
    lens_profile: str | None
    focal_px: float
    focal_source: str
    thickness: ThicknessCorrection | None = None

    def to_dict(self) -> dict[str, Any]:
        """The JSON form: the keys (and their order) of the result document's ``scale.extra``."""
        t = self.target
        out: dict[str, Any]
        if isinstance(t, MatDetails):
            out = {
                "layout": t.layout,
                "markers_used": t.markers_used,
                "markers_detected": t.markers_detected,
                "markers_on_mat": t.markers_on_mat,
                "corner_noise_px": t.corner_noise_px,
                "printer_check": {
                    "done": t.printer_check.done,
                    "x_factor": t.printer_check.x_factor,
                    "y_factor": t.printer_check.y_factor,
                },
                "lens_profile": self.lens_profile,
                # for overlays and reports: where each marker was found, and whether the fit used it
                "markers_px": [
                    {"id": m.id, "corners": np.round(m.corners_px, 2).tolist(), "used": m.used} for m in t.markers
                ],
                "clear_area_mm": list(t.clear_area_mm),
                "misfit_mm": t.misfit_mm,
            }
        else:
            out = {
                "sheet": t.sheet,
                "sheet_mm": list(t.sheet_mm),
                "sheet_tolerance_mm": t.sheet_tolerance_mm,
                "corners_px": np.asarray(t.corners_px).tolist(),
                "lens_profile": self.lens_profile,
            }
        out["focal_px"] = self.focal_px
        out["focal_source"] = self.focal_source
        if self.thickness is not None:
            out["thickness_correction"] = {
                "height_mm": self.thickness.height_mm,
                "height_u_mm": self.thickness.height_u_mm,
                "parallax_at_centre_mm": self.thickness.parallax_at_centre_mm,
            }
        return out


@dataclass(frozen=True)
class PlaneMap:
    """Projective map from pixel coordinates to millimetres on the measured plane.

    Parameters
    ----------
    matrix : (3, 3) ndarray
        Homography taking homogeneous ``(x_px, y_px, 1)`` to millimetres.
    method : str
        ``"dpi"``, ``"mat"`` or ``"sheet"``.
    rel_u : float
        Relative standard uncertainty of lengths from this map (scale term only).
    terms : dict
        Named parts of ``rel_u`` (relative, 1 sigma), combined in quadrature.
    note : str
        One line on the scale's source, for the result.
    dpi : (float, float), optional
        A scan's resolution.
    reprojection_rms_px, reprojection_rms_mm : float, optional
        Residual of a fitted map.
    undistort : callable, optional
        Applied to pixel points before the homography (lens correction, raised face).
    mm_per_px_nominal : float, optional
        A fitted map's local pixel size at the centre of its clear area (mm).
    samples : tuple of PlaneMapSample
        Sampled maps whose spread is the map's uncertainty (fitted maps; empty for a scan).
    photo : PhotoScaleInfo, optional
        What a photo's scale source found.
    """

    matrix: np.ndarray
    method: str
    rel_u: float
    terms: dict[str, float] = field(default_factory=dict)
    note: str = ""
    dpi: tuple[float, float] | None = None
    reprojection_rms_px: float | None = None
    reprojection_rms_mm: float | None = None
    undistort: PixelCorrection | None = None
    mm_per_px_nominal: float | None = None
    samples: tuple[PlaneMapSample, ...] = ()
    photo: PhotoScaleInfo | None = None

    @classmethod
    def from_dpi(
        cls,
        dpi: float | tuple[float, float],
        *,
        height_px: int,
        rel_u: float = DEFAULT_DPI_REL_U,
        note: str = "",
    ) -> PlaneMap:
        """The scan-frame map of DESIGN.md for a scanner resolution.

        Pixel (column i, row j) has its centre at x = (i + 0.5) s, y = (H - j - 0.5) s
        with s = 25.4 / dpi.

        Examples
        --------
        >>> m = PlaneMap.from_dpi(254, height_px=100)
        >>> m.to_mm([[0, 99]]).round(6).tolist()
        [[0.05, 0.05]]
        """
        dpi_x, dpi_y = check_dpi(dpi)
        if not (math.isfinite(rel_u) and 0.0 <= rel_u < 0.5):
            raise OptionError(f"dpi uncertainty {rel_u!r} must be a fraction in [0, 0.5), e.g. 0.001 for 0.1 %")
        sx, sy = 25.4 / dpi_x, 25.4 / dpi_y
        matrix = np.array([[sx, 0.0, 0.5 * sx], [0.0, -sy, (height_px - 0.5) * sy], [0.0, 0.0, 1.0]])
        return cls(
            matrix=matrix, method="dpi", rel_u=float(rel_u), terms={"dpi": float(rel_u)}, note=note, dpi=(dpi_x, dpi_y)
        )

    @property
    def mm_per_px(self) -> float:
        """Geometric-mean length of one pixel in mm at the image centre (nominal)."""
        a = self.matrix
        if self.method == "dpi":
            return float(math.sqrt(abs(a[0, 0] * a[1, 1])))
        if self.mm_per_px_nominal is not None:
            return float(self.mm_per_px_nominal)
        return float(math.sqrt(abs(np.linalg.det(a[:2, :2]) / a[2, 2] ** 2)))

    def details(self) -> dict[str, Any]:
        """The result document's ``scale.extra``: what was found, the pixel size, the matrix, the resolution."""
        out: dict[str, Any] = {}
        if self.photo is not None:
            out.update(self.photo.to_dict())
        if self.mm_per_px_nominal is not None:
            out["mm_per_px"] = self.mm_per_px_nominal
        out["px_to_mm"] = self.matrix.tolist()
        out["dpi_xy"] = list(self.dpi) if self.dpi else None
        return out

    def to_mm(self, points_px: np.ndarray | list) -> np.ndarray:
        """Map (N, 2) pixel points (x_px, y_px) to (N, 2) millimetres."""
        pts = np.asarray(points_px, dtype=float).reshape(-1, 2)
        if self.undistort is not None:
            pts = self.undistort(pts)
        return project(self.matrix, pts)

    @cached_property
    def _inverse(self) -> np.ndarray:
        """The matrix's inverse, made once per map (a photo's checks map rings back to pixels often)."""
        inverse = np.linalg.inv(self.matrix)
        inverse.flags.writeable = False
        return inverse

    def to_px(self, points_mm: np.ndarray | list) -> np.ndarray:
        """Inverse of :meth:`to_mm` (without lens distortion)."""
        pts = np.asarray(points_mm, dtype=float).reshape(-1, 2)
        return project(self._inverse, pts)

    def local_mm_per_px(self, points_px: np.ndarray) -> np.ndarray:
        """Local length scale (mm per px, geometric mean of the two axes) at each pixel point."""
        pts = np.asarray(points_px, dtype=float).reshape(-1, 2)
        d = 0.5
        px = self.to_mm(pts + [d, 0]) - self.to_mm(pts - [d, 0])
        py = self.to_mm(pts + [0, d]) - self.to_mm(pts - [0, d])
        det = np.abs(px[:, 0] * py[:, 1] - px[:, 1] * py[:, 0])
        return np.sqrt(det)
