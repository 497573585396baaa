"""scanmass: geometric and mass properties of flat parts from scans and photos.

The library's main entry point is :func:`measure`; results are plain dataclasses
(:class:`Measurement`, :class:`Part`, :class:`Hole`) serialisable to the JSON result
document. All lengths are millimetres, frames have y up (see the README).

The public names below are fixed; each is imported from its stage on first use, so
``import scanmass`` and ``scanmass --version`` load neither numpy nor OpenCV.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
    from scanmass.batch.runner import run_batch
    from scanmass.errors import ScanmassError
    from scanmass.load.decode import LoadedImage, load_image
    from scanmass.mass.assembly import AssemblyResult, assemble
    from scanmass.mass.balance import BalanceResult, balance_measurement
    from scanmass.mass.materials import Material, find_material, load_materials
    from scanmass.mass.plate import apply_mass, plate_mass
    from scanmass.measurement import Hole, Measurement, Part
    from scanmass.options import MeasureOptions
    from scanmass.outputs.export import export_dxf, export_svg
    from scanmass.outputs.report import write_report
    from scanmass.pipeline import measure
    from scanmass.scale.mat import make_mat
    from scanmass.scale.planemap import PlaneMap
    from scanmass.section import SectionProperties, section_properties

#: Public name -> the module that holds it (imported on first use).
_WHERE = {
    "measure": "scanmass.pipeline",
    "MeasureOptions": "scanmass.options",
    "Measurement": "scanmass.measurement",
    "Part": "scanmass.measurement",
    "Hole": "scanmass.measurement",
    "load_image": "scanmass.load.decode",
    "LoadedImage": "scanmass.load.decode",
    "PlaneMap": "scanmass.scale.planemap",
    "make_mat": "scanmass.scale.mat",
    "section_properties": "scanmass.section",
    "SectionProperties": "scanmass.section",
    "Material": "scanmass.mass.materials",
    "find_material": "scanmass.mass.materials",
    "load_materials": "scanmass.mass.materials",
    "plate_mass": "scanmass.mass.plate",
    "apply_mass": "scanmass.mass.plate",
    "assemble": "scanmass.mass.assembly",
    "AssemblyResult": "scanmass.mass.assembly",
    "balance_measurement": "scanmass.mass.balance",
    "BalanceResult": "scanmass.mass.balance",
    "export_dxf": "scanmass.outputs.export",
    "export_svg": "scanmass.outputs.export",
    "write_report": "scanmass.outputs.report",
    "run_batch": "scanmass.batch.runner",
    "ScanmassError": "scanmass.errors",
}

__all__ = [
    "__version__",
    "measure",
    "MeasureOptions",
    "Measurement",
    "Part",
    "Hole",
    "load_image",
    "LoadedImage",
    "PlaneMap",
    "make_mat",
    "section_properties",
    "SectionProperties",
    "Material",
    "find_material",
    "load_materials",
    "plate_mass",
    "apply_mass",
    "assemble",
    "AssemblyResult",
    "balance_measurement",
    "BalanceResult",
    "export_dxf",
    "export_svg",
    "write_report",
    "run_batch",
    "ScanmassError",
]


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'scanmass' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
