"""scanmass: geometric and mass properties of flat parts from scans and photos.

The library's main entry point is :func:`measure`; results are plain dataclasses
(:class:`Measurement`, :class:`Part`, :class:`Hole`) serialisable to the JSON result
document. All lengths are millimetres, frames have y up (see the README).

Heavier families (export, report, assembly, balance, batch) are imported on first use,
so ``import scanmass`` and the command line stay quick.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

from . import errors
from .errors import (
    ImageError,
    MaterialError,
    OptionError,
    OutputError,
    ResultFormatError,
    ScaleError,
    ScanmassError,
    SegmentationError,
)
from .load import LoadedImage, load_image
from .mass import MassProperties, apply_mass, plate_mass
from .materials import Material, find_material, load_materials
from .measurement import SCHEMA, Hole, Measurement, Part, ScaleInfo, SourceInfo
from .outputs import write_atomic
from .pipeline import MeasureOptions, measure, measure_image
from .scale import PlaneMap
from .section import SectionProperties, fit_circle, section_properties

#: Public names imported lazily: name -> module.
_LAZY = {
    "assemble": "assembly",
    "combine_members": "assembly",
    "AssemblyResult": "assembly",
    "static_unbalance": "balance",
    "balance_measurement": "balance",
    "BalanceResult": "balance",
    "permissible_unbalance_gmm": "balance",
    "export_dxf": "export",
    "export_svg": "export",
    "render_report": "report",
    "write_report": "report",
    "render_summary": "report",
    "write_summary": "report",
    "run_batch": "batch",
    "export_batch": "batch",
    "measure_photo": "photo",
    "detect_markers": "photo",
    "make_mat": "mat",
    "write_mat_pdf": "mat",
    "write_mat_png": "mat",
    "render_mat_png": "mat",
    "calibrate_lens": "lens",
    "load_lens_profile": "lens",
    "LensProfile": "lens",
    "render_overlay": "overlay",
}


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'scanmass' has no attribute {name!r}")
    return getattr(importlib.import_module(f".{module}", __name__), name)


__all__ = [
    "__version__",
    "measure",
    "measure_image",
    "MeasureOptions",
    "load_image",
    "LoadedImage",
    "PlaneMap",
    "section_properties",
    "SectionProperties",
    "fit_circle",
    "Measurement",
    "Part",
    "Hole",
    "ScaleInfo",
    "SourceInfo",
    "SCHEMA",
    "plate_mass",
    "apply_mass",
    "MassProperties",
    "Material",
    "find_material",
    "load_materials",
    "write_atomic",
    *_LAZY,
    *errors.__all__,
]
