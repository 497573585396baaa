"""A region's texture at the finest scale: how grainy and how directional it is, against the paper's.

Part of the segment stage (:mod:`scanmass.segment`). A cast shadow is the paper in less light: its
texture is the paper's (matte, smooth, isotropic at a part's scale), scaled by the light, so on log
luma (where a change of light is an offset) it keeps the paper's fine-scale energy. A metal face,
brushed or not, varies from pixel to pixel as it mirrors its surroundings through its grain (and, in a
path-traced render, through the glossy reflection's sampling noise), whatever its mean level.

Two measures over a region's interior (pixels more than :data:`EDGE_PX` from its outline, so the
edge's own step is not counted):

- ``fine``: the robust spread of log luma less its Gaussian smoothing at :data:`FINE_SIGMA_PX`
  (a band-pass of the finest scales), over the same spread on the paper around the region;
- ``coherence``: the structure tensor's coherence over the region, ``(l1 - l2) / (l1 + l2)`` of the
  eigenvalues of the region's summed gradient outer products (1 for straight parallel streaks, near 0
  for isotropic texture or noise), read on the fine detail;
- ``local_coherence``: the median over the region of the same coherence with the tensor integrated
  over a Gaussian window of :data:`LOCAL_RHO_PX` (a grain whose direction turns along a curved part
  stays coherent locally).

Measured on the tuned renders (``python -m benchmarks.probe_grain``, docs/benchmark-history.md, branch
grain31) none of the three tells a lit steel face from a cast shadow on paper there: the renders' brushed
steel has an anisotropic reflection but no grain texture, and their paper in shade is as grainy as the
steel at the same level (the path tracer's sampling noise, largest where the light is indirect). No rule
of the pipeline uses these measures; they are kept for the probe and for a rule on scenes with a real grain.

References
----------
J. Bigun and G. H. Granlund, "Optimal orientation detection of linear symmetry", Proc. 1st ICCV,
1987, pp. 433-438 (the structure tensor); B. Jaehne, Digital Image Processing, 6th ed., Springer
2005, section 13.3 (coherence as ``(l1 - l2) / (l1 + l2)``).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.numeric import robust_sigma

__all__ = [
    "GrainTexture",
    "grain_texture",
    "tensor_coherence",
    "local_coherence",
    "fine_spread",
    "EDGE_PX",
    "FINE_SIGMA_PX",
    "LOCAL_RHO_PX",
]

#: Gaussian scale (px) below which the texture is read: the finest scales, above the demosaic's and JPEG's
#: 8x8 blocks' correlation of a pixel or two (common practice for a difference-of-Gaussians detail layer).
FINE_SIGMA_PX = 1.5
#: Pixels nearer the region's outline than this are left out (an edge's blur and the step itself span
#: 2-3 px on the renders; twice that keeps the step's gradient out).
EDGE_PX = 5
#: Gaussian integration scale (px) of the local structure tensor (:func:`local_coherence`): a few times the
#: derivative's 3x3 support, the usual choice for orientation estimates (common practice; value from memory).
LOCAL_RHO_PX = 3.0
#: Least interior pixels to read a texture from.
MIN_PIXELS = 200
#: Floor (linear level) under log luma: the darkest reflection's level is not read below it.
_LOG_FLOOR = 1e-3


@dataclass(frozen=True)
class GrainTexture:
    """A region's fine texture.

    Attributes
    ----------
    fine : float
        Robust spread of the region's fine detail on log luma over the paper's (1: the paper's texture).
    coherence : float
        Structure-tensor coherence of the region's interior, 0-1.
    local_coherence : float
        Median of the local structure tensor's coherence over the interior, 0-1.
    pixels : int
        Interior pixels read.
    """

    fine: float
    coherence: float
    local_coherence: float
    pixels: int


def _detail(log_luma: np.ndarray) -> np.ndarray:
    """Log luma less its Gaussian smoothing at :data:`FINE_SIGMA_PX`."""
    return log_luma - cv2.GaussianBlur(log_luma, (0, 0), FINE_SIGMA_PX)


def fine_spread(log_luma: np.ndarray, where: np.ndarray) -> float:
    """Robust spread (the MAD's normal sigma) of the fine detail of ``log_luma`` over ``where``."""
    if int(where.sum()) < MIN_PIXELS:
        return float("nan")
    return robust_sigma(_detail(log_luma)[where], 0.0)


def tensor_coherence(img: np.ndarray, where: np.ndarray) -> float:
    """Coherence ``(l1 - l2) / (l1 + l2)`` of the structure tensor summed over ``where``.

    The tensor is the sum of ``g g^T`` over the pixels, ``g`` the image's gradient by central
    differences (3x3 Sobel). A pure grating has every gradient along one axis: l2 = 0, coherence 1.
    Isotropic noise has equal eigenvalues in expectation: coherence near 0 (of order 1/sqrt(n)).
    """
    img = np.asarray(img, np.float32)
    gx = cv2.Sobel(img, cv2.CV_64F, 1, 0, ksize=3)[where]
    gy = cv2.Sobel(img, cv2.CV_64F, 0, 1, ksize=3)[where]
    jxx, jyy, jxy = float(gx @ gx), float(gy @ gy), float(gx @ gy)
    trace = jxx + jyy
    if trace <= 0:
        return 0.0
    return float(np.hypot(jxx - jyy, 2 * jxy) / trace)


def local_coherence(img: np.ndarray, where: np.ndarray, rho_px: float = LOCAL_RHO_PX) -> float:
    """Median over ``where`` of the coherence of the structure tensor integrated over a Gaussian of ``rho_px``.

    The same gradients as :func:`tensor_coherence`; each of ``gx gx``, ``gy gy`` and ``gx gy`` is
    smoothed with the Gaussian window before the eigenvalues are taken per pixel.
    """
    img = np.asarray(img, np.float32)
    gx = cv2.Sobel(img, cv2.CV_32F, 1, 0, ksize=3)
    gy = cv2.Sobel(img, cv2.CV_32F, 0, 1, ksize=3)
    jxx = cv2.GaussianBlur(gx * gx, (0, 0), rho_px)
    jyy = cv2.GaussianBlur(gy * gy, (0, 0), rho_px)
    jxy = cv2.GaussianBlur(gx * gy, (0, 0), rho_px)
    trace = jxx + jyy
    coh = np.hypot(jxx - jyy, 2 * jxy) / np.maximum(trace, np.finfo(np.float32).tiny)
    return float(np.median(coh[where & (trace > 0)])) if np.any(where & (trace > 0)) else 0.0


def grain_texture(
    luma_lin: np.ndarray, mask: np.ndarray, paper: np.ndarray, edge_px: int = EDGE_PX
) -> GrainTexture | None:
    """The fine texture of the region ``mask`` of a crop, against the paper's pixels ``paper``.

    Parameters
    ----------
    luma_lin : ndarray
        (H, W) linear luma of the crop.
    mask : ndarray
        (H, W) bool, the region.
    paper : ndarray
        (H, W) bool, clean paper of the same crop (outside any shadow's reach).
    edge_px : int
        Pixels nearer the border of ``mask`` (and of ``paper``) than this are left out
        (:data:`EDGE_PX` for a region bounded by steps; less for a strip bounded by a fade).

    Returns
    -------
    GrainTexture or None
        None where the region's interior or the paper holds fewer than :data:`MIN_PIXELS` pixels.
    """
    log_luma = np.log(np.maximum(np.asarray(luma_lin, np.float32), _LOG_FLOOR))
    kernel = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * edge_px + 1, 2 * edge_px + 1))
    inner = cv2.erode(mask.astype(np.uint8), kernel).astype(bool)
    clean = cv2.erode(paper.astype(np.uint8), kernel).astype(bool)
    if int(inner.sum()) < MIN_PIXELS or int(clean.sum()) < MIN_PIXELS:
        return None
    own = fine_spread(log_luma, inner)
    ref = fine_spread(log_luma, clean)
    if not ref > 0:
        return None
    detail = _detail(log_luma)
    return GrainTexture(
        fine=own / ref,
        coherence=tensor_coherence(detail, inner),
        local_coherence=local_coherence(detail, inner),
        pixels=int(inner.sum()),
    )
