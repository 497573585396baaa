"""The job queue: worker processes that measure, one job each at a time, fed from the store.

The queue lives in the store (jobs ``queued`` in the database), so it survives a restart.
Each worker is its own one-process pool: a worker that dies (a crash, the out-of-memory
killer, ``kill -9``) fails only the job it was measuring, with the reason, and is started
again. Downloads made on demand (DXF, SVG, report) run in one more process, never in the
request.
"""

from __future__ import annotations

import asyncio
import concurrent.futures as cf
import multiprocessing
import os
from collections.abc import Callable
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from scanmass.batch.backends import _single_thread_env
from scanmass.errors import OutputError
from scanmass.serve.config import ServeConfig
from scanmass.serve.store import JobRow, ServeStore
from scanmass.serve.tasks import export_task, measure_task, worker_init, worker_pid

__all__ = ["JobRunner", "QueueFull"]


class QueueFull(Exception):
    """The queue holds ``queue_size`` jobs already; ``retry_after_s`` is a fair wait."""

    def __init__(self, retry_after_s: int) -> None:
        super().__init__(f"the queue is full; try again in {retry_after_s} s")
        self.retry_after_s = retry_after_s


class _Worker:
    """One worker process (a one-process pool, started with 'spawn': nothing of the server is inherited)."""

    def __init__(self, store_dir: str, name: str) -> None:
        self.store_dir = store_dir
        self.name = name
        self.pid: int | None = None
        self.job: JobRow | None = None
        self.executor = self._start()

    def _start(self) -> cf.ProcessPoolExecutor:
        with _single_thread_env():
            return cf.ProcessPoolExecutor(
                max_workers=1,
                mp_context=multiprocessing.get_context("spawn"),
                initializer=worker_init,
                initargs=(self.store_dir, os.getpid()),
            )

    async def started(self) -> None:
        """Start the process now (it imports the measuring stages) and learn its pid."""
        self.pid = await asyncio.wrap_future(self.executor.submit(worker_pid))

    def restart(self) -> None:
        self.close()
        self.executor = self._start()
        self.pid = None

    def close(self) -> None:
        executor = self.executor
        processes = list(getattr(executor, "_processes", {}).values())  # to end them at once
        executor.shutdown(wait=False, cancel_futures=True)
        for proc in processes:
            if proc.is_alive():
                proc.kill()


class JobRunner:
    """Feeds queued jobs from the store to the workers and records their answers."""

    def __init__(
        self,
        config: ServeConfig,
        store: ServeStore,
        *,
        task: Callable[..., dict[str, Any]] = measure_task,
    ) -> None:
        self.config = config
        self.store = store
        self.task = task
        store_dir = str(store.dir.resolve())
        self.workers = [_Worker(store_dir, f"worker-{i + 1}") for i in range(config.workers)]
        self.exporter = _Worker(store_dir, "exporter")
        self.in_flight: dict[int, asyncio.Task] = {}
        self.exports: dict[tuple[int, str], asyncio.Future] = {}
        self.stopping = False
        self._wake = asyncio.Event()
        self._loop_task: asyncio.Task | None = None

    async def start(self) -> None:
        self.store.recover(self.config.max_attempts)
        await asyncio.gather(*(w.started() for w in [*self.workers, self.exporter]))
        self._loop_task = asyncio.create_task(self._dispatch_loop(), name="scanmass-dispatch")

    def admit(self) -> None:
        """Raise :class:`QueueFull` when no more jobs may wait."""
        queued = self.store.count("queued")
        if queued >= self.config.queue_size:
            mean = self.store.mean_seconds() or 5.0
            raise QueueFull(max(1, min(600, round(mean * (queued + 1) / max(1, len(self.workers))))))

    def kick(self) -> None:
        self._wake.set()

    async def _dispatch_loop(self) -> None:
        while not self.stopping:
            for worker in self.workers:
                if worker.job is None and not self.stopping:
                    job = self.store.claim_next(f"{worker.name}:{worker.pid}")
                    if job is None:
                        break
                    worker.job = job
                    self.in_flight[job.id] = asyncio.create_task(self._run(worker, job))
            self._wake.clear()
            try:
                await asyncio.wait_for(self._wake.wait(), timeout=1.0)
            except TimeoutError:
                pass

    async def _run(self, worker: _Worker, job: JobRow) -> None:
        try:
            try:
                fut = worker.executor.submit(self.task, job.image, job.options, job.out_dir)
            except (BrokenProcessPool, RuntimeError):  # the worker died while idle: not this job's doing
                worker.restart()
                await worker.started()
                fut = worker.executor.submit(self.task, job.image, job.options, job.out_dir)
            res = await asyncio.wait_for(asyncio.wrap_future(fut), timeout=self.config.job_timeout_s)
        except TimeoutError:
            if self.stopping:
                return
            self.store.fail(
                job,
                f"{job.image}: measuring took longer than the job time limit ({self.config.job_timeout_s:g} s) and "
                "was stopped; try a smaller photo, or start the page with a longer --job-timeout",
            )
            worker.restart()  # the only way to stop a measurement in flight: end its process
            try:
                await worker.started()
            except Exception:  # pragma: no cover - cannot start a process at all
                pass
        except (BrokenProcessPool, cf.CancelledError, RuntimeError) as exc:
            if self.stopping:
                return  # put back in the queue by stop()
            self.store.fail(
                job,
                f"{job.image}: the measuring process stopped abruptly ({type(exc).__name__}; "
                "out of memory or a crash) while measuring this photo",
            )
            worker.restart()
            try:
                await worker.started()
            except Exception:  # pragma: no cover - cannot start a process at all
                pass
        else:
            self.store.finish(job, res)
        finally:
            worker.job = None
            self.in_flight.pop(job.id, None)
            self.kick()

    async def export(self, job: JobRow, kind: str, title: str) -> str:
        """Write a download of a measured job in the export process (once; later calls wait for it)."""
        key = (job.id, kind)
        fut = self.exports.get(key)
        if fut is None or (fut.done() and fut.exception() is not None):
            try:
                fut = asyncio.wrap_future(self.exporter.executor.submit(export_task, kind, job.out_dir, title))
            except (BrokenProcessPool, RuntimeError):  # the export process died: start another
                self.exporter.restart()
                fut = asyncio.wrap_future(self.exporter.executor.submit(export_task, kind, job.out_dir, title))
            self.exports[key] = fut
        try:
            return await asyncio.shield(fut)
        except BrokenProcessPool:
            self.exporter.restart()
            raise OutputError("the export process stopped abruptly; try the download again") from None
        finally:
            if fut.done():
                self.exports.pop(key, None)

    def forget_exports(self, job_id: int) -> None:
        for key in [k for k in self.exports if k[0] == job_id]:
            self.exports.pop(key, None)

    async def stop(self) -> None:
        """Let the jobs in flight finish (up to the grace time); put the rest back in the queue."""
        self.stopping = True
        self.kick()
        if self._loop_task is not None:
            await self._loop_task
        pending = list(self.in_flight.values())
        if pending:
            await asyncio.wait(pending, timeout=self.config.shutdown_grace_s)
        for worker in self.workers:
            if worker.job is not None:
                self.store.requeue(worker.job)
        for worker in [*self.workers, self.exporter]:
            worker.close()
        for task in list(self.in_flight.values()):
            task.cancel()
