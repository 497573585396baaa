"""Batch measuring of scan folders: resumable, parallel, on one machine or a Dask cluster.

:func:`run_batch` finds the images under one or more folders (:mod:`.discover`),
measures each with :func:`scanmass.measure` in worker processes (:mod:`.backends`) and
records every outcome in an embedded SQLite database in the output folder
(:mod:`.store`), one transaction per finished file. Running the same batch again skips
the files already done (same content, same settings), so a run stopped at any moment --
Ctrl-C, ``kill -9``, a power cut after the last commit -- loses at most the files that
were being measured. :mod:`.export` reads a finished batch back.

Settings
--------
The measuring options (the fields of :class:`scanmass.options.MeasureOptions`) come from
the call and may be overridden per folder by a TOML file named ``scanmass.toml`` whose
keys are those fields, e.g. ``dpi = 600`` and ``min_area_mm2 = 5``. Files deeper in the
tree override shallower ones, from the folder given to the batch down to the image's own
folder. ``materials_file`` is read relative to the TOML file's folder. The settings hash
(:func:`scanmass.batch.settings.settings_hash`) covers the effective options, the
scanmass version and the files the options name: a new version of scanmass, or any
changed option or named file, re-measures the files.

Files are identified by their absolute path; the records of files that have since been
moved or deleted stay in the database and the CSVs. The content hash is the SHA-256 of the
file's bytes, read in 1 MiB chunks; a file whose size and modification time (ns) match
the database is not read again (``rehash=True`` forces it).
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import sqlite3
import threading
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from scanmass.batch.backends import Backend, make_backend_factory, measure_task, one_line
from scanmass.batch.discover import IMAGE_SUFFIXES, content_hash, find_images, is_image
from scanmass.batch.export import export_batch, iter_export, summary_rows
from scanmass.batch.settings import (
    SETTINGS_FILE,
    canonical,
    folder_settings,
    is_number,
    measure_option_names,
    normalise_settings,
    option_defaults,
    settings_hash,
    validate_settings,
)
from scanmass.batch.store import DB_NAME, DISCOVERY, Job, Record, Store
from scanmass.errors import OptionError, OutputError, escape_text
from scanmass.options import MeasureOptions, check_option_names

__all__ = [
    "BatchProgress",
    "BatchSummary",
    "run_batch",
    # re-exported from the batch's other modules, where they live
    "IMAGE_SUFFIXES",
    "SETTINGS_FILE",
    "DB_NAME",
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
    ``retry_failed=True`` to try them again); ``vanished`` those deleted while the
    batch ran (found, then gone before they could be read). ``failures`` lists every
    file found in this run whose record is a failure, old or new, and everything in the
    folders that could not be looked at (an unreadable folder, a symbolic link loop, a
    dangling link, a FIFO or device named like an image), each with its reason. ``worker_max_rss_kb`` holds the peak
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
    vanished: int = 0

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


class _Interrupt(Exception):
    """The stop event was set."""


class _Runner:
    def __init__(
        self,
        *,
        store: Store,
        backend_factory: Callable[[], Backend],
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
        self._backend: Backend | None = None
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
        self.vanished = 0
        self.problems_recorded: set[tuple[str, str]] = set()
        self.in_flight: dict[Any, Job] = {}
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
    def backend(self) -> Backend:
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
            validate_settings({**option_defaults(), **merged}, str(folder / self.settings_name))
        cache[(root, folder)] = merged
        return merged

    def plan(self) -> tuple[list[Job], dict[str, Record]]:
        """Find the files; return those that need a look (hash or measure)."""
        problems: list[tuple[Path, str]] = []
        files = find_images(
            self.folders,
            include=self.include,
            exclude=self.exclude,
            skip_dirs=[self.store.out_dir],
            problems=problems,
        )
        records = self.store.records()
        self._record_problems(problems)
        cache: dict[tuple[Path, Path], dict[str, Any]] = {}
        hashes: dict[str, str] = {}
        now_ns = time.time_ns()
        todo: list[Job] = []
        for root, path in files:
            key = str(path)
            options = self._settings_for(root, path.parent, cache)
            canon = canonical(options)
            if canon not in hashes:
                hashes[canon] = settings_hash(options)
            shash = hashes[canon]
            try:
                st = os.stat(path)
            except OSError:
                self.vanished += 1  # deleted since the listing
                self.emit("file", key, "vanished")
                continue
            rec = records.get(escape_text(key))
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
                Job(
                    root=root,
                    path=key,
                    options=options,
                    settings_sha256=shash,
                    size_bytes=st.st_size,
                    mtime_ns=st.st_mtime_ns,
                )
            )
        return todo, records

    def _record_problems(self, problems: Sequence[tuple[Path, str]]) -> None:
        """Record what the folders hold but cannot be measured, as failures (once per run).

        Such a record of an earlier run whose problem is gone (the folder is readable
        again, the link was removed) is deleted, unless the path is now a file to measure.
        """
        current = {escape_text(str(path)) for path, _ in problems}
        roots = tuple(escape_text(str(f)).rstrip(os.sep) + os.sep for f in self.folders)
        stale = {p for p in self.store.discovery_failures() - current if p.startswith(roots) and not os.path.isfile(p)}
        if stale:
            self.store.forget(stale)
            self.changed = True
        if not problems:
            return
        shash = settings_hash(self.base_options)
        for path, reason in problems:
            key = str(path)
            error = one_line(f"{escape_text(key)}: {reason}")
            self.found.add(key)
            if (key, error) in self.problems_recorded:
                continue
            self.problems_recorded.add((key, error))
            job = Job(root=path.parent, path=key, options=self.base_options, settings_sha256=shash)
            self.store.write_file(job, run_id=self.run_id, status="failed", error=error, worker=DISCOVERY)
            self._count(job, "failed", error)

    # -- one cycle ----------------------------------------------------------------------
    def run_cycle(self) -> None:
        self.cycle += 1
        todo, records = self.plan()
        self.total += len(todo)
        self.emit("cycle")
        queue = list(reversed(todo))  # pop() from the end keeps the sorted order
        originals: dict[tuple[str, str], Job] = {}
        waiting: dict[tuple[str, str], list[Job]] = {}
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

    def _count(self, job: Job, status: str, error: str | None = None) -> None:
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

    def _prepare(self, job: Job, records: Mapping[str, Record], originals: dict, waiting: dict) -> None:
        try:
            job.content_sha256 = content_hash(job.path)
        except FileNotFoundError:
            self.found.discard(job.path)
            self.processed += 1  # vanished: nothing to record, but counted
            self.vanished += 1
            self.emit("file", job.path, "vanished")
            return
        except OSError as exc:
            error = f"{escape_text(job.path)}: cannot read the file ({exc.strerror or exc}); check its permissions"
            self.store.write_file(job, run_id=self.run_id, status="failed", error=error)
            self._count(job, "failed", error)
            return
        rec = records.get(escape_text(job.path))
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

    def _write_duplicate(self, job: Job, same_as: str, result: str | None) -> None:
        if result is not None:
            doc = json.loads(result)
            if isinstance(doc.get("source"), dict):
                doc["source"]["path"] = job.path
            result = json.dumps(doc, allow_nan=False)
        self.store.write_file(job, run_id=self.run_id, status="duplicate", same_as=same_as, result=result)
        self._count(job, "duplicate")

    def _finish(self, fut: Any, job: Job, originals: dict, waiting: dict, queue: list[Job]) -> None:
        key = (job.content_sha256, job.settings_sha256)
        try:
            res = fut.result()
        except Exception as exc:  # the worker died or the cluster lost the task
            error = one_line(
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

    def _record(self, job: Job, res: Mapping[str, Any]) -> None:
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
    options: MeasureOptions | Mapping[str, Any] | None = None,
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
    options : MeasureOptions, optional
        The measuring options of every folder (a ``scanmass.toml`` in a folder overrides
        them there); a mapping of option names will do.
    **measure_options
        Fields of :class:`~scanmass.options.MeasureOptions` by name (``dpi``,
        ``min_area_mm2``, ``material``, ``thickness_mm``, ...), applied over ``options``.

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
        if not (is_number(value) and math.isfinite(value) and value >= 0):
            raise OptionError(f"{name} {value!r} must be zero or a positive number of seconds")
    if max_cycles is not None and (not isinstance(max_cycles, int) or max_cycles < 1):
        raise OptionError(f"max_cycles {max_cycles!r} must be a whole number >= 1")
    for pattern in (*include, *exclude):
        if not isinstance(pattern, str) or not pattern:
            raise OptionError(f"pattern {pattern!r} must be a non-empty glob such as '*.png'")
    if isinstance(options, MeasureOptions):
        given = options.as_dict()
    elif isinstance(options, Mapping):
        given = dict(options)
    elif options is None:
        given = {}
    else:
        raise OptionError(f"options must be a MeasureOptions, not {type(options).__name__}")
    check_option_names(given)
    check_option_names(measure_options)
    base_options = normalise_settings({**given, **measure_options}, where=None, base=Path.cwd())
    validate_settings({**option_defaults(), **base_options}, None)
    backend_factory, backend_label = make_backend_factory(workers, cluster)
    roots = [Path(os.path.normpath(os.path.abspath(Path(f).expanduser()))) for f in folder_list]
    for root in roots:
        if not (root.is_dir() or (root.is_file() and is_image(root.name))):
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

    store = Store(out)
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
        vanished=runner.vanished,
    )
