"""Atomic output files that never overwrite an input.

Every file scanmass writes goes through here: the data go to a temporary file in
the destination folder, are flushed to disk, and the temporary file is renamed over
the destination with :func:`os.replace` (atomic on POSIX and Windows within one
folder). A reader therefore sees either the old file or the complete new one, and
an interrupted run leaves no half-written output behind.

``"-"`` (standard output) is the caller's business and is refused here.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from scanmass.errors import OutputError

__all__ = ["write_atomic", "atomic_path"]

PathLike = str | os.PathLike


def _as_path(path: PathLike) -> Path:
    text = os.fspath(path)
    if isinstance(text, bytes):
        text = os.fsdecode(text)
    if text == "":
        raise OutputError("output path is empty; give a file name")
    if text == "-":
        raise OutputError("'-' (standard output) cannot be written as a file; handle it before calling write_atomic")
    return Path(text)


def _same_file(a: Path, b: Path) -> bool:
    try:
        if os.path.samefile(a, b):  # also catches hard links
            return True
    except OSError:
        pass
    return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def _check_target(target: Path, inputs: Iterable[PathLike | None]) -> Path:
    """Validate the destination; return its folder."""
    for item in inputs:
        if item is None:
            continue
        source = Path(os.fsdecode(os.fspath(item)))
        if _same_file(target, source):
            raise OutputError(
                f"would overwrite the input file {source}; choose a different output name", path=str(target)
            )
    if target.is_dir():
        example = target / "result.json"
        raise OutputError(f"is a folder; give a file name inside it, e.g. {example}", path=str(target))
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.exists():
        raise OutputError(f"folder {folder} does not exist; create it first or choose another folder", path=str(target))
    if not folder.is_dir():
        raise OutputError(f"{folder} is not a folder; choose another output path", path=str(target))
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(
            f"folder {folder} is not writable; choose another folder or fix its permissions", path=str(target)
        )
    return folder


def _umask() -> int:
    """The process umask, read without changing it where the OS allows (Linux)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    return 0o022


def _final_mode(target: Path) -> int:
    """Permissions the new file gets: those of the file it replaces, else 0666 & ~umask."""
    try:
        return target.stat().st_mode & 0o7777
    except OSError:
        return 0o666 & ~_umask()


def _fsync_path(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable (POSIX); not possible on every OS or filesystem."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextmanager
def _atomic(path: PathLike, inputs: Iterable[PathLike | None], *, allow_empty: bool) -> Iterator[Path]:
    target = _as_path(path)
    folder = _check_target(target, inputs)
    # Keep the destination's extension last: cv2.imwrite and PIL pick the format by it.
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.stem}.", suffix=f".tmp{target.suffix}", dir=folder)
    except OSError as exc:
        raise OutputError(
            f"cannot create a file in folder {folder} ({exc.strerror or exc}); choose another folder",
            path=str(target),
        ) from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        if not tmp.exists():
            raise OutputError("nothing was written (the temporary file vanished); try again", path=str(target))
        if not allow_empty and tmp.stat().st_size == 0:
            raise OutputError("nothing was written (the writer produced an empty file)", path=str(target))
        os.chmod(tmp, _final_mode(target))
        _fsync_path(tmp)
        try:
            os.replace(tmp, target)
        except OSError as exc:
            raise OutputError(
                f"cannot replace the file ({exc.strerror or exc}); check that it is not open elsewhere "
                "and that the folder is writable",
                path=str(target),
            ) from None
        _fsync_folder(folder)
    except BaseException:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise


@contextmanager
def atomic_path(path: PathLike, *, inputs: Iterable[PathLike | None] = ()) -> Iterator[Path]:
    """A temporary path to write to, renamed over ``path`` when the block succeeds.

    For writers that want a file name (``cv2.imwrite``, ``PIL.Image.save``, ezdxf).
    The temporary file sits in the destination folder and ends with the same
    extension. It is removed if the block raises, or if it is empty at the end
    (``cv2.imwrite`` reports failure by a return value, not an exception).

    Parameters
    ----------
    path : str or os.PathLike
        The destination.
    inputs : iterable of str, os.PathLike or None
        Files that must not be overwritten (the images being measured).

    Yields
    ------
    pathlib.Path
        The temporary path.

    Raises
    ------
    OutputError
        ``path`` is an input, a folder, or in a folder that is missing or not
        writable, or nothing was written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_path(folder / "note.txt") as tmp:
    ...     _ = tmp.write_text("ok")
    >>> (folder / "note.txt").read_text()
    'ok'
    """
    with _atomic(path, inputs, allow_empty=False) as tmp:
        yield tmp


def write_atomic(path: PathLike, data: bytes | str, *, inputs: Iterable[PathLike | None] = ()) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + fsync + os.replace).

    Parameters
    ----------
    path : str or os.PathLike
        The destination.
    data : bytes or str
        The content; ``str`` is written as UTF-8 exactly as given (no newline
        translation).
    inputs : iterable of str, os.PathLike or None
        Files that must not be overwritten.

    Returns
    -------
    pathlib.Path
        ``path`` as a Path.

    Raises
    ------
    OutputError
        ``path`` is an input, a folder, in a folder that is missing or not writable,
        or cannot be written.
    """
    if isinstance(data, str):
        payload = data.encode("utf-8")
    elif isinstance(data, (bytes, bytearray, memoryview)):
        payload = bytes(data)
    else:
        raise OutputError(f"can only write bytes or str, not {type(data).__name__}", path=os.fspath(path))
    with _atomic(path, inputs, allow_empty=True) as tmp:
        try:
            with open(tmp, "wb") as fh:
                fh.write(payload)
                fh.flush()
                os.fsync(fh.fileno())
        except OSError as exc:
            raise OutputError(
                f"cannot write the file ({exc.strerror or exc}); check free space and permissions",
                path=os.fspath(path),
            ) from None
    return _as_path(path)
