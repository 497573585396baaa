"""The EXIF focal-length fallback of the thickness correction.

Check value: the Exif tag FocalLengthIn35mmFilm (0xA405, CIPA DC-008 Exif 2.32) is the focal
length a 36 x 24 mm frame would need for the same field of view; with the frame's diagonal
43.27 mm (common practice) the focal length in pixels is f35 / 43.27 * image diagonal.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from PIL import Image

from scanmass.load.decode import load_image
from scanmass.scale.camera import FILM_DIAGONAL_MM, _exif_focal_px


def test_exif_35mm_focal_length_in_pixels(tmp_path):
    path = tmp_path / "phone.jpg"
    img = Image.fromarray(np.full((300, 400), 200, np.uint8))
    exif = Image.Exif()
    exif.get_ifd(0x8769)[0xA405] = 26  # FocalLengthIn35mmFilm, mm
    img.save(path, exif=exif)
    f_px = _exif_focal_px(load_image(path))
    assert FILM_DIAGONAL_MM == pytest.approx(43.27, abs=0.01)  # 36 x 24 mm frame
    assert f_px == pytest.approx(26 / 43.27 * math.hypot(400, 300), rel=1e-3)


def test_no_exif_means_unknown(tmp_path):
    path = tmp_path / "plain.png"
    Image.fromarray(np.full((50, 60), 200, np.uint8)).save(path)
    assert _exif_focal_px(load_image(path)) is None
