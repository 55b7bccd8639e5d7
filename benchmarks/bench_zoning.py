"""Benchmark: course-first zoning vs a naive whole-raster workflow vs a minimal windowed script.

For each synthetic raster size, and in one fresh subprocess per variant and repeat (so that the
peak RSS, ``resource.getrusage(RUSAGE_SELF).ru_maxrss``, belongs to one run of one variant):

* **plan** — what the plan does for zoning: :func:`courseplan.io.course.read_course` (the course
  GeoJSON), :func:`courseplan.io.rasters.read_window` (the course bounds plus its 20 m margin; GDAL
  decodes the tiles on all cores, ``GDAL_NUM_THREADS``) and
  :func:`courseplan.stages.zoning.zone_course` with ``Zoning()`` defaults, ``window_hours=3.0`` and the
  ``fraction`` encoding: classify, label and merge small regions, polygonise, per-region statistics,
  distance from the start (Dijkstra on the cell grid, no centreline), smooth the shared edges
  (``shapely.coverage_simplify``), clip to the course, merge small pieces and slivers, order.
  Not the full :func:`courseplan.pipeline.run_plan` (no forecast, dosing, order or outputs).
* **naive** — read the whole raster, classify it into 3 classes, ``rasterio.features.shapes``
  over the whole raster, ``geopandas.clip`` to the course, then ``rasterstats.zonal_stats`` of the
  raster over the clipped polygons.
* **minimal** — windowed read of the course bounding box only, classify, mask to the course
  (rasterize), ``shapes``, nothing else.

The raster is a smooth random sun-fraction field (four octaves of bicubic-zoomed noise, 256 m down
to 4 m, values 0–1, so class boundaries wind like real shade edges), EPSG:32632, 1 m cells, float32, tiled
256 × 256, DEFLATE; it is square with ``--sizes`` million cells.  The course is a winding
3 km × 50 m polygon (a sinusoidal centreline buffered by 25 m) in the middle of the raster,
identical in shape for every size.  Everything is generated deterministically into a temporary
directory.  Times are medians of ``--repeats`` runs of the work after the imports; "base MB" is
the child's peak RSS after the imports, before any work.

Goals (issues 5 and 18): plan peak RSS < 500 MB on the 40 M raster; naive / plan ≥ 5× in time;
plan / minimal ≤ 2× in time and in peak memory.

Run::

    /work/venv/bin/python benchmarks/bench_zoning.py                    # 10 M and 40 M cells
    /work/venv/bin/python benchmarks/bench_zoning.py --sizes 5 --repeats 1 --naive-timeout 60
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

CRS_EPSG = 32632
X0, Y0 = 400_000.0, 5_200_000.0  # top-left corner of every raster [m]
BREAKS = [0.35, 0.70]  # default breaks of the fraction encoding (courseplan.stages.zoning.default_breaks)
COURSE_LENGTH_M, COURSE_WIDTH_M, COURSE_DROP_M, COURSE_WIGGLES = 3000.0, 50.0, 2000.0, 3
VARIANTS = ("plan", "naive", "minimal")


# --------------------------------------------------------------------------- inputs
def make_field(side: int, seed: int = 11) -> np.ndarray:
    """Smooth random sun fraction in [0, 1] on a side × side grid, float32."""
    from scipy.ndimage import zoom

    rng = np.random.default_rng(seed)
    z = np.zeros((side, side), dtype=np.float32)
    for scale, weight in ((256, 1.0), (64, 0.5), (16, 0.3), (4, 0.15)):
        n = side // scale + 4
        coarse = rng.standard_normal((n, n)).astype(np.float32)
        z += np.float32(weight) * zoom(coarse, scale, order=3, prefilter=False)[:side, :side]
    z /= np.float32(z.std())
    return (np.float32(0.5) + np.float32(0.5) * np.tanh(np.float32(1.2) * z)).astype(np.float32)


def write_raster(path: Path, side: int) -> None:
    import rasterio
    from rasterio.transform import from_origin

    prof = dict(driver="GTiff", width=side, height=side, count=1, dtype="float32", crs=f"EPSG:{CRS_EPSG}",
                transform=from_origin(X0, Y0, 1.0, 1.0), tiled=True, blockxsize=256, blockysize=256,
                compress="deflate", predictor=3, nodata=-9999.0)
    with rasterio.open(path, "w", **prof) as ds:
        ds.write(make_field(side), 1)


def course_polygon(side: int):
    """Winding 3 km × 50 m course centred in a side × side raster (working CRS coordinates)."""
    from shapely.geometry import LineString

    t = np.linspace(0.0, 1.0, 2001)

    def line(amp: float) -> np.ndarray:
        return np.column_stack([amp * np.sin(2 * math.pi * COURSE_WIGGLES * t), -COURSE_DROP_M * t])

    lo, hi = 0.0, COURSE_LENGTH_M
    for _ in range(60):  # amplitude giving a 3 km centreline
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if LineString(line(mid)).length < COURSE_LENGTH_M else (lo, mid)
    xy = line(0.5 * (lo + hi))
    xy[:, 0] += X0 + side / 2.0
    xy[:, 1] += Y0 - side / 2.0 + COURSE_DROP_M / 2.0
    centre = LineString(xy)
    return centre.buffer(COURSE_WIDTH_M / 2.0, cap_style="flat"), centre


def make_inputs(workdir: Path, mcells: float) -> tuple[Path, Path, dict]:
    import geopandas as gpd

    side = int(round(math.sqrt(mcells * 1e6)))
    if side < COURSE_DROP_M + 200:
        sys.exit(f"{mcells:g} M cells is too small for the {COURSE_DROP_M:g} m drop of the course (use ≥ 5)")
    tif, gj = workdir / f"sun_{mcells:g}M.tif", workdir / f"course_{mcells:g}M.geojson"
    poly, centre = course_polygon(side)
    if not tif.exists():
        write_raster(tif, side)
    gpd.GeoDataFrame({"name": ["bench course"]}, geometry=[poly], crs=f"EPSG:{CRS_EPSG}").to_file(
        gj, driver="GeoJSON")
    b = poly.bounds
    meta = dict(side=side, cells=side * side, tif_mb=tif.stat().st_size / 1e6, course_len=centre.length,
                course_area=poly.area, bbox_cells=(b[2] - b[0]) * (b[3] - b[1]))
    return tif, gj, meta


# --------------------------------------------------------------------------- variants (in the child)
def run_plan(tif: Path, gj: Path) -> dict:
    from pyproj import CRS

    from courseplan.io.course import read_course
    from courseplan.io.rasters import read_window
    from courseplan.settings import Zoning
    from courseplan.stages.zoning import ZoningInputs, zone_course

    course = read_course(gj)
    work = CRS.from_epsg(CRS_EPSG)
    sun = read_window(tif, course.geometry.bounds, work, what="sun")
    res = zone_course(ZoningInputs(course=course.geometry, sun=sun, encoding="fraction"), Zoning(),
                      window_hours=3.0)
    return {"zones": res.n_zones, "window_cells": int(sun.values.size)}


def run_naive(tif: Path, gj: Path) -> dict:
    import geopandas as gpd
    import rasterio
    from rasterio.features import shapes
    from rasterstats import zonal_stats
    from shapely.geometry import shape

    course = gpd.read_file(gj)
    with rasterio.open(tif) as ds:
        arr = ds.read(1)
        transform, crs = ds.transform, ds.crs
    cls = np.digitize(arr, BREAKS).astype(np.uint8)
    geoms, vals = [], []
    for gjs, v in shapes(cls, connectivity=4, transform=transform):
        geoms.append(shape(gjs))
        vals.append(int(v))
    del cls
    allpolys = gpd.GeoDataFrame({"cls": vals}, geometry=geoms, crs=crs)
    clipped = gpd.clip(allpolys, course)
    clipped = clipped[clipped.geom_type.isin(["Polygon", "MultiPolygon"])]
    stats = zonal_stats(list(clipped.geometry), str(tif), stats=["mean", "count"])
    return {"zones": len(stats), "all_polys": len(allpolys)}


def run_minimal(tif: Path, gj: Path) -> dict:
    import json as _json

    import rasterio
    from rasterio.features import rasterize, shapes
    from rasterio.windows import from_bounds
    from shapely.geometry import shape

    geom = shape(_json.loads(gj.read_text())["features"][0]["geometry"])
    with rasterio.open(tif) as ds:
        win = from_bounds(*geom.bounds, transform=ds.transform)
        win = win.round_offsets(op="floor").round_lengths(op="ceil")
        arr = ds.read(1, window=win)
        wt = ds.window_transform(win)
    mask = rasterize([(geom, 1)], out_shape=arr.shape, transform=wt, fill=0, dtype="uint8").astype(bool)
    cls = np.digitize(arr, BREAKS).astype(np.uint8)
    n = sum(1 for _ in shapes(cls, mask=mask, connectivity=4, transform=wt))
    return {"zones": n, "window_cells": int(arr.size)}


def child(variant: str, tif: Path, gj: Path, profile: Path | None) -> dict:
    fn = {"plan": run_plan, "naive": run_naive, "minimal": run_minimal}[variant]
    # Import what the variant needs before timing (the timed part is the work, not the imports).
    if variant == "plan":
        import rasterio.features  # noqa: F401
        import scipy.ndimage  # noqa: F401  (zone_course imports these lazily)
        import scipy.sparse.csgraph  # noqa: F401

        import courseplan.io.course  # noqa: F401
        import courseplan.io.rasters  # noqa: F401
        import courseplan.stages.zoning  # noqa: F401
    elif variant == "naive":
        import geopandas  # noqa: F401
        import rasterio.features  # noqa: F401
        import rasterstats  # noqa: F401
    else:
        import rasterio.features  # noqa: F401
        import shapely.geometry  # noqa: F401
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    if profile is not None:
        import cProfile

        prof = cProfile.Profile()
        t0 = time.perf_counter()
        info = prof.runcall(fn, tif, gj)
        dt = time.perf_counter() - t0
        prof.dump_stats(str(profile))
    else:
        t0 = time.perf_counter()
        info = fn(tif, gj)
        dt = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    hwm = next((float(line.split()[1]) / 1024.0 for line in open("/proc/self/status")
                if line.startswith("VmHWM:")), float("nan"))
    return {"time_s": dt, "peak_mb": peak, "hwm_mb": hwm, "base_mb": base, **info}


# --------------------------------------------------------------------------- parent
def make_in_child(workdir: Path, mcells: float) -> tuple[Path, Path, dict]:
    """Generate the inputs in a subprocess, so the parent stays small.

    On Linux a child's ``ru_maxrss`` starts from the high-water mark of the process image it
    replaced at ``exec`` (for ``vfork``/``posix_spawn`` that is the parent's), so a parent that
    had held a 160 MB field would inflate every child's peak.
    """
    cmd = [sys.executable, __file__, "--make", f"{mcells:g}", "--workdir", str(workdir)]
    out = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if out.returncode:
        sys.exit(f"making the {mcells:g} M inputs failed:\n{out.stderr}")
    d = json.loads(out.stdout.strip().splitlines()[-1])
    return Path(d.pop("tif")), Path(d.pop("course")), d


def spawn(variant: str, tif: Path, gj: Path, timeout: float | None) -> dict | None:
    cmd = [sys.executable, __file__, "--child", variant, "--tif", str(tif), "--course", str(gj)]
    try:
        out = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=True)
    except subprocess.TimeoutExpired:
        return None
    except subprocess.CalledProcessError as exc:
        sys.exit(f"{variant} failed:\n{exc.stderr}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def fmt_ratio(r: float | None, lower: bool = False) -> str:
    if r is None:
        return "—"
    return f"{'>' if lower else ''}{r:.2f}×"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10,40", help="raster sizes in millions of cells, comma-separated")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--naive-timeout", type=float, default=600.0,
                    help="time limit of one naive run [s]; a run over it is reported as '> N s'")
    ap.add_argument("--workdir", type=Path, help="keep the inputs here (default: a temporary directory)")
    ap.add_argument("--child", choices=VARIANTS, help=argparse.SUPPRESS)
    ap.add_argument("--tif", type=Path, help=argparse.SUPPRESS)
    ap.add_argument("--course", type=Path, help=argparse.SUPPRESS)
    ap.add_argument("--profile", type=Path, help="(with --child) write cProfile stats of the run here")
    ap.add_argument("--make", type=float, help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.make:
        tif, gj, meta = make_inputs(a.workdir, a.make)
        print(json.dumps({"tif": str(tif), "course": str(gj), **meta}))
        return
    if a.child:
        print(json.dumps(child(a.child, a.tif, a.course, a.profile)))
        return

    sizes = [float(s) for s in a.sizes.split(",") if s.strip()]
    workdir = a.workdir or Path(tempfile.mkdtemp(prefix="bench_zoning_"))
    workdir.mkdir(parents=True, exist_ok=True)
    results: dict[tuple[float, str], dict] = {}
    try:
        for m in sizes:
            t0 = time.perf_counter()
            tif, gj, meta = make_in_child(workdir, m)
            print(f"# {m:g} M: {meta['side']} × {meta['side']} = {meta['cells'] / 1e6:.1f} M cells, "
                  f"{meta['tif_mb']:.0f} MB GeoTIFF; course {meta['course_len']:.0f} m long, "
                  f"{meta['course_area'] / 1e4:.1f} ha, bbox {meta['bbox_cells'] / 1e6:.2f} M cells "
                  f"(inputs {time.perf_counter() - t0:.0f} s)", flush=True)
            for v in VARIANTS:
                runs, timed_out = [], False
                for _ in range(a.repeats):
                    r = spawn(v, tif, gj, a.naive_timeout if v == "naive" else None)
                    if r is None:
                        timed_out = True
                        break
                    runs.append(r)
                res = {"timed_out": timed_out}
                if runs and not timed_out:
                    res.update(time_s=statistics.median(r["time_s"] for r in runs),
                               peak_mb=max(r["peak_mb"] for r in runs),
                               base_mb=statistics.median(r["base_mb"] for r in runs),
                               zones=runs[0]["zones"])
                results[(m, v)] = res
                shown = (f"> {a.naive_timeout:g} s" if timed_out else
                         f"{res['time_s']:.2f} s, {res['peak_mb']:.0f} MB, {res['zones']} polygons")
                if runs and not timed_out:
                    shown += f" (VmHWM {max(r['hwm_mb'] for r in runs):.0f} MB)"
                print(f"#   {v:8s} {shown}", flush=True)
    finally:
        if a.workdir is None:
            shutil.rmtree(workdir, ignore_errors=True)

    print()
    print("plan = courseplan.io.course.read_course + courseplan.io.rasters.read_window + "
          "courseplan.stages.zoning.zone_course (Zoning() defaults, window_hours=3.0, fraction); not run_plan")
    print(f"medians of {a.repeats} runs, one fresh subprocess per run; peak MB = max ru_maxrss of the runs; "
          "base MB = RSS after imports")
    print("polys: plan = zones after merging; naive = clipped polygons given to zonal_stats; "
          "minimal = polygons from shapes")
    hdr = (f"{'size':>6} {'variant':8} {'median s':>10} {'peak MB':>8} {'base MB':>8} {'polys':>6} "
           f"{'naive/plan t':>12} {'naive/plan m':>12} {'plan/min t':>10} {'plan/min m':>10}")
    print(f"parent peak RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0:.0f} MB "
          "(a floor under every child's ru_maxrss)")
    print(hdr)
    print("-" * len(hdr))
    goals = []
    for m in sizes:
        p, n, mi = results[(m, "plan")], results[(m, "naive")], results[(m, "minimal")]
        nt = None if n["timed_out"] else n["time_s"] / p["time_s"]
        nt_low = a.naive_timeout / p["time_s"] if n["timed_out"] else None
        nm = None if n["timed_out"] else n["peak_mb"] / p["peak_mb"]
        pt, pm = p["time_s"] / mi["time_s"], p["peak_mb"] / mi["peak_mb"]
        for v, r in (("plan", p), ("naive", n), ("minimal", mi)):
            if r["timed_out"]:
                cells = f"{'> ' + format(a.naive_timeout, 'g'):>10} {'—':>8} {'—':>8} {'—':>6}"
            else:
                cells = f"{r['time_s']:10.2f} {r['peak_mb']:8.0f} {r['base_mb']:8.0f} {r['zones']:6d}"
            ratios = (f"{fmt_ratio(nt if nt is not None else nt_low, nt is None):>12} {fmt_ratio(nm):>12} "
                      f"{fmt_ratio(pt):>10} {fmt_ratio(pm):>10}" if v == "plan" else "")
            print(f"{m:5g}M {v:8} {cells} {ratios}")
        speed = nt if nt is not None else nt_low
        goals += [(f"{m:g} M: naive/plan time ≥ 5×", speed >= 5.0, fmt_ratio(speed, nt is None)),
                  (f"{m:g} M: plan/minimal time ≤ 2×", pt <= 2.0, fmt_ratio(pt)),
                  (f"{m:g} M: plan/minimal peak memory ≤ 2×", pm <= 2.0, fmt_ratio(pm))]
        if m >= 40:
            goals.append((f"{m:g} M: plan peak RSS < 500 MB", p["peak_mb"] < 500.0, f"{p['peak_mb']:.0f} MB"))
    print()
    print("goals")
    for text, ok, val in goals:
        print(f"  {'PASS' if ok else 'MISS'}  {text}  ({val})")


if __name__ == "__main__":
    main()
