"""The camera behind a photo's plane map: lens, focal length, sampled maps, clear area.

:func:`photo_scale_basis` and :meth:`ScaleBasis.with_thickness` are the common tail of the two photo scale sources
(:func:`scanmass.scale.mat_scale.mat_scale` and :func:`scanmass.scale.sheet.sheet_scale`):
given the fitted homography it samples its uncertainty, finds the camera's focal length
(from a lens profile, the view's perspective, EXIF or an assumption), adds the
correction for a raised face when the part's thickness is given, and returns a
:class:`PhotoScale` -- the plane map, the clear area as a pixel polygon, the points the
map is supported by, and warnings. Nothing here segments or measures: the pipeline does.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from scanmass.load.decode import LoadedImage
from scanmass.numeric import combine
from scanmass.scale.homography import (
    ElevationHook,
    HomographyFit,
    apply_h,
    focal_from_homography,
    local_scale,
    sample_homographies,
)
from scanmass.scale.lens import LensProfile, load_lens_profile
from scanmass.scale.markers import MarkerDetection
from scanmass.scale.mat import MatLayout
from scanmass.scale.planemap import (
    MatDetails,
    PhotoScaleInfo,
    PixelCorrection,
    PlaneMap,
    PlaneMapSample,
    SheetDetails,
    ThicknessCorrection,
)

__all__ = [
    "PhotoScale",
    "LensTools",
    "lens_tools",
    "photo_scale_basis",
    "ScaleBasis",
    "principal_point",
    "SAMPLES",
    "FILM_DIAGONAL_MM",
    "DEFAULT_FOCAL_35MM",
    "DEFAULT_FOCAL_REL_U",
]

#: Matrices sampled for the homography's uncertainty.
SAMPLES = 64
#: A 35 mm film frame's diagonal, mm (36 x 24 mm), for EXIF 35 mm-equivalent focal lengths.
FILM_DIAGONAL_MM = 43.27
#: Assumed 35 mm-equivalent focal length of a phone's main camera and its relative
#: uncertainty, when neither a lens profile, the view's perspective nor EXIF tells it
#: (common practice: 24-28 mm equivalent).
DEFAULT_FOCAL_35MM = 26.0
DEFAULT_FOCAL_REL_U = 0.2


@dataclass
class PhotoScale:
    """What the scale stage returns for a photo: its plane map and where it may be used.

    Attributes
    ----------
    plane_map : PlaneMap
    roi_px : (N, 2) ndarray
        The clear area (mat) or the sheet inside its margin, as a pixel polygon.
    support_mm : (M, 2) ndarray
        The plane points the map was fitted to (marker corners, sheet corners), mm.
    warnings : list of str
    camera_matrix : (3, 3) ndarray, optional
        Of the ideal (undistorted) image; for the parallax of a raised face.
    fit, detection, layout
        What was found, for callers that want to look further.
    """

    plane_map: PlaneMap
    roi_px: np.ndarray
    support_mm: np.ndarray
    warnings: list[str] = field(default_factory=list)
    camera_matrix: np.ndarray | None = None
    fit: HomographyFit | None = None
    detection: MarkerDetection | None = None
    layout: MatLayout | None = None


@dataclass(frozen=True)
class LensTools:
    """An optional lens profile and its two point corrections.

    ``estimated`` marks a profile fitted to the photo's own marker corners
    (:mod:`scanmass.scale.selfcal`): its focal length only sets the units of the
    coefficients, so the camera's focal length is found as without a profile.
    """

    profile: LensProfile | None = None
    estimated: bool = False

    @property
    def undistort(self) -> PixelCorrection | None:
        """Distorted photo pixels -> ideal pinhole pixels (None without a profile)."""
        return None if self.profile is None else self.profile.undistort_points

    @property
    def distort(self) -> PixelCorrection | None:
        """Ideal pinhole pixels -> distorted photo pixels (None without a profile)."""
        return None if self.profile is None else self.profile.distort_points

    @property
    def source(self) -> str | None:
        return None if self.profile is None else self.profile.source


def lens_tools(lens: LensProfile | str | os.PathLike | None, image: LoadedImage) -> LensTools:
    """The :class:`LensTools` of an optional lens profile (object or file), checked against the image."""
    if lens is None:
        return LensTools()
    profile = lens if isinstance(lens, LensProfile) else load_lens_profile(lens)
    profile.check_image(image.width_px, image.height_px, path=image.path)
    return LensTools(profile)


def principal_point(image: LoadedImage) -> tuple[float, float]:
    """The image centre in pixel coordinates (the assumed principal point)."""
    return (0.5 * (image.width_px - 1), 0.5 * (image.height_px - 1))


def _exif_focal_px(image: LoadedImage) -> float | None:
    """Focal length in px from the file's EXIF 35 mm-equivalent focal length, if any."""
    if not image.path:
        return None
    try:
        from PIL import Image

        with Image.open(image.path) as im:
            exif = im.getexif().get_ifd(0x8769)
        f35 = exif.get(0xA405)
        if not f35:
            return None
        diag = math.hypot(image.width_px, image.height_px)
        return float(f35) / FILM_DIAGONAL_MM * diag
    except Exception:  # noqa: BLE001 -- EXIF is optional; any problem means "not known"
        return None


def _camera_matrix(
    image: LoadedImage, profile: LensProfile | None, h_samples: list[np.ndarray], rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray, str]:
    """Camera matrix for the thickness correction and the focal lengths of each sample.

    Returns (K, focal samples (K,), source note).
    """
    cx, cy = principal_point(image)
    if profile is not None:
        k = profile.camera_matrix
        f = 0.5 * (k[0, 0] + k[1, 1])
        return k, np.full(len(h_samples), f), "lens profile"
    fs = [focal_from_homography(np.linalg.inv(h), (cx, cy)) for h in h_samples]
    good = np.array([f for f in fs if f is not None and math.isfinite(f)])
    diag = math.hypot(image.width_px, image.height_px)
    if len(good) >= 0.9 * len(fs) and len(good) >= 8:
        f_med = float(np.median(good))
        spread = float(np.std(good, ddof=1)) / f_med
        if 0.2 * diag < f_med < 10 * diag and spread < 0.15:
            # besides the corner noise, the assumed principal point and square pixels: 3 % (1 sigma)
            samples = np.array([f if f is not None else f_med for f in fs], dtype=float)
            samples *= 1.0 + 0.03 * rng.standard_normal(len(samples))
            return (
                np.array([[f_med, 0, cx], [0, f_med, cy], [0, 0, 1.0]]),
                samples,
                f"estimated from the view's perspective ({f_med:.0f} px +- {100 * math.hypot(spread, 0.03):.0f} %)",
            )
    f_exif = _exif_focal_px(image)
    if f_exif is not None:
        f0, rel, note = f_exif, 0.03, f"EXIF 35 mm-equivalent focal length ({f_exif:.0f} px)"
    else:
        f0, rel = DEFAULT_FOCAL_35MM / FILM_DIAGONAL_MM * diag, DEFAULT_FOCAL_REL_U
        note = f"assumed {DEFAULT_FOCAL_35MM:g} mm equivalent (+-{100 * rel:.0f} %): no lens profile, EXIF or usable perspective"
    samples = f0 * (1.0 + rel * rng.standard_normal(len(h_samples)))
    return np.array([[f0, 0, cx], [0, f0, cy], [0, 0, 1.0]]), samples, note


def _roi_from_rect(
    rect_mm: tuple[float, float, float, float] | np.ndarray,
    to_px: Callable[[np.ndarray], np.ndarray],
    per_side: int = 48,
) -> np.ndarray:
    x0, y0, x1, y1 = rect_mm
    t = np.linspace(0.0, 1.0, per_side, endpoint=False)[:, None]
    corners = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)
    pts = np.concatenate([corners[k] + t * (corners[(k + 1) % 4] - corners[k]) for k in range(4)])
    return to_px(pts)


@dataclass(frozen=True)
class ScaleBasis:
    """A photo's scale before a thickness is given: the fit, its sampled maps and the camera.

    :meth:`with_thickness` gives the :class:`PhotoScale` for a part's thickness; the random
    stream continues from ``rng_state`` (where :func:`photo_scale_basis` left it), so a scale
    built from one basis at any thickness is the one a fresh basis would give.
    ``detection`` and ``layout`` (a marker mat's) are set on the scale as they are.
    """

    method: str
    fit: HomographyFit
    h0: np.ndarray
    matrices: list[np.ndarray]
    k: np.ndarray
    f_samples: np.ndarray
    f_note: str
    rng_state: dict[str, Any]
    terms: dict[str, float]
    details: MatDetails | SheetDetails
    note: str
    clear_mm: tuple[float, float, float, float] | np.ndarray
    lens: LensTools
    centre_px: np.ndarray
    mm_per_px: float
    roi_px: np.ndarray
    support_mm: np.ndarray
    warnings: list[str]
    detection: MarkerDetection | None = None
    layout: MatLayout | None = None

    def with_thickness(self, thickness_mm: float | None, thickness_u_mm: float = 0.0) -> PhotoScale:
        """The :class:`PhotoScale` for a measured face ``thickness_mm`` above the plane (1-sigma ``thickness_u_mm``)."""
        profile, undistort = self.lens.profile, self.lens.undistort
        rng = np.random.default_rng(0)
        rng.bit_generator.state = self.rng_state
        h0, k, matrices, centre_px = self.h0, self.k, self.matrices, self.centre_px
        terms = dict(self.terms)
        hook: PixelCorrection | None = undistort
        corrections: list[PixelCorrection | None] = [undistort] * len(matrices)
        thickness = None
        if thickness_mm is not None and thickness_mm > 0:
            hook = ElevationHook(h0, k, thickness_mm, undistort)
            hooks = []
            for h, f in zip(matrices, self.f_samples):
                kk = k.copy()
                kk[0, 0] = kk[1, 1] = f
                hk = thickness_mm + thickness_u_mm * rng.standard_normal() if thickness_u_mm > 0 else thickness_mm
                hooks.append(ElevationHook(h, kk, max(hk, 0.0), undistort))
            corrections = list(hooks)
            # relative spread of the raised face's scale (focal length and height uncertain)
            raised = np.array([local_scale(hk.hh, centre_px) for hk in hooks])
            terms["thickness"] = float(np.std(raised, ddof=1) / np.mean(raised))
            shift = _parallax_mm(h0, k, thickness_mm, centre_px)
            thickness = ThicknessCorrection(
                height_mm=thickness_mm, height_u_mm=thickness_u_mm, parallax_at_centre_mm=shift
            )
        clear_mm = self.clear_mm
        if profile is not None:  # the calibration's residual, as a misfit over a typical part's size
            clear_diag = math.hypot(clear_mm[2] - clear_mm[0], clear_mm[3] - clear_mm[1])
            terms["lens"] = profile.rms_px * self.mm_per_px / (0.25 * clear_diag)
        rel_u = combine(*terms.values())
        info = PhotoScaleInfo(
            target=self.details,
            lens_profile=self.lens.source,
            focal_px=float(k[0, 0]),
            focal_source=self.f_note,
            thickness=thickness,
        )
        plane_map = PlaneMap(
            matrix=h0,
            method=self.method,
            rel_u=rel_u,
            terms=terms,
            note=self.note,
            reprojection_rms_px=self.fit.rms_px,
            reprojection_rms_mm=self.fit.rms_mm,
            undistort=hook,
            mm_per_px_nominal=self.mm_per_px,
            samples=tuple(PlaneMapSample(h, c) for h, c in zip(matrices, corrections)),
            photo=info,
        )
        return PhotoScale(
            plane_map=plane_map,
            roi_px=self.roi_px.copy(),
            support_mm=self.support_mm,
            warnings=list(self.warnings),
            fit=self.fit,
            camera_matrix=k,
            detection=self.detection,
            layout=self.layout,
        )


def photo_scale_basis(
    image: LoadedImage,
    *,
    method: str,
    fit: HomographyFit,
    points_mm: np.ndarray,
    printer: np.ndarray,
    terms: dict[str, float],
    details: MatDetails | SheetDetails,
    note: str,
    clear_mm: tuple[float, float, float, float] | np.ndarray,
    lens: LensTools,
    support_mm: np.ndarray,
    warnings: list[str],
    sample_sigma_px: float,
    size_samples: Callable[[np.random.Generator], np.ndarray] | None = None,
) -> ScaleBasis:
    """The thickness-free part of a photo's scale: the sampled maps, the focal length, the ROI."""
    distort = lens.distort
    rng = np.random.default_rng(12345)
    h0 = printer @ fit.px_to_plane
    h0 = h0 / h0[2, 2]
    raw = sample_homographies(fit, points_mm, sigma_px=max(sample_sigma_px, 1e-3), count=SAMPLES, seed=7)
    cx_mm, cy_mm = 0.5 * (clear_mm[0] + clear_mm[2]), 0.5 * (clear_mm[1] + clear_mm[3])
    centre_px = apply_h(np.linalg.inv(h0), [[cx_mm, cy_mm]])[0]
    mm_per_px = local_scale(h0, centre_px)
    scales = np.array([local_scale(h, centre_px) for h in raw])
    terms = {"homography": float(np.std(scales, ddof=1) / np.mean(scales)), **terms}
    if size_samples is not None:  # the target's own size tolerance (a sheet): scale each sample
        raw = [size_samples(rng) @ h for h in raw]
    matrices = [printer @ h for h in raw]
    matrices = [h / h[2, 2] for h in matrices]
    k, f_samples, f_note = _camera_matrix(image, None if lens.estimated else lens.profile, matrices, rng)
    inv = np.linalg.inv(h0)

    def to_px(pts_mm: np.ndarray) -> np.ndarray:
        ideal = apply_h(inv, pts_mm)
        return distort(ideal) if distort is not None else ideal

    return ScaleBasis(
        method=method,
        fit=fit,
        h0=h0,
        matrices=matrices,
        k=k,
        f_samples=f_samples,
        f_note=f_note,
        rng_state=dict(rng.bit_generator.state),
        terms=terms,
        details=details,
        note=note,
        clear_mm=clear_mm,
        lens=lens,
        centre_px=centre_px,
        mm_per_px=mm_per_px,
        roi_px=_roi_from_rect(clear_mm, to_px),
        support_mm=support_mm,
        warnings=list(warnings),
    )


def _parallax_mm(h0: np.ndarray, k: np.ndarray, height_mm: float, centre_px: np.ndarray) -> float:
    """How far (mm on the mat) a point ``height_mm`` above the mat's clear-area centre appears displaced."""
    hook = ElevationHook(h0, k, height_mm)
    foot = apply_h(hook.to_footprint, [centre_px])
    return float(np.hypot(*(apply_h(h0, foot) - apply_h(h0, [centre_px]))[0]))
