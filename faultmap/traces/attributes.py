"""Reading fault-database attributes: numbers, ranges, triples and compass letters.

Fault databases and field sheets write one quantity in several ways: a number (``60``), a range
(``50-70``), a triple of minimum, preferred and maximum (``(50,60,70)``) and, for directions,
compass letters (``NNE``). :func:`parse_values` reads a whole column at once (pandas string
methods, no loop over features) into three arrays; :func:`sigma_from_range` turns a range into the
1-sigma error the Monte Carlo steps draw with. Pure functions, no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from faultmap.errors import InputError

__all__ = ["COMPASS_DEG", "ParsedValues", "parse_values", "sigma_from_range"]

#: The 16 points of the compass, azimuth in degrees clockwise from north.
COMPASS_DEG = {
    name: 22.5 * i
    for i, name in enumerate(
        ("N", "NNE", "NE", "ENE", "E", "ESE", "SE", "SSE", "S", "SSW", "SW", "WSW", "W", "WNW", "NW", "NNW")
    )
}

_NUM = r"([+-]?(?:\d+(?:\.\d*)?|\.\d+))"
_POS = r"((?:\d+(?:\.\d*)?|\.\d+))"
#: ``50-70``, ``50 to 70``, ``50–70`` (en dash); the first number may be signed, the second not
_RANGE = rf"^{_NUM}\s*(?:-|\u2013|to)\s*{_POS}$"
#: ``(50,60,70)``, ``[50; 60; 70]``, ``50/60/70``: minimum, preferred, maximum
_TRIPLE = rf"^[\(\[]?\s*{_NUM}\s*[,;/]\s*{_NUM}\s*[,;/]\s*{_NUM}\s*[\)\]]?$"
_MISSING = ("", "nan", "none", "null", "<na>", "n/a", "na", "-")


@dataclass(frozen=True)
class ParsedValues:
    """One attribute column read as minimum, preferred and maximum (NaN where empty).

    Attributes
    ----------
    min, preferred, max : numpy.ndarray of float
        Equal for a plain number; the ends and the midpoint for a range; the three values of a
        triple.
    kind : numpy.ndarray of str
        ``number``, ``range``, ``triple``, ``compass`` or ``missing`` per feature.
    """

    min: np.ndarray
    preferred: np.ndarray
    max: np.ndarray
    kind: np.ndarray

    @property
    def has_range(self) -> np.ndarray:
        """Features given with a spread (range or triple)."""
        return np.isin(self.kind, ("range", "triple"))


def _fail(where: str, feature, field: str, value, why: str, label: str = "") -> InputError:
    value = value.item() if isinstance(value, np.generic) else value
    named = f"field '{field}' ({label})" if label else f"field '{field}'"
    return InputError(f"{where}: feature {feature}: {named} is {value!r}: {why}; fix the attribute.")


def parse_values(
    values: pd.Series,
    *,
    field: str,
    ids,
    where: str = "faults",
    compass: bool = False,
    lower: float | None = None,
    upper: float | None = None,
    lower_inclusive: bool = True,
    label: str = "",
) -> ParsedValues:
    """Read a column of numbers, ranges, triples (and optionally compass letters).

    Parameters
    ----------
    values : pandas.Series
        The column as read (numbers, text or a mix).
    field : str
        Its name in the input, for messages.
    ids : array_like
        Feature number of each row, for messages.
    where : str
        File and layer, for messages.
    compass : bool
        Also accept the 16 compass points (``N``, ``NNE``, ... ``NNW``; any case) as azimuths.
    lower, upper : float, optional
        Allowed range of every value (``lower`` exclusive unless ``lower_inclusive``).
    label : str
        What the field holds, in words (``dip direction``), for messages.

    Returns
    -------
    ParsedValues

    Raises
    ------
    InputError
        Naming the feature, the field and the value: text that is none of the accepted
        spellings, a range or triple out of order, or a value outside ``lower``-``upper``.

    Notes
    -----
    A range ``a-b`` has its midpoint as preferred value; a triple is read as (minimum, preferred,
    maximum), the order fault databases use (common practice).
    """
    ids = np.asarray(ids)
    n = len(values)
    lo = np.full(n, np.nan)
    pref = np.full(n, np.nan)
    hi = np.full(n, np.nan)
    kind = np.full(n, "missing", dtype=object)
    if n == 0:
        return ParsedValues(lo, pref, hi, kind)
    raw = values.reset_index(drop=True)
    text = raw.astype(object).where(raw.notna(), "").astype(str).str.strip()
    num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
    missing = text.str.lower().isin(_MISSING).to_numpy() & ~np.isfinite(num)
    is_num = np.isfinite(num)
    lo[is_num] = pref[is_num] = hi[is_num] = num[is_num]
    kind[is_num] = "number"
    rest = ~is_num & ~missing
    if rest.any():
        t = text[rest]
        tri = t.str.extract(_TRIPLE).astype(float)
        rng = t.str.extract(_RANGE).astype(float)
        pos = np.flatnonzero(rest)
        ok_tri = tri.notna().all(axis=1).to_numpy()
        ok_rng = rng.notna().all(axis=1).to_numpy() & ~ok_tri
        p = pos[ok_tri]
        lo[p], pref[p], hi[p] = (
            tri[0].to_numpy()[ok_tri],
            tri[1].to_numpy()[ok_tri],
            tri[2].to_numpy()[ok_tri],
        )
        kind[p] = "triple"
        p = pos[ok_rng]
        a, b = rng[0].to_numpy()[ok_rng], rng[1].to_numpy()[ok_rng]
        lo[p], hi[p], pref[p] = a, b, 0.5 * (a + b)
        kind[p] = "range"
        left = ~ok_tri & ~ok_rng
        if compass and left.any():
            az = t.str.upper().map(COMPASS_DEG).to_numpy(dtype=float)
            ok_c = left & np.isfinite(az)
            p = pos[ok_c]
            lo[p] = pref[p] = hi[p] = az[ok_c]
            kind[p] = "compass"
            left &= ~ok_c
        if left.any():
            i = pos[np.flatnonzero(left)[0]]
            allowed = "not a number, a range such as '50-70' or a triple '(min, preferred, max)'"
            if compass:
                allowed += " or compass letters (N, NNE, NE, ... NNW)"
            raise _fail(where, ids[i], field, raw.iloc[i], allowed, label)
    order = ~(lo <= pref) | ~(pref <= hi)
    order &= kind != "missing"
    if order.any():
        i = int(np.flatnonzero(order)[0])
        raise _fail(
            where,
            ids[i],
            field,
            raw.iloc[i],
            "a range or triple must run from the smallest to the largest value",
            label,
        )
    given = kind != "missing"
    if lower is not None and upper is not None:
        bad = given & ((lo < lower) | (~lower_inclusive & (lo == lower)) | (hi > upper))
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            span = f"{lower:g}-{upper:g}" + ("" if lower_inclusive else f" (exclusive of {lower:g})")
            raise _fail(where, ids[i], field, raw.iloc[i], f"values must lie within {span}", label)
    if lower is not None:
        bad = given & ((lo < lower) | (~lower_inclusive & (lo == lower)))
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            sign = ">=" if lower_inclusive else ">"
            raise _fail(where, ids[i], field, raw.iloc[i], f"values must be {sign} {lower:g}", label)
    if upper is not None:
        bad = given & (hi > upper)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise _fail(where, ids[i], field, raw.iloc[i], f"values must be <= {upper:g}", label)
    return ParsedValues(lo, pref, hi, kind)


def sigma_from_range(parsed: ParsedValues) -> np.ndarray:
    """1-sigma error implied by a range or triple: a quarter of its width (NaN for plain numbers).

    Notes
    -----
    A database range is read as a 95 % interval, about +-2 sigma of a normal error (our rule,
    stated in docs/without_dem.md); an asymmetric triple gets the mean of its two half-widths / 2.
    """
    width = parsed.max - parsed.min
    return np.where(parsed.has_range, width / 4.0, np.nan)
