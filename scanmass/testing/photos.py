"""Synthetic phone photos of flat parts on a marker mat or a plain sheet, with known truth.

A pinhole camera (square pixels, principal point at the image centre, optional radial
distortion) looks at the mat; every printed dark area and every part is a polygon in
mat mm, projected into the photo and drawn with its exact pixel coverage
(:func:`scanmass.raster.coverage`), so straight edges stay exact under perspective.
Then, in linear light: reflectances, uneven light, optional lens distortion (OpenCV's
model, applied by resampling the ideal image), Gaussian blur, optional motion blur,
noise, sRGB encoding, optional JPEG.

Two entry points share all of that:

- :func:`render_photo` (tests and benchmarks): parts of their own grey level and
  thickness, a plain sheet instead of a mat, covered markers, a bent mat, a printer's
  scale error, lens distortion. A raised part is drawn as the silhouette of the solid --
  the union of its two faces and its walls in the image -- which needs shapely (a test
  dependency).
- :func:`render_mat_photo` (the demo): one grey level for all parts; a raised plate must
  be convex with convex holes, whose outline is then the convex hull of its bottom and
  top faces, and each hole's opening the intersection of the hole's two ends.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import cv2
import numpy as np

from scanmass.geometry import point_in_ring
from scanmass.raster import coverage, srgb_encode
from scanmass.scale.mat import MatLayout, mat_dark_rectangles

__all__ = [
    "PinholeCamera",
    "PhotoParts",
    "look_at",
    "make_camera",
    "polygon_coverage",
    "solid_silhouette_px",
    "render_photo",
    "render_mat_photo",
]

Polygons = Sequence[tuple[np.ndarray, Sequence[np.ndarray]]]


@dataclass(frozen=True)
class PinholeCamera:
    """Camera matrix ``k``, pose (rotation ``r`` mat -> camera, translation ``t``), size and distortion.

    ``dist`` holds OpenCV's ``k1, k2, p1, p2, k3``; all zero for an ideal pinhole.
    """

    k: np.ndarray
    r: np.ndarray
    t: np.ndarray
    size_px: tuple[int, int]
    dist: np.ndarray = field(default_factory=lambda: np.zeros(5))

    def plane_to_px(self, height_mm: float = 0.0) -> np.ndarray:
        """Homography mat mm -> px of the plane z = height_mm: K [r1 r2 (t + h r3)]."""
        g = self.k @ np.column_stack([self.r[:, 0], self.r[:, 1], self.t + height_mm * self.r[:, 2]])
        return g / g[2, 2]

    def project(self, points_mm: np.ndarray, height_mm: float = 0.0) -> np.ndarray:
        """Ideal pixels of (N, 2) points of the plane z = height_mm."""
        g = self.plane_to_px(height_mm)
        p = np.asarray(points_mm, float).reshape(-1, 2) @ g[:, :2].T + g[:, 2]
        return p[:, :2] / p[:, 2:3]

    def project3d(self, points_mm: np.ndarray) -> np.ndarray:
        """Ideal pixels of (N, 3) points of the mat's frame (z up, towards the camera)."""
        cam = np.asarray(points_mm, float) @ self.r.T + self.t
        p = cam @ self.k.T
        return p[:, :2] / p[:, 2:3]


def look_at(
    target_mm: tuple[float, float],
    *,
    distance_mm: float,
    tilt_deg: float,
    tilt_dir_deg: float,
    roll_deg: float,
    f_px: float,
    size_px: tuple[int, int],
) -> PinholeCamera:
    """A camera ``distance_mm`` from ``target_mm``, tilted ``tilt_deg`` from the mat's normal."""
    w, h = size_px
    k = np.array([[f_px, 0, (w - 1) / 2], [0, f_px, (h - 1) / 2], [0, 0, 1.0]])
    a, b = math.radians(tilt_deg), math.radians(tilt_dir_deg)
    target = np.array([target_mm[0], target_mm[1], 0.0])
    centre = target + distance_mm * np.array([math.sin(a) * math.cos(b), math.sin(a) * math.sin(b), math.cos(a)])
    z_c = (target - centre) / distance_mm
    x_c = np.cross(z_c, [0.0, 1.0, 0.0])
    x_c /= np.linalg.norm(x_c)
    y_c = np.cross(z_c, x_c)
    c, s = math.cos(math.radians(roll_deg)), math.sin(math.radians(roll_deg))
    r = np.vstack([c * x_c + s * y_c, -s * x_c + c * y_c, z_c])
    return PinholeCamera(k=k, r=r, t=-r @ centre, size_px=(int(w), int(h)))


def make_camera(
    *,
    size: tuple[int, int] = (1600, 1200),
    f_px: float = 1500.0,
    target_mm: tuple[float, float] = (105.0, 148.5),
    distance_mm: float = 480.0,
    tilt_deg: float = 0.0,
    tilt_dir_deg: float = 0.0,
    roll_deg: float = 0.0,
    k1: float = 0.0,
    k2: float = 0.0,
) -> PinholeCamera:
    """A phone-like camera looking at ``target_mm`` on an A4 mat, with radial distortion ``k1``, ``k2``."""
    cam = look_at(
        target_mm,
        distance_mm=distance_mm,
        tilt_deg=tilt_deg,
        tilt_dir_deg=tilt_dir_deg,
        roll_deg=roll_deg,
        f_px=f_px,
        size_px=size,
    )
    return PinholeCamera(k=cam.k, r=cam.r, t=cam.t, size_px=cam.size_px, dist=np.array([k1, k2, 0, 0, 0], float))


@dataclass
class PhotoParts:
    """A part on the mat: rings in mat mm, its linear-light grey level and its thickness."""

    outer_mm: np.ndarray
    holes_mm: list[np.ndarray] = field(default_factory=list)
    level: float = 0.06
    height_mm: float = 0.0


def _scan_frame(ring_px: np.ndarray, height_px: int, positive: bool) -> np.ndarray:
    """OpenCV pixel coordinates (centres at integers, y down) -> the raster frame (1 px units, y up), oriented."""
    ring = np.column_stack([ring_px[:, 0] + 0.5, height_px - (ring_px[:, 1] + 0.5)])
    area = float(np.dot(ring[:, 0], np.roll(ring[:, 1], -1)) - np.dot(np.roll(ring[:, 0], -1), ring[:, 1]))
    return ring if (area > 0) == positive else ring[::-1]


def polygon_coverage(polys_px: Polygons, shape: tuple[int, int]) -> np.ndarray:
    """Exact coverage of polygons (outer, holes) given in photo pixels."""
    rings = []
    for outer, holes in polys_px:
        rings.append(_scan_frame(outer, shape[0], True))
        rings += [_scan_frame(h, shape[0], False) for h in holes]
    return coverage(rings, shape=shape, mm_per_px=1.0) if rings else np.zeros(shape)


def solid_silhouette_px(
    cam: PinholeCamera, outer_mm: np.ndarray, holes_mm: Sequence[np.ndarray], height_mm: float
) -> list[tuple[np.ndarray, list[np.ndarray]]]:
    """The image outline of a prism (a plate of thickness ``height_mm`` on the mat), any shape.

    The union (shapely, a test dependency) of its bottom and top faces and its walls.
    """
    import shapely  # test dependency: only raised parts of any shape need it

    faces = []
    for h in (0.0, height_mm):
        faces.append(shapely.Polygon(cam.project(outer_mm, h), [cam.project(r, h) for r in holes_mm]))
    walls = []
    for ring in [outer_mm] + list(holes_mm):
        b = cam.project(ring, 0.0)
        t = cam.project(ring, height_mm)
        for i in range(len(ring)):
            j = (i + 1) % len(ring)
            q = shapely.Polygon([b[i], b[j], t[j], t[i]])
            if q.is_valid and q.area > 0:
                walls.append(q)
    geom = shapely.union_all(faces + walls)
    out = []
    for poly in getattr(geom, "geoms", [geom]):
        out.append((np.asarray(poly.exterior.coords)[:-1], [np.asarray(r.coords)[:-1] for r in poly.interiors]))
    return out


def _convex_raised(
    cam: PinholeCamera, outer: np.ndarray, holes: Sequence[np.ndarray], height_mm: float
) -> tuple[np.ndarray, list[np.ndarray]]:
    """Photo outline of a convex plate with convex holes standing ``height_mm`` high."""
    both = np.concatenate([cam.project(outer), cam.project(outer, height_mm)]).astype(np.float32)
    hull = cv2.convexHull(both).reshape(-1, 2).astype(float)
    openings = []
    for hole in holes:
        a = cv2.convexHull(cam.project(hole).astype(np.float32))
        b = cv2.convexHull(cam.project(hole, height_mm).astype(np.float32))
        area, inter = cv2.intersectConvexConvex(a, b)
        if area > 0 and inter is not None:
            openings.append(inter.reshape(-1, 2).astype(float))
    return hull, openings


def _printed(
    cam: PinholeCamera,
    shape: tuple[int, int],
    layout: MatLayout | None,
    sheet_mm: tuple[float, float] | None,
    *,
    paper: float,
    ink: float,
    table: float,
    print_scale: tuple[float, float] = (1.0, 1.0),
    hide_ids: Sequence[int] = (),
    bend_mm: float = 0.0,
) -> np.ndarray:
    """Reflectance of the table, the page and what is printed on it (a mat's dark areas)."""
    page_mm = layout.page_mm if layout is not None else sheet_mm
    if page_mm is None:
        raise ValueError("give a mat layout or the sheet's size")
    page = np.array([[0, 0], [page_mm[0], 0], [page_mm[0], page_mm[1]], [0, page_mm[1]]], float)
    refl: np.ndarray = np.full(shape, table)
    refl += (paper - table) * polygon_coverage([(cam.project(page), [])], shape)
    if layout is not None:
        hidden = [m.corners_mm for m in layout.markers if m.id in set(hide_ids)]
        rects: list[tuple[np.ndarray, Sequence[np.ndarray]]] = []
        for r in mat_dark_rectangles(layout):
            if any(point_in_ring(r.mean(axis=0), ring) for ring in hidden):
                continue
            r = r * np.asarray(print_scale, float)
            if bend_mm:
                z = bend_mm * np.sin(np.pi * np.clip(r[:, 0] / page_mm[0], 0, 1))
                rects.append((cam.project3d(np.column_stack([r, z])), []))
            else:
                rects.append((cam.project(r), []))
        refl += (ink - paper) * polygon_coverage(rects, shape)
    return refl


def _expose(
    refl: np.ndarray,
    cam: PinholeCamera,
    *,
    light: tuple[float, float],
    blur_px: float,
    noise: float,
    seed: int,
    motion_px: float = 0.0,
    jpeg_quality: int | None = None,
) -> np.ndarray:
    """Light, lens distortion, blur, noise, sRGB encoding (and JPEG) of a reflectance image."""
    h, w = refl.shape
    yy, xx = np.mgrid[0:h, 0:w]
    field_ = 1.0 + light[0] * (xx / w - 0.5) + light[1] * (yy / h - 0.5)
    lin = refl * field_
    if np.any(cam.dist != 0):
        pts = np.column_stack([xx.ravel(), yy.ravel()]).astype(np.float64).reshape(-1, 1, 2)
        ideal = cv2.undistortPoints(
            pts, cam.k, cam.dist, None, None, cam.k, (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 30, 1e-9)
        ).reshape(h, w, 2)
        lin = cv2.remap(
            lin.astype(np.float32),
            ideal[..., 0].astype(np.float32),
            ideal[..., 1].astype(np.float32),
            cv2.INTER_CUBIC,
            borderMode=cv2.BORDER_REPLICATE,
        ).astype(np.float64)
    if blur_px > 0:
        lin = cv2.GaussianBlur(lin, (0, 0), blur_px)
    if motion_px > 0:
        n = int(math.ceil(motion_px))
        kernel = np.zeros((1, 2 * n + 1))
        kernel[0, n - int(motion_px // 2) : n + int(motion_px // 2) + 1] = 1.0
        lin = cv2.filter2D(lin, -1, kernel / kernel.sum())
    rng = np.random.default_rng(seed)
    lin = np.clip(lin + rng.normal(0.0, noise, (h, w)), 0.0, 1.0)
    img = np.rint(srgb_encode(lin) * 255.0).astype(np.uint8)
    if jpeg_quality is not None:
        from PIL import Image

        bio = io.BytesIO()
        Image.fromarray(img).save(bio, format="JPEG", quality=jpeg_quality)
        img = np.asarray(Image.open(io.BytesIO(bio.getvalue())).convert("L"))
    return img


def render_photo(
    layout: MatLayout | None,
    parts: Sequence[PhotoParts],
    cam: PinholeCamera,
    *,
    paper: float = 0.85,
    ink: float = 0.03,
    table: float = 0.12,
    blur_px: float = 1.0,
    noise: float = 0.006,
    light: tuple[float, float] = (0.1, -0.08),
    seed: int = 0,
    jpeg_quality: int | None = None,
    sheet_mm: tuple[float, float] | None = None,
    motion_px: float = 0.0,
    hide_ids: Sequence[int] = (),
    print_scale: tuple[float, float] = (1.0, 1.0),
    bend_mm: float = 0.0,
) -> np.ndarray:
    """The photo as an 8-bit sRGB grey image (JPEG-decoded when ``jpeg_quality`` is given).

    ``layout`` None with ``sheet_mm``: a plain sheet of that size. ``hide_ids``: markers
    covered up (not drawn); ``print_scale``: the printer's x and y scale of everything
    printed (about the page origin); ``bend_mm``: the mat arches up by this much in the
    middle along x (a sine bump), so its print leaves the plane. A part with
    ``height_mm`` > 0 is drawn as the solid's silhouette (:func:`solid_silhouette_px`).
    """
    w, h = cam.size_px
    shape = (h, w)
    refl = _printed(
        cam,
        shape,
        layout,
        sheet_mm,
        paper=paper,
        ink=ink,
        table=table,
        print_scale=print_scale,
        hide_ids=hide_ids,
        bend_mm=bend_mm,
    )
    for part in parts:
        if part.height_mm > 0:
            polys = solid_silhouette_px(cam, part.outer_mm, part.holes_mm, part.height_mm)
        else:
            polys = [(cam.project(part.outer_mm), [cam.project(r) for r in part.holes_mm])]
        refl += (part.level - paper) * polygon_coverage(polys, shape)
    return _expose(
        refl, cam, light=light, blur_px=blur_px, noise=noise, seed=seed, motion_px=motion_px, jpeg_quality=jpeg_quality
    )


def render_mat_photo(
    layout: MatLayout,
    parts: Sequence[tuple[np.ndarray, list[np.ndarray]]],
    cam: PinholeCamera,
    *,
    height_mm: float = 0.0,
    print_scale: tuple[float, float] = (1.0, 1.0),
    paper: float = 0.85,
    ink: float = 0.03,
    table: float = 0.2,
    part_level: float = 0.09,
    blur_px: float = 1.0,
    noise: float = 0.006,
    light: tuple[float, float] = (0.12, -0.1),
    seed: int = 0,
) -> np.ndarray:
    """Render a photo (8-bit sRGB grey) of parts of one grey level lying on a printed mat.

    ``print_scale`` stretches everything printed (a printer's x and y scale errors);
    parts are given in true mm. With ``height_mm`` > 0, parts must be convex with convex
    holes (see the module docstring).
    """
    w, h = cam.size_px
    shape = (h, w)
    refl = _printed(cam, shape, layout, None, paper=paper, ink=ink, table=table, print_scale=print_scale)
    polys: list[tuple[np.ndarray, Sequence[np.ndarray]]] = []
    for outer, holes in parts:
        if height_mm > 0:
            polys.append(
                _convex_raised(cam, np.asarray(outer, float), [np.asarray(x, float) for x in holes], height_mm)
            )
        else:
            polys.append((cam.project(outer), [cam.project(x) for x in holes]))
    refl += (part_level - paper) * polygon_coverage(polys, shape)
    return _expose(refl, cam, light=light, blur_px=blur_px, noise=noise, seed=seed)
