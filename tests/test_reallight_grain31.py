"""The fine-texture measures of :mod:`scanmass.segment.grain`: closed forms, and what they read on the renders.

The closed forms: the structure tensor of a plane wave has rank one (all gradients parallel: coherence 1 at any
angle), of concentric rings is isotropic over the full annulus (coherence 0 by symmetry) while each small
neighbourhood is a plane wave (local coherence near 1), of white noise is isotropic in expectation (J. Bigun and
G. H. Granlund, ICCV 1987; B. Jaehne, Digital Image Processing, 2005, section 13.3). The fine detail of white
noise of sigma s, less its Gaussian smoothing at sigma g, has the variance s^2 (1 - 2 h0 + sum h^2) of a linear
filter of white noise (sum of the squared taps of delta - h: common practice), with the continuous Gaussian's
centre tap h0 = 1 / (2 pi g^2) and sum h^2 = 1 / (4 pi g^2).

On the renders: the texture of the region named 'shadow only' on dev-lens-window-steel4-t20 (the steel gasket's
face lit near the paper's level) is no less grainy than the shadows alone of white parts on window-nylon-t0, so
no rule of the pipeline uses these measures (docs/benchmark-history.md, branch grain31).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from scanmass.segment.grain import FINE_SIGMA_PX, fine_spread, grain_texture, local_coherence, tensor_coherence


def _grid(n: int = 256) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    y, x = np.mgrid[0:n, 0:n].astype(np.float32)
    inner = np.zeros((n, n), bool)
    inner[16:-16, 16:-16] = True  # away from the border's reflection
    return x, y, inner


@pytest.mark.parametrize("angle_deg", [0.0, 30.0, 72.0])
def test_a_plane_wave_is_fully_coherent(angle_deg):
    """A sinusoidal grating at any angle: every gradient along its normal, so l2 = 0 and coherence 1 (the tensor's
    definition; the 3x3 Sobel responses of a plane wave share its phase)."""
    x, y, inner = _grid()
    t = math.radians(angle_deg)
    img = np.sin(2 * math.pi * (x * math.cos(t) + y * math.sin(t)) / 9.0)
    assert tensor_coherence(img, inner) == pytest.approx(1.0, abs=1e-6)
    assert local_coherence(img, inner) == pytest.approx(1.0, abs=1e-3)


def test_rings_are_coherent_locally_and_not_over_the_annulus():
    """Concentric rings (a grain turning along a round part): the annulus's summed tensor is isotropic by symmetry
    (coherence 0), each neighbourhood of a few pixels a plane wave (local coherence near 1; the ring's curvature
    over the 3 px window at radii of 40-110 px leaves under 1 %)."""
    x, y, _ = _grid()
    r = np.hypot(x - 128, y - 128)
    img = np.sin(2 * math.pi * r / 9.0)
    annulus = (r > 40) & (r < 110)
    assert tensor_coherence(img, annulus) < 1e-6
    assert local_coherence(img, annulus) > 0.99


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_white_noise_is_isotropic(seed):
    """White Gaussian noise: equal gradient variances along x and y and no covariance in expectation, so the summed
    tensor's coherence is of the order of its sampling error, 1 / sqrt(n_eff) with n_eff the 50176 interior pixels
    over the Sobel kernel's 9 (0.013); checked under three times that."""
    _, _, inner = _grid()
    noise = np.random.default_rng(seed).normal(0.0, 1.0, inner.shape).astype(np.float32)
    assert tensor_coherence(noise, inner) < 3 * 3 / math.sqrt(inner.sum())


@pytest.mark.parametrize("sigma", [0.5, 2.0])
def test_fine_spread_of_white_noise_matches_the_filter_closed_form(sigma):
    """The detail (noise less its Gaussian smoothing) of white noise of sigma s has the spread
    s sqrt(1 - 2 h0 + sum h^2), h0 = 1 / (2 pi g^2), sum h^2 = 1 / (4 pi g^2) for the Gaussian of g =
    FINE_SIGMA_PX (continuous form; the discrete taps differ by under 0.5 % at 1.5 px). The robust spread
    (MAD) of 50176 samples is within about 0.6 % (1 sigma); checked to 2 %."""
    _, _, inner = _grid()
    noise = np.random.default_rng(11).normal(0.0, sigma, inner.shape).astype(np.float32)
    g2 = FINE_SIGMA_PX**2
    expected = sigma * math.sqrt(1 - 2 / (2 * math.pi * g2) + 1 / (4 * math.pi * g2))
    assert fine_spread(noise, inner) == pytest.approx(expected, rel=0.02)


def test_a_shadow_keeps_the_papers_fine_texture_on_log_luma():
    """A shadow is the paper in less light: its luma the paper's times a factor, its log the paper's plus a constant,
    so its fine spread over the paper's is 1 (exactly, but for the step's tail beyond EDGE_PX); a face with five
    times the paper's log-luma grain reads 5."""
    rng = np.random.default_rng(5)
    paper = (0.8 * np.exp(rng.normal(0.0, 0.02, (200, 200)))).astype(np.float32)
    region = np.zeros(paper.shape, bool)
    region[40:160, 40:100] = True
    shadow = paper.copy()
    shadow[region] *= 0.3
    tex = grain_texture(shadow, region, ~region)
    assert tex is not None and tex.fine == pytest.approx(1.0, abs=0.05)
    face = paper.copy()
    face[region] = 0.3 * np.exp(rng.normal(0.0, 0.1, int(region.sum())))
    tex = grain_texture(face, region, ~region)
    assert tex is not None and tex.fine == pytest.approx(5.0, rel=0.05)


def test_too_small_a_region_reads_nothing():
    """Fewer than MIN_PIXELS pixels inside the region's edge margin: no texture is read."""
    img = np.ones((60, 60), np.float32)
    region = np.zeros(img.shape, bool)
    region[20:30, 20:30] = True
    assert grain_texture(img, region, ~region) is None


def _region_textures(name: str, thickness_mm: float, monkeypatch, white_faces_off: bool = False) -> list:
    """(centroid mm, named 'shadow only', texture) of the regions a render's measurement found."""
    import cv2
    from _reallight_truth import REALLIGHT

    import scanmass
    from scanmass.errors import ScanmassError
    from scanmass.pipeline import flow, photo_shadows
    from scanmass.pipeline.part_terms import UNKNOWN_THICKNESS_MM
    from scanmass.segment.shadow import shadow_band_px

    original = flow._shadows_only
    found: list = []

    def spy(image, scale, result, colour, thickness_mm=None, white=frozenset()):
        shadows, _ = photo_shadows._shadow_regions(image, scale, result, colour, thickness_mm, white)
        lut = np.asarray(image.to_linear, np.float32)
        luma = lut[colour] @ np.array([0.2126, 0.7152, 0.0722], np.float32)  # Rec. 709 luma on linear colour
        band = int(shadow_band_px(UNKNOWN_THICKNESS_MM, scale.plane_map.mm_per_px))
        every = np.zeros(luma.shape, np.uint8)
        for p in result.parts:
            cv2.fillPoly(every, [np.round(scale.plane_map.to_px(np.asarray(p.outline_mm, float))).astype(np.int32)], 1)
        reach = cv2.dilate(every, cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * band + 1,) * 2)).astype(bool)
        for p in result.parts:
            ring = scale.plane_map.to_px(np.asarray(p.outline_mm, float))
            x0, y0 = np.maximum(np.floor(ring.min(axis=0)).astype(int) - band - 30, 0)
            x1, y1 = np.ceil(ring.max(axis=0)).astype(int) + band + 30
            mask = np.zeros(luma.shape, np.uint8)
            cv2.fillPoly(mask, [np.round(ring).astype(np.int32)], 1)
            for h in p.holes:
                hole = np.round(scale.plane_map.to_px(np.asarray(h.outline_mm, float))).astype(np.int32)
                cv2.fillPoly(mask, [hole], 0)
            box = np.s_[y0:y1, x0:x1]  # the paper round the region only (not the markers or the table)
            found.append((p.centroid_mm, p in shadows, grain_texture(luma[box], mask[box].astype(bool), ~reach[box])))
        return original(image, scale, result, colour, thickness_mm, white)

    monkeypatch.setattr(flow, "_shadows_only", spy)
    if white_faces_off:
        monkeypatch.setattr(photo_shadows, "white_faces", lambda *a, **k: [])
    try:
        scanmass.measure(REALLIGHT / f"{name}.jpg", thickness_mm=thickness_mm)
    except ScanmassError:
        pass  # window-nylon-t0 without its white faces is refused as shadows only, after they were read
    return found


@pytest.mark.slow
def test_the_steel_face_named_shadow_only_is_as_grainy_as_a_shadow_alone(monkeypatch):
    """Why no texture rule: on dev-lens-window-steel4-t20 (3.5 mm, the gasket's thickness) the steel gasket's found
    region (its centroid within 3 mm of the truth's: shapely on the render's truth; named 'shadow only' at the start
    of stop 31), its face lit near the paper's level, has a fine texture within the range of the shadows alone of
    the white parts on window-nylon-t0 (white faces' search off, so that they stay regions named 'shadow only'): on
    these renders the paper in shade is as grainy as lit steel (the path tracer's noise) and the steel has no grain
    of its own."""
    from _reallight_truth import truth_part

    steel = _region_textures("dev-lens-window-steel4-t20", 3.5, monkeypatch)
    gasket = truth_part("dev-lens-window-steel4-t20", "gasket")
    tex = [t for c, _, t in steel if math.dist(c, gasket["centroid"]) < 3.0][-1]
    nylon = _region_textures("window-nylon-t0", 3.0, monkeypatch, white_faces_off=True)
    # the regions named 'shadow only' (the smallest have too few pixels inside their edge to read)
    shadows = [t for _, named, t in nylon if named and t is not None]
    assert tex is not None and len(shadows) >= 2
    assert min(t.fine for t in shadows) <= tex.fine <= max(t.fine for t in shadows)
