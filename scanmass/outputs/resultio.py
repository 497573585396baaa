"""Result documents given as a Measurement or as the path of its JSON, for export, report and the command line.

:func:`read_result` lives in :mod:`scanmass.measurement` (mass reads results too) and is re-exported here.
Private helpers shared by :mod:`scanmass.outputs.export` and :mod:`scanmass.outputs.report`.
"""

from __future__ import annotations

import os
from typing import Union

from scanmass.errors import ResultFormatError
from scanmass.measurement import Measurement, read_result

__all__ = ["PathLike", "read_result", "as_measurement"]

PathLike = Union[str, "os.PathLike[str]"]


def as_measurement(obj: Measurement | PathLike) -> tuple[Measurement, str | None]:
    """Return ``(measurement, json_path)`` for a Measurement or a path to its JSON."""
    if isinstance(obj, Measurement):
        return obj, None
    if isinstance(obj, (str, os.PathLike)):
        return read_result(obj), os.fspath(obj)
    raise ResultFormatError(
        f"expected a Measurement or the path of a result JSON, got {type(obj).__name__}; pass a file written by 'scanmass measure --json'"
    )
