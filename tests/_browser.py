"""Headless Chromium for the browser tests (Debian's chromium and chromium-driver), shared set-up.

Import it after ``pytest.importorskip("selenium.webdriver")``; a module that needs the
browser calls :func:`skip_without_chromium` at import time.
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
CHROMEDRIVER = shutil.which("chromedriver")
ARTIFACTS = Path(__file__).resolve().parent.parent / "test-artifacts"

_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-dev-shm-usage",
)


def skip_without_chromium() -> None:
    """Skip the calling test module when the browser or its driver is missing."""
    if not (CHROMIUM and CHROMEDRIVER):
        pytest.skip(
            "chromium and chromium-driver are not installed (apt-get install chromium chromium-driver)",
            allow_module_level=True,
        )


def start_chromium(profile_dir: Path, *extra_flags: str, mobile: dict[str, Any] | None = None) -> Any:
    """A headless Chromium driver that keeps its browser log, with its own profile folder."""
    from selenium import webdriver
    from selenium.webdriver.chrome.options import Options
    from selenium.webdriver.chrome.service import Service

    options = Options()
    options.binary_location = CHROMIUM
    for arg in (*_FLAGS, *extra_flags, f"--user-data-dir={profile_dir}"):
        options.add_argument(arg)
    if mobile is not None:
        options.add_experimental_option("mobileEmulation", mobile)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    # an explicit driver path keeps selenium from looking for (downloading) a driver
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(30)
    return driver
