"""Batch file discovery: the image files under the folders, and their content hash."""

from __future__ import annotations

import errno
import fnmatch
import hashlib
import os
import stat
from collections.abc import Sequence
from pathlib import Path

from scanmass.errors import OptionError
from scanmass.readfile import describe_mode, display_path

__all__ = ["IMAGE_SUFFIXES", "content_hash", "find_images", "is_image"]

#: Suffixes (compared in lower case) of the files a batch picks up.
IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".tif", ".tiff")

_CHUNK_BYTES = 1 << 20

# Folders a batch never enters through a link (generated files, devices).
_SYSTEM_ROOTS = ("/proc/", "/sys/", "/dev/")


def _matches(rel_posix: str, name: str, pattern: str) -> bool:
    """A pattern with a slash matches the path below the folder, else the file name."""
    target = rel_posix if "/" in pattern else name
    return fnmatch.fnmatchcase(target.lower(), pattern.lower())


def is_image(name: str) -> bool:
    """Whether a file name has one of the :data:`IMAGE_SUFFIXES`."""
    return name.lower().endswith(IMAGE_SUFFIXES)


def _walk(
    root: Path,
    skip: set[str],
    problems: list[tuple[Path, str]] | None,
) -> list[Path]:
    """Image files below ``root`` (regular files only); what cannot be looked at goes to ``problems``.

    Links to folders are followed, except one that leads back to a folder above it
    (a loop); folders and links under /proc, /sys and /dev are not entered.
    """
    found: list[Path] = []

    def note(path: Path, reason: str) -> None:
        if problems is not None:
            problems.append((path, reason))

    def visit(folder: Path, ancestors: frozenset[tuple[int, int]]) -> None:
        try:
            with os.scandir(folder) as it:
                entries = sorted(it, key=lambda e: e.name)
        except OSError as exc:
            note(folder, f"folder cannot be read ({exc.strerror or exc}); fix its permissions, or --exclude it")
            return
        for entry in entries:
            if entry.name.startswith("."):
                continue
            path = folder / entry.name
            try:
                st = os.stat(path)
            except FileNotFoundError:
                if entry.is_symlink():
                    note(path, "is a link to nothing (dangling link); remove it or point it at a file")
                continue  # deleted since the listing
            except OSError as exc:
                if exc.errno == errno.ELOOP:
                    note(path, "is a symbolic link loop; remove the link")
                else:
                    note(path, f"cannot be looked at ({exc.strerror or exc}); check its permissions")
                continue
            if stat.S_ISDIR(st.st_mode):
                real = os.path.realpath(path)
                if real in skip:
                    continue
                if (st.st_dev, st.st_ino) in ancestors:
                    note(path, f"is a link back to the folder {display_path(real)} above it (a loop); not entered")
                    continue
                if any(real == r.rstrip("/") or real.startswith(r) for r in _SYSTEM_ROOTS):
                    note(path, f"leads into the system folder {display_path(real)}; not entered")
                    continue
                visit(path, ancestors | {(st.st_dev, st.st_ino)})
            elif is_image(entry.name):
                if stat.S_ISREG(st.st_mode):
                    found.append(path)
                else:
                    note(path, f"is {describe_mode(st.st_mode)}, not a regular file; only image files are measured")

    try:
        st0 = os.stat(root)
        visit(root, frozenset({(st0.st_dev, st0.st_ino)}))
    except OSError as exc:
        note(root, f"folder cannot be read ({exc.strerror or exc}); check its permissions")
    return found


def find_images(
    folders: Sequence[str | os.PathLike],
    *,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    skip_dirs: Sequence[str | os.PathLike] = (),
    problems: list[tuple[Path, str]] | None = None,
) -> list[tuple[Path, Path]]:
    """Image files under the folders, recursively, sorted, each with its folder.

    A file is taken when its suffix is one of :data:`IMAGE_SUFFIXES`, it matches an
    ``include`` pattern (all do when none is given) and no ``exclude`` pattern. Patterns
    are shell globs compared without regard to case; one without ``/`` is matched
    against the file name (``*.png``), one with ``/`` against the path below the
    folder (``drawer-2/*``; ``*`` crosses folders). Hidden files and folders (names
    starting with ``.``) and the folders in ``skip_dirs`` are not entered. A path given
    as a folder may also be one image file. Links to folders are followed, unless they
    lead back to a folder above them.

    Parameters
    ----------
    problems : list, optional
        Receives ``(path, reason)`` for everything that could not be looked at: an
        unreadable folder, a symbolic link loop, a dangling link, a FIFO or device
        named like an image (matched against ``include``/``exclude`` like a file).
        File names that are not valid UTF-8 are kept as they are (``str`` with
        surrogate escapes), so the files can be opened.

    Returns
    -------
    list of (folder, file)
        Absolute paths; a file reachable from two folders is listed once, with the
        first folder.

    Raises
    ------
    OptionError
        A folder does not exist or is not a folder or an image file.
    """
    skip = {os.path.realpath(p) for p in skip_dirs}
    seen: set[str] = set()
    out: list[tuple[Path, Path]] = []

    def wanted(root: Path, path: Path) -> bool:
        try:
            rel = path.relative_to(root).as_posix() if path != root else path.name
        except ValueError:
            rel = path.name
        if include and not any(_matches(rel, path.name, p) for p in include):
            return False
        return not any(_matches(rel, path.name, p) for p in exclude)

    def take(root: Path, path: Path) -> None:
        key = str(path)
        if key in seen or not wanted(root, path):
            return
        seen.add(key)
        out.append((root, path))

    for folder in folders:
        root = Path(os.path.normpath(os.path.abspath(Path(folder).expanduser())))
        if root.is_file():
            if not is_image(root.name):
                raise OptionError(
                    f"is a file but not a {'/'.join(s[1:] for s in IMAGE_SUFFIXES)} image; give a folder or an image",
                    path=display_path(root),
                )
            take(root.parent, root)
            continue
        if not root.is_dir():
            raise OptionError("folder not found; check the path", path=display_path(root))
        found_problems: list[tuple[Path, str]] = []
        for path in sorted(_walk(root, skip, found_problems)):
            take(root, path)
        if problems is not None:
            for path, reason in found_problems:
                # reported unless --exclude names it; an image name must also match --include
                if is_image(path.name):
                    report = wanted(root, path)
                else:
                    rel = path.relative_to(root).as_posix() if path != root else path.name
                    report = not any(_matches(rel, path.name, p) for p in exclude)
                if report:
                    problems.append((path, reason))
    return out


def content_hash(path: str | os.PathLike) -> str:
    """SHA-256 (hex) of a file's bytes, read in 1 MiB chunks.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x.bin"
    >>> _ = p.write_bytes(b"abc")
    >>> content_hash(p)[:16]
    'ba7816bf8f01cfea'
    """
    digest = hashlib.sha256()
    # O_NONBLOCK: a file swapped for a FIFO since the listing must not wait for a writer
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    with open(fd, "rb") as fh:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise OSError(errno.EINVAL, f"{describe_mode(st.st_mode)}, not a regular file")
        left = st.st_size  # never more than the file's size
        while left > 0 and (chunk := fh.read(min(_CHUNK_BYTES, left))):
            digest.update(chunk)
            left -= len(chunk)
    return digest.hexdigest()
