"""Pixel-to-millimetre maps of the measured plane (the "scale" stage).

A :class:`PlaneMap` takes pixel coordinates in the OpenCV convention — ``x_px`` the
column, ``y_px`` the row counted from the top, pixel centres at integers — to
millimetres in a right-handed frame with y up (DESIGN.md). The y flip happens here
and nowhere else.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from scanmass.errors import OptionError
from scanmass.options import DEFAULT_DPI_REL_U, check_dpi

__all__ = ["PlaneMap", "DEFAULT_DPI_REL_U", "check_dpi"]


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
    undistort : callable, optional
        Applied to pixel points before the homography (lens correction).
    """

    matrix: np.ndarray
    method: str
    rel_u: float
    terms: dict[str, float] = field(default_factory=dict)
    note: str = ""
    dpi: tuple[float, float] | None = None
    reprojection_rms_px: float | None = None
    reprojection_rms_mm: float | None = None
    extra: dict[str, Any] = field(default_factory=dict)
    undistort: Callable[[np.ndarray], np.ndarray] | None = None

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
        return float(self.extra.get("mm_per_px", math.sqrt(abs(np.linalg.det(a[:2, :2]) / a[2, 2] ** 2))))

    def to_mm(self, points_px: np.ndarray | list) -> np.ndarray:
        """Map (N, 2) pixel points (x_px, y_px) to (N, 2) millimetres."""
        pts = np.asarray(points_px, dtype=float).reshape(-1, 2)
        if self.undistort is not None:
            pts = self.undistort(pts)
        h = pts @ self.matrix[:, :2].T + self.matrix[:, 2]
        return h[:, :2] / h[:, 2:3]

    def to_px(self, points_mm: np.ndarray | list) -> np.ndarray:
        """Inverse of :meth:`to_mm` (without lens distortion)."""
        pts = np.asarray(points_mm, dtype=float).reshape(-1, 2)
        inv = np.linalg.inv(self.matrix)
        h = pts @ inv[:, :2].T + inv[:, 2]
        return h[:, :2] / h[:, 2:3]

    def local_mm_per_px(self, points_px: np.ndarray) -> np.ndarray:
        """Local length scale (mm per px, geometric mean of the two axes) at each pixel point."""
        pts = np.asarray(points_px, dtype=float).reshape(-1, 2)
        d = 0.5
        px = self.to_mm(pts + [d, 0]) - self.to_mm(pts - [d, 0])
        py = self.to_mm(pts + [0, d]) - self.to_mm(pts - [0, d])
        det = np.abs(px[:, 0] * py[:, 1] - px[:, 1] * py[:, 0])
        return np.sqrt(det)
