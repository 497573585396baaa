"""Output files that never overwrite an input, never replace a device, never mix two runs.

Every file scanmass writes goes through here. What happens depends on what the
destination is:

* a regular file, or a new name: the data go to a temporary file in the destination
  folder, are flushed to disk, and the temporary file is renamed over the destination
  with :func:`os.replace` (atomic on POSIX and Windows within one folder). A reader sees
  either the old file or the complete new one. A symbolic link to a regular file keeps
  the link: the file it points to is replaced.
* ``"-"`` (standard output), a FIFO (named pipe), or an open descriptor named
  ``/dev/fd/N``, ``/proc/self/fd/N``, ``/dev/stdout`` or ``/dev/stderr`` (what a shell's
  ``>(...)`` passes): the data are written straight through, in one piece, once all
  of them are ready.
* anything else -- a device node (``/dev/full``, ``/dev/sda``), a socket, a folder, a
  file under ``/proc`` or ``/sys`` -- is refused with a one-line :class:`OutputError`,
  and nothing is written.

:func:`write_many` writes the outputs of one run together: it refuses two outputs that
name one file (same resolved path or same inode) before writing anything, writes every
temporary file, and only then renames them all, so a run killed part-way never leaves
one output from this run beside another from an earlier one.

Temporary files are hidden and named ``.NAME.scanmass-HOST-PID-RANDOM.tmpSUFFIX``; a
later write to the same folder deletes those whose process is gone (same host), or that
are more than a day old (another host), so a ``kill -9`` leaves nothing behind for long.
"""

from __future__ import annotations

import errno
import hashlib
import os
import re
import shutil
import socket
import stat
import sys
import tempfile
import time
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from scanmass.errors import OutputError
from scanmass.readfile import describe_mode, display_path

__all__ = ["write_atomic", "write_many", "atomic_path", "check_distinct", "clean_leftovers", "TEMP_MARK"]

PathLike = str | os.PathLike

#: Part of every temporary file name (``.NAME.scanmass-HOST-PID-RANDOM.tmpSUFFIX``).
TEMP_MARK = ".scanmass-"

_TEMP_RE = re.compile(r"^\..*\.scanmass-([0-9a-f]{8})-(\d+)-[^.]+\.tmp(\.[^.]*)?$")
_FD_RE = re.compile(r"^/(?:dev/fd|proc/self/fd|proc/thread-self/fd)/(\d+)$")
_NAMED_FDS = {"/dev/stdout": 1, "/dev/stderr": 2}
_FOREIGN_TEMP_AGE_S = 86400.0
_PSEUDO_ROOTS = ("/proc/", "/sys/")


def _host_tag() -> str:
    return hashlib.sha256(socket.gethostname().encode("utf-8", "surrogateescape")).hexdigest()[:8]


@dataclass
class _Target:
    """Where one output goes: ``kind`` is "file", "stdout", "fifo" or "fd"."""

    given: str  # the path as the user gave it (for messages and the return value)
    kind: str
    path: Path | None = None  # "file": the resolved destination; "fifo": the FIFO
    fd: int | None = None  # "fd": the descriptor
    key: tuple | None = None  # identity, for refusing two outputs naming one file


def _text(path: PathLike) -> str:
    text = os.fspath(path)
    return os.fsdecode(text) if isinstance(text, bytes) else text


def _same_file(a: Path, b: Path) -> bool:
    try:
        if os.path.samefile(a, b):  # also catches hard links
            return True
    except OSError:
        pass
    return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def _classify(path: PathLike) -> _Target:
    """What kind of destination ``path`` is; refuse the kinds that cannot be written."""
    text = _text(path)
    shown = display_path(text)
    if text == "":
        raise OutputError("output path is empty; give a file name")
    if text == "-":
        return _Target(given=text, kind="stdout", key=("fd", "stdout"))
    fd_match = _FD_RE.match(text)
    fd = int(fd_match.group(1)) if fd_match else _NAMED_FDS.get(text)
    if fd is not None:
        try:
            st = os.fstat(fd)
        except OSError:
            raise OutputError(
                f"names descriptor {fd}, which is not open; give a file name instead", path=shown
            ) from None
        if stat.S_ISDIR(st.st_mode) or stat.S_ISBLK(st.st_mode):
            raise OutputError(f"names {describe_mode(st.st_mode)}; give a file name instead", path=shown)
        return _Target(given=text, kind="fd", fd=fd, key=("ino", st.st_dev, st.st_ino))
    found: os.stat_result | None
    try:
        found = os.stat(text)
    except FileNotFoundError:
        found = None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise OutputError("is a symbolic link loop; give another output name", path=shown) from None
        found = None
    real = os.path.realpath(text)
    if any(real.startswith(root) or real == root.rstrip("/") for root in _PSEUDO_ROOTS):
        raise OutputError(
            "leads into /proc or /sys (system files, not a place for results); give an ordinary file name",
            path=shown,
        )
    if found is not None:
        st = found
        if stat.S_ISDIR(st.st_mode):
            example = Path(text) / "result.json"
            raise OutputError(f"is a folder; give a file name inside it, e.g. {display_path(example)}", path=shown)
        if stat.S_ISFIFO(st.st_mode):
            return _Target(given=text, kind="fifo", path=Path(real), key=("ino", st.st_dev, st.st_ino))
        if not stat.S_ISREG(st.st_mode):
            raise OutputError(
                f"is {describe_mode(st.st_mode)}, not a regular file; scanmass does not write to devices, "
                "give an ordinary file name",
                path=shown,
            )
        return _Target(given=text, kind="file", path=Path(real), key=("ino", st.st_dev, st.st_ino))
    return _Target(given=text, kind="file", path=Path(real), key=("path", os.path.normcase(real)))


def _check_inputs(target: _Target, inputs: Iterable[PathLike | None]) -> None:
    if target.kind != "file":
        return  # a stream is never an input file
    assert target.path is not None
    for item in inputs:
        if item is None:
            continue
        source = Path(_text(item))
        if _same_file(target.path, source):
            raise OutputError(
                f"would overwrite the input file {display_path(source)}; choose a different output name",
                path=display_path(target.given),
            )


def _check_folder(target: _Target) -> Path:
    assert target.path is not None
    shown = display_path(target.given)
    folder = target.path.parent if str(target.path.parent) else Path(".")
    if not folder.exists():
        raise OutputError(
            f"folder {display_path(folder)} does not exist; create it first or choose another folder", path=shown
        )
    if not folder.is_dir():
        raise OutputError(f"{display_path(folder)} is not a folder; choose another output path", path=shown)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(
            f"folder {display_path(folder)} is not writable; choose another folder or fix its permissions", path=shown
        )
    return folder


def check_distinct(paths: Iterable[PathLike | None]) -> None:
    """Refuse two outputs that name one file, before anything is written.

    Two names are one file when they resolve to the same path, or name the same inode
    (a hard link, a FIFO reached by two names), or both are standard output.

    Raises
    ------
    OutputError
        Two of ``paths`` name one file.

    Examples
    --------
    >>> check_distinct(["a.json", "./a.json"])
    Traceback (most recent call last):
    ...
    scanmass.errors.OutputError: a.json and ./a.json name the same file; give each output its own file name
    """
    seen: dict[tuple, str] = {}
    for path in paths:
        if path is None:
            continue
        target = _classify(path)
        assert target.key is not None
        if target.key in seen:
            raise OutputError(
                f"{display_path(seen[target.key])} and {display_path(target.given)} name the same file; "
                "give each output its own file name"
            )
        seen[target.key] = target.given


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


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True  # exists, owned by someone else
    return True


def clean_leftovers(folder: PathLike) -> list[Path]:
    """Delete temporary files that earlier, killed runs left in ``folder``.

    A temporary file is removed when the process that made it is gone (same host),
    or when it is more than a day old (made on another host sharing the folder).

    Returns
    -------
    list of Path
        The files removed.
    """
    removed: list[Path] = []
    host = _host_tag()
    try:
        entries = list(os.scandir(_text(folder)))
    except OSError:
        return removed
    now = time.time()
    for entry in entries:
        match = _TEMP_RE.match(entry.name)
        if match is None:
            continue
        try:
            if not entry.is_file(follow_symlinks=False):
                continue
            if match.group(1) == host:
                stale = not _pid_alive(int(match.group(2)))
            else:
                stale = now - entry.stat(follow_symlinks=False).st_mtime > _FOREIGN_TEMP_AGE_S
            if stale:
                os.unlink(entry.path)
                removed.append(Path(entry.path))
        except OSError:
            continue
    return removed


def _make_temp(target: _Target) -> Path:
    assert target.path is not None
    folder = _check_folder(target)
    clean_leftovers(folder)
    # Keep the destination's extension last: cv2.imwrite and PIL pick the format by it.
    stem = target.path.name[:80]
    try:
        fd, tmp_name = tempfile.mkstemp(
            prefix=f".{stem}{TEMP_MARK}{_host_tag()}-{os.getpid()}-",
            suffix=f".tmp{target.path.suffix}",
            dir=folder,
        )
    except OSError as exc:
        raise OutputError(
            f"cannot create a file in folder {display_path(folder)} ({exc.strerror or exc}); choose another folder",
            path=display_path(target.given),
        ) from None
    os.close(fd)
    return Path(tmp_name)


def _write_bytes(tmp: Path, payload: bytes, given: str) -> None:
    try:
        with open(tmp, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
    except OSError as exc:
        raise OutputError(
            f"cannot write the file ({exc.strerror or exc}); check free space and permissions", path=display_path(given)
        ) from None


def _finish_temp(tmp: Path, target: _Target, *, allow_empty: bool) -> None:
    """Check and fsync a finished temporary file (before any rename)."""
    assert target.path is not None
    shown = display_path(target.given)
    if not tmp.exists():
        raise OutputError("nothing was written (the temporary file vanished); try again", path=shown)
    if not allow_empty and tmp.stat().st_size == 0:
        raise OutputError("nothing was written (the writer produced an empty file)", path=shown)
    os.chmod(tmp, _final_mode(target.path))
    _fsync_path(tmp)


def _rename(tmp: Path, target: _Target) -> None:
    assert target.path is not None
    try:
        os.replace(tmp, target.path)
    except OSError as exc:
        raise OutputError(
            f"cannot replace the file ({exc.strerror or exc}); check that it is not open elsewhere "
            "and that the folder is writable",
            path=display_path(target.given),
        ) from None
    _fsync_folder(target.path.parent)


def _stream_error(target: _Target, exc: OSError) -> OutputError:
    where = "standard output" if target.kind == "stdout" else display_path(target.given)
    if exc.errno in (errno.EPIPE, errno.ECONNRESET):
        return OutputError(
            f"{where} was closed by the program reading it before all was written; keep the reader running to the end"
        )
    if exc.errno == errno.ENOSPC:
        return OutputError(f"{where} is full (no space left on the device); free some space or write to a file")
    return OutputError(f"cannot write to {where} ({exc.strerror or exc}); write to a file instead")


def _silence_stdout() -> None:
    """After a broken pipe on stdout, point it at /dev/null so the exit flush stays quiet."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, AttributeError, ValueError):
        pass


def _write_stream(target: _Target, payload: bytes) -> None:
    """Write straight through to stdout, a FIFO or an open descriptor."""
    if target.kind == "stdout":
        out = sys.stdout
        if out is None:
            raise OutputError("standard output is closed; give a file name instead of '-'")
        try:
            out.flush()
            buffer = getattr(out, "buffer", None)
            if buffer is not None:
                buffer.write(payload)
                buffer.flush()
            else:
                out.write(payload.decode("utf-8", errors="surrogateescape"))
                out.flush()
        except OSError as exc:
            if exc.errno in (errno.EPIPE, errno.ECONNRESET):
                _silence_stdout()
            raise _stream_error(target, exc) from None
        except ValueError:  # I/O on a closed file
            raise OutputError("standard output is closed; give a file name instead of '-'") from None
        return
    if target.kind == "fd":
        assert target.fd is not None
        try:
            fd = os.dup(target.fd)
        except OSError as exc:
            raise _stream_error(target, exc) from None
    else:
        assert target.path is not None
        try:
            # O_NONBLOCK: with no reader, open fails (ENXIO) instead of waiting forever.
            fd = os.open(target.path, os.O_WRONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
        except OSError as exc:
            if exc.errno == errno.ENXIO:
                raise OutputError(
                    "is a FIFO (named pipe) that no program is reading; start the reader first or give a file name",
                    path=display_path(target.given),
                ) from None
            raise _stream_error(target, exc) from None
        os.set_blocking(fd, True)
    try:
        view = memoryview(payload)
        while view:
            n = os.write(fd, view)
            view = view[n:]
    except OSError as exc:
        raise _stream_error(target, exc) from None
    finally:
        os.close(fd)


def _payload(data: bytes | str, path: PathLike) -> bytes:
    if isinstance(data, str):
        return data.encode("utf-8", errors="surrogateescape")
    if isinstance(data, (bytes, bytearray, memoryview)):
        return bytes(data)
    raise OutputError(f"can only write bytes or str, not {type(data).__name__}", path=display_path(_text(path)))


@contextmanager
def atomic_path(path: PathLike, *, inputs: Iterable[PathLike | None] = ()) -> Iterator[Path]:
    """A temporary path to write to, put in place of ``path`` when the block succeeds.

    For writers that want a file name (``cv2.imwrite``, ``PIL.Image.save``, ezdxf).
    For a regular file the temporary file sits in the destination folder, ends with
    the same extension and is renamed over ``path``; for standard output (``"-"``), a
    FIFO or an open descriptor it sits in a private temporary folder and its bytes are
    written straight through. It is removed if the block raises, or if it is empty at
    the end (``cv2.imwrite`` reports failure by a return value, not an exception).

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
        ``path`` is an input, a folder, a device, in a folder that is missing or not
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
    target = _classify(path)
    _check_inputs(target, inputs)
    if target.kind != "file":
        assert target.path is not None or target.kind != "fifo"
        scratch = Path(tempfile.mkdtemp(prefix="scanmass-"))
        suffix = Path(target.given).suffix or (target.path.suffix if target.path is not None else "")
        tmp = scratch / f"out{suffix}"
        try:
            yield tmp
            if not tmp.exists() or tmp.stat().st_size == 0:
                raise OutputError("nothing was written (the writer produced an empty file)", path=target.given)
            _write_stream(target, tmp.read_bytes())
        finally:
            shutil.rmtree(scratch, ignore_errors=True)
        return
    tmp = _make_temp(target)
    try:
        yield tmp
        _finish_temp(tmp, target, allow_empty=False)
        _rename(tmp, target)
    except BaseException:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise


def write_many(items: Sequence[tuple[PathLike, bytes | str]], *, inputs: Iterable[PathLike | None] = ()) -> list[Path]:
    """Write the outputs of one run together (see the module notes).

    Every destination is checked first (two naming one file, an input, a device, a
    missing folder: nothing is written); then every temporary file is written and
    synced; then all are renamed into place; then the streams (stdout, FIFOs, open
    descriptors) are written.

    Parameters
    ----------
    items : sequence of (path, data)
        Each destination with its content (``str`` is written as UTF-8, as given).
    inputs : iterable of str, os.PathLike or None
        Files that must not be overwritten.

    Returns
    -------
    list of pathlib.Path
        The destinations, as given, in order.

    Raises
    ------
    OutputError
        A destination cannot be written; see :func:`write_atomic`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> [p.name for p in write_many([(folder / "a.txt", "1"), (folder / "b.txt", b"2")])]
    ['a.txt', 'b.txt']
    """
    inputs = [i for i in inputs if i is not None]
    check_distinct(path for path, _ in items)
    targets = [_classify(path) for path, _ in items]
    payloads = [_payload(data, path) for path, data in items]
    for target in targets:
        _check_inputs(target, inputs)
        if target.kind == "file":
            _check_folder(target)
    temps: list[tuple[Path, _Target]] = []
    try:
        for target, payload in zip(targets, payloads):
            if target.kind == "file":
                tmp = _make_temp(target)
                temps.append((tmp, target))
                _write_bytes(tmp, payload, target.given)
                _finish_temp(tmp, target, allow_empty=True)
        for tmp, target in temps:
            _rename(tmp, target)
    except BaseException:
        for tmp, _ in temps:
            try:
                tmp.unlink()
            except OSError:
                pass
        raise
    for target, payload in zip(targets, payloads):
        if target.kind != "file":
            _write_stream(target, payload)
    return [Path(target.given) for target in targets]


def write_atomic(path: PathLike, data: bytes | str, *, inputs: Iterable[PathLike | None] = ()) -> Path:
    """Write ``data`` to ``path``: atomically to a regular file, straight through to a stream.

    Parameters
    ----------
    path : str or os.PathLike
        The destination; ``"-"`` is standard output.
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
        ``path`` is an input, a folder, a device, in a folder that is missing or not
        writable, a FIFO nobody reads, or cannot be written (disk or pipe full, pipe
        closed).
    """
    return write_many([(path, data)], inputs=inputs)[0]
