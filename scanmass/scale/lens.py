"""Camera lens profiles: calibration from photos of a marker mat, save/load, point correction.

A :class:`LensProfile` holds a pinhole camera matrix and radial distortion
coefficients (OpenCV's model). scanmass never resamples a photo to remove the
distortion: it corrects only the points it measures -- marker edge points and part
boundary vertices -- with :meth:`LensProfile.undistort_points`.
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import cast

import cv2
import numpy as np

from scanmass.errors import OptionError, ScaleError
from scanmass.load.decode import DEFAULT_MAX_PIXELS, load_image
from scanmass.readfile import MAX_JSON_BYTES, read_regular_text
from scanmass.scale.markers import MIN_MARKERS, detect_markers, expected_quads, found_markers, marker_sides
from scanmass.scale.mat import calibration_dir, layout_for_ids, load_layout
from scanmass.scale.planemap import PixelCorrection

__all__ = [
    "LensProfile",
    "LENS_SCHEMA",
    "calibrate_lens",
    "default_profile_path",
    "load_lens_profile",
    "MIN_LENS_PHOTOS",
]

#: Identifier of the lens profile JSON document.
LENS_SCHEMA = "scanmass.lens/1"
#: Fewest photos :func:`calibrate_lens` accepts.
MIN_LENS_PHOTOS = 5


@dataclass
class LensProfile:
    """A calibrated camera: intrinsics and distortion for one image size.

    Attributes
    ----------
    camera_matrix : (3, 3) ndarray
        ``[[fx, 0, cx], [0, fy, cy], [0, 0, 1]]`` in px (OpenCV pixel-centre convention).
    dist_coeffs : (5,) ndarray
        ``k1, k2, p1, p2, k3`` (OpenCV's order).
    image_size : (int, int)
        Width and height of the photos it was made from, px.
    rms_px : float
        Reprojection RMS of the calibration.
    photos : int
        Number of photos used.
    source : str or None
        File the profile was read from.
    """

    camera_matrix: np.ndarray
    dist_coeffs: np.ndarray
    image_size: tuple[int, int]
    rms_px: float
    photos: int = 0
    points: int = 0
    source: str | None = None

    def undistort_points(self, points_px: np.ndarray) -> np.ndarray:
        """Distorted photo pixels -> pixels of the ideal pinhole image with the same camera matrix."""
        pts = np.asarray(points_px, dtype=np.float64).reshape(-1, 1, 2)
        if len(pts) == 0:
            return pts.reshape(0, 2)
        out = cv2.undistortPoints(
            pts,
            self.camera_matrix,
            self.dist_coeffs,
            None,
            None,
            self.camera_matrix,
            (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 40, 1e-10),
        )
        return out.reshape(-1, 2)

    def distort_points(self, points_px: np.ndarray) -> np.ndarray:
        """Ideal pinhole pixels -> distorted photo pixels (the inverse of :meth:`undistort_points`)."""
        pts = np.asarray(points_px, dtype=np.float64).reshape(-1, 2)
        k = self.camera_matrix
        norm = np.column_stack([(pts[:, 0] - k[0, 2]) / k[0, 0], (pts[:, 1] - k[1, 2]) / k[1, 1], np.ones(len(pts))])
        out, _ = cv2.projectPoints(norm.reshape(-1, 1, 3), np.zeros(3), np.zeros(3), k, self.dist_coeffs)
        return out.reshape(-1, 2)

    def check_image(self, width_px: int, height_px: int, *, path: str | None = None) -> None:
        """Refuse a photo whose size differs from the calibration's."""
        if (int(width_px), int(height_px)) != tuple(self.image_size):
            raise OptionError(
                f"the lens profile was made for {self.image_size[0]} x {self.image_size[1]} px photos, this one is "
                f"{width_px} x {height_px} px; use the camera's full-size photos in the same orientation, or "
                "calibrate for this size with 'scanmass lens'",
                path=path,
            )

    def to_dict(self) -> dict:
        """The profile as a JSON-ready dictionary."""
        return {
            "schema": LENS_SCHEMA,
            "image_size_px": list(self.image_size),
            "camera_matrix_px": self.camera_matrix.tolist(),
            "dist_coeffs": {
                "k1": float(self.dist_coeffs[0]),
                "k2": float(self.dist_coeffs[1]),
                "p1": float(self.dist_coeffs[2]),
                "p2": float(self.dist_coeffs[3]),
                "k3": float(self.dist_coeffs[4]),
            },
            "rms_px": self.rms_px,
            "photos": self.photos,
            "points": self.points,
            "model": "OpenCV pinhole with radial (k1, k2, k3) and tangential (p1, p2) distortion",
        }


def load_lens_profile(path: str | os.PathLike) -> LensProfile:
    """Read a lens profile JSON written by :func:`save_lens_profile`."""
    p = Path(os.fspath(path))
    if not p.exists() and not p.is_symlink():
        raise OptionError("lens profile not found; make one with 'scanmass lens PHOTOS...'", path=str(p))
    # a regular file only (a FIFO or device would hang or never end), of a bounded size
    text = read_regular_text(
        p, error=OptionError, what="lens profile", fix="give the JSON from 'scanmass lens'", max_bytes=MAX_JSON_BYTES
    )
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise OptionError(
            f"cannot read the lens profile ({exc}); make it again with 'scanmass lens'", path=str(p)
        ) from None
    if not isinstance(data, dict) or data.get("schema") != LENS_SCHEMA:
        raise OptionError(
            f"not a scanmass lens profile (schema {LENS_SCHEMA!r} expected); make one with 'scanmass lens'", path=str(p)
        )
    try:
        d = data["dist_coeffs"]
        profile = LensProfile(
            camera_matrix=np.asarray(data["camera_matrix_px"], dtype=float).reshape(3, 3),
            dist_coeffs=np.array([d["k1"], d["k2"], d["p1"], d["p2"], d["k3"]], dtype=float),
            image_size=cast(tuple[int, int], tuple(int(v) for v in data["image_size_px"])),
            rms_px=float(data["rms_px"]),
            photos=int(data.get("photos", 0)),
            points=int(data.get("points", 0)),
            source=str(p),
        )
    except (KeyError, TypeError, ValueError) as exc:
        raise OptionError(
            f"lens profile is incomplete ({exc}); make it again with 'scanmass lens'", path=str(p)
        ) from None
    return profile


def calibrate_lens(
    photos: Sequence[str | os.PathLike | np.ndarray], *, mat=None, max_pixels: int | None = None
) -> LensProfile:
    """Calibrate a camera from 5 or more photos of a scanmass marker mat.

    The photos should show the whole mat flat, from different directions and tilts
    (10-40 degrees), filling most of the frame, all at the camera's full size and in
    the same orientation. The marker corners (refined as for measuring) and their
    printed positions go to OpenCV's calibrateCamera; tangential distortion and k3
    are held at zero, which suits phone lenses and keeps the fit stable. Corners are
    refined a second time with the first estimate's lens correction.

    Returns
    -------
    LensProfile

    Raises
    ------
    ScaleError
        Too few photos, a photo without enough markers, or photos of different sizes.

    References
    ----------
    .. [1] Z. Zhang, "A flexible new technique for camera calibration", IEEE Trans.
       PAMI 22(11), 1330-1334, 2000.
    .. [2] OpenCV ``cv::calibrateCamera`` documentation (camera model and flags).
    """
    photos = list(photos)
    if len(photos) < MIN_LENS_PHOTOS:
        raise ScaleError(
            f"lens calibration needs at least {MIN_LENS_PHOTOS} photos of the mat from different angles; got {len(photos)}"
        )
    images = [load_image(p, max_pixels=max_pixels or DEFAULT_MAX_PIXELS) for p in photos]
    sizes = {(im.width_px, im.height_px) for im in images}
    if len(sizes) > 1:
        raise ScaleError(
            f"the photos have different sizes ({', '.join(f'{w}x{h}' for w, h in sorted(sizes))}); use full-size photos in one orientation"
        )
    size = sizes.pop()
    layout = load_layout(mat) if mat is not None else None

    # the detector's markers of each photo, searched and their sides sampled once (the line fits run per correction)
    sampled = [
        marker_sides(im, found_markers(im, expected=lambda ids, quads: expected_quads(layout, ids, quads)))
        for im in images
    ]

    def correspondences(
        undistort: PixelCorrection | None = None, distort: PixelCorrection | None = None
    ) -> tuple[list[np.ndarray], list[np.ndarray]]:
        objs, imgs = [], []
        for im, sides in zip(images, sampled):
            det = detect_markers(im, undistort=undistort, sides=sides)
            lay = layout or (layout_for_ids(det.ids, path=im.path) if len(det.ids) else None)
            keep = np.isin(det.ids, lay.ids) if lay is not None else np.zeros(0, bool)
            if lay is None or keep.sum() < MIN_MARKERS:
                raise ScaleError(
                    f"fewer than {MIN_MARKERS} mat markers found; show the whole mat, sharp and well lit", path=im.path
                )
            mm = lay.marker_corners(det.ids[keep]).reshape(-1, 2)
            px = det.corners_px[keep].reshape(-1, 2)
            if distort is not None:  # back to the distorted photo: calibrateCamera models the distortion
                px = distort(px)
            objs.append(np.column_stack([mm, np.zeros(len(mm))]).astype(np.float32).reshape(-1, 1, 3))
            imgs.append(px.astype(np.float32).reshape(-1, 1, 2))
        return objs, imgs

    flags = cv2.CALIB_ZERO_TANGENT_DIST | cv2.CALIB_FIX_K3
    criteria = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 200, 1e-12)
    objs, imgs = correspondences()
    profile_now: LensProfile | None = None
    for round_ in range(2):
        rms, k, dist, _, _ = cv2.calibrateCamera(objs, imgs, size, None, None, flags=flags, criteria=criteria)
        profile_now = LensProfile(
            camera_matrix=k,
            dist_coeffs=np.asarray(dist, dtype=float).ravel()[:5],
            image_size=size,
            rms_px=float(rms),
            photos=len(images),
            points=int(sum(len(o) for o in objs)),
        )
        if round_ == 0:
            objs, imgs = correspondences(profile_now.undistort_points, profile_now.distort_points)
    assert profile_now is not None
    if not math.isfinite(profile_now.rms_px) or profile_now.rms_px > 2.0:
        raise ScaleError(
            f"lens calibration did not converge (RMS {profile_now.rms_px:.2f} px); take sharper photos of the flat mat "
            "from more varied angles"
        )
    return profile_now


def default_profile_path(profile: LensProfile) -> Path:
    """calibration/lens-WxH.json in a checkout, else lens-WxH.json in the current folder."""
    name = f"lens-{profile.image_size[0]}x{profile.image_size[1]}.json"
    folder = calibration_dir()
    return (folder / name) if folder is not None else Path(name)
