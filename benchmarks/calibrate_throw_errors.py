"""Calibration of the error bars of the maximum throw on synthetic scenes (a script, not a test).

Runs the ``throw`` tool on the fictional scenes of ``tests/scenes.py`` at
several pixel sizes, profile shapes and hanging-wall tapers, and on copies of
them whose DEM was perturbed the way real DEMs differ from the ideal one:

* ``noiseS``: white noise of S m standard deviation (sensor noise);
* ``degS``: the whole DEM smoothed by a Gaussian of S pixels (a diffused,
  degraded landscape: a Gaussian kernel of sigma sqrt(2 kappa t) is the
  solution of linear diffusion, Culling 1960, from memory);
* ``vegH``: positive blobs of about H m on a quarter of the pixels
  (canopy left in a surface model).

For each scene it prints the share of faults whose true maximum throw lies
within 1 and 2 reported sigma (``max_throw_err_m``), the median relative
error and the median relative sigma. With ``--grid`` it also scores the
candidate rules sigma^2 = fit^2 + (a * station)^2 + (c * max)^2 over a grid
of (a, c) and prints the best, which is how
:data:`faultmap.throw.fault_summaries.MAX_THROW_STATION_SHARE` and
:data:`faultmap.throw.fault_summaries.MAX_THROW_MODEL_REL_ERR` were chosen
(``docs/methods/throw.md``, "Error of the maximum throw").

Usage::

    python benchmarks/calibrate_throw_errors.py          # about a minute on 2 cores
    python benchmarks/calibrate_throw_errors.py --grid   # and the grid of rules
"""

from __future__ import annotations

import argparse
import itertools
import sys
import tempfile
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from scenes import match_truth, narrow_rift_scene, read_layers, scaling_scene, wide_rift_scene  # noqa: E402

from faultmap.runner import run_tools  # noqa: E402


def perturb(scene, kind: str, seed: int = 0) -> None:
    """Perturb the scene's DEM in place (see the module docstring for the kinds)."""
    import rasterio
    from scipy import ndimage

    rng = np.random.default_rng(seed)
    with rasterio.open(scene.dem) as src:
        a = src.read(1).astype(np.float64)
        prof = src.profile
        nod = src.nodata
    bad = a == nod
    if kind.startswith("noise"):
        a = a + rng.normal(0.0, float(kind[5:]), a.shape)
    elif kind.startswith("deg"):
        a = ndimage.gaussian_filter(np.where(bad, np.mean(a[~bad]), a), float(kind[3:]))
    elif kind.startswith("veg"):
        crowns = (rng.random(a.shape) < 0.25) * rng.uniform(0.5, 1.5, a.shape) * float(kind[3:])
        a = a + 3.0 * ndimage.gaussian_filter(crowns, 0.8)
    a[bad] = nod
    with rasterio.open(scene.dem, "w", **prof) as dst:
        dst.write(a.astype(np.float32), 1)


def fault_rows(scene, label: str) -> pd.DataFrame:
    """Run ``throw`` on a scene; the measured faults joined to the truth, with the station error."""
    res = run_tools(["throw"], inputs=scene.inputs(), out=scene.folder / "results.gpkg", quiet=True,
                    echo=lambda _m: None, overwrite=True)
    layers = read_layers(res.gpkg)
    st = layers["throw_stations"]
    st = st[(st["status"] == "ok") & ~st["outlier"].astype(bool)]
    station_err = st.groupby("fault_id")["throw_err_m"].median()
    m = match_truth(scene, layers["faults"])
    m["station_err_m"] = m["fault_id"].map(station_err)
    keep = (~m["censored"].astype(bool) & ~m["censored_truth_true"].astype(bool)
            & (m["n_stations_ok"] >= 6) & (m["n_stations_ok"] >= 0.6 * m["n_stations"]))
    m = m.loc[keep, ["name", "max_throw_m", "max_throw_err_m", "max_throw_fit_err_m", "station_err_m",
                     "max_throw_m_true"]].copy()
    m["scene"] = label
    return m


def scenes():
    """(label, builder, perturbation) of every calibration scene."""
    out = [
        ("Skervolin 100 m", lambda d: narrow_rift_scene(d, pixel_size_m=100.0), None),
        ("Skervolin 50 m", lambda d: narrow_rift_scene(d, pixel_size_m=50.0), None),
        ("Skervolin 100 m taper 0.5 L", lambda d: narrow_rift_scene(d, pixel_size_m=100.0, hw_extent_factor=0.5),
         None),
        ("Plessovar 70 m", lambda d: scaling_scene(d), None),
        ("Plessovar 70 m triangular", lambda d: scaling_scene(d, profile_shape="triangular"), None),
        ("Plessovar 35 m, 40 faults", lambda d: scaling_scene(d, pixel_size_m=35.0, n_faults=40,
                                                              half_extent_m=15_000.0,
                                                              length_range_m=(2000.0, 16_000.0), seed=4_409),
         None),
        ("Sundravelk 800 m", lambda d: wide_rift_scene(d, pixel_size_m=800.0), None),
        ("Sundravelk 400 m", lambda d: wide_rift_scene(d, pixel_size_m=400.0), None),
        ("Sundravelk 800 m noise3", lambda d: wide_rift_scene(d, pixel_size_m=800.0), "noise3"),
    ]
    for p in ("noise1", "noise3", "deg2", "veg4"):
        out.append((f"Skervolin 100 m {p}", lambda d: narrow_rift_scene(d, pixel_size_m=100.0), p))
        out.append((f"Plessovar 70 m seed 4500 {p}", lambda d: scaling_scene(d, seed=4_500), p))
    return out


def shares(df: pd.DataFrame, err: np.ndarray) -> pd.DataFrame:
    """Per scene: share within 1 and 2 sigma, median |relative error| and median relative sigma."""
    z = np.abs((df["max_throw_m"] - df["max_throw_m_true"]).to_numpy() / err)
    t = pd.DataFrame({"scene": df["scene"].to_numpy(), "within_1_sigma": z <= 1.0, "within_2_sigma": z <= 2.0,
                      "rel_err": np.abs(df["max_throw_m"] / df["max_throw_m_true"] - 1.0).to_numpy(),
                      "rel_sigma": err / df["max_throw_m"].to_numpy()})
    g = t.groupby("scene", sort=False)
    return pd.concat([g.size().rename("faults"), g[["within_1_sigma", "within_2_sigma"]].mean(),
                      g[["rel_err", "rel_sigma"]].median()], axis=1)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--grid", action="store_true", help="score a grid of candidate rules")
    args = ap.parse_args(argv)
    rows = []
    with tempfile.TemporaryDirectory(prefix="faultmap_calibrate_") as tmp:
        for k, (label, build, kind) in enumerate(scenes()):
            sc = build(Path(tmp) / f"scene_{k}")
            if kind:
                perturb(sc, kind, seed=k)
            rows.append(fault_rows(sc, label))
            print(f"{label}: done", file=sys.stderr, flush=True)
    df = pd.concat(rows, ignore_index=True)
    tab = shares(df, df["max_throw_err_m"].to_numpy())
    with pd.option_context("display.width", 200, "display.float_format", "{:.3f}".format):
        print(tab.to_string())
    ok = tab["within_1_sigma"].between(0.55, 0.85) & (tab["within_2_sigma"] >= 0.90)
    z = np.abs((df["max_throw_m"] - df["max_throw_m_true"]) / df["max_throw_err_m"])
    print(f"\nall {len(df)} faults: {np.mean(z <= 1):.0%} within 1 sigma, {np.mean(z <= 2):.0%} within 2 sigma; "
          f"{int(ok.sum())} of {len(tab)} scenes meet 55-85 % and >= 90 %")
    if args.grid:
        fit, stn, mx = (df[c].to_numpy() for c in ("max_throw_fit_err_m", "station_err_m", "max_throw_m"))
        scored = []
        for a, c in itertools.product((0.0, 0.25, 0.5, 0.75, 1.0, 1.5), (0.0, 0.01, 0.02, 0.025, 0.03, 0.04)):
            s = shares(df, np.sqrt(fit**2 + (a * np.nan_to_num(stn)) ** 2 + (c * mx) ** 2))
            miss = int((~(s["within_1_sigma"].between(0.55, 0.85) & (s["within_2_sigma"] >= 0.90))).sum())
            zz = np.abs((df["max_throw_m"] - df["max_throw_m_true"]).to_numpy()
                        / np.sqrt(fit**2 + (a * np.nan_to_num(stn)) ** 2 + (c * mx) ** 2))
            scored.append((miss, abs(np.mean(zz <= 1) - 0.68), a, c, np.mean(zz <= 1), np.mean(zz <= 2)))
        scored.sort()
        print("\nscenes missing the target, |share in 1 sigma - 68 %|, a, c, share in 1 / 2 sigma:")
        for r in scored[:8]:
            print(f"  {r[0]:2d}  {r[1]:.3f}  a={r[2]:.2f}  c={r[3]:.3f}  {r[4]:.0%} / {r[5]:.0%}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
