"""scanmass: geometric and mass properties of flat parts from scans and photos.

The library's main entry point is :func:`measure`; results are plain dataclasses
(:class:`Measurement`, :class:`Part`, :class:`Hole`) serialisable to the JSON result
document. All lengths are millimetres, frames have y up (see the README).
"""

from __future__ import annotations

__version__ = "0.1.0"

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
from .measurement import SCHEMA, Hole, Measurement, Part, ScaleInfo, SourceInfo
from .pipeline import MeasureOptions, measure, measure_image
from .scale import PlaneMap
from .section import SectionProperties, fit_circle, section_properties

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
    "ScanmassError",
    "ImageError",
    "ScaleError",
    "SegmentationError",
    "OptionError",
    "OutputError",
    "ResultFormatError",
    "MaterialError",
]
