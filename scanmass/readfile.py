"""Reading input files safely: regular files only, never more bytes than the file holds.

Every file scanmass reads (images, result JSON, materials and assembly TOML, batch
settings) goes through :func:`read_regular`. It looks at what the path is before
opening it, so a FIFO, a device such as ``/dev/zero``, a socket or a generated file
under ``/proc`` is refused with a one-line message instead of hanging the process or
filling its memory, and it reads at most the size the file had when it was opened.
"""

from __future__ import annotations

import errno
import os
import stat

from scanmass.errors import ScanmassError, escape_text

__all__ = [
    "MAX_JSON_BYTES",
    "MAX_TOML_BYTES",
    "describe_mode",
    "display_path",
    "escape_text",
    "parse_toml",
    "read_regular",
    "read_regular_text",
    "read_toml",
]

# Pseudo file systems whose "regular" files are generated on reading (sizes are 0 or 4096).
_PSEUDO_ROOTS = ("/proc/", "/sys/")


def display_path(path: str | bytes | os.PathLike) -> str:
    """A path as text that always encodes as UTF-8 (see :func:`escape_text`).

    Examples
    --------
    >>> display_path(b"\\xdcbersicht.png")
    '\\\\xdcbersicht.png'
    >>> display_path("plain.png")
    'plain.png'
    """
    return escape_text(os.fsdecode(os.fspath(path)))


def describe_mode(mode: int) -> str:
    """What kind of file a ``st_mode`` says this is, in words for a message."""
    if stat.S_ISREG(mode):
        return "a regular file"
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISCHR(mode):
        return "a character device"
    if stat.S_ISBLK(mode):
        return "a block device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _is_pseudo(name: str) -> bool:
    real = os.path.realpath(name)
    return any(real.startswith(root) or real == root.rstrip("/") for root in _PSEUDO_ROOTS)


def read_regular(
    path: str | bytes | os.PathLike,
    *,
    error: type[ScanmassError],
    what: str = "file",
    fix: str = "give the path of a regular file",
    max_bytes: int | None = None,
) -> bytes:
    """The bytes of a regular file, refused with ``error`` when the path is anything else.

    Parameters
    ----------
    path : str, bytes or os.PathLike
        The file.
    error : type of ScanmassError
        The error raised (ImageError, MaterialError, ...), with a one-line message.
    what : str
        What the file should be, for messages ("image", "assembly file").
    fix : str
        What the user should do instead, ending the message.
    max_bytes : int, optional
        Refuse files larger than this.

    Returns
    -------
    bytes
        At most the size the file had when it was opened (a file that grows while it
        is read is cut there; one that shrinks gives what is left).

    Raises
    ------
    ScanmassError
        ``error``: missing, a dangling link, a symlink loop, a folder, a FIFO, a device,
        a socket, a file under /proc or /sys, unreadable, or too large.

    Examples
    --------
    >>> from scanmass.errors import ImageError
    >>> read_regular("/dev/zero", error=ImageError)
    Traceback (most recent call last):
    ...
    scanmass.errors.ImageError: /dev/zero: is a character device, not a regular file; give the path of a regular file
    """
    name = display_path(path)
    real_name = os.fsdecode(os.fspath(path))
    try:
        st = os.stat(real_name)
    except FileNotFoundError:
        if os.path.islink(real_name):
            raise error(f"is a link to a missing {what} (dangling link); {fix}", path=name) from None
        raise error(f"{what.split(' (')[0]} not found; check the path and the current folder", path=name) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise error(f"is a symbolic link loop; {fix}", path=name) from None
        raise error(f"cannot be read ({exc.strerror or exc}); check its permissions", path=name) from None
    if stat.S_ISDIR(st.st_mode):
        raise error(f"is a folder, not a {what}; {fix}", path=name)
    if not stat.S_ISREG(st.st_mode):
        raise error(f"is {describe_mode(st.st_mode)}, not a regular file; {fix}", path=name)
    if _is_pseudo(real_name):
        raise error(f"is a generated system file (under /proc or /sys), not a {what}; {fix}", path=name)
    if max_bytes is not None and st.st_size > max_bytes:
        raise error(
            f"is {st.st_size} bytes, more than the {max_bytes} bytes a {what} may have; {fix}",
            path=name,
        )
    try:
        # O_NONBLOCK: if the path was swapped for a FIFO since the stat, open must not wait
        # for a writer; fstat below refuses it.
        fd = os.open(real_name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise error(f"cannot be read ({exc.strerror or exc}); check its permissions", path=name) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise error(f"is {describe_mode(st.st_mode)}, not a regular file; {fix}", path=name)
        size = st.st_size
        if max_bytes is not None and size > max_bytes:
            raise error(f"is {size} bytes, more than the {max_bytes} bytes a {what} may have; {fix}", path=name)
        chunks: list[bytes] = []
        left = size
        try:
            first = os.read(fd, left) if left > 0 else b""
            if len(first) == size:
                return first  # the usual case: one read, no copy
            chunks.append(first)
            left -= len(first)
            while left > 0 and first:
                chunk = os.read(fd, min(left, 1 << 24))
                if not chunk:
                    break
                chunks.append(chunk)
                left -= len(chunk)
        except OSError as exc:
            raise error(f"cannot be read ({exc.strerror or exc}); check the file and its disk", path=name) from None
    finally:
        os.close(fd)
    return b"".join(chunks)


def read_regular_text(
    path: str | bytes | os.PathLike,
    *,
    error: type[ScanmassError],
    what: str = "file",
    fix: str = "give the path of a regular file",
    max_bytes: int | None = None,
) -> str:
    """:func:`read_regular`, decoded as UTF-8 (a byte-order mark is dropped).

    Raises
    ------
    ScanmassError
        As :func:`read_regular`, or ``error`` when the bytes are not UTF-8.
    """
    data = read_regular(path, error=error, what=what, fix=fix, max_bytes=max_bytes)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(
            f"is not UTF-8 text (byte {exc.start}); save the {what} as UTF-8", path=display_path(path)
        ) from None


#: Largest mat layout or lens profile JSON read (bytes).
MAX_JSON_BYTES = 1 << 24
#: Largest settings, materials or assembly TOML file read (bytes).
MAX_TOML_BYTES = 1 << 24


def parse_toml(text: str, *, error: type[ScanmassError], path: str | None, fix: str = "fix the file's syntax") -> dict:
    """Parse TOML text; syntax errors and absurd nesting become one-line ``error``.

    Examples
    --------
    >>> from scanmass.errors import OptionError
    >>> parse_toml("a = " + "[" * 5000 + "]" * 5000, error=OptionError, path="deep.toml")
    Traceback (most recent call last):
    ...
    scanmass.errors.OptionError: deep.toml: TOML nested too deeply (arrays or tables inside each other thousands of levels deep); fix the file's syntax
    """
    import tomllib

    try:
        return tomllib.loads(text)
    except RecursionError:
        raise error(
            f"TOML nested too deeply (arrays or tables inside each other thousands of levels deep); {fix}", path=path
        ) from None
    except tomllib.TOMLDecodeError as exc:
        raise error(f"not valid TOML ({exc}); {fix}", path=path) from None


def read_toml(
    path: str | bytes | os.PathLike,
    *,
    error: type[ScanmassError],
    what: str = "TOML file",
    fix: str = "fix the file's syntax",
) -> dict:
    """Read and parse a TOML file with :func:`read_regular_text` and :func:`parse_toml`."""
    text = read_regular_text(path, error=error, what=what, fix=f"give the path of a {what}", max_bytes=MAX_TOML_BYTES)
    return parse_toml(text, error=error, path=display_path(path), fix=fix)
