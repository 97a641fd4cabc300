"""What a synthetic scene was built from: per-fault truth, true throw and heave.

Pure functions and a frozen container, no file I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from rasterio.transform import Affine

from faultmap.errors import ParameterError
from faultmap.synthetic.faults import _Fault
from faultmap.synthetic.grid import _positive
from faultmap.synthetic.profile_shapes import throw_profile

__all__ = ["SceneTruth"]


@dataclass(frozen=True)
class SceneTruth:
    """What a synthetic scene was built from.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        One row per fault, in input order, geometry = the trace as given
        (multi-part traces merged). Columns: ``fault_id``, ``name``,
        ``length_m``, ``max_throw_m``, ``dip_deg``, ``dip_dir_deg``,
        ``strike_deg`` (right-hand rule, ``dip_dir_deg - 90``),
        ``max_heave_m`` (``max_throw_m / tan(dip)``), ``max_throw_dist_m``
        (distance of the maximum from the trace's start vertex),
        ``profile_shape``, ``peak_pos``, ``plateau_frac``, ``hw_extent_m``
        (inf for a rigid hanging wall), ``kappa_t_m2`` (diffusivity times
        age of a diffusion-degraded scarp, m^2; 0 = the raised-sine ramp).
    transform : rasterio.Affine
        Grid transform (pixel-centre convention of :mod:`faultmap.synthetic.builder`).
    shape : (nrows, ncols)
    params : dict
        The build parameters (origin, pixel size, slope, relief, seed, ...).
    """

    faults: gpd.GeoDataFrame
    transform: Affine
    shape: tuple[int, int]
    params: dict[str, Any]

    def _row(self, fault_id: int) -> pd.Series:
        rows = self.faults.loc[self.faults["fault_id"] == int(fault_id)]
        if rows.empty:
            raise ParameterError(f"no fault with fault_id {fault_id} in this scene")
        return rows.iloc[0]

    def throw_at(self, fault_id: int, dist_m: float | np.ndarray) -> np.ndarray:
        """Return the true throw (m) at distance ``dist_m`` (m) along the trace from its start vertex."""
        r = self._row(fault_id)
        s = np.asarray(dist_m, dtype=float) / float(r["length_m"])
        return throw_profile(s, float(r["max_throw_m"]), shape=str(r["profile_shape"]),
                             peak_pos=float(r["peak_pos"]), plateau_frac=float(r["plateau_frac"]))

    def heave_at(self, fault_id: int, dist_m: float | np.ndarray) -> np.ndarray:
        """Return the true heave (m), throw / tan(dip), at distance ``dist_m`` (m) along the trace."""
        r = self._row(fault_id)
        d = math.radians(float(r["dip_deg"]))
        return self.throw_at(fault_id, dist_m) * (math.cos(d) / math.sin(d))

    def stations(self, *, spacing_m: float = 100.0) -> gpd.GeoDataFrame:
        """Return the true throw and heave at stations every ``spacing_m`` or less along every trace.

        Returns
        -------
        geopandas.GeoDataFrame
            Points with ``fault_id``, ``name``, ``dist_m`` (from the start
            vertex, tips included), ``throw_m``, ``heave_m``.
        """
        spacing = _positive(spacing_m, "spacing_m")
        parts = []
        for r in self.faults.itertuples(index=False):
            n = max(int(math.ceil(r.length_m / spacing - 1e-9)), 1)
            dist = np.linspace(0.0, r.length_m, n + 1)
            pts = shapely.line_interpolate_point(r.geometry, dist)
            parts.append(gpd.GeoDataFrame(
                {"fault_id": np.full(n + 1, r.fault_id, dtype=int),
                 "name": [r.name] * (n + 1),
                 "dist_m": dist,
                 "throw_m": self.throw_at(r.fault_id, dist),
                 "heave_m": self.heave_at(r.fault_id, dist)},
                geometry=pts, crs=self.faults.crs))
        if not parts:
            return gpd.GeoDataFrame({"fault_id": [], "name": [], "dist_m": [], "throw_m": [],
                                     "heave_m": []}, geometry=[], crs=self.faults.crs)
        return gpd.GeoDataFrame(pd.concat(parts, ignore_index=True), crs=self.faults.crs)


def _truth_table(flist: list[_Fault], crs: Any) -> gpd.GeoDataFrame:
    rows = []
    for f in flist:
        if f.shape == "plateau":
            # Centre of the plateau (any point on it has the maximum throw).
            c = f.peak_pos
            s_max = c + 0.5 * f.plateau_frac * ((1.0 - c) - c)
        else:
            s_max = f.peak_pos
        rows.append({
            "fault_id": f.fault_id, "name": f.name, "length_m": f.length_m,
            "max_throw_m": f.max_throw_m, "dip_deg": f.dip_deg, "dip_dir_deg": f.dip_dir_deg,
            "strike_deg": (f.dip_dir_deg - 90.0) % 360.0,
            "max_heave_m": f.max_throw_m * f.cot_dip,
            "max_throw_dist_m": s_max * f.length_m,
            "profile_shape": f.shape, "peak_pos": f.peak_pos, "plateau_frac": f.plateau_frac,
            "hw_extent_m": f.hw_extent_m, "kappa_t_m2": f.kappa_t_m2, "geometry": f.line,
        })
    if not rows:
        cols = ["fault_id", "name", "length_m", "max_throw_m", "dip_deg", "dip_dir_deg",
                "strike_deg", "max_heave_m", "max_throw_dist_m", "profile_shape", "peak_pos",
                "plateau_frac", "hw_extent_m", "kappa_t_m2"]
        return gpd.GeoDataFrame({c: [] for c in cols}, geometry=[], crs=crs)
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)

