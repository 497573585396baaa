"""Start-up stays light: ``import scanmass``, ``scanmass --version`` and ``scanmass --help``
load none of the heavy image libraries, and every public name resolves.

Each check runs in a fresh interpreter (``sys.executable``, the same environment as the
tests) and reads its ``sys.modules`` afterwards.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import scanmass

HEAVY = ("numpy", "cv2", "skimage", "scipy", "PIL")

_REPORT = f"""
import json, sys
heavy = [m for m in {HEAVY!r} if m in sys.modules]
print("\\n" + json.dumps({{"code": code, "heavy": heavy, "file": scanmass.__file__}}))
"""


def _run(body: str) -> dict:
    """Run ``body`` (which sets ``code`` and imports scanmass) in a fresh interpreter."""
    proc = subprocess.run(
        [sys.executable, "-c", body + _REPORT], capture_output=True, text=True, timeout=120, check=False
    )
    assert proc.returncode == 0, proc.stderr
    report = json.loads(proc.stdout.strip().splitlines()[-1])
    # the child imports the same scanmass as the tests (the installed one in CI)
    assert report["file"] == scanmass.__file__
    return report | {"output": proc.stdout}


def test_import_scanmass_loads_no_image_library():
    report = _run("import scanmass\ncode = 0\n")
    assert report["heavy"] == []


@pytest.mark.parametrize("argv", [["--version"], ["--help"], ["-h"]])
def test_version_and_help_load_no_image_library(argv):
    body = (
        "import scanmass\n"
        "from scanmass.cli.app import app\n"
        "try:\n"
        f"    app({argv!r}, prog_name='scanmass')\n"
        "    code = 0\n"
        "except SystemExit as exc:\n"
        "    code = exc.code or 0\n"
    )
    report = _run(body)
    assert report["code"] == 0
    assert report["heavy"] == [], f"scanmass {' '.join(argv)} imported {report['heavy']}"
    if argv == ["--version"]:
        assert f"scanmass {scanmass.__version__}" in report["output"]
    else:
        assert "Usage: scanmass" in report["output"]


def test_the_probe_sees_a_heavy_import():
    # the check above can fail: importing the pipeline does load numpy
    report = _run("import scanmass\nscanmass.measure\ncode = 0\n")
    assert "numpy" in report["heavy"]


def test_measuring_a_scan_leaves_scipy_unloaded():
    """A scan with a ring, a plate with a hole and a strip (necks searched, walls examined): no scipy
    (its import takes ~0.3-0.5 s of a process). Parts with walls thinner than the blur allows, or
    split with --split-touching, may still load it."""
    body = (
        "import numpy as np, cv2, scanmass\n"
        "img = np.full((400, 600), 235, np.uint8)\n"
        "cv2.circle(img, (120, 120), 80, 25, -1); cv2.circle(img, (120, 120), 50, 235, -1)\n"
        "img[60:300, 260:420] = 25; cv2.circle(img, (340, 200), 30, 235, -1)\n"
        "img[330:370, 60:560] = 25\n"
        "m = scanmass.measure(img, dpi=300)\n"
        "code = len(m.parts)\n"
    )
    report = _run(body)
    assert report["code"] == 3
    assert "scipy" not in report["heavy"] and "numpy" in report["heavy"]


@pytest.mark.parametrize("name", scanmass.__all__)
def test_every_public_name_resolves(name):
    value = getattr(scanmass, name)
    assert value is not None
    if name != "__version__":
        assert getattr(value, "__name__", name) == name
        assert value.__module__.startswith("scanmass.")


def test_public_names_are_listed_once_and_dir_shows_them():
    assert len(scanmass.__all__) == len(set(scanmass.__all__))
    assert set(scanmass.__all__) <= set(dir(scanmass))
    with pytest.raises(AttributeError):
        scanmass.no_such_name  # noqa: B018
