"""Benchmark of faultmap's throw step (a script, not a test).

Builds a synthetic DEM physically from known fault slips (faultmap.synthetic.builder),
writes it as a tiled GeoTIFF in a temporary folder, and measures in the same
run, in profile samples per second:

1. faultmap's whole throw step (``faultmap.throw.step.measure_throw``: stations,
   crossings, windowed DEM reads, sampling, robust fits, summaries),
   single-threaded and with the default engine (in-process, one thread per
   core, at most 4; the raw gather below runs on one thread);
2. a naive loop: ``rasterio`` ``dataset.sample`` once per point plus a
   per-station numpy line fit, on a subset of stations;
3. a raw bilinear gather of the same sample points with
   ``scipy.ndimage.map_coordinates`` on the DEM already in memory (the
   practical ceiling), and the same preceded by reading the whole DEM.

Timings are the best of five rounds, each timing the step (both ways) and the raw gather in
turn, so that a drift of the machine's speed during the run does not favour one of them (the
machine may be shared; the load average is printed). The throw step's sample
count includes the first, shorter profiles of stations measured again with
longer ones; the raw gather samples the final profiles only.

The ratios are given for the step as the tool runs it (the default engine)
and, beside them, on one thread; ``map_coordinates`` itself runs on one
thread.

An instrumented single-threaded run then says where the step's time goes
(reading the DEM windows, sampling, fits, smoothing, the rest), against the
time the "half the raw gather" target allows.

It also runs the throw step in a subprocess with ``memory_budget_mb`` set
below the DEM's size and reports its peak memory (ru_maxrss and the
tracemalloc peak of numpy/Python allocations).

Usage::

    python benchmarks/bench_throw.py           # 8000 x 8000 pixels, 2000 faults
    python benchmarks/bench_throw.py --small   # 2000 x 2000 pixels, 200 faults
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from bench_scene import CRS, PIXEL_M, vm_hwm_kb  # noqa: E402  (the shared scene)

#: Rounds of the timed runs (each times the step both ways and the raw gather; the best of each counts).
ROUNDS = 5


def build_scene(folder: Path, n_pixels: int, n_faults: int, seed: int = 3):
    """Synthetic rift: a fault population (D = gamma L) displacing a gently rough surface."""
    from bench_scene import write_scene_dem

    from faultmap.synthetic import fault_population

    ext = (0.0, 0.0, n_pixels * PIXEL_M, n_pixels * PIXEL_M)
    t0 = time.perf_counter()
    faults = fault_population(
        n_faults,
        gamma=0.015,
        length_range_m=(400.0, min(6000.0, 0.5 * n_pixels * PIXEL_M)),
        length_alpha=2.2,
        extent=ext,
        min_spacing_m=200.0,
        strike_scatter_deg=12.0,
        seed=seed,
        crs=CRS,
    )
    tif = write_scene_dem(faults, folder, n_pixels, seed=seed)
    faults = faults.copy()
    faults["fault_id"] = np.arange(1, len(faults) + 1)
    gpkg = folder / "faults.gpkg"
    faults.to_file(gpkg, layer="faults")
    return tif, gpkg, time.perf_counter() - t0


def sample_points(stations, step):
    """Sample coordinates of the final profiles (both sides, 1..K steps), row-major."""
    x = stations.geometry.x.to_numpy()
    y = stations.geometry.y.to_numpy()
    az = np.radians(stations["profile_azimuth_deg"].to_numpy())
    H = stations["profile_half_length_m"].to_numpy()
    keep = np.isfinite(az) & np.isfinite(H)
    x, y, az, H = x[keep], y[keep], az[keep], H[keep]
    K = np.ceil(H / step - 1e-9).astype(np.int64)
    nx, ny = np.sin(az), np.cos(az)
    rep = np.repeat(np.arange(x.size), 2 * K)
    start = np.cumsum(2 * K) - 2 * K
    j = np.arange(rep.size) - start[rep]
    k = j % K[rep] + 1
    side = np.where(j < K[rep], -1.0, 1.0)
    d = side * k * step
    return x[rep] + d * nx[rep], y[rep] + d * ny[rep]


def raw_gather(tif, px, py, repeat=3):
    """Read the whole DEM, then time map_coordinates alone on the same points (best of ``repeat``)."""
    import rasterio
    from scipy import ndimage

    t_read = t_gather = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        with rasterio.open(tif) as src:
            arr = src.read(1)
            t = src.transform
        arr[arr == -9999.0] = np.nan
        t_read = min(t_read, time.perf_counter() - t0)
        cols = (px - t.c) / t.a - 0.5
        rows = (py - t.f) / t.e - 0.5
        chunk = 2_000_000
        t0 = time.perf_counter()
        for s in range(0, px.size, chunk):
            ndimage.map_coordinates(
                arr,
                [rows[s : s + chunk], cols[s : s + chunk]],
                order=1,
                mode="constant",
                cval=np.nan,
                prefilter=False,
                output=np.float32,
            )
        t_gather = min(t_gather, time.perf_counter() - t0)
    return t_read, t_gather


def naive_loop(tif, stations, step, n_stations, scarp_halfwidth_m):
    """rasterio dataset.sample once per point + a numpy line fit per side, per station."""
    import rasterio

    rng = np.random.default_rng(0)
    ok = stations.loc[stations["status"] == "ok"]
    sub = ok.iloc[rng.choice(len(ok), size=min(n_stations, len(ok)), replace=False)]
    n_samples = 0
    t0 = time.perf_counter()
    with rasterio.open(tif) as src:
        for row in sub.itertuples():
            az = math.radians(row.profile_azimuth_deg)
            nx, ny = math.sin(az), math.cos(az)
            K = int(math.ceil(row.profile_half_length_m / step - 1e-9))
            d = np.r_[-np.arange(K, 0, -1), np.arange(1, K + 1)] * step
            z = np.empty(d.size)
            for i, di in enumerate(d):  # one read per point: the pattern to avoid
                z[i] = next(src.sample([(row.geometry.x + di * nx, row.geometry.y + di * ny)]))[0]
            z[z == -9999.0] = np.nan
            vs = []
            for side in (d < -scarp_halfwidth_m, d > scarp_halfwidth_m):
                m = side & np.isfinite(z)
                b, a = np.polyfit(d[m], z[m], 1)
                vs.append(a)
            n_samples += d.size
    return n_samples, time.perf_counter() - t0


def breakdown(faults, dem, rounds=3):
    """Where a single-threaded throw step spends its time: seconds per part (the fastest of ``rounds`` runs).

    Wraps the step's building blocks with timers: reading the DEM windows
    (``faultmap.io.dem.read_window_array``), bilinear sampling
    (``faultmap.throw.profiles.sample_profiles``), the profile fits
    (``faultmap.throw.profiles.fit_profile_matrix``) and the along-strike smoothing
    (``faultmap.throw.smoothing._smooth_chunk``); the rest (stations, crossings,
    per-station results, gathering, side, summaries, station points) is the
    whole step minus these.
    """
    import faultmap.io.dem as dem_io
    import faultmap.throw.profiles as profiles
    import faultmap.throw.smoothing as smoothing
    from faultmap.throw.step import measure_throw

    spent = {"read": 0.0, "sample": 0.0, "fit": 0.0, "smooth": 0.0}
    patches = [
        (dem_io, "read_window_array", "read"),
        (profiles, "sample_profiles", "sample"),
        (profiles, "fit_profile_matrix", "fit"),
        (smoothing, "_smooth_chunk", "smooth"),
    ]
    saved = [(mod, name, getattr(mod, name)) for mod, name, _ in patches]

    def timed(fn, key):
        def run(*args, **kw):
            t0 = time.perf_counter()
            try:
                return fn(*args, **kw)
            finally:
                spent[key] += time.perf_counter() - t0

        return run

    for (mod, name, key), (_, _, fn) in zip(patches, saved, strict=True):
        setattr(mod, name, timed(fn, key))
    best = None
    try:
        for _ in range(rounds):  # the fastest of a few runs, as for the timings above
            for k in spent:
                spent[k] = 0.0
            t0 = time.perf_counter()
            measure_throw(faults, dem)
            total = time.perf_counter() - t0
            if best is None or total < best["total"]:
                best = dict(spent, rest=total - sum(spent.values()), total=total)
    finally:
        for mod, name, fn in saved:
            setattr(mod, name, fn)
    return best


def _vm_hwm_kb():
    """Peak resident set size of this process (VmHWM, reset at exec; ru_maxrss where there is no /proc)."""
    return vm_hwm_kb() or resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def child_memory(tif, gpkg, budget_mb):
    """Run the throw step under a memory budget; print peak memory as JSON (subprocess).

    The step runs twice: once plain for the peak resident memory (VmHWM) and
    the time, once under tracemalloc for the peak of Python and numpy
    allocations (tracemalloc slows allocation-heavy code down).
    """
    import tracemalloc

    import geopandas as gpd

    from faultmap.io.dem import open_dem
    from faultmap.throw.step import measure_throw

    faults = gpd.read_file(gpkg, layer="faults")
    dem = open_dem(tif)
    measure_throw(faults.iloc[:5], dem, memory_budget_mb=budget_mb)  # imports, first allocations
    base = _vm_hwm_kb()
    t0 = time.perf_counter()
    res = measure_throw(faults, dem, memory_budget_mb=budget_mb)
    dt = time.perf_counter() - t0
    rss = _vm_hwm_kb()
    tracemalloc.start()
    measure_throw(faults, dem, memory_budget_mb=budget_mb)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(
        json.dumps(
            {
                "baseline_rss_kb": base,
                "peak_rss_kb": rss,
                "tracemalloc_peak_b": peak,
                "seconds": dt,
                "n_samples": res.n_samples,
            }
        )
    )


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--small", action="store_true", help="2000 x 2000 pixels and 200 faults (quick check)")
    ap.add_argument("--naive-stations", type=int, default=150, help="stations measured by the naive loop")
    ap.add_argument("--child-memory", nargs=3, metavar=("TIF", "GPKG", "BUDGET_MB"), help=argparse.SUPPRESS)
    a = ap.parse_args(argv)
    if a.child_memory:
        child_memory(a.child_memory[0], a.child_memory[1], float(a.child_memory[2]))
        return
    import geopandas as gpd

    from faultmap.engine import Engine
    from faultmap.io.dem import open_dem
    from faultmap.throw.batches import min_batches_for
    from faultmap.throw.step import measure_throw

    n_pix, n_faults = (2000, 200) if a.small else (8000, 2000)
    with tempfile.TemporaryDirectory(prefix="faultmap_bench_") as tmp:
        tmp = Path(tmp)
        tif, gpkg, t_build = build_scene(tmp, n_pix, n_faults)
        dem = open_dem(tif)
        faults = gpd.read_file(gpkg, layer="faults")
        size_mb = os.path.getsize(tif) / 1e6
        print(f"load average before the runs (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())}")
        print(
            f"scene: {n_pix} x {n_pix} px ({PIXEL_M:g} m), {len(faults)} faults, "
            f"{faults.geometry.length.sum() / 1000:.0f} km of trace, GeoTIFF {size_mb:.0f} MB, built in {t_build:.1f} s"
        )

        measure_throw(faults.iloc[:20], dem)  # warm-up (imports, compiled kernels, page cache)
        # the default engine: in-process, one thread per core (at most 4), batches as the tool plans them
        eng = Engine()
        nthr = eng.threads
        res = measure_throw(faults, dem)
        st = res.stations
        step = res.params.sample_step_m
        px, py = sample_points(st, step)
        # the three are timed in turn, round after round (best of each), so a drift of the machine's speed
        # during the run does not favour one of them
        best = dt2 = t_read = t_gather = math.inf
        for _ in range(ROUNDS):
            t0 = time.perf_counter()
            res = measure_throw(faults, dem)
            best = min(best, time.perf_counter() - t0)
            t0 = time.perf_counter()
            res2 = measure_throw(faults, dem, mapper=lambda f, b, p: eng.map(f, b), min_batches=min_batches_for(eng))
            dt2 = min(dt2, time.perf_counter() - t0)
            tr, tg = raw_gather(tif, px, py, repeat=1)
            t_read, t_gather = min(t_read, tr), min(t_gather, tg)
        n_samp = res.n_samples
        same = np.allclose(
            res2.faults["max_throw_m"].to_numpy(float), res.faults["max_throw_m"].to_numpy(float), equal_nan=True
        )
        ok = (st["status"] == "ok").mean()
        truth = faults.set_index("fault_id")["max_throw_m"]
        rel = (res.faults.set_index("fault_id")["max_throw_m"] / truth - 1.0).dropna()

        n_naive, t_naive = naive_loop(tif, st, step, a.naive_stations, res.params.scarp_halfwidth_m)

        rate = n_samp / best
        rate2 = n_samp / dt2
        raw = px.size / t_gather
        raw_read = px.size / (t_gather + t_read)
        naive = n_naive / t_naive
        print(f"stations: {len(st)} ({ok:.1%} ok); profile samples: {n_samp:,}")
        print(
            f"max throw vs truth: median {rel.median():+.2%}, 5-95 % {rel.quantile(0.05):+.1%} .. {rel.quantile(0.95):+.1%}"
        )
        print("")
        print(f"{'method':58s} {'samples/s':>12s}")
        print(f"{'faultmap throw step, 1 thread (whole step)':58s} {rate:12,.0f}   ({best:.2f} s)")
        print(
            f"{f'faultmap throw step, default engine: {nthr} thread(s)':58s} {rate2:12,.0f}   ({dt2:.2f} s; "
            f"same max throws as 1 thread: {same})"
        )
        print(
            f"{'naive: dataset.sample per point + numpy fit per station':58s} {naive:12,.0f}   ({n_naive:,} samples, {t_naive:.1f} s)"
        )
        print(f"{'raw gather: map_coordinates, DEM already in memory':58s} {raw:12,.0f}   ({t_gather:.2f} s)")
        print(
            f"{'raw gather incl. reading the whole DEM':58s} {raw_read:12,.0f}   ({t_read + t_gather:.2f} s)"
        )
        print("")
        print(
            f"ratios of faultmap's throw step as the tool runs it (default engine, {nthr} thread(s)), "
            "and on 1 thread:"
        )
        print(f"  vs the naive loop:                 {rate2 / naive:8.0f} x  (1 thread {rate / naive:5.0f} x)   target >= 100 x")
        print(f"  vs the raw gather (DEM in memory): {rate2 / raw:8.2f}    (1 thread {rate / raw:5.2f})     target >= 0.5")
        print(f"  vs reading the DEM + raw gather:   {rate2 / raw_read:8.2f}    (1 thread {rate / raw_read:5.2f})")

        # what the "half the raw gather" target leaves for the whole step, against what reading the
        # DEM windows and sampling them take alone (an instrumented single-threaded run)
        parts = breakdown(faults, dem)
        allowed = 2.0 * t_gather * n_samp / px.size
        print("")
        print(
            f"single-threaded step, instrumented (fastest of 3 runs, {parts['total']:.2f} s): "
            + ", ".join(f"{k} {parts[k]:.2f} s" for k in ("read", "sample", "fit", "smooth", "rest"))
        )
        print(
            f"  half the in-memory raw gather's throughput allows {allowed:.2f} s for the whole step; reading the "
            f"DEM windows and sampling them alone take {parts['read'] + parts['sample']:.2f} s "
            f"({(parts['read'] + parts['sample']) / allowed:.0%} of it)"
        )

        dem_mb = dem.width * dem.height * 4 / 1e6
        budget = max(16.0, round(dem_mb / 4))
        out = subprocess.run(
            [sys.executable, __file__, "--child-memory", str(tif), str(gpkg), str(budget)],
            capture_output=True,
            text=True,
            check=True,
        )
        m = json.loads(out.stdout.strip().splitlines()[-1])
        print("")
        print(
            f"memory: DEM {dem_mb:.0f} MB as float32 ({dem_mb * 2:.0f} MB as float64); memory_budget_mb = {budget:g}"
        )
        print(
            f"  peak resident memory of the subprocess (VmHWM) {m['peak_rss_kb'] / 1024:.0f} MB; "
            f"before the step (imports, faults, a warm-up): {m['baseline_rss_kb'] / 1024:.0f} MB; "
            f"increase during the step {(m['peak_rss_kb'] - m['baseline_rss_kb']) / 1024:.0f} MB"
        )
        print(
            f"  tracemalloc peak (numpy + Python allocations during the step): {m['tracemalloc_peak_b'] / 1e6:.0f} MB; "
            f"step took {m['seconds']:.2f} s at this budget"
        )


if __name__ == "__main__":
    main()
