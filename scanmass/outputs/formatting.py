"""Numbers for people: a value with its standard uncertainty, rounded as the GUM advises."""

from __future__ import annotations

import math
from typing import Any

__all__ = ["format_value"]


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _fixed(value: float, decimals: int) -> str:
    text = f"{value:.{max(decimals, 0)}f}"
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0.0 else text


def format_value(value: Any, u: Any = None, *, digits: int = 6) -> tuple[str, str]:
    """Format a value and its standard uncertainty for display.

    The uncertainty is rounded to two significant digits and the value to the same
    decimal place (JCGM 100:2008, GUM, 7.2.6). Without a usable uncertainty the value
    keeps ``digits`` significant digits and the uncertainty is ``""``.

    References
    ----------
    .. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
       uncertainty in measurement (GUM), clause 7.2.6.

    Examples
    --------
    >>> format_value(1234.5678, 0.01234)
    ('1234.568', '0.012')
    >>> format_value(833333.3, 1234.0)
    ('833300', '1200')
    >>> format_value(12.5, None)
    ('12.5', '')
    >>> format_value(None)
    ('–', '')
    """
    v = _finite(value)
    if v is None:
        return "–", ""
    uu = _finite(u)
    if uu is None or uu <= 0.0:
        if v == 0.0:
            return "0", ""
        exponent = math.floor(math.log10(abs(v)))
        decimals = digits - 1 - exponent
        if decimals >= 0:
            text = _fixed(v, decimals)
            if "." in text:
                text = text.rstrip("0").rstrip(".")
            return text, ""
        return _fixed(round(v, decimals), 0), ""
    exponent = math.floor(math.log10(uu))
    decimals = 1 - exponent  # two significant digits of u
    u_round = round(uu, decimals)
    if u_round >= 10.0 ** (exponent + 1):  # 0.0996 -> 0.10: the carry adds a digit
        decimals -= 1
        u_round = round(uu, decimals)
    v_round = round(v, decimals)
    return _fixed(v_round, decimals), _fixed(u_round, decimals)
