"""Read result documents from disk for export, report and the command line.

Private helpers shared by :mod:`scanmass.outputs.export` and :mod:`scanmass.outputs.report`.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Union

from scanmass.errors import ResultFormatError
from scanmass.measurement import Measurement

__all__ = ["PathLike", "read_result", "as_measurement"]

PathLike = Union[str, "os.PathLike[str]"]


def read_result(path: PathLike) -> Measurement:
    """Read a result document (JSON written by ``scanmass measure --json``).

    Raises
    ------
    ResultFormatError
        The file is missing, unreadable, not JSON, or of another schema; the message
        names the file.
    """
    name = os.fspath(path)
    p = Path(name)
    if not p.exists():
        raise ResultFormatError("file not found; pass a result JSON written by 'scanmass measure --json'", path=name)
    if not p.is_file():
        raise ResultFormatError("is not a file; pass a result JSON written by 'scanmass measure --json'", path=name)
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ResultFormatError(
            "is not UTF-8 text; pass a result JSON written by 'scanmass measure --json'", path=name
        ) from None
    except OSError as exc:
        raise ResultFormatError(f"cannot be read ({exc.strerror}); check its permissions", path=name) from None
    return Measurement.from_json(text, path=name)


def as_measurement(obj: Measurement | PathLike) -> tuple[Measurement, str | None]:
    """Return ``(measurement, json_path)`` for a Measurement or a path to its JSON."""
    if isinstance(obj, Measurement):
        return obj, None
    if isinstance(obj, (str, os.PathLike)):
        return read_result(obj), os.fspath(obj)
    raise ResultFormatError(
        f"expected a Measurement or the path of a result JSON, got {type(obj).__name__}; pass a file written by 'scanmass measure --json'"
    )
