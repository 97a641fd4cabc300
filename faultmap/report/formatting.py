"""Numbers and text as the report prints them.

Plain functions with no dependency beyond the standard library: significant digits, a value with
its one-sigma error, a value with its interval, file names instead of paths, and text that carries
no live address.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable

__all__ = [
    "DASH",
    "is_missing",
    "fmt_num",
    "fmt_pm",
    "fmt_range",
    "fmt_percent",
    "file_name",
    "TextCleaner",
]

#: What an empty or undefined value prints as.
DASH = "\u2013"

_URL = re.compile(r"(?i)\b(https?|ftp|file)://")


def is_missing(x) -> bool:
    """Whether ``x`` is None, NaN, NaT, pandas NA or an empty string."""
    if x is None:
        return True
    if isinstance(x, str):
        return x.strip() == "" or x.strip().lower() in ("nan", "none", "<na>")
    try:
        return bool(x != x)  # NaN, NaT
    except (TypeError, ValueError):  # pandas NA raises on bool()
        return True


def _as_float(x) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _exp_form(v: float, sig: int) -> str:
    mant, _, exp = f"{v:.{sig - 1}e}".partition("e")
    return f"{mant}e{int(exp)}"


def fmt_num(x, sig: int = 3) -> str:
    """Format a number with ``sig`` significant digits.

    Integers print whole; booleans as ``yes``/``no``; values of 10**sig and above to the unit;
    values below 1e-3 or of 1e7 and above in exponent form (``1.69e-5``); missing values as a dash.
    Significant trailing zeros are kept (``14.0``, ``0.950``).
    Text is returned unchanged.

    Parameters
    ----------
    x : object
        A number, a boolean, text or a missing value.
    sig : int
        Significant digits of non-integral values.

    Returns
    -------
    str
    """
    if isinstance(x, str):
        return x if x.strip() else DASH
    if is_missing(x):
        return DASH
    if isinstance(x, bool) or type(x).__name__ == "bool_":
        return "yes" if x else "no"
    if isinstance(x, int) or type(x).__name__.startswith(("int", "uint")):
        return str(int(x))
    v = _as_float(x)
    if v is None:
        try:
            return DASH if math.isnan(float(x)) else ("\u221e" if float(x) > 0 else "-\u221e")
        except (TypeError, ValueError):
            return str(x)
    if v == 0.0:
        return "0"
    a = abs(v)
    if a < 1e-3 or a >= 1e7:
        return _exp_form(v, sig)
    if a >= 10**sig:
        return f"{v:.0f}"
    digits = sig - 1 - math.floor(math.log10(a))
    if digits > 0 and round(a, digits) >= 10 ** (sig - digits):  # 9.996 -> 10.0, not 10.00
        digits -= 1
    return f"{v:.{max(digits, 0)}f}"


def fmt_pm(value, err, sig: int = 3) -> str:
    """Format ``value ± err``, the error to two significant digits and the value to match.

    Parameters
    ----------
    value, err : float
        Value and its (one-sigma) error; a missing or non-positive error prints the value alone.
    sig : int
        Significant digits of the value when it has no error.

    Returns
    -------
    str
    """
    v, e = _as_float(value), _as_float(err)
    if v is None:
        return fmt_num(value, sig)
    if e is None or e <= 0:
        return fmt_num(v, sig)
    a = max(abs(v), e)
    if a < 1e-3 or a >= 1e7:
        return f"{fmt_num(v, sig)} \u00b1 {fmt_num(e, 2)}"
    decimals = 1 - math.floor(math.log10(e))
    if decimals <= 0:
        step = 10 ** (-decimals)
        return f"{round(v / step) * step:.0f} \u00b1 {round(e / step) * step:.0f}"
    return f"{v:.{decimals}f} \u00b1 {e:.{decimals}f}"


def fmt_range(value, lo, hi, sig: int = 3) -> str:
    """Format ``value [lo, hi]``; bounds that are missing are left out.

    Parameters
    ----------
    value, lo, hi : float
        A central value and the bounds of its interval.
    sig : int
        Significant digits.

    Returns
    -------
    str
    """
    centre = fmt_num(value, sig)
    if is_missing(lo) and is_missing(hi):
        return centre
    return f"{centre} [{fmt_num(lo, sig)}, {fmt_num(hi, sig)}]"


def fmt_percent(value, sig: int = 3) -> str:
    """Format a fraction as a percentage number (0.0097 -> ``0.97``), without the sign."""
    v = _as_float(value)
    return fmt_num(value, sig) if v is None else fmt_num(100.0 * v, sig)


def file_name(path: str) -> str:
    """Return the last part of a path written with slashes or backslashes (``a/b/c.gpkg`` -> ``c.gpkg``)."""
    text = str(path).rstrip("/\\")
    return re.split(r"[\\/]", text)[-1] if text else str(path)


class TextCleaner:
    """Turn text for the page into text that names no machine path and holds no live address.

    Parameters
    ----------
    paths : iterable of str
        Paths to show as their file name wherever they occur (input and output paths of the run).

    Notes
    -----
    An address such as ``https://...`` in a message stays readable but is broken with a
    zero-width space after the scheme, so the page itself contains no URL.
    """

    def __init__(self, paths: Iterable[str] = ()):
        pairs = {}
        for p in paths:
            p = str(p)
            name = file_name(p)
            if p and name != p and ("/" in p or "\\" in p):
                pairs[p] = name
        self._pairs = sorted(pairs.items(), key=lambda kv: -len(kv[0]))

    def __call__(self, text: str) -> str:
        """Return ``text`` with the paths shortened and addresses broken."""
        for path, name in self._pairs:
            if path in text:
                text = text.replace(path, name)
        return _URL.sub(lambda m: m.group(1) + "\u200b://", text)
