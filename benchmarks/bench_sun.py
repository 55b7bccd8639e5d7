"""Benchmark: sun and shade from a DEM (16 sun positions) vs 16 calls of matplotlib's hillshade.

For each DEM size, in one fresh subprocess per method (so that peak memory belongs to one method):

* **ours** — :func:`courseplan.stages.sun.sun_from_dem` over a window of exactly 16 daylight steps
  (08:00–16:00 local, 30 min) on 15 March at 46.5° N: Horn slope/aspect, then per step the solar
  position, the cast-shadow sweep over the whole DEM, the cosine of incidence, the sun count and
  the beam sum; finally the diffuse part.  Everything the ``sun`` command computes except file I/O.
* **hillshade** — 16 calls of ``matplotlib.colors.LightSource(az, alt).hillshade(dem, dx, dy)`` at
  the same 16 sun positions (no cast shadows, no irradiance), in the same run.

The DEM is synthetic, smooth mountain terrain (bicubic-zoomed noise plus ridges, about 1.5 km of
relief, 10 m cells, float32).  Times are medians of ``--repeat`` runs; the ratio is ours /
hillshade (goal ≤ 1.0×, stretch 0.5×).  Memory: ``tracemalloc`` peak of the timed call (numpy
reports its buffers to it) in an extra untimed run, and the subprocess's peak RSS
(``resource.getrusage(RUSAGE_SELF).ru_maxrss``, includes the DEM, Python and the libraries).

Run::

    /work/venv/bin/python benchmarks/bench_sun.py                     # 1 M and 10 M cells
    /work/venv/bin/python benchmarks/bench_sun.py --sizes 250000 --repeat 5
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import statistics
import subprocess
import sys
import time
import tracemalloc

import numpy as np

DAY = dict(date="2025-03-15", start="08:00", end="16:00", timezone="Europe/Zurich", step_minutes=30)
CELL_M = 10.0


def make_dem(n_cells: int, seed: int = 7) -> np.ndarray:
    """Synthetic smooth terrain of about *n_cells* cells (square), float32 [m]."""
    from scipy.ndimage import zoom

    side = int(round(math.sqrt(n_cells)))
    rng = np.random.default_rng(seed)
    coarse = rng.standard_normal((side // 32 + 4, side // 32 + 4)).astype(np.float32)
    z = zoom(coarse, 32, order=3, prefilter=False)[:side, :side] * np.float32(250.0)
    y, x = np.mgrid[0:side, 0:side].astype(np.float32) / np.float32(side)
    z += np.float32(600.0) * np.sin(np.float32(2 * math.pi * 1.5) * x + np.float32(3) * y) ** 2
    z += np.float32(1800.0)
    return np.ascontiguousarray(z, dtype=np.float32)


def child(n_cells: int, what: str, repeat: int) -> dict:
    from affine import Affine

    from courseplan.physics.solar import clear_sky_window
    from courseplan.stages.sun import sun_from_dem

    dem = make_dem(n_cells)
    side = dem.shape[0]
    transform = Affine(CELL_M, 0, 500_000.0 - side * CELL_M / 2, 0, -CELL_M, 5_150_000.0 + side * CELL_M / 2)
    if what == "ours":
        def once():
            return sun_from_dem(dem, transform, "EPSG:32632", **DAY)
    else:
        from matplotlib.colors import LightSource

        cs = clear_sky_window(46.5, 9.0, float(np.median(dem)), **DAY)
        positions = [(float(a), 90.0 - float(z)) for a, z in zip(cs.azimuth_deg, cs.zenith_deg, strict=True)]
        assert len(positions) == 16 and all(alt > 0 for _, alt in positions)

        def once():
            out = None
            for az, alt in positions:
                out = LightSource(azdeg=az, altdeg=alt).hillshade(dem, dx=CELL_M, dy=CELL_M)
            return out

    once()                                      # warm-up (imports, pvlib data file, caches)
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        res = once()
        times.append(time.perf_counter() - t0)
        del res
    tracemalloc.start()
    res = once()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    extra = {}
    if what == "ours":
        extra = {"steps": res.window.n_steps, "mean_sun_fraction": float(np.nanmean(res.sun_fraction)),
                 "shaded_share": float(np.mean(res.sun_fraction < 1))}
    del res
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux: kB
    return {"cells": int(dem.size), "times": times, "median_s": statistics.median(times),
            "tracemalloc_peak_b": peak, "maxrss_b": rss, **extra}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", type=float, nargs="+", default=[1e6, 1e7], help="DEM cells (default 1e6 1e7)")
    ap.add_argument("--repeat", type=int, default=3, help="timed repeats per method (median)")
    ap.add_argument("--child", nargs=2, metavar=("CELLS", "WHAT"), help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        print(json.dumps(child(int(float(a.child[0])), a.child[1], a.repeat)))
        return
    print(f"sun_from_dem (16 sun positions, shadows + irradiance) vs 16 × LightSource.hillshade; "
          f"median of {a.repeat}")
    head = (f"{'cells':>12} {'ours s':>8} {'hillshade s':>12} {'ratio':>7} {'ours peak MB':>13} "
            f"{'ours RSS MB':>12} {'hs peak MB':>11} {'hs RSS MB':>10} {'shaded':>7}")
    print(head)
    print("-" * len(head))
    for size in a.sizes:
        r = {}
        for what in ("ours", "hillshade"):
            cmd = [sys.executable, __file__, "--child", str(int(size)), what, "--repeat", str(a.repeat)]
            p = subprocess.run(cmd, capture_output=True, text=True, check=False)
            if p.returncode != 0:
                sys.exit(f"child {what} {int(size)} failed:\n{p.stderr}")
            r[what] = json.loads(p.stdout.strip().splitlines()[-1])
        o, h = r["ours"], r["hillshade"]
        mb = 1e6
        ratio = o["median_s"] / h["median_s"]
        print(f"{o['cells']:>12,} {o['median_s']:>8.2f} {h['median_s']:>12.2f} {ratio:>6.2f}× "
              f"{o['tracemalloc_peak_b'] / mb:>13.0f} {o['maxrss_b'] / mb:>12.0f} "
              f"{h['tracemalloc_peak_b'] / mb:>11.0f} {h['maxrss_b'] / mb:>10.0f} {o['shaded_share']:>6.0%}")
    print("goal: ratio ≤ 1.0× (stretch 0.5×), peak memory < 1 GB; 'shaded' = share of cells with some "
          "time step in shadow")


if __name__ == "__main__":
    main()
