"""Scarps degraded by diffusion, for synthetic scenes with a known kappa t per fault.

A vertical step relaxing under dz/dt = kappa d2z/dx2 takes the error-function
form (Nash 1980; Hanks, Bucknam, Lajoie & Wallace 1984): the fraction of the
offset reached at distance d from the trace is (1 + erf(d / (2 sqrt(kappa t)))) / 2.
:func:`diffused_ramp` is that fraction; the scene builder uses it in place of
its raised-sine ramp for faults given a ``kappa_t_m2``. Linear diffusion acts on
the offset alone (a planar surface does not change), so a scene built this
way holds, across each such scarp, exactly the diffusion profile of kappa t.
Pure functions, no file I/O.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

__all__ = ["diffused_ramp", "ramp_reach_m"]


def diffused_ramp(d_m, kappa_t_m2: float) -> np.ndarray:
    """Fraction of the offset at signed distance ``d_m`` (m, + towards the hanging wall) from the trace.

    Parameters
    ----------
    d_m : array_like
        Distance from the trace, m.
    kappa_t_m2 : float
        Diffusivity times age, m^2 (> 0).

    Returns
    -------
    ndarray
        (1 + erf(d / (2 sqrt(kappa t)))) / 2: 0 on the footwall, 1/2 on the trace, 1 on the hanging wall.
    """
    s = 2.0 * math.sqrt(float(kappa_t_m2))
    return 0.5 * (1.0 + erf(np.asarray(d_m, dtype=float) / s))


def ramp_reach_m(kappa_t_m2: float) -> float:
    """Distance from the trace beyond which the ramp is 0 or 1 to rounding, m.

    Six widths 2 sqrt(kappa t): erfc(6) is about 2e-17 (scipy.special.erfc).
    """
    return 12.0 * math.sqrt(max(float(kappa_t_m2), 0.0))
