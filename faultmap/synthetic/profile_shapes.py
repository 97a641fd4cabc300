"""Along-strike throw profiles of synthetic faults: elliptical, triangular, plateau.

Throw as a function of normalised distance along a trace, used to build the
synthetic scenes of :mod:`faultmap.synthetic.builder` and to state their truth.
Pure functions, no file I/O.
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import ParameterError

__all__ = ["PROFILE_SHAPES", "throw_profile"]

#: Along-strike throw profile shapes understood by :func:`throw_profile`.
PROFILE_SHAPES: tuple[str, ...] = ("elliptical", "triangular", "plateau")

def throw_profile(
    s_norm: float | np.ndarray,
    max_throw_m: float,
    *,
    shape: str = "elliptical",
    peak_pos: float = 0.5,
    plateau_frac: float = 0.5,
) -> np.ndarray:
    """Throw along a fault trace as a function of normalised distance.

    Parameters
    ----------
    s_norm : float or array
        Normalised distance along the trace, 0 at one tip and 1 at the other.
        Values outside [0, 1] (beyond the tips) get zero throw; NaN stays NaN.
    max_throw_m : float
        Maximum throw, metres (>= 0).
    shape : {"elliptical", "triangular", "plateau"}
        Profile shape (see Notes).
    peak_pos : float
        Normalised position of the maximum (0 < peak_pos < 1). 0.5 gives a
        symmetric profile; other values skew it.
    plateau_frac : float
        For ``shape="plateau"``: fraction of the trace length at maximum throw
        (0 <= plateau_frac < 1).

    Returns
    -------
    numpy.ndarray
        Throw in metres, same shape as ``s_norm``; zero at the tips and beyond.

    Notes
    -----
    With ``r`` the signed distance from the peak scaled to -1 at the first
    tip and +1 at the second (``r = (s - c)/c`` before the peak ``c``,
    ``(s - c)/(1 - c)`` after it), the throw is ``max_throw_m * f(r)`` with

    * elliptical: ``f = sqrt(1 - r**2)``, the displacement of an elliptical
      crack in an elastic medium (Walsh & Watterson 1987, 1988, from memory);
    * triangular: ``f = 1 - |r|``, linear tapers as described for many
      natural faults (Manighetti et al. 2001, from memory);
    * plateau: ``f = 1`` for ``|r| <= plateau_frac`` and a raised-cosine taper
      ``(1 + cos(pi (|r| - p)/(1 - p)))/2`` to the tips (our choice; a
      flat-topped profile, common practice for tests needing a uniform throw).
    """
    shape = _check_profile_params(shape, peak_pos, plateau_frac)
    max_throw_m = float(max_throw_m)
    if not np.isfinite(max_throw_m) or max_throw_m < 0:
        raise ParameterError(
            f"max_throw_m must be a finite number >= 0, got {max_throw_m}; pass a throw in metres"
        )
    s = np.asarray(s_norm, dtype=float)
    c = float(peak_pos)
    with np.errstate(invalid="ignore"):
        r = np.where(s < c, (s - c) / c, (s - c) / (1.0 - c))
        ar = np.abs(r)
        if shape == "elliptical":
            f = np.sqrt(np.clip(1.0 - r * r, 0.0, None))
        elif shape == "triangular":
            f = np.clip(1.0 - ar, 0.0, None)
        else:
            p = float(plateau_frac)
            taper = 0.5 * (1.0 + np.cos(np.pi * np.clip((ar - p) / (1.0 - p), 0.0, 1.0)))
            f = np.where(ar <= p, 1.0, taper)
        inside = (s > 0.0) & (s < 1.0)
    out = np.where(inside, max_throw_m * f, 0.0)
    return np.where(np.isnan(s), np.nan, out)


def _check_profile_params(shape: str, peak_pos: float, plateau_frac: float) -> str:
    shape = str(shape).strip().lower()
    if shape not in PROFILE_SHAPES:
        raise ParameterError(
            f"unknown throw profile shape {shape!r}; use one of {', '.join(PROFILE_SHAPES)}"
        )
    if not (0.0 < float(peak_pos) < 1.0):
        raise ParameterError(f"peak_pos must be strictly between 0 and 1, got {peak_pos}")
    if not (0.0 <= float(plateau_frac) < 1.0):
        raise ParameterError(f"plateau_frac must be in [0, 1), got {plateau_frac}")
    return shape
