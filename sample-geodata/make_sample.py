"""Make the demo data set of the invented hill "Ulmenkar".

Everything this script writes is invented: the venue "Ulmenkar" does not exist, and its terrain,
course, sun map, field observations and forecast are made up for demonstrating and testing
courseplan.  Only the position (about 46.55° N, 9.25° E, so that sun angles are realistic for an
alpine venue) is real; nothing there resembles this terrain.

The script is deterministic (fixed seed) and uses numpy, rasterio, shapely and pyproj, plus
``courseplan.stages.sun.sun_from_dem`` for the sun raster.  Run it from anywhere::

    python sample-geodata/make_sample.py            # writes next to this file
    python sample-geodata/make_sample.py --check    # also prints statistics along the course

Files written (see README.md beside this script): terrain.tif, sun.tif, course.geojson,
centreline.geojson, observations.csv, forecast.csv, plan.toml.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import json
from pathlib import Path

import numpy as np
import rasterio
import shapely
from pyproj import Transformer
from rasterio.transform import from_origin
from shapely.geometry import LineString, Polygon, mapping

HERE = Path(__file__).resolve().parent
SEED = 20270318
CRS = "EPSG:32632"            # UTM zone 32N, metres
CELL = 2.0                    # DEM cell size [m]
SUN_CELL = 4.0                # sun raster cell size [m]
X0, Y0 = 518_400.0, 5_154_000.0   # south-west corner of the DEM [m, EPSG:32632] (≈ 46.54° N, 9.24° E)
WIDTH_M, HEIGHT_M = 1_600.0, 2_600.0
NODATA = -9999.0
RACE_DAY = "2027-03-18"
TIMEZONE = "Europe/Zurich"
UTC_OFFSET = "+01:00"         # Central European Time; summer time starts 2027-03-28
WINDOW = ("09:30", "13:30")
INVENTED = ("Invented demo data: the venue 'Ulmenkar' and all terrain, course, sun, observation and "
            "forecast values are made up for courseplan's demonstrations and tests.")

# Centreline control points in local metres (u east, v north from the south-west corner),
# start (top, north) to finish (bottom, south).
CONTROL = np.array([
    (660, 2440), (600, 2300), (640, 2150), (720, 2010), (700, 1870), (680, 1770),
    (731, 1693), (816, 1609), (901, 1524), (985, 1439),          # along the spur's north-east flank
    (1060, 1300), (1100, 1120), (1105, 950), (1075, 780), (1095, 640), (1110, 520),
    (1090, 400), (1065, 305),
], dtype=float)


# ----------------------------------------------------------------------------- terrain

def _smooth_noise(u: np.ndarray, v: np.ndarray, rng: np.random.Generator, n: int = 24) -> np.ndarray:
    """Sum of random plane waves (wavelengths 120–600 m, amplitudes 0.2–1.8 m): gentle micro-relief."""
    out = np.zeros(np.broadcast(u, v).shape)
    for _ in range(n):
        lam = rng.uniform(120.0, 600.0)
        amp = 0.003 * lam * rng.uniform(0.5, 1.0)
        th = rng.uniform(0, np.pi)
        ph = rng.uniform(0, 2 * np.pi)
        out += amp * np.sin(2 * np.pi * (u * np.cos(th) + v * np.sin(th)) / lam + ph)
    return out


def _ridge(u, v, a, b, height, half_width, taper=200.0):
    """Return a ridge of Gaussian cross-section along the segment a→b, fading out past its ends."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    d = b - a
    L = np.hypot(*d)
    t = ((u - a[0]) * d[0] + (v - a[1]) * d[1]) / L           # along the axis [m]
    n = ((u - a[0]) * d[1] - (v - a[1]) * d[0]) / L           # across the axis [m]
    along = np.clip(np.minimum(t, L - t) / taper + 0.5, 0.0, 1.0)
    along = along * along * (3 - 2 * along)                  # smoothstep
    return height * np.exp(-(n / half_width) ** 2) * along, t / L


def terrain(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Invented terrain height [m] at local coordinates (u east, v north) [m]."""
    rng = np.random.default_rng(SEED)
    # main slope rising to the north (south-facing), tilted so it also rises to the west
    z = 1470.0 + 0.15 * v + 0.05 * (WIDTH_M - u)
    # steeper pitches (steps of the profile) and a flatter finish area
    z += 35.0 * np.tanh((v - 2050.0) / 110.0)
    z += 30.0 * np.tanh((v - 1150.0) / 100.0)
    z += 30.0 * np.tanh((v - 600.0) / 120.0)
    # "Ulmengrat": a spur running from the north-west down to the south-east, west and
    # south-west of the middle of the course: its north-east flank gives north-east-facing
    # pitches, and the spur shades them when the sun stands in the south and south-west.
    spur, frac = _ridge(u, v, (250, 1750), (1000, 1000), 180.0, 260.0, taper=300.0)
    z += spur * (1.0 - 0.5 * frac)
    # a rock rib east of the lower course: shades the lower pitches in the morning
    rib, _ = _ridge(u, v, (1250, 1050), (1240, 200), 230.0, 80.0, taper=250.0)
    z += rib
    # a wall south of the finish: with the rib it closes a hollow whose last pitches stay in shade
    wall, _ = _ridge(u, v, (820, 150), (1420, 180), 260.0, 65.0, taper=150.0)
    z += wall
    # a gully along the lower-middle part of the course
    ug = 1090.0 + 25.0 * np.sin((v - 700.0) / 220.0)
    depth = 16.0 * np.clip(1.0 - np.abs(v - 800.0) / 380.0, 0.0, 1.0)
    z -= depth * np.exp(-((u - ug) / 55.0) ** 2)
    z += _smooth_noise(u, v, rng)
    return z


# ----------------------------------------------------------------------------- course

def _catmull_rom(p: np.ndarray, step: float = 5.0) -> np.ndarray:
    """Centripetal-free (uniform) Catmull–Rom spline through *p*, resampled about every *step* m."""
    ext = np.vstack([2 * p[0] - p[1], p, 2 * p[-1] - p[-2]])
    pts = []
    for i in range(1, len(ext) - 2):
        p0, p1, p2, p3 = ext[i - 1], ext[i], ext[i + 1], ext[i + 2]
        n = max(int(np.hypot(*(p2 - p1)) / step), 2)
        t = np.linspace(0, 1, n, endpoint=False)[:, None]
        pts.append(0.5 * ((2 * p1) + (-p0 + p2) * t + (2 * p0 - 5 * p1 + 4 * p2 - p3) * t ** 2
                          + (-p0 + 3 * p1 - 3 * p2 + p3) * t ** 3))
    pts.append(p[-1][None, :])
    return np.vstack(pts)


def course_geometry() -> tuple[np.ndarray, Polygon, np.ndarray]:
    """Centreline points (local m), outline polygon (local m) and width per point [m]."""
    c = _catmull_rom(CONTROL)
    seg = np.hypot(*np.diff(c, axis=0).T)
    s = np.concatenate([[0.0], np.cumsum(seg)])
    width = 44.0 + 11.0 * np.sin(2 * np.pi * s / 650.0 + 0.7) + 3.0 * np.sin(2 * np.pi * s / 230.0)
    tang = np.gradient(c, axis=0)
    tang /= np.hypot(*tang.T)[:, None]
    normal = np.column_stack([-tang[:, 1], tang[:, 0]])
    left = c + normal * (width / 2)[:, None]
    right = c - normal * (width / 2)[:, None]
    poly = Polygon(np.vstack([left, right[::-1]])).buffer(0).simplify(0.2)
    return c, poly, width


def grade_piste(dem: np.ndarray, centre: np.ndarray, width: np.ndarray, min_fall: float = 0.04,
                margin: float = 25.0) -> tuple[np.ndarray, float]:
    """Cut the piste into the terrain so that the centreline never climbs (as a piste is graded).

    Along the centreline the target height falls by at least *min_fall* m per m; where the terrain
    is higher, it is cut down over the course width, tapering to zero over *margin* m beside it.
    Returns the graded DEM and the deepest cut [m].
    """
    z = _sample(dem, centre)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(centre, axis=0).T))])
    target = z.copy()
    for i in range(1, len(z)):
        target[i] = min(z[i], target[i - 1] - min_fall * (s[i] - s[i - 1]))
    cut = z - target
    k = np.ones(9) / 9.0                        # smooth the cut along the course (about 45 m)
    cut = np.maximum(np.convolve(np.pad(cut, 4, mode="edge"), k, mode="valid"), cut)
    ny, nx = dem.shape
    line = LineString(centre)
    reach = float(width.max()) / 2 + margin
    minx, miny, maxx, maxy = line.buffer(reach).bounds
    c0, c1 = max(int(minx / CELL), 0), min(int(maxx / CELL) + 1, nx)
    r0, r1 = max(int((HEIGHT_M - maxy) / CELL), 0), min(int((HEIGHT_M - miny) / CELL) + 1, ny)
    uu, vv = np.meshgrid((np.arange(c0, c1) + 0.5) * CELL, HEIGHT_M - (np.arange(r0, r1) + 0.5) * CELL)
    pts = shapely.points(uu.ravel(), vv.ravel())
    along = shapely.line_locate_point(line, pts)
    dist = shapely.distance(line, pts)
    half = np.interp(along, s, width) / 2
    w = np.clip(1.0 - (dist - half) / margin, 0.0, 1.0)
    w = w * w * (3 - 2 * w)
    out = dem.copy()
    out[r0:r1, c0:c1] -= (np.interp(along, s, cut) * w).reshape(uu.shape)
    return out, float(cut.max())


def _aspect_at(dem: np.ndarray, x: float, y: float) -> float:
    """Aspect [° from north, clockwise, downhill direction] of the DEM at a local point."""
    col = int(np.clip(x / CELL, 1, dem.shape[1] - 2))
    row = int(np.clip((HEIGHT_M - y) / CELL, 1, dem.shape[0] - 2))
    dzdx = (dem[row, col + 1] - dem[row, col - 1]) / (2 * CELL)
    dzdn = (dem[row - 1, col] - dem[row + 1, col]) / (2 * CELL)
    return float((np.degrees(np.arctan2(-dzdx, -dzdn)) + 360.0) % 360.0)


def _sample(dem: np.ndarray, pts_local: np.ndarray) -> np.ndarray:
    """Nearest-cell DEM heights at local points."""
    col = np.clip((pts_local[:, 0] / CELL).astype(int), 0, dem.shape[1] - 1)
    row = np.clip(((HEIGHT_M - pts_local[:, 1]) / CELL).astype(int), 0, dem.shape[0] - 1)
    return dem[row, col]


# ----------------------------------------------------------------------------- sun

def sun_raster(dem: np.ndarray, transform):
    """Sun share of the hold window on the SUN_CELL grid, from ``courseplan.stages.sun.sun_from_dem``."""
    from courseplan.stages.sun import sun_from_dem

    f = int(SUN_CELL / CELL)
    coarse = dem.reshape(dem.shape[0] // f, f, dem.shape[1] // f, f).mean(axis=(1, 3))
    ctr = from_origin(transform.c, transform.f, SUN_CELL, SUN_CELL)
    res = sun_from_dem(coarse, ctr, CRS, date=RACE_DAY, start=WINDOW[0], end=WINDOW[1],
                       timezone=TIMEZONE, step_minutes=15)
    return np.asarray(res.sun_fraction, dtype="float32"), ctr, "courseplan.stages.sun.sun_from_dem"


# ----------------------------------------------------------------------------- writers

def write_tif(path: Path, arr: np.ndarray, transform, description: str, band_name: str,
              units: str) -> None:
    """Write a single-band float32 GeoTIFF, tiled, DEFLATE with floating-point predictor."""
    profile = dict(driver="GTiff", height=arr.shape[0], width=arr.shape[1], count=1, dtype="float32",
                   crs=CRS, transform=transform, nodata=NODATA, tiled=True, blockxsize=256,
                   blockysize=256, compress="deflate", predictor=3, zlevel=9)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(arr.astype("float32"), 1)
        dst.update_tags(TIFFTAG_IMAGEDESCRIPTION=description,
                        SOURCE="courseplan sample-geodata/make_sample.py")
        dst.set_band_description(1, band_name)
        dst.set_band_unit(1, units)


def write_geojson(path: Path, features: list[dict], name: str) -> None:
    """Write a GeoJSON FeatureCollection (WGS84) with the invented-data description."""
    fc = {"type": "FeatureCollection", "name": name, "description": INVENTED, "features": features}
    path.write_text(json.dumps(fc, indent=1) + "\n", encoding="utf-8")


def _round_coords(geom_mapping: dict, nd: int = 7) -> dict:
    def r(c):
        if isinstance(c, (int, float)):
            return round(c, nd)
        return [r(x) for x in c]
    return {"type": geom_mapping["type"], "coordinates": r(geom_mapping["coordinates"])}


def main(argv: list[str] | None = None) -> int:
    """Write every sample file into the output folder."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=HERE, help="output folder (default: beside this script)")
    ap.add_argument("--check", action="store_true", help="print statistics along the course")
    args = ap.parse_args(argv)
    out: Path = args.out
    out.mkdir(parents=True, exist_ok=True)

    to_wgs = Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)

    # --- DEM
    nx, ny = int(WIDTH_M / CELL), int(HEIGHT_M / CELL)
    u = (np.arange(nx) + 0.5) * CELL
    v = HEIGHT_M - (np.arange(ny) + 0.5) * CELL
    uu, vv = np.meshgrid(u, v)
    dem = terrain(uu, vv)
    c_local, poly_local, width = course_geometry()
    dem, deepest_cut = grade_piste(dem, c_local, width)
    dem = np.round(dem, 2)  # centimetres: plenty for a demo and compresses better
    transform = from_origin(X0, Y0 + HEIGHT_M, CELL, CELL)
    write_tif(out / "terrain.tif", dem, transform,
              INVENTED + " Terrain model (heights above sea level) of the invented hill.", "height", "m")

    # --- course
    def to_utm(a):
        return a + np.array([X0, Y0])

    def to_lonlat(a):
        return np.column_stack(to_wgs.transform(a[:, 0], a[:, 1]))

    poly_utm = shapely.transform(poly_local, to_utm)
    line_utm = shapely.transform(LineString(c_local), to_utm)
    poly_wgs = shapely.transform(poly_utm, to_lonlat)
    line_wgs = shapely.transform(line_utm.simplify(0.3), to_lonlat)
    z_c = _sample(dem, c_local)
    write_geojson(out / "course.geojson", [{
        "type": "Feature",
        "properties": {"name": "Ulmenkar giant slalom (invented)", "discipline": "GS",
                       "description": INVENTED},
        "geometry": _round_coords(mapping(poly_wgs)),
    }], "ulmenkar_course")
    write_geojson(out / "centreline.geojson", [{
        "type": "Feature",
        "properties": {"name": "Ulmenkar centreline, start to finish (invented)", "description": INVENTED},
        "geometry": _round_coords(mapping(line_wgs)),
    }], "ulmenkar_centreline")

    # --- sun
    sun, sun_tr, sun_source = sun_raster(dem, transform)
    write_tif(out / "sun.tif", sun, sun_tr,
              INVENTED + f" Share of the hold window {WINDOW[0]}-{WINDOW[1]} ({TIMEZONE}) on {RACE_DAY} "
              f"in direct sun, computed from terrain.tif (averaged to {SUN_CELL:g} m) with {sun_source}.",
              "sun_fraction", "1")

    def sun_at(x_local, y_local):
        col = np.clip((np.asarray(x_local) / SUN_CELL).astype(int), 0, sun.shape[1] - 1)
        row = np.clip(((HEIGHT_M - np.asarray(y_local)) / SUN_CELL).astype(int), 0, sun.shape[0] - 1)
        return sun[row, col]

    # --- observations: invented hand tests and instrument readings on race morning
    rng = np.random.default_rng(SEED + 1)
    line_local = LineString(c_local)
    n_obs = 20
    s_obs = np.linspace(60, line_local.length - 60, n_obs) + rng.uniform(-25, 25, n_obs)
    notes = {
        0: "start ramp, groomed at 05:30",
        3: "boot print 3 cm deep; water squeezes out at turn apex",
        5: "under the spur, snow still firm",
        7: 'gate 14 "Grat" turn, ruts starting',
        9: "gully floor, slush in the ruts",
        12: "machine-made base, injected in February",
        15: "rib shade until about 10:45",
        19: "finish hollow under the wall, in shade, refrozen crust",
    }
    rows = []
    for i, s in enumerate(s_obs):
        p = line_local.interpolate(s)
        q = line_local.interpolate(min(s + 2.0, line_local.length))
        tx, ty = q.x - p.x, q.y - p.y
        tl = np.hypot(tx, ty) or 1.0
        off = rng.uniform(-12, 12)
        x, y = p.x - ty / tl * off, p.y + tx / tl * off
        f = float(sun_at(x, y))
        hour = 7 * 60 + 25 + i * 6 + int(rng.integers(0, 4))
        t = dt.datetime.fromisoformat(f"{RACE_DAY}T{hour // 60:02d}:{hour % 60:02d}:00{UTC_OFFSET}")
        # more water where the sun shines longer and more squarely, and later in the morning
        asp = float(np.radians(_aspect_at(dem, x, y)))
        squareness = 0.55 + 0.45 * np.cos(asp - np.radians(165.0))
        ramp = 0.45 + 0.55 * (hour - 7 * 60) / 150.0
        lwc = max(0.0, 0.2 + 7.0 * (f * squareness) ** 2 * ramp + rng.normal(0, 0.4))
        if i == 9:
            lwc = 13.0 + rng.uniform(0, 1.5)
        wet = ("dry" if lwc == 0 else "moist" if lwc <= 3 else "wet" if lwc <= 8
               else "very-wet" if lwc <= 15 else "soaked")
        instrument = i % 3 != 2                 # two in three by a dielectric probe
        grain = "MM" if 11 <= i <= 14 else ("MF" if f > 0.45 or lwc > 3 else "RG")
        temp = 0.0 if lwc > 0.8 else round(-rng.uniform(0.3, 1.5), 1)
        dens = np.clip(520 + 60 * (grain == "MM") + 40 * f + rng.normal(0, 15), 470, 640)
        dens = round(float(dens) / 5) * 5
        hard = int(np.clip(round(4.2 - 0.35 * lwc + rng.normal(0, 0.4)), 1, 5))
        lon, lat = to_wgs.transform(x + X0, y + Y0)
        rows.append({
            "obs_id": f"U{i + 1:02d}",
            "time": t.isoformat(timespec="minutes"),
            "lon": f"{lon:.6f}", "lat": f"{lat:.6f}",
            "wetness": "" if (instrument and i % 2 == 0) else wet,
            "lwc_pct": f"{lwc:.1f}" if instrument else "",
            "snow_temp_c": f"{temp:.1f}",
            "density_kg_m3": f"{dens:.0f}" if i % 4 != 3 else "",
            "grain": grain,
            "hand_hardness": str(hard) if i % 5 != 4 else "",
            "note": notes.get(i, ""),
        })
    cols = ["obs_id", "time", "lon", "lat", "wetness", "lwc_pct", "snow_temp_c", "density_kg_m3", "grain",
            "hand_hardness", "note"]
    with open(out / "observations.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols, lineterminator="\n")
        w.writeheader()
        w.writerows(rows)

    # --- forecast: an invented warm, mostly clear spring day
    with open(out / "forecast.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["time", "air_temp_c", "rh_pct", "wind_m_s", "cloud_fraction"])
        for h in range(4, 16):
            if h < 7:  # the cold clear night before: crews salt the first pass in it
                air, rh, wind, cloud = 1.8 - 1.1 * (7 - h), 85.0, 1.0, 0.10
            else:
                air = 0.5 + 7.0 * np.sin(np.pi * (h - 6) / 11.0) ** 1.3
                rh = 82 - 30 * np.sin(np.pi * (h - 6) / 11.0)
                wind = 1.2 + 0.25 * (h - 7)
                cloud = [0.1, 0.1, 0.05, 0.05, 0.1, 0.15, 0.25, 0.35, 0.4][h - 7]
            w.writerow([f"{RACE_DAY}T{h:02d}:00{UTC_OFFSET}", f"{air:.1f}", f"{rh:.0f}", f"{wind:.1f}",
                        f"{cloud:.2f}"])

    # --- plan
    plan = f"""# Demo plan for the invented hill "Ulmenkar".
# {INVENTED}
# Made by sample-geodata/make_sample.py; paths are relative to this file.

[plan]
name = "Ulmenkar GS, race day (invented demo)"
date = "{RACE_DAY}"
timezone = "{TIMEZONE}"
agent = "NaCl"

[inputs]
course = "course.geojson"
sun = "sun.tif"
sun_encoding = "fraction"
dem = "terrain.tif"
observations = "observations.csv"
forecast = "forecast.csv"
centreline = "centreline.geojson"
# invented gates along the course (placed by hand): sections run from gate to gate
markers = "gates.geojson"
# invented no-salt areas (drawn by hand, kept beside this script): the finish area, and a stream
# crossing the course with 8 m either side
no_salt = ["no-salt-finish.geojson", "no-salt-stream.geojson"]
no_salt_buffer_m = [0.0, 8.0]

[race]
# race day of the invented demo: course inspection, then two runs of a giant slalom
inspection = ["08:15", "09:00"]
runs = [["09:30", "10:45"], ["12:30", "13:45"]]

[zoning]
min_zone_area_m2 = 400.0
section_length_m = 250.0

[snow]
max_distance_m = 150.0
max_age_h = 6.0

[dosing]
depth_m = 0.04
samples = 200

[logistics]
crews = 6
margin_pct = 10.0
"""
    (out / "plan.toml").write_text(plan, encoding="utf-8")

    if args.check:
        seg = np.hypot(*np.diff(c_local, axis=0).T)
        gy, gx = np.gradient(dem, CELL)
        col = np.clip((c_local[:, 0] / CELL).astype(int), 0, nx - 1)
        row = np.clip(((HEIGHT_M - c_local[:, 1]) / CELL).astype(int), 0, ny - 1)
        dzdx, dzdn = gx[row, col], -gy[row, col]
        slope = np.degrees(np.arctan(np.hypot(dzdx, dzdn)))
        aspect = (np.degrees(np.arctan2(-dzdx, -dzdn)) + 360) % 360
        print(f"course length {seg.sum():.0f} m, area {poly_local.area:.0f} m², width {width.min():.0f}–"
              f"{width.max():.0f} m, drop {z_c[0] - z_c[-1]:.0f} m ({z_c[0]:.0f} → {z_c[-1]:.0f} m)")
        print(f"deepest piste cut {deepest_cut:.1f} m")
        print(f"uphill steps along the centreline: {(np.diff(z_c) > 0).sum()} of {len(z_c) - 1}, "
              f"max rise {np.diff(z_c).max():.2f} m")
        mean_sun = sun_at(c_local[:, 0], c_local[:, 1]).mean()
        print(f"sun source: {sun_source}; sun fraction on the course: mean {mean_sun:.2f}")
        s = np.concatenate([[0], np.cumsum(seg)])
        for k in range(0, len(c_local), 20):
            print(f"  s={s[k]:6.0f} m  z={z_c[k]:6.0f}  slope={slope[k]:4.1f}°  aspect={aspect[k]:5.0f}°  "
                  f"sun={float(sun_at(*c_local[k])):.2f}")
        total = sum(p.stat().st_size for p in out.iterdir() if p.is_file())
        print(f"folder size {total / 1e6:.2f} MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
