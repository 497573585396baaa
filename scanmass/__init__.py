"""scanmass: geometric and mass properties of flat parts from scans and photos."""

from __future__ import annotations

__version__ = "0.1.0"
