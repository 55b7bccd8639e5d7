"""Load every input a plan names, in one working metric CRS, collecting problems for `check`."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from pyproj import CRS, Transformer

from courseplan.errors import CourseplanError, CRSError, InputError, ProblemList
from courseplan.geo.crs import is_metric, utm_crs
from courseplan.pipeline import LoadedInputs
from courseplan.settings import PlanSettings


def choose_working_crs(settings: PlanSettings, course_crs: CRS, course_geom, raster_crs: CRS | None) -> CRS:
    """The one metric CRS used inside: the setting, else the sun raster's or DEM's when metric
    (so the raster is not resampled), else the course's when metric, else the local UTM zone.
    """
    if settings.inputs.crs:
        try:
            crs = CRS.from_user_input(settings.inputs.crs)
        except Exception:
            raise CRSError(f"unknown CRS {settings.inputs.crs!r}", where="[inputs] crs",
                           fix='write e.g. "EPSG:32632"') from None
        if not is_metric(crs):
            raise CRSError(f"{settings.inputs.crs} is not a metric projected CRS", where="[inputs] crs",
                           fix="choose a projected CRS in metres (e.g. the local UTM zone)")
        return crs
    for c in (raster_crs, course_crs):
        if is_metric(c):
            return c
    tr = Transformer.from_crs(course_crs, CRS.from_epsg(4326), always_xy=True)
    c = course_geom.centroid
    lon, lat = tr.transform(c.x, c.y)
    return utm_crs(lon, lat)


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
    from courseplan.io.rasters import open_raster_info, read_window

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
    course = attempt(lambda: read_course(ins.course, ins.course_feature))
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
    sources.update({"course": course.source, "course_crs": course.crs.to_string(), "working_crs": crs.to_string()})
    bounds = tuple(geom.bounds)
    sun = dem = None
    if sun_info is not None:
        sun = attempt(lambda: read_window(ins.sun, bounds, crs, what="sun", margin_m=20.0))
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
    obs = None
    if ins.observations:
        from courseplan.io.observations import read_observations

        obs = attempt(lambda: read_observations(ins.observations, crs, timezone=settings.plan.timezone,
                                                xy_crs=ins.observations_crs))
        sources["observations"] = str(ins.observations)
    fc = None
    if ins.forecast:
        from courseplan.io.forecast import read_forecast_csv

        fc = attempt(lambda: read_forecast_csv(ins.forecast))
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
    if problems:
        raise ProblemList(problems) if (collect or len(problems) > 1) else problems[0]
    return LoadedInputs(course=geom, course_name=course.name, crs=crs, sun=sun, dem=dem, observations=obs,
                        forecast=fc, centreline=centre, markers=markers, catalogue=catalogue,
                        notes=tuple(notes), sources=sources)
