"""Batch file discovery: the image files under the folders, and their content hash."""

from __future__ import annotations

import fnmatch
import hashlib
import os
from collections.abc import Sequence
from pathlib import Path

from scanmass.errors import OptionError

__all__ = ["IMAGE_SUFFIXES", "content_hash", "find_images", "is_image"]

#: Suffixes (compared in lower case) of the files a batch picks up.
IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".tif", ".tiff")

_CHUNK_BYTES = 1 << 20


def _matches(rel_posix: str, name: str, pattern: str) -> bool:
    """A pattern with a slash matches the path below the folder, else the file name."""
    target = rel_posix if "/" in pattern else name
    return fnmatch.fnmatchcase(target.lower(), pattern.lower())


def is_image(name: str) -> bool:
    """Whether a file name has one of the :data:`IMAGE_SUFFIXES`."""
    return name.lower().endswith(IMAGE_SUFFIXES)


def find_images(
    folders: Sequence[str | os.PathLike],
    *,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    skip_dirs: Sequence[str | os.PathLike] = (),
) -> list[tuple[Path, Path]]:
    """Image files under the folders, recursively, sorted, each with its folder.

    A file is taken when its suffix is one of :data:`IMAGE_SUFFIXES`, it matches an
    ``include`` pattern (all do when none is given) and no ``exclude`` pattern. Patterns
    are shell globs compared without regard to case; one without ``/`` is matched
    against the file name (``*.png``), one with ``/`` against the path below the
    folder (``drawer-2/*``; ``*`` crosses folders). Hidden files and folders (names
    starting with ``.``) and the folders in ``skip_dirs`` are not entered. A path given
    as a folder may also be one image file.

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

    def take(root: Path, path: Path) -> None:
        key = str(path)
        if key in seen:
            return
        rel = path.relative_to(root).as_posix() if path != root else path.name
        if include and not any(_matches(rel, path.name, p) for p in include):
            return
        if any(_matches(rel, path.name, p) for p in exclude):
            return
        seen.add(key)
        out.append((root, path))

    for folder in folders:
        root = Path(os.path.normpath(os.path.abspath(Path(folder).expanduser())))
        if root.is_file():
            if not is_image(root.name):
                raise OptionError(
                    f"is a file but not a {'/'.join(s[1:] for s in IMAGE_SUFFIXES)} image; give a folder or an image",
                    path=str(root),
                )
            take(root.parent, root)
            continue
        if not root.is_dir():
            raise OptionError("folder not found; check the path", path=str(root))
        found: list[Path] = []
        for dirpath, dirnames, filenames in os.walk(root):
            dirnames[:] = sorted(
                d for d in dirnames if not d.startswith(".") and os.path.realpath(os.path.join(dirpath, d)) not in skip
            )
            found.extend(Path(dirpath) / f for f in filenames if not f.startswith(".") and is_image(f))
        for path in sorted(found):
            take(root, path)
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
    with open(path, "rb") as fh:
        while chunk := fh.read(_CHUNK_BYTES):
            digest.update(chunk)
    return digest.hexdigest()
