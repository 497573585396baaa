"""The measuring pipeline: image -> scale -> segment -> map -> section -> uncertainty.

:func:`measure` is the library's main entry point; the CLI's ``measure`` and ``batch``
commands and the demo call it.

The stage is split by what it holds: :mod:`~scanmass.pipeline.flow` (the order of the
stages for scans and photos), :mod:`~scanmass.pipeline.part_terms` (one part's figures and
terms), :mod:`~scanmass.pipeline.scan_checks` (faces, touching parts, tone, lid) and the photo checks:
:mod:`~scanmass.pipeline.photo_checks` (parallax, metal edges, hidden holes, the shared helpers),
:mod:`~scanmass.pipeline.photo_walls` (which edge of a thick part's wall the outline runs on),
:mod:`~scanmass.pipeline.photo_thickness` (a thickness not given, read from the side walls),
:mod:`~scanmass.pipeline.photo_shadows` (shadows only, cast shadows, reflections),
:mod:`~scanmass.pipeline.photo_shadow_cut` (the shadow cut and a second measurement),
:mod:`~scanmass.pipeline.photo_cut_strips` (a cut's strips closed off as holes) and
:mod:`~scanmass.pipeline.photo_holes` (deep holes opened at the top face).
"""

from __future__ import annotations

from scanmass.options import MeasureOptions
from scanmass.pipeline.flow import (
    measure,
    measure_image,
    measure_loaded,
    measure_photo,
    photo_scale,
    scale_method,
    scan_plane_map,
)
from scanmass.pipeline.part_terms import measure_part

__all__ = [
    "measure",
    "measure_loaded",
    "measure_image",
    "measure_photo",
    "measure_part",
    "photo_scale",
    "scale_method",
    "scan_plane_map",
    "MeasureOptions",
]
