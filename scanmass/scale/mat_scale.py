"""The scale of a photo of a part on a scanmass marker mat (part of the "scale" stage).

:func:`mat_scale` finds the mat's markers (:mod:`scanmass.scale.markers`), identifies the
mat layout from their ids, checks the view (motion blur, focus, a flat mat), fits the
homography pixel -> mat mm (robust, then least squares), applies the printer's check-bar
readings and returns a :class:`~scanmass.scale.camera.PhotoScale`.

Pixel coordinates are OpenCV's (x_px = column, y_px = row from the top, pixel centres at
integers); mm are in the mat frame (origin lower-left, y up).
"""

from __future__ import annotations

import math
import os
from dataclasses import replace

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError
from scanmass.load.decode import LoadedImage
from scanmass.scale.camera import (
    DEFAULT_FOCAL_35MM,
    FILM_DIAGONAL_MM,
    LensTools,
    PhotoScale,
    ScaleBasis,
    lens_tools,
    photo_scale_basis,
    principal_point,
)
from scanmass.scale.homography import HomographyFit, apply_h, fit_homography, focal_from_homography
from scanmass.scale.lens import LensProfile
from scanmass.scale.markers import (
    MIN_MARKERS,
    MarkerDetection,
    MarkerSides,
    detect_markers,
    expected_quads,
    found_markers,
    marker_sides,
)
from scanmass.scale.mat import MARKER_CELLS, MatLayout, layout_for_ids, load_layout
from scanmass.scale.planemap import MarkerUse, MatDetails, PrinterCheck
from scanmass.scale.selfcal import estimate_radial_distortion

__all__ = ["mat_scale", "mat_scale_basis", "PRINTER_REL_U", "PRINTED_READING_U_MM", "MAX_MISFIT_MM"]

#: Relative standard uncertainty of an unverified print's scale (1 sigma). Common
#: practice: office printers printing "at 100 %" reproduce lengths to a few tenths of a
#: per cent, a "fit to page" setting shrinks them by 3-6 %; 0.5 % is our stated sigma
#: for a print whose bars were not measured.
PRINTER_REL_U = 0.005
#: Standard uncertainty of one caliper reading of a 100 mm printed bar, mm: a 0.02 mm
#: vernier or digital caliper (common practice) set on the ends of a printed bar,
#: whose edges are less crisp than a machined face.
PRINTED_READING_U_MM = 0.05


def _printer(
    layout: MatLayout, printed_x_mm: float | None, printed_y_mm: float | None, path: str | None
) -> tuple[np.ndarray, float, bool]:
    """(scale matrix on mat mm, relative term, note) from the caliper readings of the check bars."""
    if (printed_x_mm is None) != (printed_y_mm is None):
        raise OptionError("give both check-bar readings, e.g. --check-bar-x 100.1 --check-bar-y 99.9", path=path)
    if printed_x_mm is None or printed_y_mm is None:
        return np.eye(3), PRINTER_REL_U, False
    factors = []
    for axis, value in (("x", printed_x_mm), ("y", printed_y_mm)):
        nominal = layout.bar(axis).length_mm
        if not (math.isfinite(value) and 0.9 * nominal <= value <= 1.1 * nominal):
            raise OptionError(
                f"printed {axis} bar reading {value!r} mm is more than 10 % off its {nominal:g} mm; "
                "reprint the mat at 100 % (actual size) and measure the bar end to end",
                path=path,
            )
        factors.append(value / nominal)
    rel = PRINTED_READING_U_MM / layout.bar("x").length_mm
    return np.diag([factors[0], factors[1], 1.0]), rel, True


def mat_scale(
    image: LoadedImage,
    *,
    mat: str | os.PathLike | MatLayout | None = None,
    printed_x_mm: float | None = None,
    printed_y_mm: float | None = None,
    lens: LensProfile | str | os.PathLike | None = None,
    thickness_mm: float | None = None,
    thickness_u_mm: float = 0.0,
) -> PhotoScale:
    """The plane map of a photo of a part on a scanmass marker mat.

    Parameters
    ----------
    image : LoadedImage
    mat : str, path or MatLayout, optional
        The mat's layout name or JSON file; by default recognised from the marker ids.
    printed_x_mm, printed_y_mm : float, optional
        Caliper readings of the printed 100 mm check bars; they correct the x and y
        scale of the print separately. Without them a printer term of
        :data:`PRINTER_REL_U` enters the uncertainty and a warning says so.
    lens : LensProfile or path, optional
        Camera lens profile from :func:`scanmass.scale.lens.calibrate_lens`.
    thickness_mm, thickness_u_mm : float, optional
        Height of the part's measured face above the mat and its standard uncertainty.

    Returns
    -------
    PhotoScale

    Raises
    ------
    ScaleError
        No or too few markers, unknown layout, markers inconsistent with a flat mat,
        motion blur.
    """
    return mat_scale_basis(
        image, mat=mat, printed_x_mm=printed_x_mm, printed_y_mm=printed_y_mm, lens=lens
    ).with_thickness(thickness_mm, thickness_u_mm)


def mat_scale_basis(
    image: LoadedImage,
    *,
    mat: str | os.PathLike | MatLayout | None = None,
    printed_x_mm: float | None = None,
    printed_y_mm: float | None = None,
    lens: LensProfile | str | os.PathLike | None = None,
) -> ScaleBasis:
    """:func:`mat_scale` before a thickness: the markers found and fitted, the maps sampled.

    Its :meth:`~scanmass.scale.camera.ScaleBasis.with_thickness` is :func:`mat_scale` with that
    thickness (a photo measured at several thicknesses finds its markers once).
    """
    path = image.path
    tools = lens_tools(lens, image)
    layout = load_layout(mat) if isinstance(mat, (str, os.PathLike)) else mat
    dictionary = layout.dictionary if layout else "DICT_5X5_250"
    found = found_markers(image, dictionary, expected=lambda ids, quads: expected_quads(layout, ids, quads))
    sides = marker_sides(image, found)  # sampled once: a lens estimated below refines the same points
    det = detect_markers(image, dictionary=dictionary, undistort=tools.undistort, sides=sides)
    if len(det.ids) == 0:
        raise ScaleError(
            "no scale: no marker mat found in the photo (and no usable DPI); photograph the part on a mat "
            "printed with 'scanmass mat', or give --sheet a4 for a plain sheet, or --dpi N for a scan",
            path=path,
        )
    if layout is None:
        layout = layout_for_ids(det.ids, path=path)
    known = np.isin(det.ids, layout.ids)
    if not known.all():
        strays = det.ids[~known]
        if known.sum() < MIN_MARKERS:
            raise ScaleError(
                f"the markers in the photo (ids {sorted(strays.tolist())[:6]}) are not those of mat {layout.name}; "
                "use a mat printed by 'scanmass mat' or give its layout file with --mat LAYOUT.json",
                path=path,
            )
    ids = det.ids[known]
    corners_px = det.corners_px[known]
    n = len(ids)
    if n < MIN_MARKERS:
        raise ScaleError(
            f"only {n} marker(s) of mat {layout.name} are visible; at least {MIN_MARKERS} are needed: "
            "keep the whole mat in the photo and the part off the markers",
            path=path,
        )
    _check_blur(det, known, path)
    corners_mm = layout.marker_corners(ids)
    pts_px = corners_px.reshape(-1, 2)
    pts_mm = corners_mm.reshape(-1, 2)
    cell_px = (
        float(np.median(np.hypot(*(np.roll(corners_px, -1, axis=1) - corners_px).reshape(-1, 2).T))) / MARKER_CELLS
    )
    fit = fit_homography(pts_px, pts_mm, ransac_px=max(2.0, 0.25 * cell_px))
    if fit is None:
        raise ScaleError("the markers found do not fit a flat mat; lay the mat flat and photograph it again", path=path)
    warnings: list[str] = []
    if tools.profile is None:
        estimated = _self_calibrate(image, det, known, layout, fit, pts_px, pts_mm, cell_px, sides)
        if estimated is not None:
            tools, det, fit, note_lens = estimated  # det: the known markers only, seen through the lens
            known = np.ones(len(det.ids), bool)
            ids, corners_px = det.ids, det.corners_px
            n = len(ids)
            corners_mm = layout.marker_corners(ids)
            pts_px, pts_mm = corners_px.reshape(-1, 2), corners_mm.reshape(-1, 2)
            warnings.append(note_lens)
    misfit = _check_consistency(fit, n, det.edge_noise_px, pts_px, pts_mm, principal_point(image), path, warnings)
    printer, printer_rel, checked = _printer(layout, printed_x_mm, printed_y_mm, path)
    if not checked:
        warnings.append(
            f"print scale unverified: measure the mat's two 100 mm check bars and give --check-bar-x/--check-bar-y "
            f"(a {100 * PRINTER_REL_U:.1f} % printer term is included meanwhile)"
        )
    inl_markers = np.asarray(fit.inliers.reshape(-1, 4).all(axis=1))
    support = (printer[:2, :2] @ pts_mm[fit.inliers].T).T
    clear = np.array(layout.clear_area_mm, dtype=float)
    clear_phys = np.concatenate([printer[:2, :2] @ clear[:2], printer[:2, :2] @ clear[2:]])
    terms = {"printer": printer_rel}
    if misfit > 0:  # what the plane model leaves unexplained, over a typical part's size
        clear_diag = math.hypot(clear[2] - clear[0], clear[3] - clear[1])
        terms["flatness"] = misfit / (0.25 * clear_diag)
    x0, y0, x1, y1 = (float(v) for v in clear_phys)
    details = MatDetails(
        layout=layout.name,
        markers_used=int(inl_markers.sum()),
        markers_detected=int(len(det.ids)),
        markers_on_mat=int(len(layout.markers)),
        corner_noise_px=det.edge_noise_px,
        printer_check=PrinterCheck(done=checked, x_factor=float(printer[0, 0]), y_factor=float(printer[1, 1])),
        markers=tuple(MarkerUse(int(i), c, bool(u)) for i, c, u in zip(ids, corners_px, inl_markers)),
        clear_area_mm=(x0, y0, x1, y1),
        misfit_mm=misfit,
    )
    note = (
        f"marker mat {layout.name}: {int(inl_markers.sum())} of {len(layout.markers)} markers, "
        f"reprojection RMS {fit.rms_px:.3f} px"
    )
    basis = photo_scale_basis(
        image,
        method="mat",
        fit=fit,
        points_mm=pts_mm,
        printer=printer,
        terms=terms,
        details=details,
        note=note,
        clear_mm=clear_phys,
        lens=tools,
        support_mm=support,
        warnings=warnings,
        sample_sigma_px=fit.sigma_px,
    )
    return replace(basis, detection=det, layout=layout)


#: The self-calibrated lens is used only when it explains at least this share of the misfit
#: (its RMS falls below this fraction of the pinhole fit's).
SELFCAL_GAIN = 0.5


def _self_calibrate(
    image: LoadedImage,
    det: MarkerDetection,
    known: np.ndarray,
    layout: MatLayout,
    fit: HomographyFit,
    pts_px: np.ndarray,
    pts_mm: np.ndarray,
    cell_px: float,
    sides: MarkerSides | None = None,
) -> tuple[LensTools, MarkerDetection, HomographyFit, str] | None:
    """Without a lens profile: radial distortion from the mat's own corners, when the corners bow.

    Returns the lens tools, the markers detected again through the estimated correction,
    the refitted homography and a warning; None when the pinhole fit is good enough or the
    estimate does not explain the misfit. ``sides``: the first detection's sampled marker sides
    (:func:`~scanmass.scale.markers.marker_sides`), refined again here through the lens.
    """
    noise = det.edge_noise_px if math.isfinite(det.edge_noise_px) else 0.1
    if fit.rms_px < max(3.0 * noise, 0.15):
        return None
    sel = fit.inliers if fit.inliers.sum() >= 12 else np.ones(len(pts_px), bool)
    if not _looks_like_distortion(pts_px, pts_mm, fit, principal_point(image)):
        return None
    diag = math.hypot(image.width_px, image.height_px)
    f_px = DEFAULT_FOCAL_35MM / FILM_DIAGONAL_MM * diag
    size = (image.width_px, image.height_px)
    est = estimate_radial_distortion(pts_px, pts_mm, size, f_px, noise_px=noise, corners_per_marker=4)
    if est is None or est.rms_after_px > SELFCAL_GAIN * est.rms_before_px:
        return None
    # the focal length from the perspective of the corrected corners, when the view shows it
    ideal = est.profile.undistort_points(pts_px)
    g, _ = cv2.findHomography(pts_mm[sel], ideal[sel], 0)
    f_view = focal_from_homography(g, principal_point(image)) if g is not None else None
    if f_view is not None and 0.3 * f_px < f_view < 3.0 * f_px:
        again = estimate_radial_distortion(pts_px, pts_mm, size, f_view, noise_px=noise, corners_per_marker=4)
        if again is not None and again.rms_after_px <= est.rms_after_px * 1.05:
            est = again
    tools = LensTools(est.profile, estimated=True)
    det2 = detect_markers(image, dictionary=layout.dictionary, undistort=tools.undistort, sides=sides)
    keep = np.isin(det2.ids, det.ids[known])
    if keep.sum() < MIN_MARKERS:
        return None
    det2 = _subset(det2, keep)
    corners_mm = layout.marker_corners(det2.ids)
    fit2 = fit_homography(det2.corners_px.reshape(-1, 2), corners_mm.reshape(-1, 2), ransac_px=max(2.0, 0.25 * cell_px))
    if fit2 is None:
        return None
    k1, k2 = est.profile.dist_coeffs[:2]
    note = (
        f"lens distortion estimated from the mat's markers (no lens profile): k1 = {k1:.4f} +- {est.k_u[0]:.4f}, "
        f"k2 = {k2:.4f} +- {est.k_u[1]:.4f} for f = {est.profile.camera_matrix[0, 0]:.0f} px about the image centre, "
        f"corner RMS {est.rms_before_px:.2f} -> {est.rms_after_px:.2f} px (with a common corner offset of "
        f"{est.corner_offset_px:+.2f} px); a profile from 'scanmass lens' (--lens) is more accurate"
    )
    return tools, det2, fit2, note


def _subset(det: MarkerDetection, keep: np.ndarray) -> MarkerDetection:
    """The detection restricted to some markers (every per-marker array filtered)."""
    from dataclasses import fields as dc_fields
    from dataclasses import replace

    n = len(det.ids)
    changes = {}
    for f in dc_fields(det):
        value = getattr(det, f.name)
        if isinstance(value, np.ndarray) and value.ndim >= 1 and len(value) == n:
            changes[f.name] = value[keep]
    return replace(det, **changes)


def _check_blur(det: MarkerDetection, known: np.ndarray, path: str | None) -> None:
    """Refuse motion blur: edge widths that differ strongly with the edge's direction."""
    blur = det.edge_blur_px[known]
    normals = det.side_normals[known]
    ok = np.isfinite(blur)
    if ok.sum() < 8:
        return
    b, nrm = blur[ok], normals[ok]
    # edge width along each normal direction: fit b^2 = s0^2 + m^2 (n . v)^2 via a 2x2 tensor
    a = np.column_stack([np.ones(len(b)), nrm[:, 0] ** 2 - nrm[:, 1] ** 2, 2 * nrm[:, 0] * nrm[:, 1]])
    coef, *_ = np.linalg.lstsq(a, b**2, rcond=None)
    aniso = math.hypot(coef[1], coef[2])
    wide = math.sqrt(max(coef[0] + aniso, 0.0))
    narrow = math.sqrt(max(coef[0] - aniso, 0.0))
    if wide > 2.5 and wide > 2.0 * max(narrow, 0.5):
        raise ScaleError(
            f"the photo is smeared in one direction (motion blur: edges {wide:.1f} px wide across it, {narrow:.1f} px "
            "along it); hold the camera still or add light, and take the photo again",
            path=path,
        )
    if narrow > 6.0:
        raise ScaleError(
            f"the photo is out of focus (marker edges about {narrow:.1f} px wide); focus on the mat and take it again",
            path=path,
        )


#: Largest misfit (mm, RMS over the marker corners, beyond their localisation noise) of
#: the homography that is accepted: a flat mat printed by an office printer fits to a few
#: hundredths of a mm; a bend, crease or curl of the paper, or strong lens distortion,
#: shows as more.
MAX_MISFIT_MM = 0.15


def _misfit_mm(fit: HomographyFit, noise_px: float) -> float:
    mm_per_px = fit.rms_mm / fit.rms_px if fit.rms_px > 0 else 0.0
    expected = 3.0 * (noise_px if math.isfinite(noise_px) else 0.0)
    return math.sqrt(max(fit.rms_px**2 - expected**2, 0.0)) * mm_per_px


def _looks_like_distortion(
    pts_px: np.ndarray, pts_mm: np.ndarray, fit: HomographyFit, centre_px: tuple[float, float]
) -> bool:
    """True when one radial term about the image centre explains most of the misfit."""
    sel = fit.inliers
    c = np.asarray(centre_px, dtype=float)
    r2 = np.sum((pts_px - c) ** 2, axis=1)
    scale = float(r2.max()) or 1.0
    best = fit.rms_px
    for lam in np.linspace(-0.3, 0.3, 61):
        corrected = c + (pts_px - c) * (1.0 + lam * r2 / scale)[:, None]
        g, _ = cv2.findHomography(pts_mm[sel], corrected[sel], 0)
        if g is None:
            continue
        res = apply_h(g, pts_mm[sel]) - corrected[sel]
        best = min(best, math.sqrt(float(np.mean(np.sum(res**2, axis=1)))))
    return best < 0.35 * fit.rms_px


def _check_consistency(
    fit: HomographyFit,
    n_markers: int,
    noise_px: float,
    pts_px: np.ndarray,
    pts_mm: np.ndarray,
    centre_px: tuple[float, float],
    path: str | None,
    warnings: list[str],
) -> float:
    """Refuse a bent or creased mat (or strong lens distortion): corners that no homography explains.

    Returns the misfit in mm (RMS beyond the corners' localisation noise).
    """
    outlier_markers = int((~fit.inliers.reshape(-1, 4)).any(axis=1).sum())
    misfit = _misfit_mm(fit, noise_px)
    if outlier_markers > max(1, 0.2 * n_markers) or misfit > MAX_MISFIT_MM:
        what = (
            f"reprojection RMS {fit.rms_px:.2f} px = {fit.rms_mm:.2f} mm, {outlier_markers} of {n_markers} markers off"
        )
        if _looks_like_distortion(pts_px, pts_mm, fit, centre_px):
            raise ScaleError(
                f"the markers bow like a distorting lens ({what}); calibrate the camera with 'scanmass lens PHOTOS...' "
                "and pass --lens PROFILE",
                path=path,
            )
        raise ScaleError(
            f"the markers do not lie on one flat plane ({what}): flatten the mat (no bends, creases or curl) and "
            "take the photo again",
            path=path,
        )
    if outlier_markers:
        warnings.append(
            f"{outlier_markers} marker(s) did not fit the others and were left out (a crease or a dirty marker?)"
        )
    return misfit
