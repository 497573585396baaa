"""The scanmass exception tree.

Every error a user can cause is a :class:`ScanmassError`; its message is one line
that names the file (when there is one) and says how to fix the problem. Only the
CLI turns these into exit codes.
"""

from __future__ import annotations

__all__ = [
    "ScanmassError",
    "ImageError",
    "ScaleError",
    "SegmentationError",
    "PartCutError",
    "OptionError",
    "OutputError",
    "ResultFormatError",
    "MaterialError",
]


class ScanmassError(Exception):
    """Base class of every error scanmass raises on purpose."""

    def __init__(self, message: str, *, path: str | None = None) -> None:
        self.path = None if path is None else str(path)
        text = " ".join(str(message).split())  # always one line
        if self.path and not text.startswith(self.path):
            text = f"{self.path}: {text}"
        super().__init__(text)


class ImageError(ScanmassError):
    """The file cannot be read as an image (missing, empty, truncated, not an image, too large)."""


class ScaleError(ScanmassError):
    """No usable pixel-to-millimetre scale could be established."""


class SegmentationError(ScanmassError):
    """No part could be separated from the background."""


class PartCutError(SegmentationError):
    """Every part found touches the edge of the image (or of the region searched), none is whole.

    ``count`` is the number of such parts.
    """

    def __init__(self, message: str, *, path: str | None = None, count: int = 0) -> None:
        super().__init__(message, path=path)
        self.count = int(count)


class OptionError(ScanmassError, ValueError):
    """An option value is out of range or inconsistent with another option (also a ValueError)."""


class OutputError(ScanmassError):
    """An output file cannot be written (folder missing, no permission, would overwrite an input)."""


class ResultFormatError(ScanmassError):
    """A result document is not a scanmass result of a supported schema version."""


class MaterialError(ScanmassError):
    """A material is unknown or its data are invalid."""
