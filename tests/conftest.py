"""Test-session set-up: print the versions of the libraries the results depend on."""

from __future__ import annotations

import importlib


def pytest_report_header(config):
    versions = []
    for name in ("numpy", "cv2", "skimage", "PIL", "shapely", "sympy", "ezdxf", "typer"):
        try:
            versions.append(f"{name} {importlib.import_module(name).__version__}")
        except Exception:  # noqa: BLE001 - an optional library missing is only reported
            versions.append(f"{name} missing")
    return "scanmass test environment: " + ", ".join(versions)
