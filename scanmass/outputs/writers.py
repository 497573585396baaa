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
from scanmass.outputs.atomic import write_atomic

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
    Every file is written to a temporary name in its folder and renamed into place, and
    none of ``inputs`` is ever overwritten. ``units`` (mm or in) applies to the CSV and the
    overlay's labels; the JSON is always in mm.
    """
    document = measurement.to_json()
    written: list[str] = []
    if json_out is not None and str(json_out) != "-":
        written.append(str(write_atomic(json_out, document + "\n", inputs=inputs)))
    if csv_out is not None:
        written.append(str(write_atomic(csv_out, measurement.to_csv(units), inputs=inputs)))
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
        written.append(
            str(write_atomic(overlay_out, encode_png(render_overlay(image, measurement, units=units)), inputs=inputs))
        )
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
