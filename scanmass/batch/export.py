"""Reading a finished batch back: the parts and failures, CSV or JSON-lines exports."""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any, Literal

from scanmass.batch.store import csv_text, open_existing, parts_rows
from scanmass.errors import OptionError
from scanmass.measurement import CSV_COLUMNS
from scanmass.outputs.atomic import write_atomic

__all__ = ["duplicate_count", "export_batch", "iter_export", "summary_rows"]


def duplicate_count(out_dir: str | os.PathLike) -> int:
    """How many files of a batch were skipped as copies of a measured file."""
    conn = open_existing(out_dir)
    try:
        return int(conn.execute("SELECT COUNT(*) FROM files WHERE status='duplicate'").fetchone()[0])
    finally:
        conn.close()


def summary_rows(out_dir: str | os.PathLike) -> tuple[list[dict[str, Any]], list[dict[str, str]]]:
    """The parts of every measured file and the failures, from a batch's database.

    Returns ``(rows, failures)``: rows keyed like :data:`CSV_COLUMNS`, failures as
    ``{"file", "reason"}``; ready for :func:`scanmass.outputs.report.render_summary`.
    """
    conn = open_existing(out_dir)
    try:
        rows = [dict(zip(CSV_COLUMNS, row)) for row in parts_rows(conn)]
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
    conn = open_existing(out_dir)
    try:
        if format == "csv":
            yield csv_text(CSV_COLUMNS, [])
            for row in parts_rows(conn):
                yield csv_text(CSV_COLUMNS, [row]).split("\n", 1)[1]
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
