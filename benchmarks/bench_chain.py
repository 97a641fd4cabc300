"""Benchmark of faultmap's whole chain of tools (a script, not a test): how each tool grows with the faults.

Builds a synthetic rift as ``bench_throw.py`` does (a fault population displacing a gently rough
surface, ``faultmap.synthetic.fault_population`` and ``faultmap.synthetic.build_dem``, written as a
tiled GeoTIFF in a temporary folder), once per number of faults N on the same DEM, and runs every
tool on it (prepare, throw, scaling, transect, strain, width, hazard, figures on) through
``faultmap.run_tools``, as the command line does.

The faults are the same population at every N (lengths 300-4000 m on the full DEM, 150-2000 m with
``--small``, a power law of exponent 2.2, D = 0.015 L; a quarter marked active, on a 12 ka surface, for
the hazard tool): more faults fill the area more densely. They
are placed tile by tile (about 20 km tiles, N split evenly), which keeps the builder's rejection
sampling, quadratic in the faults of one call, short at 16000 faults; a margin of half the minimum
spacing inside each tile keeps the spacing across tile edges.

Each N runs in its own subprocess, so that its peak memory is its own: the subprocess imports faultmap,
runs the chain once on a tiny scene (imports, compiled kernels), then runs the measured chain. It
reports:

* each tool's wall time (``RunResult.time_s``, measured by the runner around each tool), the time of
  loading the inputs and of writing the GeoPackage, and the whole chain;
* the ratio of the whole chain to the throw step (the one tool that reads the whole DEM at full
  resolution);
* each tool's growth exponent between the smallest and the largest N, ``log(t2 / t1) / log(N2 / N1)``
  (1: linear in the faults; a tool whose time is mostly fixed, such as one reading the DEM at a fixed
  size, gives less than 1);
* peak resident memory (VmHWM of the subprocess) and, per tool, the peak reached while it ran (the
  high-water mark is reset before each tool through ``/proc/self/clear_refs``; Linux only), against the
  throw tool's ``memory_budget_mb``;
* the largest figure written, in pixels.

``--profile TOOL`` (repeatable) runs those tools under cProfile and prints their top functions by
cumulative time (the profile adds overhead: its times are not the table's).

Times are wall times of one run on a possibly shared machine (the load average is printed); read them
as ratios and exponents rather than absolute figures.

Usage::

    python benchmarks/bench_chain.py                 # 8000 x 8000 pixels (10 m), N = 2000, 8000, 16000
    python benchmarks/bench_chain.py --small         # 1500 x 1500 pixels, N = 200, 800, 1600
    python benchmarks/bench_chain.py --n 2000 8000   # chosen N only
    python benchmarks/bench_chain.py --small --profile width --json chain.json
"""

from __future__ import annotations

import argparse
import json
import math
import os
import struct
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_scene import CRS, PIXEL_M, vm_hwm_kb  # noqa: E402  (the shared scene)

#: The chain, in run order (the runner adds what a tool requires first).
TOOLS = ("prepare", "throw", "scaling", "transect", "strain", "width", "hazard")


def build_scene(folder: Path, n_pixels: int, n_faults: int, *, small: bool, seed: int = 3):
    """Write ``dem.tif`` and ``faults.gpkg`` of a synthetic rift in ``folder``; return their paths and the time."""
    import geopandas as gpd
    import numpy as np
    import pandas as pd
    from bench_scene import write_scene_dem

    from faultmap.synthetic import fault_population

    t0 = time.perf_counter()
    side = n_pixels * PIXEL_M
    lengths = (150.0, 2000.0) if small else (300.0, 4000.0)
    spacing = 50.0 if small else 80.0
    k = max(1, round(side / 20000.0))  # tiles per side
    tile = side / k
    counts = np.full(k * k, n_faults // (k * k))
    counts[: n_faults - counts.sum()] += 1
    parts = []
    for i in range(k * k):
        x0, y0 = (i % k) * tile, (i // k) * tile
        parts.append(
            fault_population(
                int(counts[i]),
                gamma=0.015,
                length_range_m=lengths,
                length_alpha=2.2,
                extent=(x0, y0, x0 + tile, y0 + tile),
                edge_margin_m=0.5 * spacing,
                min_spacing_m=spacing,
                strike_scatter_deg=12.0,
                seed=seed + i,
                crs=CRS,
            )
        )
    faults = gpd.GeoDataFrame(pd.concat(parts, ignore_index=True), crs=CRS)
    faults["fault_id"] = np.arange(1, len(faults) + 1)
    faults["name"] = [f"P{i}" for i in faults["fault_id"]]
    rng = np.random.default_rng(seed)
    faults["active"] = rng.random(len(faults)) < 0.25  # the hazard tool screens these
    faults["surface_age_ka"] = np.where(faults["active"], 12.0, np.nan)
    tif = write_scene_dem(faults, folder, n_pixels, seed=seed)
    gpkg = folder / "faults.gpkg"
    faults.to_file(gpkg, layer="faults")
    return tif, gpkg, time.perf_counter() - t0



def _reset_hwm() -> bool:
    """Reset this process's peak resident memory to its current size (Linux >= 4.0)."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:  # pragma: no cover - not Linux, or not allowed
        return False


def _png_size(path: Path) -> tuple[int, int]:
    """Width and height of a PNG, from its header."""
    with open(path, "rb") as fh:
        head = fh.read(24)
    if head[:8] != b"\x89PNG\r\n\x1a\n":
        return (0, 0)
    return struct.unpack(">II", head[16:24])


def _instrumented(registry: dict, profile: set[str], mem: dict, stats: dict) -> dict:
    """The registry with each tool's run wrapped: per-tool peak memory, and cProfile for ``profile``."""
    import cProfile
    import dataclasses
    import io
    import pstats

    out = {}
    for name, tool in registry.items():
        if not hasattr(tool, "run"):
            out[name] = tool
            continue

        def run(ctx, params, _name=name, _run=tool.run):
            ok = _reset_hwm()
            prof = cProfile.Profile() if _name in profile else None
            try:
                if prof is not None:
                    prof.runcall(_run, ctx, params)
                else:
                    _run(ctx, params)
            finally:
                mem[_name] = vm_hwm_kb() if ok else 0
                if prof is not None:
                    buf = io.StringIO()
                    pstats.Stats(prof, stream=buf).sort_stats("cumulative").print_stats(40)
                    stats[_name] = buf.getvalue()

        out[name] = dataclasses.replace(tool, run=run)
    return out


def child(tif: str, gpkg: str, warm_tif: str, warm_gpkg: str, out_dir: str, profile: list[str]) -> None:
    """Run the chain in this (sub)process; print its timings and memory as one JSON line."""
    t0 = time.perf_counter()
    import faultmap
    from faultmap.registry import load_tools

    out_dir = Path(out_dir)
    inputs_w = {"faults": warm_gpkg, "faults_layer": "faults", "dem": warm_tif}
    faultmap.run_tools(TOOLS, inputs=inputs_w, out=out_dir / "warm.gpkg", figures=out_dir / "warm_fig", quiet=True)
    t_warm = time.perf_counter() - t0
    base = vm_hwm_kb()
    mem: dict = {}
    stats: dict = {}
    tools = _instrumented(load_tools(), set(profile), mem, stats)
    _reset_hwm()
    t0 = time.perf_counter()
    res = faultmap.run_tools(
        TOOLS,
        inputs={"faults": gpkg, "faults_layer": "faults", "dem": tif},
        out=out_dir / "chain.gpkg",
        figures=out_dir / "fig",
        quiet=True,
        tools=tools,
    )
    total = time.perf_counter() - t0
    peak = max([vm_hwm_kb(), *mem.values()])  # the high-water mark was reset before each tool
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    figs = {p.name: _png_size(p) for p in res.figures if p.suffix.lower() == ".png"}
    faults = res.layers.get("faults")
    stations = res.layers.get("throw_stations")
    print(
        json.dumps(
            {
                "time_s": res.time_s,
                "total_s": total,
                "warm_s": t_warm,
                "baseline_kb": base,
                "peak_kb": peak,
                "tool_peak_kb": mem,
                "memory_budget_mb": float(info.get("param.throw.memory_budget_mb", "nan")),
                "figures": figs,
                "n_faults_out": 0 if faults is None else len(faults),
                "n_stations": 0 if stations is None else len(stations),
                "n_warnings": len(res.warnings),
                "profiles": stats,
            }
        )
    )


def _exponent(t1: float, t2: float, n1: float, n2: float) -> float:
    if t1 <= 0 or t2 <= 0 or n1 == n2:
        return math.nan
    return math.log(t2 / t1) / math.log(n2 / n1)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--small", action="store_true", help="1500 x 1500 pixels, N = 200, 800, 1600 (quick look)")
    ap.add_argument("--n", type=int, nargs="+", help="numbers of faults to run (default: by size)")
    ap.add_argument("--pixels", type=int, help="DEM side in pixels (default 8000, or 1500 with --small)")
    ap.add_argument("--profile", action="append", default=[], metavar="TOOL", help="run TOOL under cProfile")
    ap.add_argument("--json", metavar="PATH", help="also write the results as JSON")
    ap.add_argument("--child", nargs=5, help=argparse.SUPPRESS)
    a = ap.parse_args(argv)
    if a.child:
        child(*a.child, profile=a.profile)
        return
    n_pix = a.pixels or (1500 if a.small else 8000)
    ns = sorted(a.n or ([200, 800, 1600] if a.small else [2000, 8000, 16000]))
    print(f"load average before the runs (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print(f"cores: {os.cpu_count()}; DEM {n_pix} x {n_pix} px at {PIXEL_M:g} m; N = {', '.join(map(str, ns))}")
    runs = []
    with tempfile.TemporaryDirectory(prefix="faultmap_bench_chain_") as tmp:
        tmp = Path(tmp)
        (tmp / "warm").mkdir()
        warm_tif, warm_gpkg, _ = build_scene(tmp / "warm", 300, 20, small=True)
        for n in ns:
            d = tmp / f"n{n}"
            d.mkdir()
            tif, gpkg, t_build = build_scene(d, n_pix, n, small=a.small)
            print(f"N = {n}: scene built in {t_build:.1f} s; running the chain...", flush=True)
            cmd = [sys.executable, __file__, "--child", str(tif), str(gpkg), str(warm_tif), str(warm_gpkg), str(d)]
            for t in a.profile:
                cmd += ["--profile", t]
            out = subprocess.run(cmd, capture_output=True, text=True)
            if out.returncode != 0:
                sys.stderr.write(out.stderr)
                raise SystemExit(f"the chain failed for N = {n}")
            r = json.loads(out.stdout.strip().splitlines()[-1])
            r["n"] = n
            r["build_s"] = t_build
            runs.append(r)
            for tool, text in r.pop("profiles").items():
                print(f"--- cProfile of {tool}, N = {n} (top by cumulative time) ---")
                print("\n".join(text.splitlines()[:60]))
            for f in (d / "fig").glob("*"):  # keep the temporary folder small between runs
                f.unlink()
            tif.unlink()

    steps = ["load", *[t for t in runs[0]["time_s"] if t not in ("load", "write")], "write"]
    width = 10
    print("")
    print(f"per-tool wall time, seconds (DEM {n_pix} x {n_pix} px, {os.cpu_count()} cores)")
    head = f"{'N':>7s} " + " ".join(f"{s:>{width}s}" for s in steps) + f" {'chain':>{width}s} {'chain/throw':>12s}"
    print(head)
    for r in runs:
        ts = r["time_s"]
        ratio = r["total_s"] / ts["throw"] if ts.get("throw") else math.nan
        print(
            f"{r['n']:7d} "
            + " ".join(f"{ts.get(s, math.nan):{width}.2f}" for s in steps)
            + f" {r['total_s']:{width}.2f} {ratio:12.2f}"
        )
    if len(runs) >= 2:
        r1, r2 = runs[0], runs[-1]
        ex = {s: _exponent(r1["time_s"].get(s, 0), r2["time_s"].get(s, 0), r1["n"], r2["n"]) for s in steps}
        ex["chain"] = _exponent(r1["total_s"], r2["total_s"], r1["n"], r2["n"])
        print(f"{'exp.':>7s} " + " ".join(f"{ex[s]:{width}.2f}" for s in steps) + f" {ex['chain']:{width}.2f}")
        print(f"(exponent: log(t2/t1) / log(N2/N1) between N = {r1['n']} and {r2['n']})")
    print("")
    print("peak resident memory, MB (VmHWM; per tool: the peak while it ran)")
    tools = list(runs[0]["tool_peak_kb"])
    print(f"{'N':>7s} {'budget':>8s} {'before':>8s} " + " ".join(f"{t:>{width}s}" for t in tools) + f" {'whole':>8s}")
    for r in runs:
        print(
            f"{r['n']:7d} {r['memory_budget_mb']:8.0f} {r['baseline_kb'] / 1024:8.0f} "
            + " ".join(f"{r['tool_peak_kb'].get(t, 0) / 1024:{width}.0f}" for t in tools)
            + f" {r['peak_kb'] / 1024:8.0f}"
        )
    print("(before: after imports and a warm-up chain on a tiny scene)")
    print("")
    print("largest figure, pixels")
    for r in runs:
        if r["figures"]:
            name, (w, h) = max(r["figures"].items(), key=lambda kv: kv[1][0] * kv[1][1])
            print(f"{r['n']:7d} {name:32s} {w} x {h} ({w * h / 1e6:.1f} Mpx; {len(r['figures'])} figures)")
    print("")
    for r in runs:
        print(
            f"N = {r['n']}: {r['n_faults_out']} faults after prepare, {r['n_stations']} throw stations, "
            f"{r['n_warnings']} warnings; scene built in {r['build_s']:.1f} s"
        )
    if a.json:
        Path(a.json).write_text(json.dumps({"pixels": n_pix, "pixel_m": PIXEL_M, "runs": runs}, indent=1))


if __name__ == "__main__":
    main()
