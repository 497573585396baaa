"""Shared checks for the command-line tests."""

from __future__ import annotations


def one_line_error(result, *needles: str) -> str:
    """Assert a CliRunner result failed with exit code 1 and exactly one error line
    containing every needle, without a traceback; return that line."""
    assert result.exit_code == 1, result.output
    text = result.stderr if hasattr(result, "stderr") else result.output
    lines = [ln for ln in text.strip().splitlines() if ln.strip()]
    assert len(lines) == 1, text
    assert "Traceback" not in text
    for needle in needles:
        assert needle in lines[0], lines[0]
    return lines[0]
