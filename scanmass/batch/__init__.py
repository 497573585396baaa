"""Batches of many files: settings, discovery, store, back-ends, runner, export.

The modules, one job each: :mod:`.settings` (the options of each folder, their hash),
:mod:`.discover` (the image files), :mod:`.store` (the SQLite database and CSVs),
:mod:`.backends` (process pool, Dask, the worker task), :mod:`.runner` (the run loop,
progress, :func:`run_batch`) and :mod:`.export` (reading a batch back). The names below
are imported on first use, so ``import scanmass.batch`` stays light.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
    from scanmass.batch.export import export_batch, iter_export, summary_rows
    from scanmass.batch.runner import BatchProgress, BatchSummary, run_batch

_WHERE = {
    "run_batch": "scanmass.batch.runner",
    "BatchProgress": "scanmass.batch.runner",
    "BatchSummary": "scanmass.batch.runner",
    "export_batch": "scanmass.batch.export",
    "iter_export": "scanmass.batch.export",
    "summary_rows": "scanmass.batch.export",
}

__all__ = ["BatchProgress", "BatchSummary", "export_batch", "iter_export", "run_batch", "summary_rows"]


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'scanmass.batch' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value
