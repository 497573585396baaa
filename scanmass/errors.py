"""The scanmass exception tree.

Every error a user can cause is a :class:`ScanmassError`; its message is one line
that names the file (when there is one) and says how to fix the problem. Only the
CLI turns these into exit codes.
"""

from __future__ import annotations

__all__ = [
    "escape_text",
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


def escape_text(text: str) -> str:
    """``text`` made encodable as UTF-8: each undecodable byte of a name becomes ``\\xNN``.

    File names on POSIX are bytes; Python maps bytes that are not UTF-8 to lone
    surrogates (``surrogateescape``, U+DC80..U+DCFF), which strict JSON/CSV readers
    and terminals reject. Each such character is written as the four characters
    ``\\xNN`` (the byte's hex value, as in a Python bytes literal), so the name stays
    readable and the bytes can be recovered; any other lone surrogate becomes
    ``\\uNNNN``. Text that is valid already is returned unchanged, so an escaped name
    is told from a name that really contains ``\\x`` only by context (rare).

    Examples
    --------
    >>> escape_text(b"\\xdcbersicht.png".decode("utf-8", "surrogateescape"))
    '\\\\xdcbersicht.png'
    >>> escape_text("Übersicht.png")
    'Übersicht.png'
    """
    try:
        text.encode("utf-8")
        return text
    except UnicodeEncodeError:
        pass
    out = []
    for ch in text:
        code = ord(ch)
        if 0xDC80 <= code <= 0xDCFF:
            out.append(f"\\x{code - 0xDC00:02x}")
        elif 0xD800 <= code <= 0xDFFF:
            out.append(f"\\u{code:04x}")
        else:
            out.append(ch)
    return "".join(out)


class ScanmassError(Exception):
    """Base class of every error scanmass raises on purpose."""

    def __init__(self, message: str, *, path: str | None = None) -> None:
        self.path = None if path is None else escape_text(str(path))
        text = escape_text(" ".join(str(message).split()))  # always one line, always UTF-8
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
