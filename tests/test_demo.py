"""The demo works without the repository (installed from a wheel), and ``samples/`` is what
its script renders."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from scanmass.cli import demo

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
#: Pictures in samples/ that the demo does not make: the README's screenshot of the bench page
#: (tests/test_serve_browser.py takes it).
NOT_RENDERED = {"serve-page.png"}


@pytest.mark.parametrize("name", demo.SETTINGS_FILES)
def test_samples_settings_are_the_shipped_ones(name):
    # samples/ holds a copy (make_samples.py writes it); the package's copy is what a wheel has
    assert (SAMPLES / name).read_text(encoding="utf-8") == demo.settings_text(name)


@pytest.mark.slow
def test_demo_without_a_checkout_renders_the_samples_and_runs_every_step(tmp_path, monkeypatch):
    monkeypatch.setattr(demo, "samples_dir", lambda: None)  # as installed from a wheel
    summary = demo.run_demo(tmp_path / "out")
    rendered = tmp_path / "out" / "samples"
    committed = sorted(
        p.name for p in SAMPLES.iterdir() if p.suffix in {".jpg", ".png", ".toml"} and p.name not in NOT_RENDERED
    )
    assert sorted(p.name for p in rendered.iterdir()) == committed
    text = "\n".join(summary.lines)
    assert "for CAD" in text and "rpm" in text and "assembly 'rear-carrier side frame'" in text
    assert len(summary.measurements) == 4
    # the committed images are the script's output: the PNG decodes to the same pixels, the
    # JPEGs to nearly the same (JPEG encoders and decoders of other library builds differ slightly)
    for name in committed:
        if name.endswith(".toml"):
            continue
        now = np.asarray(Image.open(rendered / name), dtype=float)
        then = np.asarray(Image.open(SAMPLES / name), dtype=float)
        assert now.shape == then.shape, name
        if name.endswith(".png"):
            assert np.array_equal(now, then), name
        else:
            assert np.abs(now - then).mean() < 0.5, name
