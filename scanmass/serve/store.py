"""Jobs and history of the bench page, in the batch database format.

The store folder holds ``scanmass-batch.sqlite`` (the tables of :mod:`scanmass.batch.store`,
so ``scanmass batch-export`` and ``scanmass report DIR`` read it, plus a ``serve_jobs``
table: the queue, labels and notes), ``images/<sha256>.<ext>`` (each uploaded photo under
its content hash) and ``jobs/<id>/`` (each job's result, CSV, overlay, thumbnail and
downloads). A finished job is one row of ``files`` named ``jobs/<id>/<photo>``.

One process owns the store (the batch's lock file); every call runs on the server's
event-loop thread.
"""

from __future__ import annotations

import json
import shutil
import sqlite3
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from scanmass.batch.settings import canonical, settings_hash
from scanmass.batch.store import Job as FileJob
from scanmass.batch.store import Store, utc_now

__all__ = ["JobRow", "ServeStore", "LABEL_MAX", "NOTE_MAX"]

LABEL_MAX = 120
NOTE_MAX = 2000

_JOBS_SQL = """
CREATE TABLE IF NOT EXISTS serve_jobs (
    id INTEGER PRIMARY KEY,
    created TEXT NOT NULL,
    image TEXT NOT NULL,
    content_sha256 TEXT NOT NULL,
    size_bytes INTEGER, width_px INTEGER, height_px INTEGER,
    client_name TEXT NOT NULL DEFAULT '',
    options TEXT NOT NULL,
    settings_sha256 TEXT NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('queued', 'running', 'done', 'failed')),
    attempts INTEGER NOT NULL DEFAULT 0,
    label TEXT NOT NULL DEFAULT '',
    note TEXT NOT NULL DEFAULT '',
    error TEXT, started TEXT, finished TEXT, seconds REAL, worker TEXT,
    warnings TEXT
)
"""


@dataclass
class JobRow:
    """One job as the page sees it."""

    id: int
    created: str
    image: str
    content_sha256: str
    size_bytes: int
    width_px: int
    height_px: int
    client_name: str
    options: dict[str, Any]
    status: str
    attempts: int
    label: str
    note: str
    error: str | None
    started: str | None
    finished: str | None
    seconds: float | None
    warnings: list[str]

    @property
    def out_dir(self) -> str:
        """The job's folder, relative to the store."""
        return f"jobs/{self.id}"

    @property
    def record_path(self) -> str:
        """Its row's ``path`` in the batch tables."""
        return f"jobs/{self.id}/{Path(self.image).name}"


def clean_text(text: Any, limit: int) -> str:
    """A label or note: text without control characters (newlines kept in notes), at most ``limit`` characters."""
    s = "" if text is None else str(text)
    s = "".join(ch for ch in s if ch in "\n\t" or ch >= " ").replace("\t", " ")
    return s.strip()[:limit]


class ServeStore:
    """The store folder: the batch database (held with its lock), photos and job folders."""

    def __init__(self, store_dir: Path) -> None:
        self.dir = Path(store_dir)
        for sub in ("images", "jobs", "tmp"):
            (self.dir / sub).mkdir(parents=True, exist_ok=True)
        self.db = Store(self.dir)  # creates the batch tables, takes the lock
        try:
            with self.db.transaction() as conn:
                conn.execute(_JOBS_SQL)
            self.run_id = self.db.begin_run({"folders": [], "options": {}, "backend": "serve"})
        except BaseException:
            self.db.close()
            raise
        self.measured = self.failed = 0
        for leftover in (self.dir / "tmp").glob(".upload-*"):
            leftover.unlink(missing_ok=True)

    @property
    def conn(self) -> sqlite3.Connection:
        return self.db.conn

    def close(self, status: str = "done") -> None:
        """End this server's run in the ``runs`` table and release the store."""
        counts = {"measured": self.measured, "failed": self.failed, "duplicates": 0, "unchanged": 0, "seconds": None}
        try:
            self.db.end_run(self.run_id, status, counts)
        finally:
            self.db.close()

    # -- jobs ----------------------------------------------------------------------------
    def _row(self, r: sqlite3.Row) -> JobRow:
        return JobRow(
            id=r["id"],
            created=r["created"],
            image=r["image"],
            content_sha256=r["content_sha256"],
            size_bytes=r["size_bytes"] or 0,
            width_px=r["width_px"] or 0,
            height_px=r["height_px"] or 0,
            client_name=r["client_name"],
            options=json.loads(r["options"]),
            status=r["status"],
            attempts=r["attempts"],
            label=r["label"],
            note=r["note"],
            error=r["error"],
            started=r["started"],
            finished=r["finished"],
            seconds=r["seconds"],
            warnings=json.loads(r["warnings"]) if r["warnings"] else [],
        )

    def add_job(
        self,
        *,
        image: str,
        content_sha256: str,
        size_bytes: int,
        width_px: int,
        height_px: int,
        client_name: str,
        options: Mapping[str, Any],
        label: str,
        note: str = "",
    ) -> JobRow:
        with self.db.transaction() as conn:
            cur = conn.execute(
                "INSERT INTO serve_jobs (created, image, content_sha256, size_bytes, width_px, height_px, client_name, "
                "options, settings_sha256, status, label, note) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, 'queued', ?, ?)",
                (
                    utc_now(),
                    image,
                    content_sha256,
                    size_bytes,
                    width_px,
                    height_px,
                    client_name,
                    canonical(dict(options)),
                    settings_hash(options),
                    clean_text(label, LABEL_MAX),
                    clean_text(note, NOTE_MAX),
                ),
            )
        job = self.get(int(cur.lastrowid or 0))
        assert job is not None
        return job

    def get(self, job_id: int) -> JobRow | None:
        r = self.conn.execute("SELECT * FROM serve_jobs WHERE id=?", (job_id,)).fetchone()
        return None if r is None else self._row(r)

    def count(self, status: str) -> int:
        return int(self.conn.execute("SELECT COUNT(*) FROM serve_jobs WHERE status=?", (status,)).fetchone()[0])

    def position(self, job_id: int) -> int:
        """How many queued jobs are ahead of this one."""
        return int(
            self.conn.execute("SELECT COUNT(*) FROM serve_jobs WHERE status='queued' AND id<?", (job_id,)).fetchone()[0]
        )

    def mean_seconds(self) -> float | None:
        r = self.conn.execute(
            "SELECT AVG(seconds) FROM (SELECT seconds FROM serve_jobs WHERE seconds IS NOT NULL ORDER BY id DESC LIMIT 20)"
        ).fetchone()
        return None if r[0] is None else float(r[0])

    def claim_next(self, worker: str) -> JobRow | None:
        """The oldest queued job, marked running (one transaction), or None."""
        with self.db.transaction() as conn:
            r = conn.execute("SELECT id FROM serve_jobs WHERE status='queued' ORDER BY id LIMIT 1").fetchone()
            if r is None:
                return None
            conn.execute(
                "UPDATE serve_jobs SET status='running', attempts=attempts+1, started=?, worker=? WHERE id=?",
                (utc_now(), worker, r[0]),
            )
        return self.get(r[0])

    def finish(self, job: JobRow, res: Mapping[str, Any]) -> None:
        """Record a worker's answer: the batch tables' row (with its parts), then the job's status."""
        status = "ok" if res["status"] == "ok" else "failed"
        self.db.write_file(
            FileJob(
                root=self.dir,
                path=job.record_path,
                options=job.options,
                settings_sha256=settings_hash(job.options),
                size_bytes=job.size_bytes,
                content_sha256=job.content_sha256,
            ),
            run_id=self.run_id,
            status=status,
            error=res.get("error"),
            result=res.get("result"),
            rows=res.get("rows") or (),
            started=res.get("started"),
            finished=res.get("finished"),
            seconds=res.get("seconds"),
            worker=res.get("worker"),
        )
        self._set_done(job.id, "done" if status == "ok" else "failed", res)
        if status == "ok":
            self.measured += 1
        else:
            self.failed += 1

    def _set_done(self, job_id: int, status: str, res: Mapping[str, Any]) -> None:
        with self.db.transaction() as conn:
            conn.execute(
                "UPDATE serve_jobs SET status=?, error=?, finished=?, seconds=?, warnings=? WHERE id=?",
                (
                    status,
                    res.get("error"),
                    res.get("finished") or utc_now(),
                    res.get("seconds"),
                    json.dumps(res.get("warnings") or []),
                    job_id,
                ),
            )

    def fail(self, job: JobRow, error: str) -> None:
        """A job that ended without a worker's answer (its worker died, or it was interrupted too often)."""
        self.finish(job, {"status": "failed", "error": error, "finished": utc_now()})

    def recover(self, max_attempts: int) -> tuple[int, int]:
        """After a restart: jobs left 'running' by a killed server run again or fail; none twice.

        A job whose batch row was written before the kill is finished from that row.
        Returns ``(requeued, failed)``.
        """
        requeued = failed = 0
        for r in self.conn.execute("SELECT * FROM serve_jobs WHERE status='running' ORDER BY id").fetchall():
            job = self._row(r)
            done = self.conn.execute(
                "SELECT status, error, result, finished, seconds FROM files WHERE path=?", (job.record_path,)
            ).fetchone()
            if done is not None:  # killed between the two transactions of finish()
                warnings = json.loads(done["result"]).get("warnings", []) if done["result"] else []
                res = {"status": done["status"], "error": done["error"], "finished": done["finished"]}
                self._set_done(job.id, "done" if done["status"] == "ok" else "failed", res | {"warnings": warnings})
            elif job.attempts >= max_attempts:
                self.fail(
                    job,
                    f"the server stopped {job.attempts} times while measuring this photo; "
                    "it was not measured again (upload it once more to retry)",
                )
                failed += 1
            else:
                with self.db.transaction() as conn:
                    conn.execute("UPDATE serve_jobs SET status='queued', worker=NULL WHERE id=?", (job.id,))
                requeued += 1
        return requeued, failed

    def requeue(self, job: JobRow) -> None:
        """Put a job in flight back in the queue (shutdown), without counting the attempt."""
        with self.db.transaction() as conn:
            conn.execute(
                "UPDATE serve_jobs SET status='queued', worker=NULL, attempts=MAX(attempts-1, 0) WHERE id=? "
                "AND status='running'",
                (job.id,),
            )

    # -- history -------------------------------------------------------------------------
    def history(self, query: str = "", *, limit: int = 200) -> list[JobRow]:
        q = clean_text(query, LABEL_MAX)
        if q:
            pattern = "%" + q.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_") + "%"
            rows = self.conn.execute(
                "SELECT * FROM serve_jobs WHERE label LIKE ? ESCAPE '\\' OR client_name LIKE ? ESCAPE '\\' "
                "ORDER BY id DESC LIMIT ?",
                (pattern, pattern, limit),
            ).fetchall()
        else:
            rows = self.conn.execute("SELECT * FROM serve_jobs ORDER BY id DESC LIMIT ?", (limit,)).fetchall()
        return [self._row(r) for r in rows]

    def parts(self, job: JobRow) -> list[dict[str, Any]]:
        """The CSV rows of a done job's parts (from the batch tables)."""
        rows = self.conn.execute(
            "SELECT p.row_json FROM parts p JOIN files f ON f.id = p.file_id WHERE f.path=? ORDER BY p.part",
            (job.record_path,),
        ).fetchall()
        return [json.loads(r[0]) for r in rows]

    def result_text(self, job: JobRow) -> str | None:
        r = self.conn.execute("SELECT result FROM files WHERE path=?", (job.record_path,)).fetchone()
        return None if r is None else r[0]

    def edit(self, job_id: int, *, label: str | None = None, note: str | None = None) -> JobRow | None:
        with self.db.transaction() as conn:
            if label is not None:
                conn.execute("UPDATE serve_jobs SET label=? WHERE id=?", (clean_text(label, LABEL_MAX), job_id))
            if note is not None:
                conn.execute("UPDATE serve_jobs SET note=? WHERE id=?", (clean_text(note, NOTE_MAX), job_id))
        return self.get(job_id)

    def delete(self, job: JobRow) -> None:
        """Forget a job that is not running: its rows, its folder, and its photo when no other job has it."""
        with self.db.transaction() as conn:
            conn.execute("DELETE FROM serve_jobs WHERE id=?", (job.id,))
            conn.execute("DELETE FROM files WHERE path=?", (job.record_path,))
            others = conn.execute("SELECT COUNT(*) FROM serve_jobs WHERE image=?", (job.image,)).fetchone()[0]
        shutil.rmtree(self.dir / job.out_dir, ignore_errors=True)
        if not others:
            (self.dir / job.image).unlink(missing_ok=True)

    def jobs_by_status(self, statuses: Sequence[str]) -> list[JobRow]:
        marks = ", ".join("?" * len(statuses))
        rows = self.conn.execute(
            f"SELECT * FROM serve_jobs WHERE status IN ({marks}) ORDER BY id", tuple(statuses)
        ).fetchall()
        return [self._row(r) for r in rows]
