"""Where a batch measures: in this process, a process pool or a Dask cluster.

:func:`measure_task` is what every worker runs for one file; it never raises for a bad
file. Pool workers run one OpenCV/BLAS thread each, ignore Ctrl-C (the parent's
business) and exit when the parent is killed.
"""

from __future__ import annotations

import contextlib
import logging
import multiprocessing
import os
import signal
import socket
import threading
import time
from collections.abc import Callable, Iterable, Iterator, Mapping
from concurrent import futures as cf
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from scanmass.batch.store import utc_now
from scanmass.errors import OptionError, ScanmassError
from scanmass.options import resolve_options

__all__ = [
    "Backend",
    "DaskBackend",
    "PoolBackend",
    "SerialBackend",
    "cpu_count",
    "make_backend_factory",
    "measure_task",
    "one_line",
]


def one_line(text: str) -> str:
    """Text on one line (runs of white space become one space)."""
    return " ".join(str(text).split())


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


def measure_batch_file(path: str, options: Any) -> Any:
    """Measure one file of a batch: a batch-wide ``dpi`` never turns a mat photo into a scan.

    With ``scale = auto`` and a ``dpi`` given for the whole batch, a file that stores no
    trustworthy resolution is first looked for on a marker mat; only when no mat is found
    is it measured as a scan at the given ``dpi``. A file that stores one is a scan (and a
    ``dpi`` more than 1 % off it is refused unless ``dpi_override`` is set).
    """
    from scanmass.errors import ScaleError
    from scanmass.load.decode import read_dpi
    from scanmass.pipeline import measure

    if options.dpi is None or options.scale != "auto" or options.sheet is not None or options.mat is not None:
        return measure(path, options)
    stored, _ = read_dpi(path)
    if stored is not None:
        return measure(path, options)
    try:
        return measure(path, options.updated(dpi=None, scale="mat"))
    except ScaleError:
        return measure(path, options)


def measure_task(path: str, options: Mapping[str, Any]) -> dict[str, Any]:
    """Measure one file; return a small plain document (never raises for a bad file).

    This is what the worker processes (or Dask workers) run. The returned dict holds
    ``status`` (``ok``/``failed``), ``error`` (one line), ``result`` (the result
    document as JSON text, serialised here rather than in the parent), ``sha256`` (of the
    bytes measured), ``rows`` (the per-part CSV rows), ``started``/``finished`` (UTC ISO
    times), ``seconds`` (wall) and ``cpu_seconds``, ``worker`` (host:pid) and
    ``max_rss_kb`` (the worker's peak resident memory so far). A worker process runs
    OpenCV on one thread (the parallelism is the processes); :class:`SerialBackend`
    calls :func:`measure_in_process` instead, which leaves the caller's process as it is.
    """
    _one_cv_thread()
    return measure_in_process(path, options)


def measure_in_process(path: str, options: Mapping[str, Any]) -> dict[str, Any]:
    """:func:`measure_task` without setting OpenCV's thread count (no change to the calling process)."""
    from scanmass.pipeline import measure  # noqa: F401  (the worker's first file loads the measuring stages)

    started = utc_now()
    t0, c0 = time.perf_counter(), time.process_time()
    result = rows = sha = None
    try:
        m = measure_batch_file(path, resolve_options(options, {}))
        result, rows, sha = m.to_json(indent=None), m.csv_rows(), m.source.sha256
        status, error = "ok", None
    except ScanmassError as exc:
        status, error = "failed", str(exc)
    except MemoryError:
        status, error = "failed", f"{path}: out of memory while measuring; lower --max-pixels or use fewer --workers"
    except Exception as exc:  # a bug must not stop the batch; say so plainly
        status = "failed"
        error = one_line(f"{path}: internal error ({type(exc).__name__}: {exc}); please report it with this file")
    return {
        "path": path,
        "status": status,
        "error": error,
        "result": result,
        "sha256": sha,
        "rows": rows,
        "started": started,
        "finished": utc_now(),
        "seconds": time.perf_counter() - t0,
        "cpu_seconds": time.process_time() - c0,
        "worker": f"{socket.gethostname()}:{os.getpid()}",
        "max_rss_kb": _max_rss_kb(),
    }


class Backend:
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


class SerialBackend(Backend):
    """workers=0: measure in this process, one file at a time (for debugging)."""

    name = "serial"
    capacity = 1

    def submit(self, path: str, options: Mapping[str, Any]) -> cf.Future:
        fut: cf.Future = cf.Future()
        fut.set_result(measure_in_process(path, options))
        return fut

    def wait(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        return set(pending)


class PoolBackend(Backend):
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


class DaskBackend(Backend):
    """A dask.distributed cluster: a scheduler address, or a LocalCluster on loopback."""

    def __init__(self, address: str, workers: int | None) -> None:
        distributed = _require_distributed()
        self._distributed = distributed
        self._cluster = None
        text = address.strip()
        if text == "local" or text.startswith("local:"):
            n_text = text.partition(":")[2]
            try:
                n = int(n_text) if n_text else (workers or cpu_count())
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
                    f"cannot reach the Dask scheduler at {text} ({one_line(str(exc)) or type(exc).__name__}); "
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


def cpu_count() -> int:
    try:
        return len(os.sched_getaffinity(0)) or 1
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def make_backend_factory(workers: int | None, cluster: str | None) -> tuple[Callable[[], Backend], str]:
    """A function that starts the back-end on first use, and the back-end's label.

    Raises OptionError for a bad ``workers`` or ``cluster`` (and when dask is missing).
    """
    if cluster is not None:
        if not isinstance(cluster, str) or not cluster.strip():
            raise OptionError("cluster must be an address such as tcp://host:8786, or local:N")
        _require_distributed()  # fail early, with the one-line message
        label = cluster.strip()
        return (lambda: DaskBackend(label, workers)), f"dask:{label}"
    if workers is None:
        workers = cpu_count()
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
        raise OptionError(
            f"workers {workers!r} must be a whole number >= 0 (0: measure in this process), e.g. --workers 2"
        )
    if workers == 0:
        return SerialBackend, "serial"
    return (lambda: PoolBackend(workers)), f"processes:{workers}"
