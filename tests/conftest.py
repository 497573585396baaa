"""Test-session set-up: report which scanmass is tested and the versions of the libraries the
results depend on.

CI tests the installed wheel, not the checkout: it sets ``SCANMASS_TEST_INSTALLED=1``, and the
session stops at once when ``import scanmass`` finds the repository's own folder instead.
"""

from __future__ import annotations

import importlib
import os
from pathlib import Path

import pytest

import scanmass

REPOSITORY = Path(__file__).resolve().parent.parent


def _tested_from() -> Path:
    return Path(scanmass.__file__).resolve().parent


def pytest_configure(config):
    if os.environ.get("SCANMASS_TEST_INSTALLED") == "1" and _tested_from().is_relative_to(REPOSITORY):
        raise pytest.UsageError(
            f"SCANMASS_TEST_INSTALLED=1 but scanmass is imported from the checkout ({_tested_from()}); "
            "run with PYTHONSAFEPATH=1 (or from outside the repository) so the installed package is tested"
        )


def pytest_report_header(config):
    versions = []
    for name in ("numpy", "cv2", "skimage", "PIL", "shapely", "sympy", "ezdxf", "typer"):
        try:
            versions.append(f"{name} {importlib.import_module(name).__version__}")
        except Exception:  # noqa: BLE001 - an optional library missing is only reported
            versions.append(f"{name} missing")
    return [
        f"scanmass {scanmass.__version__} from {_tested_from()}",
        "scanmass test environment: " + ", ".join(versions),
    ]
