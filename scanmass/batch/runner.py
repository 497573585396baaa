"""Batch measuring of scan folders: resumable, parallel, on one machine or a Dask cluster.

:func:`run_batch` finds the images under one or more folders, measures each with
:func:`scanmass.measure` in worker processes and records every outcome in an embedded
SQLite database in the output folder, one transaction per finished file. Running the
same batch again skips the files already done (same content, same settings), so a run
stopped at any moment -- Ctrl-C, ``kill -9``, a power cut after the last commit -- loses
at most the files that were being measured.

Output folder
-------------
``scanmass-batch.sqlite``
    Tables ``files`` (one row per image path: content and settings hashes, status
    ``ok``/``failed``/``duplicate``, timing, error, the full result document as JSON),
    ``parts`` (one row per measured part with its main figures) and ``runs`` (one row
    per invocation). Written only by the process that runs the batch.
``parts.csv``, ``failures.csv``, ``duplicates.csv``
    Rewritten atomically from the database at the end of a run, on interrupt, and after
    every watch cycle that changed something.

Settings
--------
The measuring options (the keyword arguments of :func:`scanmass.measure`) come from the
call and may be overridden per folder by a TOML file named ``scanmass.toml`` whose keys
are those keyword arguments, e.g. ``dpi = 600`` and ``min_area_mm2 = 5``. Files deeper
in the tree override shallower ones, from the folder given to the batch down to the
image's own folder. ``materials_file`` is read relative to the TOML file's folder.

The settings hash is the SHA-256 of the canonical JSON (sorted keys, no spaces) of the
effective options with defaults filled in, the scanmass version, the result schema and
the SHA-256 of each file the options name (materials, mat layout, lens profile): a new
version of scanmass, or any changed option or named file, re-measures the files.

Files are identified by their absolute path; the records of files that have since been
moved or deleted stay in the database and the CSVs. The content hash is the SHA-256 of the
file's bytes, read in 1 MiB chunks; a file whose size and modification time (ns) match
the database is not read again (``rehash=True`` forces it).
"""

from __future__ import annotations

import contextlib
import csv
import difflib
import fnmatch
import hashlib
import inspect
import io
import json
import logging
import math
import multiprocessing
import os
import signal
import socket
import sqlite3
import threading
import time
import tomllib
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from concurrent import futures as cf
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal

from scanmass.errors import OptionError, OutputError, ResultFormatError, ScanmassError
from scanmass.measurement import CSV_COLUMNS, SCHEMA
from scanmass.outputs.atomic import write_atomic

__all__ = [
    "IMAGE_SUFFIXES",
    "SETTINGS_FILE",
    "DB_NAME",
    "BatchProgress",
    "BatchSummary",
    "run_batch",
    "export_batch",
    "iter_export",
    "summary_rows",
    "find_images",
    "folder_settings",
    "measure_option_names",
    "settings_hash",
    "content_hash",
    "measure_task",
]

#: Suffixes (compared in lower case) of the files a batch picks up.
IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".tif", ".tiff")

#: Name of the per-folder settings file.
SETTINGS_FILE = "scanmass.toml"

#: Name of the database in the output folder.
DB_NAME = "scanmass-batch.sqlite"

PARTS_CSV = "parts.csv"
FAILURES_CSV = "failures.csv"
DUPLICATES_CSV = "duplicates.csv"
_LOCK_NAME = ".scanmass-batch.lock"

#: Version of the database layout (``PRAGMA user_version``).
DB_VERSION = 1

_CHUNK_BYTES = 1 << 20

#: Columns of the ``parts`` table besides ``file_id`` and ``row_json`` (the main figures;
#: the full CSV row of :meth:`Measurement.csv_rows` is kept in ``row_json``).
_PART_COLUMNS = (
    ("part", "INTEGER"),
    ("area_mm2", "REAL"),
    ("area_u_mm2", "REAL"),
    ("centroid_x_mm", "REAL"),
    ("centroid_y_mm", "REAL"),
    ("centroid_x_u_mm", "REAL"),
    ("centroid_y_u_mm", "REAL"),
    ("perimeter_mm", "REAL"),
    ("ixx_mm4", "REAL"),
    ("iyy_mm4", "REAL"),
    ("ixy_mm4", "REAL"),
    ("i1_mm4", "REAL"),
    ("i2_mm4", "REAL"),
    ("principal_angle_deg", "REAL"),
    ("holes", "INTEGER"),
    ("mass_g", "REAL"),
    ("mass_u_g", "REAL"),
)

_SCHEMA_SQL = f"""
CREATE TABLE IF NOT EXISTS runs (
    id INTEGER PRIMARY KEY,
    started TEXT NOT NULL,
    finished TEXT,
    status TEXT NOT NULL CHECK (status IN ('running', 'done', 'interrupted', 'killed', 'error')),
    scanmass_version TEXT NOT NULL,
    host TEXT, pid INTEGER,
    folders TEXT, options TEXT, backend TEXT,
    measured INTEGER DEFAULT 0, failed INTEGER DEFAULT 0, duplicates INTEGER DEFAULT 0,
    unchanged INTEGER DEFAULT 0, seconds REAL
);
CREATE TABLE IF NOT EXISTS files (
    id INTEGER PRIMARY KEY,
    path TEXT NOT NULL UNIQUE,
    size_bytes INTEGER, mtime_ns INTEGER,
    content_sha256 TEXT,
    settings_sha256 TEXT NOT NULL,
    settings TEXT NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('ok', 'failed', 'duplicate')),
    same_as TEXT,
    error TEXT,
    started TEXT, finished TEXT, seconds REAL, cpu_seconds REAL,
    worker TEXT,
    run_id INTEGER REFERENCES runs (id),
    result TEXT
);
CREATE INDEX IF NOT EXISTS files_by_hashes ON files (content_sha256, settings_sha256, status);
CREATE TABLE IF NOT EXISTS parts (
    file_id INTEGER NOT NULL REFERENCES files (id) ON DELETE CASCADE,
    {", ".join(f"{name} {kind}" for name, kind in _PART_COLUMNS)},
    row_json TEXT NOT NULL,
    PRIMARY KEY (file_id, part)
);
"""


# ======================================================================================
# small helpers
# ======================================================================================


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds")


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


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


def measure_option_names() -> tuple[str, ...]:
    """The keyword arguments of :func:`scanmass.measure`: the valid settings keys."""
    from scanmass.pipeline import measure

    return tuple(name for name, p in inspect.signature(measure).parameters.items() if p.kind is p.KEYWORD_ONLY)


def _option_defaults() -> dict[str, Any]:
    from scanmass.pipeline import measure

    return {name: p.default for name, p in inspect.signature(measure).parameters.items() if p.kind is p.KEYWORD_ONLY}


# Kinds of the options whose default (None) does not tell their type.
# "path": a file, made absolute against the settings file's folder; "ref": a name or a file
# (made absolute when such a file exists there).
_KINDS: dict[str, str] = {
    "dpi": "dpi",
    "threshold": "float",
    "min_hole_area_mm2": "float",
    "material": "str",
    "thickness_mm": "float",
    "materials_file": "path",
    "sheet": "str",
    "printed_x_mm": "float",
    "printed_y_mm": "float",
    "mat": "ref",
    "lens": "ref",
}


def _kind(name: str, default: Any) -> str | None:
    if name in _KINDS:
        return _KINDS[name]
    if isinstance(default, bool):
        return "bool"
    if isinstance(default, int):
        return "int"
    if isinstance(default, float):
        return "float"
    if isinstance(default, str):
        return "str"
    return None  # a newer option this module does not know: passed through as given


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _coerce(name: str, value: Any, kind: str | None, *, where: str | None, base: Path | None) -> Any:
    """Check one option's type; return its canonical value (floats, absolute paths)."""
    if value is None or kind is None:
        return value

    def bad(expect: str) -> OptionError:
        return OptionError(f"setting {name} = {value!r} must be {expect}", path=where)

    if kind == "float":
        if not _is_number(value):
            raise bad("a number")
        return float(value)
    if kind == "int":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if not isinstance(value, int) or isinstance(value, bool):
            raise bad("a whole number")
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise bad("true or false")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise bad("a text string")
        return value
    if kind == "path":
        if not isinstance(value, (str, os.PathLike)):
            raise bad("a file path")
        p = Path(value).expanduser()
        if not p.is_absolute() and base is not None:
            p = base / p
        return os.path.normpath(os.path.abspath(p))
    if kind == "ref":
        if not isinstance(value, (str, os.PathLike)):
            return value  # an object given by a library caller (e.g. a lens profile)
        p = Path(value).expanduser()
        if not p.is_absolute() and base is not None:
            p = base / p
        return os.path.normpath(os.path.abspath(p)) if p.is_file() else os.fspath(value)
    if kind == "dpi":
        if _is_number(value):
            return float(value)
        if isinstance(value, (list, tuple)) and len(value) == 2 and all(_is_number(v) for v in value):
            return [float(value[0]), float(value[1])]
        raise bad("a number of dots per inch or a pair [x, y]")
    return value


def _check_names(given: Iterable[str], *, where: str | None, what: str) -> None:
    known = measure_option_names()
    for name in given:
        if name not in known:
            close = difflib.get_close_matches(name, known, n=1, cutoff=0.5)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise OptionError(f"unknown {what} {name!r}; {hint}known: {', '.join(known)}", path=where)


def _validate(options: Mapping[str, Any], where: str | None) -> None:
    """Range checks of the effective options, before any file is measured."""
    from scanmass.pipeline import MeasureOptions

    known = {f for f in MeasureOptions.__dataclass_fields__}
    opts = MeasureOptions(**{k: (tuple(v) if isinstance(v, list) else v) for k, v in options.items() if k in known})
    opts.check(where)
    dpi = options.get("dpi")
    if dpi is not None:
        values = dpi if isinstance(dpi, list) else [dpi]
        if not all(math.isfinite(v) and v > 0 for v in values):
            raise OptionError(f"dpi {dpi!r} must be a positive number of dots per inch, e.g. dpi = 600", path=where)
    material, thickness = options.get("material"), options.get("thickness_mm")
    if (material is None) != (thickness is None):
        raise OptionError(
            "mass needs both a material and a thickness, e.g. --material carbon-steel --thickness 3", path=where
        )
    if material is not None:
        from scanmass.mass.materials import find_material, load_materials
        from scanmass.mass.plate import check_positive

        check_positive("thickness_mm", thickness, hint="pass the sheet thickness in mm, e.g. 2.0")
        check_positive(
            "thickness_u_mm",
            options.get("thickness_u_mm", 0.0),
            allow_zero=True,
            hint="pass the thickness's standard uncertainty in mm, or 0",
        )
        find_material(material, load_materials(options.get("materials_file")))


def _normalise(options: Mapping[str, Any], *, where: str | None, base: Path | None) -> dict[str, Any]:
    defaults = _option_defaults()
    return {
        name: _coerce(name, value, _kind(name, defaults.get(name)), where=where, base=base)
        for name, value in options.items()
    }


def folder_settings(folder: str | os.PathLike, *, name: str = SETTINGS_FILE) -> dict[str, Any]:
    """Read the settings file of one folder (empty when there is none).

    Parameters
    ----------
    folder : path
        The folder.
    name : str
        Settings file name (default ``scanmass.toml``).

    Returns
    -------
    dict
        Keyword arguments of :func:`scanmass.measure`, type-checked; a relative
        ``materials_file`` made absolute against ``folder``.

    Raises
    ------
    OptionError
        Not valid TOML, an unknown key (the message names it and the close match), or a
        value of the wrong type.
    """
    path = Path(folder) / name
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return {}
    except (OSError, UnicodeDecodeError) as exc:
        raise OptionError(
            f"cannot read the settings file ({exc.__class__.__name__}); make it a readable UTF-8 TOML file",
            path=str(path),
        ) from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise OptionError(f"not valid TOML ({exc}); fix the file's syntax", path=str(path)) from None
    _check_names(doc, where=str(path), what="setting")
    return _normalise(doc, where=str(path), base=path.parent)


def _canonical(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False, default=str)


def settings_hash(options: Mapping[str, Any]) -> str:
    """SHA-256 of the canonical JSON of the effective options and the scanmass version.

    Defaults are filled in first, so naming a default value explicitly gives the same
    hash as leaving it out. A materials file contributes its content hash.

    Examples
    --------
    >>> settings_hash({"min_area_mm2": 2.0}) == settings_hash({})
    True
    >>> settings_hash({"dpi": 600}) == settings_hash({"dpi": 600.0})
    True
    """
    from scanmass import __version__

    defaults = _option_defaults()
    effective = {**_normalise(defaults, where=None, base=None), **_normalise(options, where=None, base=None)}
    doc: dict[str, Any] = {"scanmass": __version__, "schema": SCHEMA, "options": effective, "files_sha256": {}}
    for name, value in effective.items():  # a materials file, mat layout or lens profile: its content counts
        if _kind(name, defaults.get(name)) in ("path", "ref") and isinstance(value, str) and os.path.isfile(value):
            try:
                doc["files_sha256"][name] = content_hash(value)
            except OSError:
                doc["files_sha256"][name] = None
    return hashlib.sha256(_canonical(doc).encode("utf-8")).hexdigest()


# ======================================================================================
# discovery
# ======================================================================================


def _matches(rel_posix: str, name: str, pattern: str) -> bool:
    """A pattern with a slash matches the path below the folder, else the file name."""
    target = rel_posix if "/" in pattern else name
    return fnmatch.fnmatchcase(target.lower(), pattern.lower())


def _is_image(name: str) -> bool:
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
            if not _is_image(root.name):
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
            found.extend(Path(dirpath) / f for f in filenames if not f.startswith(".") and _is_image(f))
        for path in sorted(found):
            take(root, path)
    return out


# ======================================================================================
# the worker task
# ======================================================================================


def _one_cv_thread() -> None:
    try:
        import cv2

        cv2.setNumThreads(1)
    except Exception:  # pragma: no cover - OpenCV missing or odd build: nothing to limit
        pass


def _process_gone(pid: int) -> bool:
    """True when process ``pid`` no longer runs (or is a zombie, or the pid is someone else's)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except PermissionError:
        return True  # the pid now belongs to another user's process
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] == b"Z"
    except (OSError, IndexError):
        return False


def _watch_parent(pid: int, interval_s: float = 1.0) -> None:
    while not _process_gone(pid):
        time.sleep(interval_s)
    os._exit(1)  # the batch was killed (kill -9): nobody will collect our results


def _worker_init(parent_pid: int) -> None:
    """Process-pool initializer: one OpenCV thread, Ctrl-C left to the parent, exit with it.

    A pool worker whose parent was killed would otherwise wait for work forever (it holds
    both ends of its own task pipe), keeping the fork server alive with it.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _one_cv_thread()
    threading.Thread(target=_watch_parent, args=(parent_pid,), name="scanmass-parent-watch", daemon=True).start()


#: Thread-count variables of the BLAS and OpenMP runtimes numpy, OpenCV and scikit-image
#: may use. Worker processes run one thread each: the parallelism is the processes, and
#: idle OpenBLAS threads spinning beside a busy worker were measured to cost ~40 % extra
#: CPU per file.
_THREAD_ENV = (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
    "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS",
)


@contextlib.contextmanager
def _single_thread_env() -> Iterator[None]:
    """Set the thread-count variables (those the user has not set) to 1 while workers start.

    BLAS libraries read them once, when they are loaded in the new process; the
    variables are restored as soon as the processes exist.
    """
    added = [name for name in _THREAD_ENV if name not in os.environ]
    for name in added:
        os.environ[name] = "1"
    try:
        yield
    finally:
        for name in added:
            os.environ.pop(name, None)


def _max_rss_kb() -> int | None:
    try:
        import resource

        return int(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)  # KiB on Linux
    except Exception:  # pragma: no cover - not on POSIX
        return None


def measure_task(path: str, options: Mapping[str, Any]) -> dict[str, Any]:
    """Measure one file; return a small plain document (never raises for a bad file).

    This is what the worker processes (or Dask workers) run. The returned dict holds
    ``status`` (``ok``/``failed``), ``error`` (one line), ``result`` (the result
    document as JSON text, serialised here rather than in the parent), ``sha256`` (of the
    bytes measured), ``rows`` (the per-part CSV rows), ``started``/``finished`` (UTC ISO
    times), ``seconds`` (wall) and ``cpu_seconds``, ``worker`` (host:pid) and
    ``max_rss_kb`` (the worker's peak resident memory so far).
    """
    _one_cv_thread()
    from scanmass.pipeline import measure

    started = _now()
    t0, c0 = time.perf_counter(), time.process_time()
    result = rows = sha = None
    try:
        kwargs = {k: (tuple(v) if k == "dpi" and isinstance(v, list) else v) for k, v in options.items()}
        m = measure(path, **kwargs)
        result, rows, sha = m.to_json(indent=None), m.csv_rows(), m.source.sha256
        status, error = "ok", None
    except ScanmassError as exc:
        status, error = "failed", str(exc)
    except MemoryError:
        status, error = "failed", f"{path}: out of memory while measuring; lower --max-pixels or use fewer --workers"
    except Exception as exc:  # a bug must not stop the batch; say so plainly
        status = "failed"
        error = _one_line(f"{path}: internal error ({type(exc).__name__}: {exc}); please report it with this file")
    return {
        "path": path,
        "status": status,
        "error": error,
        "result": result,
        "sha256": sha,
        "rows": rows,
        "started": started,
        "finished": _now(),
        "seconds": time.perf_counter() - t0,
        "cpu_seconds": time.process_time() - c0,
        "worker": f"{socket.gethostname()}:{os.getpid()}",
        "max_rss_kb": _max_rss_kb(),
    }


# ======================================================================================
# the store
# ======================================================================================


@dataclass
class _Record:
    id: int
    size_bytes: int | None
    mtime_ns: int | None
    content_sha256: str | None
    settings_sha256: str
    status: str


def _connect(db_path: Path, *, readonly: bool = False) -> sqlite3.Connection:
    try:
        if readonly:
            conn = sqlite3.connect(f"{db_path.resolve().as_uri()}?mode=ro", uri=True, isolation_level=None)
        else:
            conn = sqlite3.connect(db_path, isolation_level=None, timeout=30.0)
        version = conn.execute("PRAGMA user_version").fetchone()[0]
    except sqlite3.DatabaseError as exc:
        raise ResultFormatError(
            f"not a scanmass batch database ({exc}); choose another --out folder", path=str(db_path)
        ) from None
    if version not in (0, DB_VERSION):
        conn.close()
        raise ResultFormatError(
            f"batch database layout {version} is not supported by this version (expects {DB_VERSION}); use a new --out folder",
            path=str(db_path),
        )
    conn.row_factory = sqlite3.Row
    return conn


class _Store:
    """The SQLite database of one output folder (written by this process only)."""

    def __init__(self, out_dir: Path) -> None:
        self.out_dir = out_dir
        self.db_path = out_dir / DB_NAME
        self._lock_fh = self._lock()
        try:
            self.conn = _connect(self.db_path)
            self.conn.execute("PRAGMA journal_mode=WAL")
            # FULL: a committed file survives a power cut too; one fsync per file is cheap
            # next to measuring it.
            self.conn.execute("PRAGMA synchronous=FULL")
            self.conn.execute("PRAGMA foreign_keys=ON")
            with self.transaction():
                for statement in _SCHEMA_SQL.split(";"):
                    if statement.strip():
                        self.conn.execute(statement)
                self.conn.execute(f"PRAGMA user_version={DB_VERSION}")
                # runs still 'running' belong to a process that was killed (we hold the lock)
                self.conn.execute("UPDATE runs SET status='killed' WHERE status='running'")
        except sqlite3.DatabaseError as exc:
            self.close()
            raise ResultFormatError(
                f"cannot use the batch database ({exc}); choose another --out folder", path=str(self.db_path)
            ) from None
        except BaseException:
            self.close()
            raise
        self._clean_temporaries()

    def _lock(self):
        path = self.out_dir / _LOCK_NAME
        fh = open(path, "a+")
        try:
            import fcntl

            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except ImportError:  # pragma: no cover - not POSIX: no lock
            pass
        except OSError:
            fh.close()
            raise OutputError(
                "another 'scanmass batch' is writing to this folder; wait for it to finish or choose another --out folder",
                path=str(self.out_dir),
            ) from None
        return fh

    def _clean_temporaries(self) -> None:
        """Remove temporary CSVs left by a killed run (we hold the lock)."""
        for name in (PARTS_CSV, FAILURES_CSV, DUPLICATES_CSV):
            stem, suffix = os.path.splitext(name)
            for tmp in self.out_dir.glob(f".{stem}.*.tmp{suffix}"):
                with contextlib.suppress(OSError):
                    tmp.unlink()

    def close(self) -> None:
        conn = getattr(self, "conn", None)
        if conn is not None:
            with contextlib.suppress(sqlite3.Error):
                conn.close()
            self.conn = None
        if self._lock_fh is not None:
            self._lock_fh.close()
            self._lock_fh = None

    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        self.conn.execute("BEGIN IMMEDIATE")
        try:
            yield self.conn
        except BaseException:
            self.conn.execute("ROLLBACK")
            raise
        self.conn.execute("COMMIT")

    # -- runs ---------------------------------------------------------------------------
    def begin_run(self, info: Mapping[str, Any]) -> int:
        from scanmass import __version__

        with self.transaction():
            cur = self.conn.execute(
                "INSERT INTO runs (started, status, scanmass_version, host, pid, folders, options, backend) "
                "VALUES (?, 'running', ?, ?, ?, ?, ?, ?)",
                (
                    _now(),
                    __version__,
                    socket.gethostname(),
                    os.getpid(),
                    _canonical(info["folders"]),
                    _canonical(info["options"]),
                    info["backend"],
                ),
            )
        return int(cur.lastrowid)

    def end_run(self, run_id: int, status: str, counts: Mapping[str, Any]) -> None:
        with self.transaction():
            self.conn.execute(
                "UPDATE runs SET finished=?, status=?, measured=?, failed=?, duplicates=?, unchanged=?, seconds=? WHERE id=?",
                (
                    _now(),
                    status,
                    counts["measured"],
                    counts["failed"],
                    counts["duplicates"],
                    counts["unchanged"],
                    counts["seconds"],
                    run_id,
                ),
            )

    # -- files --------------------------------------------------------------------------
    def records(self) -> dict[str, _Record]:
        rows = self.conn.execute(
            "SELECT id, path, size_bytes, mtime_ns, content_sha256, settings_sha256, status FROM files"
        ).fetchall()
        return {
            r["path"]: _Record(
                r["id"], r["size_bytes"], r["mtime_ns"], r["content_sha256"], r["settings_sha256"], r["status"]
            )
            for r in rows
        }

    def find_ok(self, content: str, settings: str, *, not_path: str) -> sqlite3.Row | None:
        return self.conn.execute(
            "SELECT path, result FROM files WHERE content_sha256=? AND settings_sha256=? AND status='ok' AND path<>? "
            "ORDER BY id LIMIT 1",
            (content, settings, not_path),
        ).fetchone()

    def update_stat(self, path: str, size_bytes: int | None, mtime_ns: int | None) -> None:
        with self.transaction():
            self.conn.execute("UPDATE files SET size_bytes=?, mtime_ns=? WHERE path=?", (size_bytes, mtime_ns, path))

    def write_file(
        self,
        job: _Job,
        *,
        run_id: int,
        status: str,
        error: str | None = None,
        same_as: str | None = None,
        result: str | None = None,
        rows: Sequence[Mapping[str, Any]] = (),
        started: str | None = None,
        finished: str | None = None,
        seconds: float | None = None,
        cpu_seconds: float | None = None,
        worker: str | None = None,
    ) -> None:
        """Record one finished file (and its parts) in one transaction."""
        now = _now()
        with self.transaction():
            self.conn.execute(
                "INSERT INTO files (path, size_bytes, mtime_ns, content_sha256, settings_sha256, settings, status, "
                "same_as, error, started, finished, seconds, cpu_seconds, worker, run_id, result) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) "
                "ON CONFLICT (path) DO UPDATE SET size_bytes=excluded.size_bytes, mtime_ns=excluded.mtime_ns, "
                "content_sha256=excluded.content_sha256, settings_sha256=excluded.settings_sha256, "
                "settings=excluded.settings, status=excluded.status, same_as=excluded.same_as, error=excluded.error, "
                "started=excluded.started, finished=excluded.finished, seconds=excluded.seconds, "
                "cpu_seconds=excluded.cpu_seconds, "
                "worker=excluded.worker, run_id=excluded.run_id, result=excluded.result",
                (
                    job.path,
                    job.size_bytes,
                    job.mtime_ns,
                    job.content_sha256,
                    job.settings_sha256,
                    _canonical(job.options),
                    status,
                    same_as,
                    error,
                    started or now,
                    finished or now,
                    seconds,
                    cpu_seconds,
                    worker,
                    run_id,
                    result,
                ),
            )
            file_id = self.conn.execute("SELECT id FROM files WHERE path=?", (job.path,)).fetchone()[0]
            self.conn.execute("DELETE FROM parts WHERE file_id=?", (file_id,))
            names = [name for name, _ in _PART_COLUMNS]
            self.conn.executemany(
                f"INSERT INTO parts (file_id, {', '.join(names)}, row_json) VALUES (?, {', '.join('?' * len(names))}, ?)",
                [(file_id, *[row.get(n) for n in names], _canonical(row)) for row in rows],
            )

    # -- reports ------------------------------------------------------------------------
    def failures(self, paths: Iterable[str] | None = None) -> list[tuple[str, str]]:
        rows = self.conn.execute("SELECT path, error FROM files WHERE status='failed' ORDER BY path").fetchall()
        if paths is None:
            return [(r[0], r[1] or "") for r in rows]
        wanted = set(paths)
        return [(r[0], r[1] or "") for r in rows if r[0] in wanted]

    def write_reports(self) -> list[Path]:
        return _write_reports(self.conn, self.out_dir)


def _csv_text(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow(["" if v is None else v for v in row])
    return buf.getvalue()


def _parts_rows(conn: sqlite3.Connection) -> Iterator[list[Any]]:
    cur = conn.execute(
        "SELECT f.path, p.row_json FROM parts p JOIN files f ON f.id = p.file_id WHERE f.status='ok' ORDER BY f.path, p.part"
    )
    for path, row_json in cur:
        row = json.loads(row_json)
        row["file"] = path
        yield [row.get(c) for c in CSV_COLUMNS]


def _write_reports(conn: sqlite3.Connection, out_dir: Path) -> list[Path]:
    failures = conn.execute("SELECT path, error FROM files WHERE status='failed' ORDER BY path").fetchall()
    dups = conn.execute("SELECT path, same_as FROM files WHERE status='duplicate' ORDER BY path").fetchall()
    return [
        write_atomic(out_dir / PARTS_CSV, _csv_text(CSV_COLUMNS, _parts_rows(conn))),
        write_atomic(out_dir / FAILURES_CSV, _csv_text(["file", "error"], (tuple(r) for r in failures))),
        write_atomic(out_dir / DUPLICATES_CSV, _csv_text(["file", "same_as"], (tuple(r) for r in dups))),
    ]


# ======================================================================================
# execution backends
# ======================================================================================


class _Backend:
    """Where the measuring runs: submit, wait for any, close."""

    name = "?"
    capacity = 1
    abandons_on_broken = False

    def submit(self, path: str, options: Mapping[str, Any]) -> Any:
        raise NotImplementedError

    def wait(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        raise NotImplementedError

    def close(self, *, abandon: bool = False) -> None:
        pass


class _SerialBackend(_Backend):
    """workers=0: measure in this process, one file at a time (for debugging)."""

    name = "serial"
    capacity = 1

    def submit(self, path: str, options: Mapping[str, Any]) -> cf.Future:
        fut: cf.Future = cf.Future()
        fut.set_result(measure_task(path, options))
        return fut

    def wait(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        return set(pending)


class _PoolBackend(_Backend):
    """A process pool (forkserver where available, else spawn), started on first use."""

    def __init__(self, workers: int) -> None:
        self.workers = workers
        self.capacity = 2 * workers
        self.name = f"processes:{workers}"
        self._pool: cf.ProcessPoolExecutor | None = None
        self._method = "spawn"

    def _ensure(self) -> cf.ProcessPoolExecutor:
        if self._pool is None:
            methods = multiprocessing.get_all_start_methods()
            self._method = "forkserver" if "forkserver" in methods else "spawn"
            ctx = multiprocessing.get_context(self._method)
            if self._method == "forkserver":
                with _single_thread_env():  # the workers fork from the server and keep its environment
                    from multiprocessing import forkserver

                    forkserver.ensure_running()
            self._pool = cf.ProcessPoolExecutor(
                max_workers=self.workers, mp_context=ctx, initializer=_worker_init, initargs=(os.getpid(),)
            )
        return self._pool

    def _submit(self, path: str, options: Mapping[str, Any]) -> cf.Future:
        pool = self._ensure()
        if self._method == "forkserver":
            return pool.submit(measure_task, path, dict(options))
        with _single_thread_env():  # spawn: a worker may start inside this call
            return pool.submit(measure_task, path, dict(options))

    def submit(self, path: str, options: Mapping[str, Any]) -> cf.Future:
        try:
            return self._submit(path, options)
        except BrokenProcessPool:
            self.restart()
            return self._submit(path, options)

    def wait(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        done, _ = cf.wait(list(pending), timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return set(done)

    def restart(self) -> None:
        self.close(abandon=True)

    def close(self, *, abandon: bool = False) -> None:
        pool, self._pool = self._pool, None
        if pool is None:
            return
        if abandon:
            for proc in list((getattr(pool, "_processes", None) or {}).values()):
                with contextlib.suppress(Exception):
                    proc.terminate()
            pool.shutdown(wait=False, cancel_futures=True)
        else:
            pool.shutdown(wait=True)


@contextlib.contextmanager
def _sigint_ignored() -> Iterator[None]:
    """Ignore SIGINT while child processes are started (main thread only; restored after)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def _require_distributed() -> Any:
    """Import dask.distributed lazily; scanmass works without it."""
    try:
        import distributed
    except ImportError:
        raise OptionError(
            "--cluster needs dask.distributed, which is not installed; install it with "
            "pip install 'dask[distributed]' (or the scanmass 'cluster' extra)"
        ) from None
    return distributed


class _DaskBackend(_Backend):
    """A dask.distributed cluster: a scheduler address, or a LocalCluster on loopback."""

    def __init__(self, address: str, workers: int | None) -> None:
        distributed = _require_distributed()
        self._distributed = distributed
        self._cluster = None
        text = address.strip()
        if text == "local" or text.startswith("local:"):
            n_text = text.partition(":")[2]
            try:
                n = int(n_text) if n_text else (workers or _cpu_count())
            except ValueError:
                raise OptionError(
                    f"cluster {address!r}: the number of workers must be a whole number, e.g. local:4"
                ) from None
            if n < 1:
                raise OptionError(f"cluster {address!r}: give at least one worker, e.g. local:2")
            import dask

            # Workers get one BLAS/OpenMP thread (as dask's default environment gives), but not
            # dask's MALLOC_TRIM_THRESHOLD_: an explicit trim threshold turns off glibc's
            # dynamic mmap threshold, so every large array is mapped and page-faulted afresh
            # (measured: +15 % CPU per A4 scan).
            environ = {
                k: v
                for k, v in (dask.config.get("distributed.nanny.pre-spawn-environ", None) or {}).items()
                if k != "MALLOC_TRIM_THRESHOLD_"
            }
            environ.update({name: 1 for name in _THREAD_ENV})
            with _sigint_ignored(), dask.config.set({"distributed.nanny.pre-spawn-environ": environ}):
                # SIGINT ignored: the worker processes inherit it, Ctrl-C is the parent's business
                self._cluster = distributed.LocalCluster(
                    n_workers=n,
                    threads_per_worker=1,
                    processes=True,
                    host="127.0.0.1",
                    dashboard_address=None,
                    silence_logs=logging.ERROR,
                )
            self._client = distributed.Client(self._cluster)
            self.name = f"dask-local:{n}"
        else:
            if "://" not in text and ":" not in text:
                raise OptionError(
                    f"cluster address {address!r} is not an address; give e.g. tcp://host:8786 or local:4"
                )
            try:
                self._client = distributed.Client(text, timeout="10s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise OptionError(
                    f"cannot reach the Dask scheduler at {text} ({_one_line(str(exc)) or type(exc).__name__}); "
                    "check the address and that the scheduler is running"
                ) from None
            self.name = f"dask:{text}"
        threads = sum(self._client.nthreads().values()) or 1
        self.capacity = max(2, 2 * threads)

    def submit(self, path: str, options: Mapping[str, Any]) -> Any:
        return self._client.submit(measure_task, path, dict(options), pure=False)

    def wait(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        pending = list(pending)
        try:
            done, _ = self._distributed.wait(pending, timeout=timeout, return_when="FIRST_COMPLETED")
        except TimeoutError:
            return set()
        except Exception:  # cancelled or lost tasks (a worker or the scheduler went away)
            ended = {f for f in pending if f.status in ("finished", "error", "cancelled", "lost")}
            if not ended:
                raise
            return ended  # their result() raises; the caller records or drops them
        return set(done)

    def close(self, *, abandon: bool = False) -> None:
        with contextlib.suppress(Exception):
            self._client.close()
        if self._cluster is not None:
            with contextlib.suppress(Exception):
                self._cluster.close()


def _cpu_count() -> int:
    try:
        return len(os.sched_getaffinity(0)) or 1
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


# ======================================================================================
# progress and summary
# ======================================================================================


@dataclass
class BatchProgress:
    """What a running batch reports to its ``progress`` callback.

    ``event`` is ``"cycle"`` (files found; ``total`` grew), ``"file"`` (one file
    finished: ``path``, ``status`` ``ok``/``failed``/``duplicate``/``unchanged``,
    ``error``), ``"finishing"`` (interrupted; waiting for the files in flight),
    ``"idle"`` (watch mode waits for new files) or ``"done"``. Counts are for the whole
    run; ``processed`` of ``total`` are the files that needed a look this run (the
    files skipped unread are in ``unchanged`` and ``failed_earlier`` only).
    """

    event: str
    cycle: int
    total: int
    processed: int
    measured: int
    failed: int
    duplicates: int
    unchanged: int
    failed_earlier: int
    in_flight: int
    elapsed_s: float
    path: str | None = None
    status: str | None = None
    error: str | None = None


@dataclass
class BatchSummary:
    """The outcome of :func:`run_batch`.

    ``measured``, ``failed`` and ``duplicates`` count the files handled in this run;
    ``unchanged`` the files skipped because they were done before with the same content
    and settings; ``failed_earlier`` those skipped because they failed before (pass
    ``retry_failed=True`` to try them again). ``failures`` lists every file found in
    this run whose record is a failure, old or new. ``worker_max_rss_kb`` holds the peak
    resident memory of each worker (host:pid) and ``worker_cpu_seconds`` the CPU time the
    workers spent measuring.
    """

    out_dir: Path
    db_path: Path
    reports: list[Path]
    run_id: int
    backend: str
    found: int
    measured: int
    failed: int
    duplicates: int
    unchanged: int
    failed_earlier: int
    cycles: int
    seconds: float
    interrupted: bool
    failures: list[tuple[str, str]] = field(default_factory=list)
    worker_max_rss_kb: dict[str, int] = field(default_factory=dict)
    worker_cpu_seconds: float = 0.0

    @property
    def ok(self) -> bool:
        """True when no file found in this run is recorded as failed."""
        return not self.failures

    @property
    def files_per_second(self) -> float | None:
        """Files measured (ok or failed) per second of wall time."""
        n = self.measured + self.failed
        return n / self.seconds if n and self.seconds > 0 else None

    @property
    def peak_worker_rss_mb(self) -> float | None:
        """The largest peak resident memory of any worker, MiB (None when none ran)."""
        return max(self.worker_max_rss_kb.values()) / 1024 if self.worker_max_rss_kb else None


# ======================================================================================
# the run
# ======================================================================================


@dataclass
class _Job:
    root: Path
    path: str
    options: dict[str, Any]
    settings_sha256: str
    size_bytes: int | None = None
    mtime_ns: int | None = None
    content_sha256: str | None = None


class _Interrupt(Exception):
    """The stop event was set."""


class _Runner:
    def __init__(
        self,
        *,
        store: _Store,
        backend_factory: Callable[[], _Backend],
        folders: list[Path],
        include: Sequence[str],
        exclude: Sequence[str],
        base_options: dict[str, Any],
        settings_name: str,
        retry_failed: bool,
        rehash: bool,
        watch: bool,
        settle_seconds: float,
        stop_event: threading.Event | None,
        progress: Callable[[BatchProgress], None] | None,
        run_id: int,
    ) -> None:
        self.store = store
        self._backend_factory = backend_factory
        self._backend: _Backend | None = None
        self.folders = folders
        self.include, self.exclude = include, exclude
        self.base_options = base_options
        self.settings_name = settings_name
        self.retry_failed, self.rehash, self.watch = retry_failed, rehash, watch
        self.settle_seconds = settle_seconds
        self.stop_event = stop_event
        self.progress = progress
        self.run_id = run_id
        self.t0 = time.perf_counter()
        self.cycle = 0
        self.total = self.processed = 0
        self.measured = self.failed = self.duplicates = 0
        self.unchanged: set[str] = set()
        self.failed_earlier: set[str] = set()
        self.recorded: set[str] = set()  # paths whose record this run wrote
        self.found: set[str] = set()
        self.in_flight: dict[Any, _Job] = {}
        self.rss: dict[str, int] = {}
        self.cpu_seconds = 0.0
        self.changed = False
        self.backend_name: str | None = None

    # -- reporting ----------------------------------------------------------------------
    def emit(self, event: str, path: str | None = None, status: str | None = None, error: str | None = None) -> None:
        if self.progress is None:
            return
        self.progress(
            BatchProgress(
                event=event,
                cycle=self.cycle,
                total=self.total,
                processed=self.processed,
                measured=self.measured,
                failed=self.failed,
                duplicates=self.duplicates,
                unchanged=len(self.unchanged),
                failed_earlier=len(self.failed_earlier),
                in_flight=len(self.in_flight),
                elapsed_s=time.perf_counter() - self.t0,
                path=path,
                status=status,
                error=error,
            )
        )

    def check_stop(self) -> None:
        if self.stop_event is not None and self.stop_event.is_set():
            raise _Interrupt

    @property
    def backend(self) -> _Backend:
        if self._backend is None:
            self._backend = self._backend_factory()
            self.backend_name = self._backend.name
        return self._backend

    # -- planning -----------------------------------------------------------------------
    def _settings_for(self, root: Path, folder: Path, cache: dict[tuple[Path, Path], dict[str, Any]]) -> dict[str, Any]:
        if (root, folder) in cache:
            return cache[(root, folder)]
        if folder == root or root not in folder.parents:
            parent: dict[str, Any] = self.base_options
        else:
            parent = self._settings_for(root, folder.parent, cache)
        own = folder_settings(folder, name=self.settings_name)
        merged = {**parent, **own} if own else parent
        if own:
            _validate({**_option_defaults(), **merged}, str(folder / self.settings_name))
        cache[(root, folder)] = merged
        return merged

    def plan(self) -> tuple[list[_Job], dict[str, _Record]]:
        """Find the files; return those that need a look (hash or measure)."""
        files = find_images(self.folders, include=self.include, exclude=self.exclude, skip_dirs=[self.store.out_dir])
        records = self.store.records()
        cache: dict[tuple[Path, Path], dict[str, Any]] = {}
        hashes: dict[str, str] = {}
        now_ns = time.time_ns()
        todo: list[_Job] = []
        for root, path in files:
            key = str(path)
            options = self._settings_for(root, path.parent, cache)
            canon = _canonical(options)
            if canon not in hashes:
                hashes[canon] = settings_hash(options)
            shash = hashes[canon]
            try:
                st = os.stat(path)
            except OSError:
                continue  # vanished since the listing
            rec = records.get(key)
            rehash = self.rehash and self.cycle == 1  # watch: later cycles trust size and time
            if (
                rec is not None
                and not rehash
                and rec.settings_sha256 == shash
                and rec.size_bytes == st.st_size
                and rec.mtime_ns == st.st_mtime_ns
            ):
                self.found.add(key)
                if rec.status in ("ok", "duplicate"):
                    if key not in self.recorded:
                        self.unchanged.add(key)
                    continue
                if key in self.recorded:
                    continue  # failed in this run already: retried once at most
                if not self.retry_failed:
                    self.failed_earlier.add(key)
                    continue
            if self.watch and now_ns - st.st_mtime_ns < self.settle_seconds * 1e9:
                continue  # perhaps still being written: next cycle
            self.found.add(key)
            todo.append(
                _Job(
                    root=root,
                    path=key,
                    options=options,
                    settings_sha256=shash,
                    size_bytes=st.st_size,
                    mtime_ns=st.st_mtime_ns,
                )
            )
        return todo, records

    # -- one cycle ----------------------------------------------------------------------
    def run_cycle(self) -> None:
        self.cycle += 1
        todo, records = self.plan()
        self.total += len(todo)
        self.emit("cycle")
        queue = list(reversed(todo))  # pop() from the end keeps the sorted order
        originals: dict[tuple[str, str], _Job] = {}
        waiting: dict[tuple[str, str], list[_Job]] = {}
        while True:
            self.check_stop()
            while queue and len(self.in_flight) < self.backend_capacity():
                job = queue.pop()
                self._prepare(job, records, originals, waiting)
                self.check_stop()
            if not self.in_flight:
                break
            done = self.backend.wait(self.in_flight, timeout=0.5)
            for fut in done:
                job = self.in_flight.pop(fut)
                self._finish(fut, job, originals, waiting, queue)

    def backend_capacity(self) -> int:
        # 1 until the first submission starts the backend: a folder with nothing to
        # measure never starts worker processes
        return self._backend.capacity if self._backend is not None else 1

    def _count(self, job: _Job, status: str, error: str | None = None) -> None:
        self.recorded.add(job.path)
        self.unchanged.discard(job.path)
        self.failed_earlier.discard(job.path)
        self.processed += 1
        if status == "ok":
            self.measured += 1
        elif status == "failed":
            self.failed += 1
        elif status == "duplicate":
            self.duplicates += 1
        if status in ("ok", "failed", "duplicate"):
            self.changed = True
        self.emit("file", job.path, status, error)

    def _prepare(self, job: _Job, records: Mapping[str, _Record], originals: dict, waiting: dict) -> None:
        try:
            job.content_sha256 = content_hash(job.path)
        except FileNotFoundError:
            self.found.discard(job.path)
            self.processed += 1  # vanished: nothing to record
            self.emit("file", job.path, "vanished")
            return
        except OSError as exc:
            error = f"{job.path}: cannot read the file ({exc.strerror or exc}); check its permissions"
            self.store.write_file(job, run_id=self.run_id, status="failed", error=error)
            self._count(job, "failed", error)
            return
        rec = records.get(job.path)
        if rec is not None and rec.content_sha256 == job.content_sha256 and rec.settings_sha256 == job.settings_sha256:
            if rec.status in ("ok", "duplicate") or not self.retry_failed or job.path in self.recorded:
                self.store.update_stat(job.path, job.size_bytes, job.mtime_ns)
                self.processed += 1
                if job.path not in self.recorded:
                    (self.failed_earlier if rec.status == "failed" else self.unchanged).add(job.path)
                self.emit("file", job.path, "unchanged")
                return
        key = (job.content_sha256, job.settings_sha256)
        if key in originals:
            waiting.setdefault(key, []).append(job)
            return
        orig = self.store.find_ok(*key, not_path=job.path)
        if orig is not None:
            self._write_duplicate(job, orig["path"], orig["result"])
            return
        originals[key] = job
        fut = self.backend.submit(job.path, job.options)
        self.in_flight[fut] = job

    def _write_duplicate(self, job: _Job, same_as: str, result: str | None) -> None:
        if result is not None:
            doc = json.loads(result)
            if isinstance(doc.get("source"), dict):
                doc["source"]["path"] = job.path
            result = json.dumps(doc, allow_nan=False)
        self.store.write_file(job, run_id=self.run_id, status="duplicate", same_as=same_as, result=result)
        self._count(job, "duplicate")

    def _finish(self, fut: Any, job: _Job, originals: dict, waiting: dict, queue: list[_Job]) -> None:
        key = (job.content_sha256, job.settings_sha256)
        try:
            res = fut.result()
        except Exception as exc:  # the worker died or the cluster lost the task
            error = _one_line(
                f"{job.path}: the worker stopped abruptly while measuring this file ({type(exc).__name__}: {exc}; "
                "out of memory or a crash); run again with --retry-failed, with --workers 1 to find the file that causes it"
            )
            self.store.write_file(job, run_id=self.run_id, status="failed", error=error)
            self._count(job, "failed", error)
            originals.pop(key, None)
            queue.extend(reversed(waiting.pop(key, [])))  # measure the copies themselves
            return
        originals.pop(key, None)
        self._record(job, res)
        for dup in waiting.pop(key, []):
            if res["status"] == "ok":
                self._write_duplicate(dup, job.path, res["result"])
            else:
                error = f"{dup.path}: same content as {job.path}, which failed: {res['error']}"
                self.store.write_file(dup, run_id=self.run_id, status="failed", same_as=job.path, error=error)
                self._count(dup, "failed", error)

    # -- stopping -----------------------------------------------------------------------
    def drain(self) -> None:
        """After an interrupt: cancel queued work, record the files still in flight."""
        if not self.in_flight:
            return
        for fut in list(self.in_flight):
            if fut.cancel():
                self.in_flight.pop(fut)
        self.emit("finishing")
        while self.in_flight:
            try:
                done = self.backend.wait(self.in_flight, timeout=0.5)
            except Exception:  # the workers went away with the interrupt: measured next time
                self.in_flight.clear()
                break
            for fut in done:
                job = self.in_flight.pop(fut)
                try:
                    res = fut.result()
                except BaseException:
                    continue  # lost with the interrupt; measured next time
                self._record(job, res)

    def _record(self, job: _Job, res: Mapping[str, Any]) -> None:
        """Write one worker result (one transaction)."""
        self.cpu_seconds += res.get("cpu_seconds") or 0.0
        if res.get("max_rss_kb") is not None:
            self.rss[res["worker"]] = max(self.rss.get(res["worker"], 0), int(res["max_rss_kb"]))
        if res["status"] == "ok" and res.get("sha256") and res["sha256"] != job.content_sha256:
            # changed while it was being measured: keep what was measured, re-read next time
            job.content_sha256, job.size_bytes, job.mtime_ns = res["sha256"], None, None
        self.store.write_file(
            job,
            run_id=self.run_id,
            status=res["status"],
            error=res["error"],
            result=res["result"],
            rows=res["rows"] or (),
            started=res["started"],
            finished=res["finished"],
            seconds=res["seconds"],
            cpu_seconds=res.get("cpu_seconds"),
            worker=res["worker"],
        )
        self._count(job, res["status"], res["error"])

    def close_backend(self, *, abandon: bool) -> None:
        if self._backend is not None:
            self._backend.close(abandon=abandon)
            self._backend = None


def _make_backend_factory(workers: int | None, cluster: str | None) -> tuple[Callable[[], _Backend], str]:
    if cluster is not None:
        if not isinstance(cluster, str) or not cluster.strip():
            raise OptionError("cluster must be an address such as tcp://host:8786, or local:N")
        _require_distributed()  # fail early, with the one-line message
        label = cluster.strip()
        return (lambda: _DaskBackend(label, workers)), f"dask:{label}"
    if workers is None:
        workers = _cpu_count()
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
        raise OptionError(
            f"workers {workers!r} must be a whole number >= 0 (0: measure in this process), e.g. --workers 2"
        )
    if workers == 0:
        return _SerialBackend, "serial"
    return (lambda: _PoolBackend(workers)), f"processes:{workers}"


def run_batch(
    folders: str | os.PathLike | Sequence[str | os.PathLike],
    out_dir: str | os.PathLike,
    *,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    workers: int | None = None,
    cluster: str | None = None,
    retry_failed: bool = False,
    rehash: bool = False,
    watch: bool = False,
    poll_seconds: float = 5.0,
    settle_seconds: float = 2.0,
    max_cycles: int | None = None,
    stop_event: threading.Event | None = None,
    settings_file: str = SETTINGS_FILE,
    progress: Callable[[BatchProgress], None] | None = None,
    **measure_options: Any,
) -> BatchSummary:
    """Measure every image under the folders; record the results in ``out_dir``.

    Parameters
    ----------
    folders : path or sequence of paths
        Folders searched recursively (see :func:`find_images`); an image file may be
        given too.
    out_dir : path
        Output folder (created if missing): the database ``scanmass-batch.sqlite``,
        ``parts.csv``, ``failures.csv`` and ``duplicates.csv``. Running again with the
        same folder resumes: files with unchanged content and settings are skipped.
    include, exclude : sequence of str
        Glob patterns selecting files (see :func:`find_images`).
    workers : int, optional
        Worker processes (default: one per available core); 0 measures in this process.
        With ``cluster``, the number of LocalCluster workers for ``"local"``.
    cluster : str, optional
        ``"tcp://host:port"``: run on that Dask scheduler (its workers must reach the
        files by the same absolute paths); ``"local:N"``: start a Dask LocalCluster of
        N single-threaded worker processes on loopback. Needs ``dask[distributed]``.
    retry_failed : bool
        Measure again the files that failed before (by default they are skipped while
        their content and settings are unchanged).
    rehash : bool
        Read every file to hash it, even when its size and time match the database.
    watch : bool
        Keep polling the folders every ``poll_seconds`` for new or changed files, until
        ``stop_event`` is set, ``max_cycles`` cycles have run, or Ctrl-C. Files modified
        less than ``settle_seconds`` ago wait for the next cycle.
    max_cycles : int, optional
        Stop watching after this many cycles.
    stop_event : threading.Event, optional
        Set it (from another thread) to stop: the files in flight are finished and
        recorded, then the run returns.
    settings_file : str
        Name of the per-folder settings file (default ``scanmass.toml``).
    progress : callable, optional
        Called with a :class:`BatchProgress` after each event.
    **measure_options
        Keyword arguments of :func:`scanmass.measure` (``dpi``, ``min_area_mm2``,
        ``material``, ``thickness_mm``, ...): the defaults of every folder.

    Returns
    -------
    BatchSummary
        ``interrupted`` is True when Ctrl-C (KeyboardInterrupt) or ``stop_event`` ended
        the run; a second Ctrl-C abandons the files in flight.

    Raises
    ------
    OptionError
        An unknown or invalid option or settings key, a missing folder, dask missing.
    OutputError
        ``out_dir`` cannot be used, or another batch is writing to it.
    ResultFormatError
        ``out_dir`` holds a database that is not a scanmass batch database.

    Notes
    -----
    Per-file problems (unreadable, corrupt, no scale, no part) never raise: they are
    recorded with their one-line reason and listed in ``failures.csv``. Each finished
    file is committed in its own transaction (SQLite, write-ahead log, full sync), so a
    run killed at any moment loses at most the files in flight and leaves a
    consistent database.

    The worker processes are started with the ``forkserver`` (or ``spawn``) method, so a
    script that calls this function with ``workers >= 1`` must do so under
    ``if __name__ == "__main__":``, as for any use of multiprocessing.
    """
    folder_list = [folders] if isinstance(folders, (str, os.PathLike)) else list(folders)
    include = [include] if isinstance(include, str) else list(include)
    exclude = [exclude] if isinstance(exclude, str) else list(exclude)
    if not folder_list:
        raise OptionError("no folder given; pass at least one folder of scans")
    for name, value in (("poll_seconds", poll_seconds), ("settle_seconds", settle_seconds)):
        if not (_is_number(value) and math.isfinite(value) and value >= 0):
            raise OptionError(f"{name} {value!r} must be zero or a positive number of seconds")
    if max_cycles is not None and (not isinstance(max_cycles, int) or max_cycles < 1):
        raise OptionError(f"max_cycles {max_cycles!r} must be a whole number >= 1")
    for pattern in (*include, *exclude):
        if not isinstance(pattern, str) or not pattern:
            raise OptionError(f"pattern {pattern!r} must be a non-empty glob such as '*.png'")
    _check_names(measure_options, where=None, what="measuring option")
    base_options = _normalise(measure_options, where=None, base=Path.cwd())
    _validate({**_option_defaults(), **base_options}, None)
    backend_factory, backend_label = _make_backend_factory(workers, cluster)
    roots = [Path(os.path.normpath(os.path.abspath(Path(f).expanduser()))) for f in folder_list]
    for root in roots:
        if not (root.is_dir() or (root.is_file() and _is_image(root.name))):
            find_images([root])  # raises the OptionError that says what is wrong

    out = Path(out_dir).expanduser()
    if out.exists() and not out.is_dir():
        raise OutputError("is a file; give a folder for the batch results", path=str(out))
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"cannot create the folder ({exc.strerror or exc}); choose another --out folder", path=str(out)
        ) from None
    out = Path(os.path.abspath(out))

    store = _Store(out)
    t0 = time.perf_counter()
    run_id = store.begin_run(
        {
            "folders": [str(r) for r in roots],
            "options": {**base_options, "include": list(include), "exclude": list(exclude)},
            "backend": backend_label,
        }
    )
    runner = _Runner(
        store=store,
        backend_factory=backend_factory,
        folders=roots,
        include=include,
        exclude=exclude,
        base_options=base_options,
        settings_name=settings_file,
        retry_failed=retry_failed,
        rehash=rehash,
        watch=watch,
        settle_seconds=settle_seconds if watch else 0.0,
        stop_event=stop_event,
        progress=progress,
        run_id=run_id,
    )
    interrupted = completed = False
    reports: list[Path] = []
    failures: list[tuple[str, str]] = []
    try:
        try:
            while True:
                runner.run_cycle()
                if runner.changed:
                    reports = store.write_reports()
                    runner.changed = False
                if not watch or (max_cycles is not None and runner.cycle >= max_cycles):
                    break
                runner.emit("idle")
                deadline = time.monotonic() + poll_seconds
                while time.monotonic() < deadline:
                    runner.check_stop()
                    time.sleep(min(0.1, max(0.0, deadline - time.monotonic())))
        except (KeyboardInterrupt, _Interrupt):
            interrupted = True
            try:
                runner.drain()
            except KeyboardInterrupt:  # the second Ctrl-C: give up the files in flight
                pass
        completed = True
    finally:
        # after an interrupt nothing is in flight any more (or it is given up): no waiting
        try:
            runner.close_backend(abandon=interrupted or not completed)
        finally:
            try:
                reports = store.write_reports()
                failures = store.failures(runner.found)
            finally:
                seconds = time.perf_counter() - t0
                counts = {
                    "measured": runner.measured,
                    "failed": runner.failed,
                    "duplicates": runner.duplicates,
                    "unchanged": len(runner.unchanged),
                    "seconds": seconds,
                }
                status = "error" if not completed else "interrupted" if interrupted else "done"
                with contextlib.suppress(sqlite3.Error):
                    store.end_run(run_id, status, counts)
                store.close()
    backend_name = runner.backend_name or backend_label
    runner.emit("done")
    return BatchSummary(
        out_dir=out,
        db_path=out / DB_NAME,
        reports=reports,
        run_id=run_id,
        backend=backend_name,
        found=len(runner.found),
        measured=runner.measured,
        failed=runner.failed,
        duplicates=runner.duplicates,
        unchanged=len(runner.unchanged),
        failed_earlier=len(runner.failed_earlier),
        cycles=runner.cycle,
        seconds=seconds,
        interrupted=interrupted,
        failures=failures,
        worker_max_rss_kb=dict(runner.rss),
        worker_cpu_seconds=runner.cpu_seconds,
    )


# ======================================================================================
# export
# ======================================================================================


def _open_existing(out_dir: str | os.PathLike) -> sqlite3.Connection:
    db = Path(out_dir).expanduser() / DB_NAME
    if not db.is_file():
        raise OptionError(
            f"no batch database ({DB_NAME}) here; run 'scanmass batch FOLDER --out DIR' first", path=str(out_dir)
        )
    return _connect(db, readonly=True)


def summary_rows(out_dir: str | os.PathLike) -> tuple[list[dict[str, Any]], list[dict[str, str]]]:
    """The parts of every measured file and the failures, from a batch's database.

    Returns ``(rows, failures)``: rows keyed like :data:`CSV_COLUMNS`, failures as
    ``{"file", "reason"}``; ready for :func:`scanmass.outputs.report.render_summary`.
    """
    conn = _open_existing(out_dir)
    try:
        rows = [dict(zip(CSV_COLUMNS, row)) for row in _parts_rows(conn)]
        failures = [
            {"file": path, "reason": error or ""}
            for path, error in conn.execute("SELECT path, error FROM files WHERE status='failed' ORDER BY path")
        ]
    finally:
        conn.close()
    return rows, failures


def iter_export(out_dir: str | os.PathLike, *, format: Literal["csv", "jsonl"] = "csv") -> Iterator[str]:
    """The text of an export, in pieces (see :func:`export_batch`)."""
    if format not in ("csv", "jsonl"):
        raise OptionError(f"export format {format!r} is not known; use csv or jsonl")
    conn = _open_existing(out_dir)
    try:
        if format == "csv":
            yield _csv_text(CSV_COLUMNS, [])
            for row in _parts_rows(conn):
                yield _csv_text(CSV_COLUMNS, [row]).split("\n", 1)[1]
            return
        cur = conn.execute(
            "SELECT path, status, error, same_as, content_sha256, settings_sha256, started, finished, seconds, "
            "cpu_seconds, worker, result FROM files ORDER BY path"
        )
        for r in cur:
            doc = {"file": r["path"], **{k: r[k] for k in r.keys() if k not in ("path", "result")}}
            doc["result"] = None if r["result"] is None else json.loads(r["result"])
            yield json.dumps(doc, allow_nan=False) + "\n"
    finally:
        conn.close()


def export_batch(
    out_dir: str | os.PathLike, *, format: Literal["csv", "jsonl"] = "csv", out: str | os.PathLike
) -> Path:
    """Re-export a batch's results from its database.

    Parameters
    ----------
    out_dir : path
        The batch's output folder (holding ``scanmass-batch.sqlite``).
    format : {"csv", "jsonl"}
        ``csv``: one row per measured part, the columns of ``parts.csv``.
        ``jsonl``: one JSON object per file: ``file``, ``status``, ``error``,
        ``same_as``, the hashes, timing and ``result`` (the full result document).
    out : path
        The file to write (atomically).

    Returns
    -------
    Path
    """
    text = "".join(iter_export(out_dir, format=format))
    return write_atomic(out, text)
