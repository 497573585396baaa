"""The batch database: an embedded SQLite store in the output folder, and its CSV reports.

Output folder
-------------
``scanmass-batch.sqlite``
    Tables ``files`` (one row per image path: content and settings hashes, status
    ``ok``/``failed``/``duplicate``, timing, error, the full result document as JSON),
    ``parts`` (one row per measured part with its main figures) and ``runs`` (one row
    per invocation). Written only by the process that runs the batch, one transaction
    per finished file (write-ahead log, full sync).
``parts.csv``, ``failures.csv``, ``duplicates.csv``
    Rewritten atomically from the database at the end of a run, on interrupt, and after
    every watch cycle that changed something.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os
import socket
import sqlite3
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import IO, Any

from scanmass.batch.settings import canonical
from scanmass.errors import OptionError, OutputError, ResultFormatError, escape_text
from scanmass.measurement import CSV_COLUMNS
from scanmass.outputs.atomic import clean_leftovers, write_atomic

__all__ = [
    "DB_NAME",
    "DB_VERSION",
    "PARTS_CSV",
    "FAILURES_CSV",
    "DUPLICATES_CSV",
    "Job",
    "Record",
    "Store",
    "connect",
    "csv_text",
    "open_existing",
    "parts_rows",
    "utc_now",
    "write_csv_reports",
]

#: Name of the database in the output folder.
DB_NAME = "scanmass-batch.sqlite"

PARTS_CSV = "parts.csv"
FAILURES_CSV = "failures.csv"
DUPLICATES_CSV = "duplicates.csv"
_LOCK_NAME = ".scanmass-batch.lock"

#: ``worker`` of the records written for what the folder listing could not look at.
DISCOVERY = "discovery"

#: Version of the database layout (``PRAGMA user_version``).
DB_VERSION = 1

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


def utc_now() -> str:
    """The current UTC time, ISO 8601 to the millisecond (the times in the database)."""
    return datetime.now(UTC).isoformat(timespec="milliseconds")


@dataclass
class Job:
    """One file to look at: its folder, options, settings hash and what is known of its content."""

    root: Path
    path: str
    options: dict[str, Any]
    settings_sha256: str
    size_bytes: int | None = None
    mtime_ns: int | None = None
    content_sha256: str | None = None


@dataclass
class Record:
    """What the database knows of one file."""

    id: int
    size_bytes: int | None
    mtime_ns: int | None
    content_sha256: str | None
    settings_sha256: str
    status: str


def connect(db_path: Path, *, readonly: bool = False) -> sqlite3.Connection:
    try:
        if readonly:
            conn = sqlite3.connect(f"{db_path.resolve().as_uri()}?mode=ro", uri=True, isolation_level=None)
        else:
            conn = sqlite3.connect(db_path, isolation_level=None, timeout=30.0)
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        # A quick structural check (pages, freelist, record formats; not the indexes):
        # a damaged file is refused here, not met as a traceback half-way through.
        check = [row[0] for row in conn.execute("PRAGMA quick_check(1)").fetchall()]
    except sqlite3.DatabaseError as exc:
        if "malformed" in str(exc) or "corrupt" in str(exc):
            raise ResultFormatError(
                f"the batch database is damaged ({exc}); restore a backup, or move it away and run the "
                "batch again into this --out folder",
                path=str(db_path),
            ) from None
        raise ResultFormatError(
            f"not a scanmass batch database ({exc}); choose another --out folder", path=str(db_path)
        ) from None
    if check != ["ok"]:
        conn.close()
        raise ResultFormatError(
            f"the batch database is damaged ({'; '.join(map(str, check))[:200]}); restore a backup, or move it "
            "away and run the batch again into this --out folder",
            path=str(db_path),
        )
    if version not in (0, DB_VERSION):
        conn.close()
        raise ResultFormatError(
            f"batch database layout {version} is not supported by this version (expects {DB_VERSION}); use a new --out folder",
            path=str(db_path),
        )
    conn.row_factory = sqlite3.Row
    return conn


class Store:
    """The SQLite database of one output folder (written by this process only)."""

    def __init__(self, out_dir: Path) -> None:
        self.out_dir = out_dir
        self.db_path = out_dir / DB_NAME
        self._conn: sqlite3.Connection | None = None
        self._lock_fh: IO[str] | None = self._lock()
        try:
            self._conn = connect(self.db_path)
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

    @property
    def conn(self) -> sqlite3.Connection:
        """The open connection (an error once :meth:`close` has run)."""
        if self._conn is None:
            raise RuntimeError("the batch database is closed")
        return self._conn

    def _lock(self) -> IO[str]:
        path = self.out_dir / _LOCK_NAME
        for _ in range(10):
            try:
                fh = open(path, "a+")
            except OSError as exc:
                raise OutputError(
                    f"cannot write in the output folder ({exc.strerror or exc}); choose another --out folder "
                    "or fix its permissions",
                    path=str(self.out_dir),
                ) from None
            try:
                import fcntl

                fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except ImportError:  # pragma: no cover - not POSIX: no lock
                return fh
            except OSError:
                fh.close()
                raise OutputError(
                    "another 'scanmass batch' is writing to this folder; wait for it to finish or choose another --out folder",
                    path=str(self.out_dir),
                ) from None
            # The lock file is deleted on close; if that happened between our open and our
            # lock, we hold a lock on a deleted file: open the new one.
            try:
                same = os.path.samestat(os.fstat(fh.fileno()), os.stat(path))
            except OSError:
                same = False
            if same:
                return fh
            fh.close()
        raise OutputError(
            "the lock file keeps changing; another 'scanmass batch' is starting here; choose another --out folder",
            path=str(self.out_dir),
        )

    def _clean_temporaries(self) -> None:
        """Remove temporary CSVs left by a killed run (we hold the lock)."""
        clean_leftovers(self.out_dir)

    def close(self) -> None:
        conn, self._conn = self._conn, None
        if conn is not None:
            with contextlib.suppress(sqlite3.Error):
                conn.close()
        if self._lock_fh is not None:
            # delete the lock file while still holding the lock (see _lock)
            with contextlib.suppress(OSError):
                os.unlink(self.out_dir / _LOCK_NAME)
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
                    utc_now(),
                    __version__,
                    socket.gethostname(),
                    os.getpid(),
                    canonical(info["folders"]),
                    canonical(info["options"]),
                    info["backend"],
                ),
            )
        assert cur.lastrowid is not None  # an INSERT sets it
        return cur.lastrowid

    def end_run(self, run_id: int, status: str, counts: Mapping[str, Any]) -> None:
        with self.transaction():
            self.conn.execute(
                "UPDATE runs SET finished=?, status=?, measured=?, failed=?, duplicates=?, unchanged=?, seconds=? WHERE id=?",
                (
                    utc_now(),
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
    def records(self) -> dict[str, Record]:
        rows = self.conn.execute(
            "SELECT id, path, size_bytes, mtime_ns, content_sha256, settings_sha256, status FROM files"
        ).fetchall()
        return {
            r["path"]: Record(
                r["id"], r["size_bytes"], r["mtime_ns"], r["content_sha256"], r["settings_sha256"], r["status"]
            )
            for r in rows
        }

    def find_ok(self, content: str, settings: str, *, not_path: str) -> sqlite3.Row | None:
        return self.conn.execute(
            "SELECT path, result FROM files WHERE content_sha256=? AND settings_sha256=? AND status='ok' AND path<>? "
            "ORDER BY id LIMIT 1",
            (content, settings, escape_text(not_path)),
        ).fetchone()

    def update_stat(self, path: str, size_bytes: int | None, mtime_ns: int | None) -> None:
        with self.transaction():
            self.conn.execute(
                "UPDATE files SET size_bytes=?, mtime_ns=? WHERE path=?", (size_bytes, mtime_ns, escape_text(path))
            )

    def write_file(
        self,
        job: Job,
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
        """Record one finished file (and its parts) in one transaction.

        Paths are stored as text that is always UTF-8: a name that is not valid UTF-8
        is kept with each undecodable byte written as ``\\xNN`` (see
        :func:`scanmass.errors.escape_text`).
        """
        now = utc_now()
        db_path = escape_text(job.path)
        error = None if error is None else escape_text(error)
        same_as = None if same_as is None else escape_text(same_as)
        result = None if result is None else escape_text(result)
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
                    db_path,
                    job.size_bytes,
                    job.mtime_ns,
                    job.content_sha256,
                    job.settings_sha256,
                    canonical(job.options),
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
            file_id = self.conn.execute("SELECT id FROM files WHERE path=?", (db_path,)).fetchone()[0]
            self.conn.execute("DELETE FROM parts WHERE file_id=?", (file_id,))
            names = [name for name, _ in _PART_COLUMNS]
            self.conn.executemany(
                f"INSERT INTO parts (file_id, {', '.join(names)}, row_json) VALUES (?, {', '.join('?' * len(names))}, ?)",
                [(file_id, *[row.get(n) for n in names], canonical(row)) for row in rows],
            )

    def discovery_failures(self) -> set[str]:
        """Paths recorded as failed by the folder listing itself (worker ``discovery``)."""
        rows = self.conn.execute("SELECT path FROM files WHERE status='failed' AND worker=?", (DISCOVERY,))
        return {r[0] for r in rows}

    def forget(self, paths: Iterable[str]) -> None:
        """Delete the records of these paths (escaped as stored), in one transaction."""
        with self.transaction():
            self.conn.executemany("DELETE FROM files WHERE path=?", [(p,) for p in paths])

    # -- reports ------------------------------------------------------------------------
    def failures(self, paths: Iterable[str] | None = None) -> list[tuple[str, str]]:
        rows = self.conn.execute("SELECT path, error FROM files WHERE status='failed' ORDER BY path").fetchall()
        if paths is None:
            return [(r[0], r[1] or "") for r in rows]
        wanted = {escape_text(p) for p in paths}
        return [(r[0], r[1] or "") for r in rows if r[0] in wanted]

    def write_reports(self) -> list[Path]:
        return write_csv_reports(self.conn, self.out_dir)


def csv_text(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow(["" if v is None else v for v in row])
    return buf.getvalue()


def parts_rows(conn: sqlite3.Connection) -> Iterator[list[Any]]:
    cur = conn.execute(
        "SELECT f.path, p.row_json FROM parts p JOIN files f ON f.id = p.file_id WHERE f.status='ok' ORDER BY f.path, p.part"
    )
    for path, row_json in cur:
        row = json.loads(row_json)
        row["file"] = path
        yield [row.get(c) for c in CSV_COLUMNS]


def write_csv_reports(conn: sqlite3.Connection, out_dir: Path) -> list[Path]:
    failures = conn.execute("SELECT path, error FROM files WHERE status='failed' ORDER BY path").fetchall()
    dups = conn.execute("SELECT path, same_as FROM files WHERE status='duplicate' ORDER BY path").fetchall()
    return [
        write_atomic(out_dir / PARTS_CSV, csv_text(CSV_COLUMNS, parts_rows(conn))),
        write_atomic(out_dir / FAILURES_CSV, csv_text(["file", "error"], (tuple(r) for r in failures))),
        write_atomic(out_dir / DUPLICATES_CSV, csv_text(["file", "same_as"], (tuple(r) for r in dups))),
    ]


def open_existing(out_dir: str | os.PathLike) -> sqlite3.Connection:
    db = Path(out_dir).expanduser() / DB_NAME
    if not db.is_file():
        raise OptionError(
            f"no batch database ({DB_NAME}) here; run 'scanmass batch FOLDER --out DIR' first", path=str(out_dir)
        )
    return connect(db, readonly=True)
