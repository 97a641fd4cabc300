"""Benchmark of faultmap's engines (a script, not a test): in-process vs a local Dask cluster.

Builds the synthetic rift of ``bench_throw.py`` (a fault population displacing a gently rough
surface, ``faultmap.synthetic.builder``) as a tiled GeoTIFF in a temporary folder, then runs

1. the throw step (``faultmap.throw.step.measure_throw``) with ``memory_budget_mb`` below the DEM's size,
   so that it runs as many spatial batches, each reading its own DEM windows;
2. the strain step (Kostrov sums on a fine grid, in tiles of cells: ``faultmap.extension.kostrov_tiles``),

in-process and on local Dask clusters of 1 and 2 worker processes (``faultmap.engine``), checks that
every engine returns the same stations, faults and cells (bit for bit: the same batch plan), and
reports times, ratios and memory. The same clusters also run a CPU-bound numpy task with no I/O, so
the speed-up from 1 to 2 workers can be read against what this machine's two cores give any work:

* the in-process peak memory of the throw step at that budget (a subprocess of ``bench_throw.py``:
  VmHWM and the tracemalloc peak);
* each worker's peak resident memory (VmHWM) and, in a separate run, the tracemalloc peak of its
  numpy and Python allocations during the step.

Usage::

    python benchmarks/bench_scale.py            # 8000 x 8000 pixels, 2000 faults, budget 64 MB
    python benchmarks/bench_scale.py --small    # 3000 x 3000 pixels, 300 faults, budget 16 MB
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from bench_scene import vm_hwm_kb  # noqa: E402  (the benchmarks' shared helpers)


def _worker_memory() -> dict:
    """Run on each worker: its peak resident memory and tracemalloc peak (if tracing)."""
    import tracemalloc

    peak = tracemalloc.get_traced_memory()[1] if tracemalloc.is_tracing() else 0
    return {"vmhwm_kb": vm_hwm_kb(), "traced_peak_b": peak}


def _start_tracing() -> None:
    import tracemalloc

    tracemalloc.start()


def _warm_up() -> None:
    """Import what the tasks use, so the first timed batch does not pay for it."""
    import faultmap.extension.kostrov_tiles  # noqa: F401
    import faultmap.throw.step  # noqa: F401


#: Seconds the last ``_throw`` call spent in engine maps (batches and smoothing chunks), by engine.
MAP_SECONDS: dict = {}


def _throw(faults, dem, params, engine):
    """The throw step on ``engine`` (None: in-process, one thread); the time inside its maps is noted."""
    from faultmap.engine import engine_map
    from faultmap.throw.batches import min_batches_for
    from faultmap.throw.step import measure_throw

    spent = [0.0]

    def mapper(f, b, p):
        t0 = time.perf_counter()
        try:
            return engine_map(engine, f, b)
        finally:
            spent[0] += time.perf_counter() - t0

    res = measure_throw(faults, dem, params=params, mapper=mapper, min_batches=min_batches_for(engine))
    MAP_SECONDS[id(engine)] = spent[0]
    return res


def _reference_task(seed: int) -> float:
    """A CPU-bound numpy task with no I/O and no shared state: what this machine's cores can do in parallel."""
    import numpy as np

    x = np.random.default_rng(seed).random(1_500_000).astype("float32")
    for _ in range(6):
        x.sort()
        x = np.sqrt(x + np.float32(1.0)) - np.float32(0.5)
    return float(x[0])


def _strain(res, cell_m, engine):
    from faultmap.engine import engine_map
    from faultmap.extension.kostrov_tiles import gather_kostrov_tiles, kostrov_tile, plan_kostrov_tiles

    tiles, grid = plan_kostrov_tiles(res.faults, res.stations, cell_size_m=cell_m, tile_cells=64)
    cells, whole = gather_kostrov_tiles(engine_map(engine, kostrov_tile, tiles), grid)
    return cells, whole, len(tiles)


def _batches_only(faults, dem, params, engine):
    """The parallel part of the throw step alone: every batch through the engine."""
    from functools import partial

    from faultmap.engine import engine_map
    from faultmap.throw import plan_batches, run_batch

    return engine_map(engine, partial(run_batch, dem=dem, params=params), plan_batches(faults, dem, params))


def _same(a, b) -> bool:
    import pandas as pd

    try:
        pd.testing.assert_frame_equal(a, b, check_exact=True)
    except AssertionError:
        return False
    return True


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--small", action="store_true", help="3000 x 3000 pixels, 300 faults (quick check)")
    ap.add_argument("--budget-mb", type=float, help="memory_budget_mb of the throw step")
    ap.add_argument("--repeat", type=int, default=5, help="timed rounds over the engines (best is kept)")
    ap.add_argument("--spacing-px", type=float, default=3.0, help="throw station spacing in pixels (default 3)")
    a = ap.parse_args(argv)

    import warnings

    import geopandas as gpd
    from bench_throw import PIXEL_M, build_scene

    from faultmap.errors import FaultmapWarning

    # the same notice (faults of the synthetic scene with no throw) would print once per timed run
    # ("once" is not enough: the timed calls run inside warning contexts that reset the registry)
    warnings.simplefilter("ignore", category=FaultmapWarning)

    from faultmap.engine import make_engine
    from faultmap.io.dem import open_dem
    from faultmap.throw import plan_batches, resolve_params

    n_pix, n_faults, budget = (3000, 300, 16.0) if a.small else (8000, 2000, 64.0)
    budget = a.budget_mb or budget
    cell_m = 250.0 if not a.small else 100.0
    with tempfile.TemporaryDirectory(prefix="faultmap_scale_") as tmp:
        tmp = Path(tmp)
        tif, gpkg, t_build = build_scene(tmp, n_pix, n_faults)
        dem = open_dem(tif)
        faults = gpd.read_file(gpkg, layer="faults")
        params = resolve_params(
            dem.pixel_size, memory_budget_mb=budget, station_spacing_m=a.spacing_px * dem.pixel_size
        )
        n_batches = len(plan_batches(faults, dem, params))
        dem_mb = dem.width * dem.height * 4 / 1e6
        print(
            f"scene: {n_pix} x {n_pix} px ({PIXEL_M:g} m), {len(faults)} faults, built in {t_build:.1f} s; "
            f"DEM {dem_mb:.0f} MB as float32; memory_budget_mb = {budget:g} -> {n_batches} throw batches; "
            f"station spacing {a.spacing_px:g} px"
        )

        rows = []
        _throw(faults.iloc[:20], dem, params, None)  # warm-up (imports, page cache)
        mem_runs = {}
        # all engines are up at once and timed in turn, round after round (best of the rounds), so a
        # drift in the machine's speed during the run does not favour one of them
        best: dict = {}
        outs: dict = {}
        serial_of: dict = {}

        def clock(key, fn):
            t0 = time.perf_counter()
            out = fn()
            dt = time.perf_counter() - t0
            if dt < best.get(key, float("inf")):
                best[key] = dt
                if key[0] == "throw":
                    # the client's serial part of this same run: the step minus its engine maps
                    serial_of[key[1]] = dt - MAP_SECONDS.get(id(engines[key[1]]), 0.0)
            outs[key] = out

        with make_engine(workers=1) as e1, make_engine(workers=2) as e2:
            engines = {0: None, 1: e1, 2: e2}
            for e in (e1, e2):
                e.client.run(_warm_up)
                e.map(abs, list(range(8)))
                _throw(faults.iloc[:200], dem, params, e)
            for _ in range(a.repeat):
                for w, e in engines.items():
                    clock(("throw", w), lambda e=e: _throw(faults, dem, params, e))
                    clock(("batches", w), lambda e=e: _batches_only(faults, dem, params, e))
                    clock(("strain", w), lambda e=e, w=w: _strain(outs[("throw", w)], cell_m, e))
                    if e is not None:
                        clock(("reference", w), lambda e=e: e.map(_reference_task, list(range(24))))
            ref = outs[("throw", 0)]
            cells_ref, _, n_tiles = outs[("strain", 0)]
            rows.append(("in-process", best[("throw", 0)], best[("strain", 0)], True, {}, best[("batches", 0)]))
            for w, e in ((1, e1), (2, e2)):
                res, cells = outs[("throw", w)], outs[("strain", w)][0]
                same = _same(res.stations, ref.stations) and _same(res.faults, ref.faults) and _same(cells, cells_ref)
                rss = e.client.run(_worker_memory)
                rows.append(
                    (f"local cluster, {w} worker(s)", best[("throw", w)], best[("strain", w)], same, rss,
                     best[("batches", w)])
                )
            # a separate run under tracemalloc (slower; memory only)
            e2.client.run(_start_tracing)
            _throw(faults, dem, params, e2)
            mem_runs = e2.client.run(_worker_memory)
        t_in, tb_in, ts_in = best[("throw", 0)], best[("batches", 0)], best[("strain", 0)]
        t_ref = {1: best[("reference", 1)], 2: best[("reference", 2)]}

        print(f"throw: {len(ref.stations)} stations, {ref.n_samples:,} profile samples")
        print(f"strain: {len(cells_ref)} cells of {cell_m:g} m in {n_tiles} tiles of 64 x 64 cells")
        print("")
        print(
            f"{'engine':28s} {'throw s':>8s} {'vs in-proc':>10s} {'batches s':>9s} {'vs in-proc':>10s} "
            f"{'strain s':>8s} {'vs in-proc':>10s}  identical"
        )
        for name, t, ts, same, _, tb in rows:
            print(
                f"{name:28s} {t:8.2f} {t_in / t:9.2f}x {tb:9.2f} {tb_in / tb:9.2f}x {ts:8.3f} {ts_in / ts:9.2f}x  "
                f"{'yes' if same else 'NO'}"
            )
        t1, t2 = rows[1][1], rows[2][1]
        b1, b2 = rows[1][5], rows[2][5]
        s1, s2 = rows[1][2], rows[2][2]
        print("")
        ceiling = t_ref[1] / t_ref[2]
        print(
            f"speed-up from 1 to 2 workers: throw step {t1 / t2:.2f}x, its batches {b1 / b2:.2f}x, "
            f"strain {s1 / s2:.2f}x (ideal 2.00x)"
        )
        print(
            f"this machine's own ceiling, same run: a CPU-bound numpy task (24 tasks, no I/O) ran {ceiling:.2f}x "
            f"faster on 2 workers than on 1; the throw step reached {t1 / t2 / ceiling:.0%} of it, "
            f"its batches {b1 / b2 / ceiling:.0%}"
        )
        c1 = serial_of[1]
        print(
            f"serial part of the throw step on the client (the step minus its engine maps, in the same run): "
            f"in-process {serial_of[0]:.2f} s, 1 worker {c1:.2f} s, 2 workers {serial_of[2]:.2f} s; "
            f"with the 1-worker run's split, 2 workers give at most {t1 / (c1 + (t1 - c1) / 2):.2f}x (Amdahl)"
        )

        out = subprocess.run(
            [sys.executable, str(HERE / "bench_throw.py"), "--child-memory", str(tif), str(gpkg), str(budget)],
            capture_output=True, text=True, check=True,
        )
        m = json.loads(out.stdout.strip().splitlines()[-1])
        print("")
        print(f"memory (DEM {dem_mb:.0f} MB as float32, {2 * dem_mb:.0f} MB as float64; budget {budget:g} MB):")
        print(
            f"  in-process throw step: tracemalloc peak {m['tracemalloc_peak_b'] / 1e6:.0f} MB; resident "
            f"{m['baseline_rss_kb'] / 1024:.0f} MB before the step, {m['peak_rss_kb'] / 1024:.0f} MB peak"
        )
        for name, _, _, _, rss, _ in rows[1:]:
            peaks = ", ".join(f"{v['vmhwm_kb'] / 1024:.0f}" for v in rss.values())
            print(f"  {name}: peak resident memory per worker (imports included) {peaks} MB")
        if mem_runs:
            peaks = ", ".join(f"{v['traced_peak_b'] / 1e6:.0f}" for v in mem_runs.values())
            print(f"  local cluster, 2 workers: tracemalloc peak per worker during the throw step {peaks} MB")


if __name__ == "__main__":
    main()
