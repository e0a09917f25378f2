"""Defensive access to the numbers of output files (a field another version does not write reads as None), and
the number formats every rendering shares. Missing values print as an em dash, never as a crash."""

from __future__ import annotations

import math
from typing import Any

MISSING = "—"


def dig(obj: Any, *keys: Any) -> Any:
    """obj[k1][k2]... or None where any step is missing or of the wrong kind."""
    for key in keys:
        if isinstance(obj, dict):
            obj = obj.get(key)
        elif isinstance(obj, list) and isinstance(key, int) and -len(obj) <= key < len(obj):
            obj = obj[key]
        else:
            return None
    return obj


def number(value: Any) -> float | None:
    """A finite float, or None (bools, strings, NaN and infinities are not numbers here)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def fmt(value: Any, digits: int = 3, signed: bool = False) -> str:
    """Fixed decimals; a dash when missing."""
    v = number(value)
    if v is None:
        return MISSING
    return f"{v:+.{digits}f}" if signed else f"{v:.{digits}f}"


def fmt_int(value: Any) -> str:
    v = number(value)
    return MISSING if v is None else f"{int(round(v)):,}"


def fmt_share(value: Any, digits: int = 1) -> str:
    v = number(value)
    return MISSING if v is None else f"{100 * v:.{digits}f}%"


def fmt_sig(value: Any, digits: int = 4) -> str:
    """Significant digits with thousands separators, for quantities of any size (losses, perplexities)."""
    v = number(value)
    if v is None:
        return MISSING
    if abs(v) >= 10 ** digits:
        return f"{v:,.0f}"
    return f"{v:,.{digits}g}" if abs(v) >= 1 else f"{v:.{digits}g}"


def fmt_interval(low: Any, high: Any, digits: int = 3, signed: bool = False) -> str:
    if number(low) is None or number(high) is None:
        return MISSING
    return f"{fmt(low, digits, signed)} to {fmt(high, digits, signed)}"


def fmt_seconds(value: Any) -> str:
    v = number(value)
    if v is None:
        return MISSING
    if v < 120:
        return f"{v:.1f} s"
    if v < 7200:
        return f"{v / 60:.1f} min"
    return f"{v / 3600:.2f} h"


def fmt_time(iso: Any) -> str:
    """'2026-12-02 16:59 UTC' from an ISO time in UTC."""
    return f"{str(iso)[:16].replace('T', ' ')} UTC" if iso else MISSING


def fmt_pm(stat: Any, digits: int = 3) -> str:
    """mean ± sd from a seed summary; the mean alone when there is no spread."""
    mean, sd = number(dig(stat, "mean")), number(dig(stat, "sd"))
    if mean is None:
        return MISSING
    return f"{mean:.{digits}f} ± {sd:.{digits}f}" if sd is not None else f"{mean:.{digits}f}"
