"""Benchmark of the scarp degradation fit inside the throw step (a script, not a test).

Builds a regional-ish synthetic scene with the shared scene builder (``bench_scene.write_scene_dem``,
the fault population of ``bench_throw.build_scene``) and times faultmap's throw step
(``faultmap.throw.step.measure_throw``, in-process, one thread, batches as the step plans them)
with ``degradation=False`` and ``degradation=True``. The two are timed in turn, round after round,
and the best of each counts, so a drift of the machine's speed during the run does not favour one
of them (the machine may be shared; the load average is printed). It prints both times and their
ratio, for the compiled kernel (:mod:`faultmap.scarps.diffusion_jit`) and, with ``--reference``,
also for the numpy reference path (kernel switched off for the degradation fit only), and how far
the two paths' kappa t agree on the scene's stations.

Usage::

    python benchmarks/bench_degradation.py              # 4000 x 4000 px, 1500 faults
    python benchmarks/bench_degradation.py --small      # 1500 x 1500 px, 200 faults
    python benchmarks/bench_degradation.py --reference  # also the numpy reference path
    python benchmarks/bench_degradation.py --pixels 8000 --faults 4000 --reference
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np
from bench_throw import build_scene  # noqa: E402  (the shared scene)

ROUNDS = 3


def _timed(fn):
    t0 = time.perf_counter()
    res = fn()
    return time.perf_counter() - t0, res


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--small", action="store_true", help="1500 x 1500 px, 200 faults")
    ap.add_argument("--reference", action="store_true", help="also time the numpy reference of the fit")
    ap.add_argument("--rounds", type=int, default=ROUNDS)
    ap.add_argument("--pixels", type=int, help="pixels a side (default 4000)")
    ap.add_argument("--faults", type=int, help="faults (default 1500)")
    a = ap.parse_args()
    n_pix, n_faults = (1500, 200) if a.small else (4000, 1500)
    n_pix, n_faults = a.pixels or n_pix, a.faults or n_faults

    import geopandas as gpd

    import faultmap.scarps.diffusion as dif
    from faultmap.io.dem import open_dem
    from faultmap.numerics import jit
    from faultmap.throw.step import measure_throw

    fit0 = dif.fit_diffusion_profiles

    def use_reference(flag: bool) -> None:
        """Switch the degradation fit (only) to the numpy reference path, or back."""
        import faultmap.scarps.profile_degradation as pd_mod

        pd_mod.fit_diffusion_profiles = (lambda *ar, **kw: fit0(*ar, use_jit=False, **kw)) if flag else fit0

    with tempfile.TemporaryDirectory(prefix="faultmap_bench_") as tmp:
        tif, gpkg, t_build = build_scene(Path(tmp), n_pix, n_faults)
        dem = open_dem(tif)
        faults = gpd.read_file(gpkg, layer="faults")
        print(
            f"load average before the runs (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())}"
        )
        print(
            f"scene: {n_pix} x {n_pix} px (10 m), {len(faults)} faults, built in {t_build:.1f} s; "
            f"compiled kernels: {jit.ENABLED}"
        )
        measure_throw(
            faults.iloc[:20], dem, degradation=True
        )  # warm-up (imports, compiled kernels, page cache)
        cases = {"off": (False, False), "on": (True, False)}
        if a.reference:
            cases["on, numpy reference"] = (True, True)
        best = {k: np.inf for k in cases}
        results = {}
        for _ in range(a.rounds):
            for name, (deg, ref) in cases.items():
                use_reference(ref)
                try:
                    t, res = _timed(lambda deg=deg: measure_throw(faults, dem, degradation=deg))
                finally:
                    use_reference(False)
                best[name] = min(best[name], t)
                results[name] = res
        st = results["on"].stations
        n_st = len(st)
        print(f"stations: {n_st}, kappa t flagged ok: {int((st['kappa_t_flag'] == 'ok').sum())}")
        for name, t in best.items():
            print(f"throw step, degradation {name:22s}: {t:7.2f} s  (ratio to off {t / best['off']:.2f})")
        if a.reference:
            s1, s2 = results["on"].stations, results["on, numpy reference"].stations
            k1, k2 = s1["kappa_t_m2"].to_numpy(float), s2["kappa_t_m2"].to_numpy(float)
            both = np.isfinite(k1) & np.isfinite(k2) & (k2 > 0)
            rel = np.abs(k1[both] / k2[both] - 1.0)
            same_code = (s1["kappa_t_flag"].to_numpy(object) == s2["kappa_t_flag"].to_numpy(object)).mean()
            print(
                f"kernel vs reference: kappa t relative difference median {np.median(rel):.1e}, "
                f"99th percentile {np.percentile(rel, 99):.1e}, max {rel.max():.1e}; "
                f"same code at {100 * same_code:.2f} % of stations"
            )


if __name__ == "__main__":
    main()
