"""Rendered phone photos of parts on a scanmass marker mat (or a plain sheet), with known truth.

A pinhole camera (focal length f px, principal point at the image centre, square
pixels) looks at the mat from a chosen tilt, direction, roll and distance. Everything
dark on the mat (marker cells, check bars, corner marks) and every part is a polygon
in mat mm; each is projected into the photo and drawn with its exact pixel coverage
(scanmass.testing.scans.coverage), so straight edges stay exact under perspective. Then, in
linear light: reflectances, uneven light, optional radial distortion (OpenCV's model,
applied by resampling the ideal image), Gaussian blur, noise, sRGB encoding, optional
JPEG. A raised part (thickness h) is drawn as the silhouette of the solid: the union,
in the image, of its bottom face, its top face and its walls (shapely).
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field

import cv2
import numpy as np
import shapely
from polygon_truth import truth  # noqa: F401 - re-exported for the photo tests

from scanmass.scale.mat import MatLayout, mat_dark_rectangles
from scanmass.testing.photos import look_at
from scanmass.testing.scans import coverage, srgb_encode


@dataclass
class Camera:
    k: np.ndarray
    r: np.ndarray  # world (mat) -> camera rotation
    t: np.ndarray
    size: tuple[int, int]  # width, height px
    dist: np.ndarray = field(default_factory=lambda: np.zeros(5))

    def plane_to_px(self, height_mm: float = 0.0) -> np.ndarray:
        g = self.k @ np.column_stack([self.r[:, 0], self.r[:, 1], self.t + height_mm * self.r[:, 2]])
        return g / g[2, 2]

    def project3d(self, pts_mm: np.ndarray) -> np.ndarray:
        """Project (N, 3) points of the mat's frame (z up, towards the camera)."""
        cam = np.asarray(pts_mm, float) @ self.r.T + self.t
        p = cam @ self.k.T
        return p[:, :2] / p[:, 2:3]

    def project(self, pts_mm: np.ndarray, height_mm: float = 0.0) -> np.ndarray:
        g = self.plane_to_px(height_mm)
        p = np.asarray(pts_mm, float).reshape(-1, 2)
        h = p @ g[:, :2].T + g[:, 2]
        return h[:, :2] / h[:, 2:3]


def make_camera(
    *,
    size=(1600, 1200),
    f_px=1500.0,
    target_mm=(105.0, 148.5),
    distance_mm=480.0,
    tilt_deg=0.0,
    tilt_dir_deg=0.0,
    roll_deg=0.0,
    k1=0.0,
    k2=0.0,
) -> Camera:
    """A camera looking at ``target_mm`` on the mat from ``distance_mm`` away, its axis tilted
    ``tilt_deg`` from the mat's normal towards azimuth ``tilt_dir_deg``, rolled by ``roll_deg``."""
    cam = look_at(
        target_mm,
        distance_mm=distance_mm,
        tilt_deg=tilt_deg,
        tilt_dir_deg=tilt_dir_deg,
        roll_deg=roll_deg,
        f_px=f_px,
        size_px=size,
    )
    return Camera(k=cam.k, r=cam.r, t=cam.t, size=size, dist=np.array([k1, k2, 0, 0, 0], float))


def _to_scan_frame(ring_px: np.ndarray, height_px: int) -> np.ndarray:
    """OpenCV pixel coordinates (centres at integers, y down) -> synth's frame (1 px units, y up)."""
    return np.column_stack([ring_px[:, 0] + 0.5, height_px - (ring_px[:, 1] + 0.5)])


def _signed_area(r: np.ndarray) -> float:
    return 0.5 * float(np.dot(r[:, 0], np.roll(r[:, 1], -1)) - np.dot(np.roll(r[:, 0], -1), r[:, 1]))


def _oriented(ring: np.ndarray, positive: bool) -> np.ndarray:
    return ring if (_signed_area(ring) > 0) == positive else ring[::-1]


def polygon_coverage(polys_px: list[tuple[np.ndarray, list[np.ndarray]]], shape: tuple[int, int]) -> np.ndarray:
    """Exact coverage of polygons (outer, holes) given in photo pixels."""
    rings = []
    for outer, holes in polys_px:
        rings.append(_oriented(_to_scan_frame(outer, shape[0]), True))
        rings += [_oriented(_to_scan_frame(h, shape[0]), False) for h in holes]
    if not rings:
        return np.zeros(shape)
    return coverage(rings, shape=shape, mm_per_px=1.0)


def solid_silhouette_px(cam: Camera, outer_mm: np.ndarray, holes_mm: list[np.ndarray], height_mm: float):
    """The image outline of a prism (a plate of thickness ``height_mm`` on the mat): shapely geometry."""
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


@dataclass
class PhotoParts:
    outer_mm: np.ndarray
    holes_mm: list[np.ndarray] = field(default_factory=list)
    level: float = 0.06
    height_mm: float = 0.0


def render_photo(
    layout: MatLayout | None,
    parts: list[PhotoParts],
    cam: Camera,
    *,
    paper=0.85,
    ink=0.03,
    table=0.12,
    blur_px=1.0,
    noise=0.006,
    light=(0.1, -0.08),
    seed=0,
    jpeg_quality: int | None = None,
    sheet_mm: tuple[float, float] | None = None,
    motion_px: float = 0.0,
    hide_ids=(),
    print_scale=(1.0, 1.0),
    bend_mm: float = 0.0,
) -> np.ndarray:
    """The photo as an 8-bit sRGB grey image (or JPEG bytes decoded back when ``jpeg_quality``).

    ``hide_ids``: markers covered up (not drawn); ``print_scale``: the printer's x and y
    scale of everything printed (about the page origin); ``bend_mm``: the mat arches up by
    this much in the middle along x (a sine bump), so its print leaves the plane.
    """
    w, h = cam.size
    shape = (h, w)
    page_mm = layout.page_mm if layout is not None else sheet_mm
    page = np.array([[0, 0], [page_mm[0], 0], [page_mm[0], page_mm[1]], [0, page_mm[1]]], float)
    refl = np.full(shape, table)
    refl += (paper - table) * polygon_coverage([(cam.project(page), [])], shape)
    if layout is not None:
        hidden = [shapely.Polygon(m.corners_mm) for m in layout.markers if m.id in set(hide_ids)]
        rects = []
        for r in mat_dark_rectangles(layout):
            if any(hp.contains(shapely.Point(r.mean(axis=0))) for hp in hidden):
                continue
            r = r * np.asarray(print_scale, float)
            if bend_mm:
                z = bend_mm * np.sin(np.pi * np.clip(r[:, 0] / page_mm[0], 0, 1))
                rects.append((cam.project3d(np.column_stack([r, z])), []))
            else:
                rects.append((cam.project(r), []))
        refl += (ink - paper) * polygon_coverage(rects, shape)
    for part in parts:
        if part.height_mm > 0:
            polys = solid_silhouette_px(cam, part.outer_mm, part.holes_mm, part.height_mm)
        else:
            polys = [(cam.project(part.outer_mm), [cam.project(r) for r in part.holes_mm])]
        refl += (part.level - paper) * polygon_coverage(polys, shape)
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
    lin = np.clip(lin + rng.normal(0.0, noise, shape), 0.0, 1.0)
    img = np.rint(srgb_encode(lin) * 255).astype(np.uint8)
    if jpeg_quality is not None:
        from PIL import Image

        bio = io.BytesIO()
        Image.fromarray(img).save(bio, format="JPEG", quality=jpeg_quality)
        img = np.asarray(Image.open(io.BytesIO(bio.getvalue())).convert("L"))
    return img
