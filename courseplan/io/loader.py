"""Load every input a plan names, in one working metric CRS, collecting problems for `check`."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from pyproj import CRS, Transformer

from courseplan.errors import CourseplanError, CRSError, InputError, ProblemList
from courseplan.geo.crs import is_metric, utm_crs
from courseplan.pipeline import LoadedInputs
from courseplan.settings import PlanSettings

#: Largest accepted difference between the course area in the working CRS and its geodesic area.
AREA_TOLERANCE = 0.005


def geodesic_area_m2(geom, crs: CRS) -> float:
    """Area [m²] of *geom* (in *crs*) on the WGS 84 ellipsoid (``pyproj.Geod.geometry_area_perimeter``)."""
    from pyproj import Geod

    g = _reproject_geom(geom, CRS.from_user_input(crs), CRS.from_epsg(4326))
    area, _ = Geod(ellps="WGS84").geometry_area_perimeter(g)
    return abs(float(area))


def area_scale_error(geom, src: CRS, candidate: CRS, geodesic: float | None = None) -> float:
    """Relative difference between *geom*'s planar area in *candidate* and its geodesic area."""
    g = _reproject_geom(geom, src, candidate)
    ref = geodesic_area_m2(geom, src) if geodesic is None else geodesic
    return abs(g.area / ref - 1.0) if ref > 0 else 0.0


def choose_working_crs(settings: PlanSettings, course_crs: CRS, course_geom, raster_crs: CRS | None) -> CRS:
    """The one metric CRS used inside: the setting, else the sun raster's or DEM's when metric
    (so the raster is not resampled), else the course's when metric, else the local UTM zone.

    A metric CRS that distorts areas at the course by more than 0.5 % (Web Mercator, EPSG:3857,
    doubles areas in the Alps) is passed over for the local UTM zone; an ``[inputs] crs`` that does
    is refused.
    """
    geodesic = geodesic_area_m2(course_geom, course_crs)
    if settings.inputs.crs:
        try:
            crs = CRS.from_user_input(settings.inputs.crs)
        except Exception:
            raise CRSError(f"unknown CRS {settings.inputs.crs!r}", where="[inputs] crs",
                           fix='write e.g. "EPSG:32632"') from None
        if not is_metric(crs):
            raise CRSError(f"{settings.inputs.crs} is not a metric projected CRS", where="[inputs] crs",
                           fix="choose a projected CRS in metres (e.g. the local UTM zone)")
        err = area_scale_error(course_geom, course_crs, crs, geodesic)
        if err > AREA_TOLERANCE:
            raise CRSError(f"{settings.inputs.crs} distorts the course area by {100 * err:.1f} % (more than "
                           f"{100 * AREA_TOLERANCE:g} %), so areas and doses would be wrong",
                           where="[inputs] crs", fix="leave crs out (the local UTM zone is used) or choose an "
                                                     "equal-area or local CRS")
        return crs
    for c in (raster_crs, course_crs):
        if is_metric(c) and area_scale_error(course_geom, course_crs, c, geodesic) <= AREA_TOLERANCE:
            return c
    tr = Transformer.from_crs(course_crs, CRS.from_epsg(4326), always_xy=True)
    c = course_geom.centroid
    lon, lat = tr.transform(c.x, c.y)
    return utm_crs(lon, lat)


def check_course_area(geom_work, crs: CRS, course_geom, course_crs: CRS, where: str) -> None:
    """Refuse a course whose area in the working CRS differs from the geodesic area by more than 0.5 %."""
    geodesic = geodesic_area_m2(course_geom, course_crs)
    if geodesic <= 0:
        return
    err = abs(geom_work.area / geodesic - 1.0)
    if err > AREA_TOLERANCE:
        raise CRSError(f"the course area in the working CRS {crs.to_string()} ({geom_work.area:,.0f} m²) differs "
                       f"from its area on the ellipsoid ({geodesic:,.0f} m²) by {100 * err:.1f} %", where=where,
                       fix="set [inputs] crs to the local UTM zone")


def check_nodata_share(grid, geom, what: str, max_pct: float, where: str) -> float:
    """Share of the course's cells without data in *grid*; refused above *max_pct* [%]."""
    from courseplan.geo.raster import burn

    inside = burn(geom, grid, all_touched=False)
    if not inside.any():
        inside = burn(geom, grid, all_touched=True)
    if not inside.any():
        return 0.0
    share = float((inside & ~np.isfinite(grid.values)).sum()) / float(inside.sum())
    if 100 * share > max_pct:
        raise InputError(f"the {what} covers only {100 * (1 - share):.1f} % of the course ({100 * share:.1f} % "
                         f"has no data, more than the {max_pct:g} % allowed)", where=where,
                         fix=f"give a {what} that covers the whole course, or raise [inputs] max_uncovered_pct")
    return share


#: A Wh/m² sun raster whose median over the course is this many times off clear sky is refused.
WH_M2_FACTOR = 50.0


def check_wh_m2_scale(grid, geom, crs: CRS, settings: PlanSettings, where: str) -> None:
    """Refuse a Wh/m² sun raster about 1000× too small (kWh/m²) or too large (J/m², mWh) for the window."""
    if settings.plan.date is None:
        return
    from courseplan.geo.raster import burn
    from courseplan.physics.solar import clear_sky_window

    inside = burn(geom, grid, all_touched=True)
    vals = grid.values[inside & np.isfinite(grid.values)]
    if vals.size == 0:
        return
    lon, lat = Transformer.from_crs(crs, CRS.from_epsg(4326), always_xy=True).transform(
        geom.centroid.x, geom.centroid.y)
    w = settings.window
    try:
        cs = clear_sky_window(lat, lon, 0.0, settings.plan.date, w.start, w.end, settings.plan.timezone)
    except CourseplanError:
        return  # the window itself is reported elsewhere
    ghi = float(cs.ghi_wh_m2)
    med = float(np.median(vals))
    if ghi <= 0 or med <= 0:
        return
    ratio = med / ghi
    span = f"{w.start}–{w.end} on {settings.plan.date}"
    if ratio < 1 / WH_M2_FACTOR:
        raise InputError(f"the sun raster's irradiation (median {med:.3g} Wh/m² over the course) is about "
                         f"{1 / ratio:,.0f}× less than clear sky over the window {span} ({ghi:,.0f} Wh/m²): "
                         "it looks like kWh/m²", where=where,
                         fix="convert it to Wh/m² (× 1000), or set sun_encoding to what it holds")
    if ratio > WH_M2_FACTOR:
        raise InputError(f"the sun raster's irradiation (median {med:.3g} Wh/m² over the course) is about "
                         f"{ratio:,.0f}× more than clear sky over the window {span} ({ghi:,.0f} Wh/m²): "
                         "it looks like J/m² (÷ 3600) or mWh/m² (÷ 1000)", where=where,
                         fix="convert it to Wh/m², or set sun_encoding to what it holds")


#: Longest accepted gap between forecast rows inside the race day [h].
MAX_FORECAST_GAP_H = 2.0


def race_day_span(settings: PlanSettings):
    """(first, last) instant the plan needs weather for: the lead before inspection to the last run's end."""
    import pandas as pd

    from courseplan.schedule import plan_schedule

    sch = plan_schedule(settings)
    return sch.inspection_from - pd.Timedelta(hours=settings.dosing.lead_h), sch.last_end


def check_forecast_gaps(fc, settings: PlanSettings, where: str) -> None:
    """Refuse a forecast with more than :data:`MAX_FORECAST_GAP_H` hours between rows inside the race day."""
    import pandas as pd

    if settings.plan.date is None or len(fc) < 2:
        return
    try:
        day0, day1 = race_day_span(settings)
    except CourseplanError:
        return  # the schedule's own error is raised by the plan
    t = pd.DatetimeIndex(fc["time"])
    t = t.tz_localize(settings.plan.timezone, ambiguous="NaT", nonexistent="NaT") if t.tz is None else t
    t = t[~t.isna()].sort_values()
    for a, b in zip(t[:-1], t[1:], strict=True):
        if (b - a) > pd.Timedelta(hours=MAX_FORECAST_GAP_H) and b > day0 and a < day1:
            tz = settings.plan.timezone
            raise InputError(f"the forecast has a gap of {(b - a).total_seconds() / 3600:.1f} h "
                             f"({a.tz_convert(tz):%Y-%m-%d %H:%M} to {b.tz_convert(tz):%H:%M} {tz}) inside the race "
                             f"day ({day0.tz_convert(tz):%H:%M}–{day1.tz_convert(tz):%H:%M})", where=where,
                             fix=f"give rows at most {MAX_FORECAST_GAP_H:g} h apart over the race day")


#: Observations dated more than this many days from the race day are left out (all of them: refused).
MAX_OBS_AGE_DAYS = 2.0
#: Observations farther than this from the course are refused [m].
MAX_OBS_DISTANCE_M = 1000.0


def check_observation_dates(obs, settings: PlanSettings, where: str, notes: list[str]):
    """Leave out observations dated more than :data:`MAX_OBS_AGE_DAYS` from the race day (with a note)."""
    import pandas as pd

    if settings.plan.date is None or len(obs) == 0:
        return obs
    tz = settings.plan.timezone
    try:
        d0 = pd.Timestamp(settings.plan.date).tz_localize(tz)
    except Exception:  # a bad date or zone is reported by the settings check
        return obs
    d1 = d0 + pd.Timedelta(days=1)
    lim = pd.Timedelta(days=MAX_OBS_AGE_DAYS)
    t = pd.DatetimeIndex(obs["time"])
    far = np.asarray((t < d0 - lim) | (t > d1 + lim))
    if not far.any():
        return obs
    n, m = int(far.sum()), len(obs)
    span = f"{t.min().tz_convert(tz):%Y-%m-%d} … {t.max().tz_convert(tz):%Y-%m-%d}"
    if n == m:
        raise InputError(f"all {m} observations are dated more than {MAX_OBS_AGE_DAYS:g} days from the race day "
                         f"{settings.plan.date} ({span})", where=where,
                         fix="check [plan] date and the observations' dates, or leave the observations out")
    notes.append(f"{where}: {n} of {m} observations are dated more than {MAX_OBS_AGE_DAYS:g} days from the race "
                 f"day {settings.plan.date} and were left out")
    return obs[~far].reset_index(drop=True)


def check_observation_places(obs, geom, crs: CRS, xy_crs: str | None, where: str) -> None:
    """Refuse observations more than :data:`MAX_OBS_DISTANCE_M` from the course; suggest swapped lon/lat."""
    import shapely

    pts = np.asarray(obs.geometry.values)
    d = shapely.distance(geom, pts)
    far = d > MAX_OBS_DISTANCE_M
    if not far.any():
        return
    n, m = int(far.sum()), len(obs)
    ids = ", ".join(str(v) for v in obs.loc[far, "obs_id"].head(5))
    what = (f"{n} of {m} observations lie more than {MAX_OBS_DISTANCE_M / 1000:g} km from the course (up to "
            f"{float(d[far].max()) / 1000:,.1f} km; {ids})")
    fix = "check their positions and CRS, or drop those rows"
    try:
        src = CRS.from_user_input(xy_crs) if xy_crs else CRS.from_epsg(4326)
        back = Transformer.from_crs(crs, src, always_xy=True)
        fwd = Transformer.from_crs(src, crs, always_xy=True)
        fx, fy = shapely.get_x(pts[far]), shapely.get_y(pts[far])
        a, b = back.transform(fx, fy)
        sx, sy = fwd.transform(b, a)
        ok = np.isfinite(sx) & np.isfinite(sy)
        if ok.all():
            ds = shapely.distance(geom, shapely.points(sx, sy))
            if (ds <= MAX_OBS_DISTANCE_M).all():
                cols = "x and y" if xy_crs else "lon and lat"
                what += f"; with {cols} swapped they lie on the course"
                fix = f"swap the {cols} columns (or their values in those rows)"
    except Exception:  # no swap suggestion when the swapped coordinates do not transform
        pass
    raise InputError(what, where=where, fix=fix)


def _reproject_geom(geom, src: CRS, dst: CRS):
    import shapely
    from shapely.ops import transform as sh_transform

    if src == dst:
        return geom
    tr = Transformer.from_crs(src, dst, always_xy=True)
    g = sh_transform(lambda x, y, z=None: tr.transform(x, y), geom)
    return shapely.make_valid(g) if not g.is_valid else g


def _read_vector_with_crs(path: Path, what: str):
    """Read a vector file that must carry a CRS (centreline, markers)."""
    import geopandas as gpd

    from courseplan.io.files import check_readable

    p = check_readable(path, what)
    try:
        g = gpd.read_file(p)
    except Exception as exc:  # pyogrio raises several types for unreadable data
        raise InputError(f"cannot read the {what} as a vector file ({type(exc).__name__})", where=str(p),
                         fix="give a GeoJSON, GeoPackage or Shapefile") from None
    if g.crs is None:
        raise CRSError(f"the {what} file has no CRS", where=str(p), fix="save it with a CRS")
    return p, g


def load_inputs(settings: PlanSettings, *, collect: bool = False) -> LoadedInputs:
    """Read the course, rasters, observations, forecast, centreline and agents of a plan.

    Parameters
    ----------
    settings
        Validated settings naming the files.
    collect
        When True, keep going after a problem and raise :class:`ProblemList` with all of them
        (``courseplan check``); otherwise raise the first.
    """
    from courseplan.io.course import read_course
    from courseplan.io.rasters import dem_unit_factor, open_raster_info, pick_sun_band, read_window

    problems: list[CourseplanError] = []
    notes: list[str] = []
    sources: dict = {}

    def attempt(fn):
        try:
            return fn()
        except CourseplanError as exc:
            if not collect:
                raise
            problems.append(exc)
            return None

    ins = settings.inputs
    if ins.course is None:
        raise InputError("no course outline given", where="[inputs] course",
                         fix="give --course COURSE.geojson or set course in the plan file")
    if ins.sun is None and ins.dem is None:
        problems.append(InputError("neither a sun raster nor a DEM is given", where="[inputs]",
                                   fix="give --sun SUN.tif or --dem DEM.tif"))
        if not collect:
            raise problems[-1]
    course = attempt(lambda: read_course(ins.course, ins.course_feature, ins.course_layer))
    sun_info = attempt(lambda: open_raster_info(ins.sun, "sun")) if ins.sun else None
    dem_info = attempt(lambda: open_raster_info(ins.dem, "DEM")) if ins.dem else None
    catalogue = None
    if ins.agents:
        from courseplan.agents import catalogue as make_catalogue
        from courseplan.io.agentfile import read_agents_file

        catalogue = attempt(lambda: make_catalogue(read_agents_file(ins.agents), source=str(ins.agents)))
    from courseplan.agents import get_agent

    attempt(lambda: get_agent(settings.plan.agent, catalogue))
    if course is None:
        raise ProblemList(problems) if len(problems) > 1 else problems[0]
    notes += list(course.warnings)
    rcrs = (sun_info or {}).get("crs") or (dem_info or {}).get("crs")
    crs = attempt(lambda: choose_working_crs(settings, course.crs, course.geometry, rcrs)) or \
        utm_crs(0, 0)
    geom = _reproject_geom(course.geometry, course.crs, crs)
    attempt(lambda: check_course_area(geom, crs, course.geometry, course.crs, str(course.source)))
    if not crs.equals(course.crs) and is_metric(course.crs) and not (rcrs is not None and crs.equals(rcrs)):
        notes.append(f"{course.source}: the course's CRS {course.crs.to_string()} distorts areas here; "
                     f"the plan works in {crs.to_string()} (areas checked against the ellipsoid)")
    sources.update({"course": course.source, "course_crs": course.crs.to_string(), "working_crs": crs.to_string()})
    bounds = tuple(geom.bounds)
    sun = dem = None
    if sun_info is not None:
        band = attempt(lambda: pick_sun_band(sun_info, ins.sun_encoding, ins.sun_band, str(ins.sun)))
        if band is not None:
            sun = attempt(lambda: read_window(ins.sun, bounds, crs, what="sun", band=band, margin_m=20.0))
            if band != 1:
                notes.append(f"{ins.sun}: read band {band} ({(sun_info.get('descriptions') or ())[band - 1] or 'no name'}) "
                             f"as {ins.sun_encoding}")
        if sun is not None and ins.sun_encoding == "wh_m2":
            attempt(lambda: check_wh_m2_scale(sun, geom, crs, settings, str(ins.sun)))
        sources["sun"] = str(ins.sun)
    if dem_info is not None:
        # a wider margin: cast shadows come from terrain around the course
        margin = 20.0 if sun_info is not None else 1500.0
        dem = attempt(lambda: read_window(ins.dem, bounds, crs, what="DEM", margin_m=margin))
        sources["dem"] = str(ins.dem)
        if dem is not None and not np.isfinite(dem.values).any():
            problems.append(InputError("the DEM holds only nodata around the course", where=str(ins.dem),
                                       fix="give a DEM that covers the course"))
            if not collect:
                raise problems[-1]
        elif dem is not None:
            share = attempt(lambda: check_nodata_share(dem, geom, "DEM", ins.max_uncovered_pct, str(ins.dem)))
            if share:
                notes.append(f"{ins.dem}: {100 * share:.1f} % of the course has no DEM data; filled from the "
                             "nearest cells")
            factor, unit = dem_unit_factor(dem_info, 1, str(ins.dem))
            if factor != 1.0:
                notes.append(f"{ins.dem}: heights are in {unit!r}; converted to metres (× {factor:.7g})")
    obs = None
    if ins.observations:
        from courseplan.io.observations import read_observations

        obs = attempt(lambda: read_observations(ins.observations, crs, timezone=settings.plan.timezone,
                                                xy_crs=ins.observations_crs))
        sources["observations"] = str(ins.observations)
        if obs is not None:
            obs = attempt(lambda: check_observation_dates(obs, settings, str(ins.observations), notes))
        if obs is not None:
            attempt(lambda: check_observation_places(obs, geom, crs, ins.observations_crs, str(ins.observations)))
    fc = None
    if ins.forecast:
        from courseplan.io.forecast import read_forecast_csv

        fc = attempt(lambda: read_forecast_csv(ins.forecast, timezone=settings.plan.timezone))
        if fc is not None:
            attempt(lambda: check_forecast_gaps(fc, settings, str(ins.forecast)))
        sources["forecast"] = str(ins.forecast)
    centre = None
    if ins.centreline:
        def read_line():
            from courseplan.io.course import read_centreline

            line, lcrs, _ = read_centreline(ins.centreline, ins.centreline_feature)
            return _reproject_geom(line, lcrs, crs)
        centre = attempt(read_line)
        sources["centreline"] = str(ins.centreline)
    markers: tuple = ()
    if ins.markers:
        def read_markers():
            p, g = _read_vector_with_crs(ins.markers, "markers")
            g = g[g.geometry.geom_type == "Point"].to_crs(crs)
            name_col = next((c for c in g.columns if c.lower() in ("name", "label")), None)
            if name_col is None or len(g) == 0:
                raise InputError("the markers file needs points with a name field", where=str(p),
                                 fix="give points with a 'name' attribute")
            return tuple((str(n), float(pt.x), float(pt.y)) for n, pt in zip(g[name_col], g.geometry, strict=True))
        markers = attempt(read_markers) or ()
    no_salt: list = []
    for k, path in enumerate(ins.no_salt):
        buf = float(ins.no_salt_buffer_m[k]) if k < len(ins.no_salt_buffer_m) else 0.0
        got = attempt(lambda path=path, buf=buf: _read_no_salt(path, buf, crs))
        if got is not None:
            no_salt.append(got)
        sources[f"no_salt_{k + 1}"] = f"{path} (buffer {buf:g} m)"
    if ins.zones:  # the chief's edited zones (io/zonefile.py); their fit to the course is checked in the plan
        from courseplan.io.zonefile import read_zones

        sources["zones"] = str(ins.zones)
        edited = attempt(lambda: read_zones(ins.zones, crs, catalogue))
    if problems:
        raise ProblemList(problems) if (collect or len(problems) > 1) else problems[0]
    return LoadedInputs(course=geom, course_name=course.name, crs=crs, sun=sun, dem=dem, observations=obs,
                        forecast=fc, centreline=centre, markers=markers, catalogue=catalogue,
                        notes=tuple(notes), sources=sources, no_salt=tuple(no_salt),
                        zones=edited if ins.zones else None)


def _read_no_salt(path: Path, buffer_m: float, crs):
    """One no-salt entry: (name, polygon in the working CRS) from polygons, lines or points plus a buffer."""
    import shapely

    from courseplan.io.course import read_layers

    p = Path(path)
    from courseplan.io.files import check_readable

    check_readable(p, "no-salt")
    layers = read_layers(p, "no-salt area")
    parts, name = [], None
    for _, g in layers:
        if g.crs is None:
            raise CRSError("the no-salt file has no CRS", where=str(p), fix="save it with a CRS")
        g = g.to_crs(crs)
        col = next((c for c in g.columns if str(c).lower() in ("name", "label")), None)
        if col is not None and name is None and len(g):
            name = str(g[col].iloc[0])
        for geom in g.geometry:
            if geom is None or geom.is_empty:
                continue
            if geom.geom_type in ("Polygon", "MultiPolygon"):
                parts.append(shapely.make_valid(geom).buffer(buffer_m) if buffer_m else shapely.make_valid(geom))
            elif buffer_m > 0:
                parts.append(geom.buffer(buffer_m))
            else:
                raise InputError(f"the no-salt file holds {geom.geom_type.lower()}s but no buffer is given",
                                 where=str(p), fix="give its width in [inputs] no_salt_buffer_m, e.g. 10")
    if not parts:
        raise InputError("the no-salt file holds no geometry", where=str(p), fix="give polygons, lines or points")
    return name or p.stem, shapely.union_all(parts)
