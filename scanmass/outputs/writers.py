"""Write a measurement's outputs (JSON, CSV, overlay PNG) atomically, never over an input."""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from scanmass.errors import OutputError
from scanmass.load.decode import load_image
from scanmass.measurement import Measurement
from scanmass.options import MeasureOptions
from scanmass.outputs.atomic import check_distinct, write_many

__all__ = ["MeasureOutputs", "write_outputs", "measure_to_outputs"]


@dataclass
class MeasureOutputs:
    """What :func:`measure_to_outputs` produced."""

    measurement: Measurement
    document: str
    written: list[str] = field(default_factory=list)


def write_outputs(
    measurement: Measurement,
    *,
    json_out: str | os.PathLike | None = None,
    csv_out: str | os.PathLike | None = None,
    overlay_out: str | os.PathLike | None = None,
    image: Any = None,
    inputs: tuple = (),
    units: str = "mm",
) -> MeasureOutputs:
    """Write the requested outputs; ``json_out == "-"`` means "return it, do not write".

    The overlay needs the loaded image (``image``: a LoadedImage), or re-reads the source.
    Two outputs naming one file are refused before anything is written. All outputs
    are written together (:func:`~scanmass.outputs.atomic.write_many`): each to a
    temporary name in its folder, then all renamed into place; ``"-"``, FIFOs and
    pipes are written straight through. None of ``inputs`` is ever overwritten. ``units`` (mm or in) applies to the CSV and the
    overlay's labels; the JSON is always in mm.
    """
    check_distinct([json_out, csv_out, overlay_out])
    document = measurement.to_json()
    items: list[tuple[str | os.PathLike, bytes | str]] = []
    if json_out is not None and str(json_out) != "-":
        items.append((json_out, document + "\n"))
    if csv_out is not None:
        items.append((csv_out, measurement.to_csv(units)))
    if overlay_out is not None:
        from scanmass.outputs.overlay import encode_png, render_overlay

        if image is None:
            if measurement.source.path is None:
                raise OutputError(
                    "the overlay needs the measured image, and this result names no source file; "
                    "measure the image file itself",
                    path=os.fspath(overlay_out),
                )
            image = load_image(measurement.source.path)
        items.append((overlay_out, encode_png(render_overlay(image, measurement, units=units))))
    written = [str(p) for p in write_many(items, inputs=inputs)] if items else []
    return MeasureOutputs(measurement=measurement, document=document, written=written)


def measure_to_outputs(
    source: str | os.PathLike,
    options: MeasureOptions | None = None,
    *,
    json_out: str | os.PathLike | None = None,
    csv_out: str | os.PathLike | None = None,
    overlay_out: str | os.PathLike | None = None,
    units: str = "mm",
    **overrides: Any,
) -> MeasureOutputs:
    """Measure ``source`` (see :func:`scanmass.measure` for ``options`` and ``overrides``) and write outputs."""
    from scanmass.pipeline import measure_loaded

    measurement, image = measure_loaded(source, options, **overrides)
    return write_outputs(
        measurement,
        json_out=json_out,
        csv_out=csv_out,
        overlay_out=overlay_out,
        image=image,
        inputs=(Path(source),),
        units=units,
    )
