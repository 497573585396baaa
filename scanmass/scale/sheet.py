"""The scale of a photo of a part on a plain sheet of paper (part of the "scale" stage).

:func:`sheet_scale` finds the sheet (the brightest large quadrilateral), locates its four
edges to sub-pixel precision, intersects them for the corners and maps those to the
sheet's nominal size. mm are in the sheet's own frame (origin at a corner, x along its
short side in portrait).
"""

from __future__ import annotations

import math
import os

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError
from scanmass.load.decode import LoadedImage
from scanmass.numeric import combine, otsu_threshold, robust_sigma
from scanmass.scale.camera import PhotoScale, ScaleBasis, lens_tools, photo_scale_basis
from scanmass.scale.edges import Line, fit_line, intersect_lines, side_frame
from scanmass.scale.homography import fit_homography
from scanmass.scale.lens import LensProfile
from scanmass.scale.planemap import PixelCorrection, SheetDetails

__all__ = ["sheet_scale", "sheet_scale_basis", "SHEET_SIZES_MM", "SHEET_TOLERANCE_MM", "SHEET_MARGIN_MM"]

#: Nominal sheet sizes (width, height) in mm, portrait. ISO 216:2007 table 1 (A4, A3);
#: ANSI/ASME Y14.1-2020 table 1 size A (US Letter, 8.5 x 11 in).
SHEET_SIZES_MM = {"a4": (210.0, 297.0), "a3": (297.0, 420.0), "letter": (215.9, 279.4)}
#: Tolerance (+-) of a trimmed sheet's sides, mm. ISO 216: +-1.5 mm up to 150 mm,
#: +-2 mm from 150 to 600 mm (from memory). US Letter: no tolerance in ANSI/ASME Y14.1
#: that we know of; the ISO value is assumed (from memory).
SHEET_TOLERANCE_MM = 2.0
#: Margin of the clear area inside a plain sheet, mm.
SHEET_MARGIN_MM = 8.0


def sheet_scale(
    image: LoadedImage,
    sheet: str,
    *,
    lens: LensProfile | str | os.PathLike | None = None,
    thickness_mm: float | None = None,
    thickness_u_mm: float = 0.0,
) -> PhotoScale:
    """The plane map of a photo of a part on a plain sheet of paper (A4, A3 or Letter).

    The sheet must lie on a darker, contrasting table and show all four corners. Its
    edges are located to sub-pixel precision and fitted with straight lines; their
    intersections are the corners, mapped to the sheet's nominal size. The trimming
    tolerance of the paper standard (:data:`SHEET_TOLERANCE_MM`, taken as a uniform
    distribution, 1 sigma = tolerance / sqrt 3, GUM 4.3.7) enters the uncertainty.

    References
    ----------
    .. [1] ISO 216:2007, Writing paper and certain classes of printed matter --
       Trimmed sizes -- A and B series.
    .. [2] ANSI/ASME Y14.1-2020, Decimal inch drawing sheet size and format.
    .. [3] JCGM 100:2008 (GUM), section 4.3.7 (rectangular distribution).
    """
    return sheet_scale_basis(image, sheet, lens=lens).with_thickness(thickness_mm, thickness_u_mm)


def sheet_scale_basis(
    image: LoadedImage, sheet: str, *, lens: LensProfile | str | os.PathLike | None = None
) -> ScaleBasis:
    """:func:`sheet_scale` before a thickness (its :meth:`~scanmass.scale.camera.ScaleBasis.with_thickness`)."""
    path = image.path
    key = str(sheet).strip().lower()
    if key not in SHEET_SIZES_MM:
        raise OptionError(f"unknown sheet {sheet!r}; choose one of {', '.join(SHEET_SIZES_MM)}", path=path)
    tools = lens_tools(lens, image)
    corners_px, noise_px = _find_sheet(image, tools.undistort)
    w_mm, h_mm = SHEET_SIZES_MM[key]
    # which pair of sides is the long one: the longer pair in the image (valid for tilts
    # below about 40 degrees, where foreshortening cannot swap them)
    side = np.hypot(*(np.roll(corners_px, -1, axis=0) - corners_px).T)
    if side[0] + side[2] > side[1] + side[3]:  # sides 0 and 2 run along the sheet's long edge
        w_mm, h_mm = h_mm, w_mm
    # corners in order: image-lower-left first, then counter-clockwise as seen (y up)
    target = np.array([[0, 0], [w_mm, 0], [w_mm, h_mm], [0, h_mm]], dtype=float)
    fit = fit_homography(corners_px, target, ransac_px=1e9)
    if fit is None:
        raise ScaleError(
            "the sheet's corners do not form a quadrilateral; show the whole sheet flat on a plain table", path=path
        )
    fit.sigma_px = max(noise_px, 0.02)
    rel_tol = SHEET_TOLERANCE_MM / math.sqrt(3.0)

    def size_samples(rng: np.random.Generator) -> np.ndarray:
        sx = 1.0 + rel_tol / w_mm * rng.uniform(-math.sqrt(3), math.sqrt(3))
        sy = 1.0 + rel_tol / h_mm * rng.uniform(-math.sqrt(3), math.sqrt(3))
        return np.diag([sx, sy, 1.0])

    m = SHEET_MARGIN_MM
    clear = (m, m, w_mm - m, h_mm - m)
    details = SheetDetails(
        sheet=key, sheet_mm=(w_mm, h_mm), sheet_tolerance_mm=SHEET_TOLERANCE_MM, corners_px=corners_px
    )
    note = f"plain {key} sheet, {w_mm:g} x {h_mm:g} mm nominal (+-{SHEET_TOLERANCE_MM:g} mm)"
    terms = {"sheet": combine(rel_tol / w_mm, rel_tol / h_mm) / math.sqrt(2)}
    warnings = [
        f"scale from a plain {key} sheet: its trimming tolerance (+-{SHEET_TOLERANCE_MM:g} mm) limits the "
        "accuracy; a printed marker mat ('scanmass mat') does better"
    ]
    return photo_scale_basis(
        image,
        method="sheet",
        fit=fit,
        points_mm=target,
        printer=np.eye(3),
        terms=terms,
        details=details,
        note=note,
        clear_mm=clear,
        lens=tools,
        support_mm=target,
        warnings=warnings,
        sample_sigma_px=fit.sigma_px,
        size_samples=size_samples,
    )


def _find_sheet(image: LoadedImage, undistort: PixelCorrection | None) -> tuple[np.ndarray, float]:
    """Four sub-pixel corners of the brightest large quadrilateral (the sheet), ordered for the sheet frame."""
    path = image.path
    grey = image.grey
    height, width = grey.shape
    factor = max(1, int(math.ceil(max(height, width) / 800)))
    small = cv2.resize(grey, (width // factor, height // factor), interpolation=cv2.INTER_AREA) if factor > 1 else grey
    lin = image.to_linear[small].astype(np.float32)
    t = otsu_threshold(lin)
    mask = (lin > t).astype(np.uint8)
    mask = cv2.morphologyEx(mask, cv2.MORPH_OPEN, np.ones((3, 3), np.uint8))
    contours, _ = cv2.findContours(mask, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
    if not contours:
        raise ScaleError("no sheet of paper found; lay the sheet on a darker plain table and show all of it", path=path)
    biggest = max(contours, key=cv2.contourArea)
    if cv2.contourArea(biggest) < 0.05 * mask.size:
        raise ScaleError(
            "no sheet of paper found (nothing bright and large enough); lay the sheet on a darker plain table",
            path=path,
        )
    hull = cv2.convexHull(biggest)
    quad = None
    peri = cv2.arcLength(hull, True)
    for eps in (0.01, 0.02, 0.03, 0.05):
        approx = cv2.approxPolyDP(hull, eps * peri, True)
        if len(approx) == 4:
            quad = approx.reshape(4, 2).astype(np.float64)
            break
    if quad is None:
        raise ScaleError(
            "the sheet's outline is not a four-cornered shape; show all four corners of the sheet, flat", path=path
        )
    x_touch = (
        (quad[:, 0] <= 1) | (quad[:, 0] >= mask.shape[1] - 2) | (quad[:, 1] <= 1) | (quad[:, 1] >= mask.shape[0] - 2)
    )
    if x_touch.any():
        raise ScaleError("the sheet runs off the photo's edge; show all four corners of the sheet", path=path)
    quad = (quad + 0.5) * factor - 0.5  # low-res pixel centres -> full-res
    # refine each side with sub-pixel edge points, then intersect
    lin_full = image.to_linear
    lines: list[Line] = []
    residuals: list[np.ndarray] = []
    centre = quad.mean(axis=0)
    for k in range(4):
        a, b = quad[k], quad[(k + 1) % 4]
        d, length, n = side_frame(a, b, centre)
        reach = max(4.0, 2.0 * factor + 3.0)
        t_s = np.linspace(0.1, 0.9, int(np.clip(length / 4, 16, 200)))
        offs = np.arange(-reach, reach + 0.125, 0.25)
        base = a[None, :] + t_s[:, None] * d[None, :]
        pts = base[:, None, :] + offs[None, :, None] * n[None, None, :]
        x0, y0 = np.floor(pts.reshape(-1, 2).min(axis=0)).astype(int) - 2
        x1, y1 = np.ceil(pts.reshape(-1, 2).max(axis=0)).astype(int) + 2
        x0, y0 = max(x0, 0), max(y0, 0)
        x1, y1 = min(x1, width - 1), min(y1, height - 1)
        crop = lin_full[grey[y0 : y1 + 1, x0 : x1 + 1]].astype(np.float32)
        prof = cv2.remap(
            crop,
            (pts[..., 0] - x0).astype(np.float32),
            (pts[..., 1] - y0).astype(np.float32),
            cv2.INTER_LINEAR,
            borderMode=cv2.BORDER_REPLICATE,
        ).astype(np.float64)
        g = -np.diff(prof, axis=1)  # bright sheet inside, darker table outside: falls outwards
        mid = 0.5 * (offs[1:] + offs[:-1])
        w = np.clip(g - 0.15 * g.max(axis=1, keepdims=True), 0, None)
        sw = w.sum(axis=1)
        good = sw > 1e-6
        pos = (w * mid).sum(axis=1) / np.where(good, sw, 1)
        edge = (base + pos[:, None] * n)[good]
        if undistort is not None:
            edge = undistort(edge)
        line = fit_line(edge)
        if line is None:
            raise ScaleError(
                "cannot trace the sheet's edges; use a plain table that contrasts with the paper", path=path
            )
        lines.append(line[:2])
        residuals.append(line[2])
    corners = np.array([intersect_lines(lines[(k - 1) % 4], lines[k]) for k in range(4)])
    if any(c is None for c in corners):
        raise ScaleError("the sheet's edges do not meet at four corners; show the whole sheet flat", path=path)
    corners = np.asarray(corners, dtype=float)
    res = np.concatenate(residuals)
    # corner localisation: a line fitted to m points with scatter s has its end positions known to about 2 s / sqrt(m)
    noise = robust_sigma(res, centre=0.0) * 2.0 / math.sqrt(max(len(res) / 4, 1))
    # order: start at the corner lowest-left in the image (largest y - x), go counter-clockwise as seen
    area = 0.5 * np.sum(corners[:, 0] * np.roll(corners[:, 1], -1) - np.roll(corners[:, 0], -1) * corners[:, 1])
    if area > 0:  # positive in y-down pixels = clockwise as seen; reverse to counter-clockwise
        corners = corners[::-1]
    start = int(np.argmax(corners[:, 1] - corners[:, 0]))
    corners = np.roll(corners, -start, axis=0)
    return corners, noise
