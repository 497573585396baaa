"""Receiving a photo: a streamed multipart upload, limits counted as it arrives, type by content.

The file goes to a temporary file in the store while its SHA-256 is computed; nothing is
kept in memory but the small text fields. The client's file name is kept only as a label
(reduced to its last component, letters, digits and ``.-_``), never used as a path.
"""

from __future__ import annotations

import hashlib
import os
import re
import tempfile
from collections.abc import AsyncIterator
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["IMAGE_TYPES", "Upload", "UploadError", "image_kind", "receive_upload", "safe_name"]

#: Magic numbers of the image files accepted (first bytes; the file name is never trusted).
IMAGE_TYPES: tuple[tuple[bytes, str, str], ...] = (
    (b"\xff\xd8\xff", "jpg", "image/jpeg"),
    (b"\x89PNG\r\n\x1a\n", "png", "image/png"),
    (b"II*\x00", "tif", "image/tiff"),
    (b"MM\x00*", "tif", "image/tiff"),
)

#: Room for the multipart envelope and the text fields on top of the file itself.
ENVELOPE_BYTES = 64 * 1024
MAX_FIELD_BYTES = 4096
MAX_FIELDS = 32


class UploadError(Exception):
    """An upload refused: HTTP ``status`` and a one-line ``message`` for the person uploading."""

    def __init__(self, status: int, message: str) -> None:
        super().__init__(message)
        self.status = status
        self.message = message


@dataclass
class Upload:
    """A received upload: the text fields and the photo, written to ``tmp_path``."""

    fields: dict[str, str] = field(default_factory=dict)
    tmp_path: Path | None = None
    sha256: str = ""
    size_bytes: int = 0
    filename: str = ""
    kind: str = ""  # "jpg", "png" or "tif"
    width_px: int = 0
    height_px: int = 0

    def discard(self) -> None:
        if self.tmp_path is not None:
            try:
                self.tmp_path.unlink()
            except OSError:
                pass
            self.tmp_path = None


def safe_name(name: str | None, *, limit: int = 80) -> str:
    """A client's file name reduced to a harmless label: last component, safe characters only.

    Examples
    --------
    >>> safe_name("../../etc/passwd")
    'passwd'
    >>> safe_name("C:\\\\photos\\\\gusset <1>.jpg")
    'gusset_1_.jpg'
    >>> safe_name("")
    ''
    """
    if not name:
        return ""
    last = re.split(r"[\\/]", name)[-1]
    cleaned = re.sub(r"[^A-Za-z0-9._-]+", "_", last).strip("._")
    return cleaned[:limit]


def image_kind(head: bytes) -> tuple[str, str] | None:
    """``(extension, media type)`` of an image by its first bytes, or None.

    Examples
    --------
    >>> image_kind(b"\\x89PNG\\r\\n\\x1a\\n....")
    ('png', 'image/png')
    >>> image_kind(b"<html>") is None
    True
    """
    for magic, ext, media in IMAGE_TYPES:
        if head.startswith(magic):
            return ext, media
    return None


def _boundary(content_type: str) -> bytes:
    from python_multipart.multipart import parse_options_header

    kind, params = parse_options_header(content_type)
    if kind != b"multipart/form-data" or not params.get(b"boundary"):
        raise UploadError(415, "send the photo as multipart/form-data (the page's form does)")
    return params[b"boundary"]


async def receive_upload(
    headers: dict[str, str],
    stream: AsyncIterator[bytes],
    *,
    tmp_dir: Path,
    max_bytes: int,
    max_pixels: int,
    file_field: str = "photo",
) -> Upload:
    """Read a multipart upload from ``stream``, enforcing the limits as the bytes arrive.

    Parameters
    ----------
    headers : dict
        Request headers, lower-case names.
    stream : async iterator of bytes
        The request body.
    tmp_dir : Path
        Where the photo is written while it arrives (in the store, so it can be renamed).
    max_bytes : int
        Largest photo; a larger declared ``Content-Length`` is refused before reading.
    max_pixels : int
        Largest width x height, read from the image's header.

    Raises
    ------
    UploadError
        413 too large (bytes or pixels), 415 not multipart or not a JPEG/PNG/TIFF,
        400 empty, damaged or malformed.
    """
    from python_multipart.exceptions import MultipartParseError
    from python_multipart.multipart import MultipartParser, parse_options_header

    limit_mb = max_bytes / 1e6
    declared = headers.get("content-length")
    if declared is not None:
        try:
            declared_n = int(declared)
        except ValueError:
            raise UploadError(400, "the request's Content-Length is not a number") from None
        if declared_n > max_bytes + ENVELOPE_BYTES:
            raise UploadError(413, f"the photo is larger than the upload limit of {limit_mb:g} MB")
    boundary = _boundary(headers.get("content-type", ""))

    up = Upload()
    digest = hashlib.sha256()
    state: dict = {"name": None, "filename": None, "is_file": False, "buf": bytearray(), "hname": b"", "hval": b""}
    headers_seen: dict[bytes, bytes] = {}
    fh_holder: list = []

    def on_part_begin() -> None:
        headers_seen.clear()
        state.update(name=None, filename=None, is_file=False, buf=bytearray(), hname=b"", hval=b"")

    def on_header_field(data: bytes, start: int, end: int) -> None:
        state["hname"] += data[start:end]

    def on_header_value(data: bytes, start: int, end: int) -> None:
        state["hval"] += data[start:end]

    def on_header_end() -> None:
        headers_seen[state["hname"].lower()] = state["hval"]
        state["hname"], state["hval"] = b"", b""

    def on_headers_finished() -> None:
        _, params = parse_options_header(headers_seen.get(b"content-disposition", b""))
        name = params.get(b"name", b"").decode("utf-8", "replace")
        state["name"] = name
        if b"filename" in params or name == file_field:
            if name != file_field or fh_holder:
                raise UploadError(400, f"send exactly one photo, in the form field {file_field!r}")
            state["is_file"] = True
            up.filename = safe_name(params.get(b"filename", b"").decode("utf-8", "replace"))
            fd, tmp = tempfile.mkstemp(prefix=".upload-", suffix=".part", dir=tmp_dir)
            up.tmp_path = Path(tmp)
            fh_holder.append(os.fdopen(fd, "wb"))
        elif len(up.fields) >= MAX_FIELDS:
            raise UploadError(400, "too many form fields")

    def on_part_data(data: bytes, start: int, end: int) -> None:
        chunk = data[start:end]
        if state["is_file"]:
            up.size_bytes += len(chunk)
            if up.size_bytes > max_bytes:
                raise UploadError(413, f"the photo is larger than the upload limit of {limit_mb:g} MB")
            digest.update(chunk)
            fh_holder[0].write(chunk)
        else:
            state["buf"] += chunk
            if len(state["buf"]) > MAX_FIELD_BYTES:
                raise UploadError(400, f"the form field {state['name']!r} is too long")

    def on_part_end() -> None:
        if not state["is_file"] and state["name"]:
            up.fields[state["name"]] = state["buf"].decode("utf-8", "replace")

    parser = MultipartParser(
        boundary,
        {
            "on_part_begin": on_part_begin,
            "on_header_field": on_header_field,
            "on_header_value": on_header_value,
            "on_header_end": on_header_end,
            "on_headers_finished": on_headers_finished,
            "on_part_data": on_part_data,
            "on_part_end": on_part_end,
        },
    )
    received = 0
    try:
        async for chunk in stream:
            received += len(chunk)
            if received > max_bytes + ENVELOPE_BYTES:
                raise UploadError(413, f"the photo is larger than the upload limit of {limit_mb:g} MB")
            parser.write(chunk)
        parser.finalize()
    except MultipartParseError:
        up.discard()
        raise UploadError(400, "the upload is not a well-formed multipart form") from None
    except BaseException:
        up.discard()
        raise
    finally:
        for fh in fh_holder:
            fh.close()
    if up.tmp_path is None:
        raise UploadError(400, f"no photo in the upload (form field {file_field!r})")
    if up.size_bytes == 0:
        up.discard()
        raise UploadError(400, "the photo is empty (0 bytes); take or choose it again")
    up.sha256 = digest.hexdigest()
    try:
        _check_image(up, max_pixels)
    except BaseException:
        up.discard()
        raise
    return up


def _check_image(up: Upload, max_pixels: int) -> None:
    """File type from the first bytes, size in pixels from the header (nothing decoded)."""
    assert up.tmp_path is not None
    with open(up.tmp_path, "rb") as fh:
        head = fh.read(16)
    kind = image_kind(head)
    if kind is None:
        raise UploadError(415, "this is not a JPEG, PNG or TIFF image; choose a photo or a scan")
    up.kind = kind[0]
    import warnings

    from PIL import Image

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with Image.open(up.tmp_path) as im:
                up.width_px, up.height_px = im.size
    except Image.DecompressionBombError:
        raise UploadError(413, f"the image has more pixels than the limit of {max_pixels:,}") from None
    except Exception:
        raise UploadError(400, f"the {kind[0].upper()} file is damaged (its header cannot be read)") from None
    if up.width_px * up.height_px > max_pixels:
        raise UploadError(
            413, f"the image has {up.width_px} x {up.height_px} pixels, more than the limit of {max_pixels:,}"
        )
