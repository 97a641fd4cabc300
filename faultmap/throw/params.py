"""Parameters of the throw measurement: checked, and adapted to the DEM's pixel size.

:func:`resolve_params` turns the user's options (most of them optional) into a
frozen :class:`ThrowParams` whose lengths are all in metres; it raises
:class:`~faultmap.errors.ParameterError` with a one-line message for values of
the wrong type, out of range or inconsistent with the others.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from faultmap.errors import ParameterError

__all__ = ["ThrowParams", "resolve_params"]


@dataclass(frozen=True)
class ThrowParams:
    """Resolved measurement parameters (all lengths in metres).

    Build with :func:`resolve_params`, which adapts the unset ones to the
    DEM's pixel size and checks ranges.
    """

    pixel_size_m: float
    sample_step_m: float
    station_spacing_m: float
    normal_window_m: float
    scarp_halfwidth_m: float
    profile_half_length_m: float | None
    min_half_length_m: float
    max_half_length_m: float
    length_fraction: float
    far_field_widths: float
    min_far_field_m: float
    min_samples_per_side: int
    robust_loss: str
    robust_tuning: float
    robust_iterations: int
    scarp_iterations: int
    scarp_tolerance_frac: float
    crossing_margin_m: float
    memory_budget_mb: float
    smooth_stations: float | None
    min_caskey_factor: float
    min_inlier_fraction: float
    min_stations: int = 24
    degradation: bool = True
    n_events: int = 1

    @property
    def adaptive(self) -> bool:
        """Whether profile half-lengths adapt per fault and per station."""
        return self.profile_half_length_m is None

    def half_length_for(self, length_m) -> np.ndarray:
        """First-pass profile half-length of faults of these lengths, metres.

        Fixed when ``profile_half_length_m`` is set; otherwise
        ``length_fraction`` of the trace length, kept between
        ``min_half_length_m`` and ``max_half_length_m`` (stations whose
        scarp turns out wider are measured again with longer profiles).
        """
        L = np.asarray(length_m, dtype=float)
        if self.profile_half_length_m is not None:
            return np.full(L.shape, float(self.profile_half_length_m))
        return np.clip(self.length_fraction * L, self.min_half_length_m, self.max_half_length_m)

    def spacing_for(self, length_m) -> np.ndarray:
        """Station spacing of faults of these lengths, metres.

        ``station_spacing_m``, reduced on short faults so that each carries
        at least ``min_stations`` stations, but never under 2 pixels.
        """
        L = np.asarray(length_m, dtype=float)
        return np.clip(L / self.min_stations, 2.0 * self.pixel_size_m, self.station_spacing_m).astype(float)

    def as_dict(self) -> dict:
        """Plain dict of the parameters (for run_info)."""
        return asdict(self)


def _check_number(name, value, *, lo=None, hi=None, lo_open=False, integer=False):
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ParameterError(f"parameter '{name}' must be a number, got {value!r}.")
    v = float(value)
    if not math.isfinite(v):
        raise ParameterError(f"parameter '{name}' must be finite, got {value!r}.")
    if integer and not v.is_integer():
        raise ParameterError(f"parameter '{name}' must be a whole number, got {value!r}.")
    if lo is not None and (v < lo or (lo_open and v <= lo)):
        raise ParameterError(f"parameter '{name}' must be {'>' if lo_open else '>='} {lo:g}, got {v:g}.")
    if hi is not None and v > hi:
        raise ParameterError(f"parameter '{name}' must be <= {hi:g}, got {v:g}.")
    return int(v) if integer else v


def resolve_params(
    pixel_size_m: float,
    *,
    station_spacing_m: float | None = None,
    profile_half_length_m: float | None = None,
    scarp_halfwidth_m: float | None = None,
    normal_window_m: float | None = None,
    min_samples_per_side: int = 10,
    robust_loss: str = "tukey",
    robust_tuning: float | None = None,
    robust_iterations: int = 3,
    scarp_iterations: int = 3,
    far_field_widths: float = 2.5,
    max_half_length_m: float | None = None,
    memory_budget_mb: float = 512.0,
    smooth_stations: float | None = None,
    min_stations_per_fault: int = 24,
    sample_step_m: float | None = None,
    degradation: bool = True,
    n_events: int = 1,
) -> ThrowParams:
    """Check the user's parameters and adapt the unset ones to the DEM.

    Parameters
    ----------
    pixel_size_m : float
        DEM pixel size, metres.
    station_spacing_m : float, optional
        Distance between stations along a trace; default 10 pixels, never
        under 2 pixels.
    profile_half_length_m : float, optional
        Fixed profile half-length. Default: adapted per fault (10 % of the
        trace length, 40 to 400 pixels) and lengthened per station where the
        scarp is broad, so that 2-3 scarp widths of undisturbed surface are
        reached on each side.
    scarp_halfwidth_m : float, optional
        Smallest half-width of the scarp zone left out of the fits; default
        3 pixels. Widened per station and side where the profile departs
        from the far-field surface farther out.
    normal_window_m : float, optional
        Trace length over which the station normal is averaged; default
        twice the station spacing, at least 20 pixels.
    min_samples_per_side : int
        Fewest valid samples a side's fit may use (>= 3).
    robust_loss : {"tukey", "huber", "none"}
        Weight function of the iteratively reweighted line fits.
    robust_tuning : float, optional
        Tuning constant in units of the robust residual scale; default 4.685
        (Tukey) or 1.345 (Huber), 95 % efficiency under Gaussian noise
        (Holland & Welsch 1977).
    robust_iterations : int
        Reweighting passes of each fit with the residual scale (MAD)
        re-estimated (0 = ordinary least squares); a fit whose line still
        moves then goes on with the scale held until the line moves by
        under 1 % of its residual scale, at most 10 passes in all (or this
        number, if larger). A fit's result depends on its own samples only.
    scarp_iterations : int
        Scarp-zone refinements (each re-detects the scarp edges and refits).
    far_field_widths : float
        Undisturbed surface fitted on each side, in scarp widths.
    max_half_length_m : float, optional
        Longest profile half-length the adaptation may reach; default 400
        pixels.
    memory_budget_mb : float
        Memory for DEM windows and sample arrays of one batch, MB.
    smooth_stations : float, optional
        Gaussian smoothing of the along-strike profile, in station spacings
        (0 = none); default chosen per fault by cross-validation.
    min_stations_per_fault : int
        Short faults get a finer spacing so that each carries at least this
        many stations (the spacing stays at least 2 pixels): the apex of a
        peaked profile is then sampled closely enough.
    sample_step_m : float, optional
        Sample spacing along profiles; default one pixel.
    degradation : bool
        Also fit the diffusion form of a degraded scarp to every station's
        profile (kappa t; :mod:`faultmap.scarps`).
    n_events : int
        Events each scarp grew in, for that fit (1 = a single event).

    Returns
    -------
    ThrowParams

    Raises
    ------
    ParameterError
        A value is of the wrong type, out of range or inconsistent with the
        others (for example a spacing under 2 pixels or a profile too short
        for the scarp zone plus the samples a fit needs).
    """
    px = _check_number("pixel_size_m", pixel_size_m, lo=0, lo_open=True)
    step = px if sample_step_m is None else _check_number("sample_step_m", sample_step_m, lo=0, lo_open=True)
    if step < 0.25 * px or step > 2.0 * px:
        raise ParameterError(
            f"parameter 'sample_step_m' {step:g} m should be about one pixel ({px:g} m); use {px:g}."
        )
    if station_spacing_m is None:
        spacing = 10.0 * px
    else:
        spacing = _check_number("station_spacing_m", station_spacing_m, lo=0, lo_open=True)
        if spacing < 2.0 * px:
            raise ParameterError(
                f"parameter 'station_spacing_m' {spacing:g} m is under 2 DEM pixels ({2 * px:g} m): "
                "stations would repeat the same pixels; use at least 2 pixels (default 10)."
            )
        if spacing > 1e5 * px:
            raise ParameterError(
                f"parameter 'station_spacing_m' {spacing:g} m is over 100000 pixels; use a spacing of a few "
                "to a few hundred pixels (default 10)."
            )
    if normal_window_m is None:
        nwin = max(2.0 * spacing, 20.0 * px)
    else:
        nwin = _check_number("normal_window_m", normal_window_m, lo=0, lo_open=True)
        if nwin < px:
            raise ParameterError(
                f"parameter 'normal_window_m' {nwin:g} m is under one pixel; use at least {px:g} m "
                "(default: twice the station spacing)."
            )
    w0 = (
        3.0 * px if scarp_halfwidth_m is None else _check_number("scarp_halfwidth_m", scarp_halfwidth_m, lo=0)
    )
    w0 = max(w0, step)
    nmin = _check_number("min_samples_per_side", min_samples_per_side, lo=3, hi=10000, integer=True)
    if robust_loss not in ("tukey", "huber", "none"):
        raise ParameterError(
            f"parameter 'robust_loss' must be 'tukey', 'huber' or 'none', got {robust_loss!r}."
        )
    if robust_tuning is None:
        tuning = 4.685 if robust_loss == "tukey" else 1.345
    else:
        tuning = _check_number("robust_tuning", robust_tuning, lo=0.5, hi=20.0)
    iters = _check_number("robust_iterations", robust_iterations, lo=0, hi=50, integer=True)
    sc_it = _check_number("scarp_iterations", scarp_iterations, lo=0, hi=10, integer=True)
    ffw = _check_number("far_field_widths", far_field_widths, lo=0.5, hi=20.0)
    far_min = max(2.0 * nmin, 20.0) * step
    budget = _check_number("memory_budget_mb", memory_budget_mb, lo=16.0)
    min_st = _check_number("min_stations_per_fault", min_stations_per_fault, lo=1, hi=1000, integer=True)
    smooth = (
        None
        if smooth_stations is None
        else _check_number("smooth_stations", smooth_stations, lo=0.0, hi=20.0)
    )
    need = w0 + (nmin + 1) * step
    hmax = (
        400.0 * px
        if max_half_length_m is None
        else _check_number("max_half_length_m", max_half_length_m, lo=0, lo_open=True)
    )
    if profile_half_length_m is not None:
        H = _check_number("profile_half_length_m", profile_half_length_m, lo=0, lo_open=True)
        if H < need:
            raise ParameterError(
                f"parameter 'profile_half_length_m' {H:g} m leaves fewer than {nmin} samples beyond the "
                f"scarp zone ({w0:g} m); use at least {need:g} m or leave it unset (adapted)."
            )
        if H > 1e5 * px:
            raise ParameterError(
                f"parameter 'profile_half_length_m' {H:g} m is over 100000 pixels; use a few hundred pixels at most."
            )
        hmax = max(hmax, H)
        hmin = H
    else:
        H = None
        hmin = max(40.0 * px, w0 + far_min + 2 * step)
        if hmax < hmin:
            raise ParameterError(
                f"parameter 'max_half_length_m' {hmax:g} m is shorter than the shortest useful profile "
                f"({hmin:g} m); raise it or leave it unset."
            )
    return ThrowParams(
        pixel_size_m=px,
        sample_step_m=step,
        station_spacing_m=spacing,
        normal_window_m=nwin,
        scarp_halfwidth_m=w0,
        profile_half_length_m=H,
        min_half_length_m=hmin,
        max_half_length_m=hmax,
        length_fraction=0.1,
        far_field_widths=ffw,
        min_far_field_m=far_min,
        min_samples_per_side=nmin,
        robust_loss=robust_loss,
        robust_tuning=tuning,
        robust_iterations=iters,
        scarp_iterations=sc_it,
        scarp_tolerance_frac=0.02,
        crossing_margin_m=w0,
        memory_budget_mb=budget,
        smooth_stations=smooth,
        min_caskey_factor=0.25,
        min_stations=min_st,
        min_inlier_fraction=0.5,
        degradation=bool(degradation),
        n_events=_check_number("n_events", n_events, lo=1, hi=20, integer=True),
    )

