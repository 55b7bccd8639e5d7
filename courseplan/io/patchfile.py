"""Read a test-patch file (CSV): one dose ladder, spread at one time and place, read held or soft.

Columns (names case-insensitive; docs/calibration.md has the full table):

- place: ``lon``/``lat`` (WGS 84) or ``x``/``y`` with a ``crs`` column (or ``[inputs] observations_crs``);
  ``slope_deg``, ``aspect_deg`` and ``altitude_m`` (optional: taken from the plan's DEM at the place);
- ``spread_at`` (``HH:MM`` on the plan's date, or ISO 8601; without an offset it is local time in
  ``[plan] timezone``), ``agent`` (catalogue name), snow at spreading: ``lwc_pct`` or ``wetness``
  and ``density_kg_m3``;
- one row per reading: ``dose_g_m2`` (product, g/m²; equal doses are one rung), ``read_at`` and
  ``result`` (``held`` or ``soft``, or a hardness value with a ``method`` column, recorded but not
  fitted); optional ``note``.  Lines starting with ``#`` are comments.

The patch values (place, time, agent, snow) must agree on every row that gives them.  Every problem is
one :class:`~courseplan.errors.InputError` naming the file and line.
"""

from __future__ import annotations

import hashlib
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from courseplan.errors import CourseplanError, CRSError, InputError
from courseplan.io.files import check_readable
from courseplan.physics.snow import WETNESS_NAMES, class_lwc_pct, wetness_of

__all__ = ["PatchFile", "read_patch", "terrain_at"]

PATCH_VALUES = ("lon", "lat", "x", "y", "crs", "slope_deg", "aspect_deg", "altitude_m", "spread_at", "agent",
                "lwc_pct", "wetness", "density_kg_m3")
"""Columns that describe the whole patch (the same on every row that gives them)."""
READING_COLUMNS = ("dose_g_m2", "read_at", "result", "method", "note")
RESULTS = ("held", "soft")


@dataclass(frozen=True)
class PatchFile:
    """A test patch as read from its file.

    Attributes
    ----------
    name, sha256
        File name and the SHA-256 of its bytes.
    lon, lat
        Place (WGS 84) [deg].
    slope_deg, aspect_deg, altitude_m
        Terrain at the place, or None where the file does not give it.
    spread_at
        When the ladder was spread (tz-aware, in the plan's time zone).
    agent
        Agent name as written (checked against the catalogue).
    lwc_pct, wetness, lwc_from_class
        Liquid water content at spreading [% vol], its wetness class, and whether θ is the class's middle.
    density_kg_m3
        Snow density at spreading [kg/m³].
    readings
        One row per reading: ``line``, ``dose_g_m2``, ``read_at`` (tz-aware), ``held`` (True/False, or
        None for a hardness reading), ``hardness`` and ``method`` (text, may be empty), ``note``.
    """

    name: str
    sha256: str
    lon: float
    lat: float
    slope_deg: float | None
    aspect_deg: float | None
    altitude_m: float | None
    spread_at: pd.Timestamp
    agent: str
    lwc_pct: float
    wetness: str
    lwc_from_class: bool
    density_kg_m3: float
    readings: pd.DataFrame


def _time(text: str, date: str | None, tz: str, where: str, col: str) -> pd.Timestamp:
    s = text.strip()
    try:
        if len(s) <= 8 and ":" in s and "-" not in s:  # a clock time on the plan's date
            if date is None:
                raise InputError(f"{col} {s!r} is a clock time but the plan has no date", where=where,
                                 fix="set [plan] date or write the full time, e.g. 2027-03-17T10:05+01:00")
            s = f"{date} {s}"
        t = pd.Timestamp(s)
    except InputError:
        raise
    except (ValueError, TypeError):
        raise InputError(f"{col} {text!r} is not a time", where=where,
                         fix="write HH:MM or an ISO time such as 2027-03-17T10:05+01:00") from None
    if pd.isna(t):
        raise InputError(f"{col} is empty", where=where, fix="give the time")
    try:
        return t.tz_convert(tz) if t.tzinfo is not None else t.tz_localize(tz)
    except Exception:  # unknown zones and local times that do not exist
        raise InputError(f"cannot place {col} {text!r} in time zone {tz!r}", where=where,
                         fix="check [plan] timezone, or write the time with its offset") from None


def _number(v: str, col: str, lo: float, hi: float, unit: str, where: str) -> float:
    try:
        x = float(v.strip().replace(",", ".") if v.count(",") == 1 and "." not in v else v)
    except ValueError:
        raise InputError(f"{col} {v!r} is not a number", where=where, fix="write a plain number") from None
    if not (math.isfinite(x) and lo <= x <= hi):
        raise InputError(f"{col} {x:g} {unit} is outside {lo:g} … {hi:g}".rstrip(), where=where,
                         fix=f"give {col} in {unit or 'its unit'}")
    return x


def _one_value(df: pd.DataFrame, col: str, name: str, lines: list[int]) -> tuple[str | None, int]:
    """The patch value of *col*: the same on every row giving it (None when no row does)."""
    if col not in df.columns:
        return None, 0
    vals = [(lines[i], str(v).strip()) for i, v in enumerate(df[col]) if str(v).strip() != ""]
    if not vals:
        return None, 0
    first = vals[0][1]
    for line, v in vals[1:]:
        if v != first:
            raise InputError(f"{col} is {v!r} here but {first!r} on line {vals[0][0]}: one file is one patch",
                             where=f"{name}:{line}", fix="put each patch (place, time, agent, snow) in its own file")
    return first, vals[0][0]


def read_patch(path: str | Path, *, timezone: str, date: str | None, xy_crs: str | None = None,
               catalogue=None) -> PatchFile:
    """Read and check a patch file (module docstring); times come out in *timezone*.

    Parameters
    ----------
    path
        The CSV file.
    timezone, date
        The plan's time zone, and its date for clock times without a date.
    xy_crs
        CRS of ``x``/``y`` columns when the file has no ``crs`` column.
    catalogue
        Agent catalogue to check the agent against (default: the built-in one).

    Raises
    ------
    InputError
        Any problem, one line naming the file and line.
    """
    from courseplan.agents import get_agent

    p = check_readable(Path(path), "patch")
    raw = p.read_bytes()
    name = p.name
    try:
        kept = [(n, ln) for n, ln in enumerate(raw.decode("utf-8-sig").splitlines(), 1)
                if ln.strip() and not ln.lstrip().startswith("#")]  # whole-line comments and blank lines
        if not kept:
            raise pd.errors.EmptyDataError
        lines = [n for n, _ in kept[1:]]
        df = pd.read_csv(io.StringIO("\n".join(ln for _, ln in kept)), dtype=str, keep_default_na=False,
                         skipinitialspace=True, skip_blank_lines=False)
        if len(df) != len(lines):
            raise ValueError("a quoted field spans lines")
    except pd.errors.EmptyDataError:
        raise InputError("the patch file is empty", where=name, fix="give a header row and one row per reading") from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"cannot read the patch file ({type(exc).__name__}: {str(exc).splitlines()[0]})", where=name,
                         fix="give a comma-separated UTF-8 file with a header row") from None
    df.columns = [str(c).strip().lower() for c in df.columns]
    dup = sorted({c for c in df.columns if list(df.columns).count(c) > 1})
    if dup:
        raise InputError(f"column(s) {', '.join(dup)} given twice", where=name, fix="keep one of each")
    doses = [c for c in df.columns if c.startswith("dose") and c != "dose_g_m2"]
    if doses:
        raise InputError(f"dose column {doses[0]!r}: doses must be grams of product per m²", where=name,
                         fix="convert the doses to g/m² and name the column dose_g_m2")
    need = [c for c in ("dose_g_m2", "spread_at", "agent", "density_kg_m3", "read_at", "result")
            if c not in df.columns]
    if "lwc_pct" not in df.columns and "wetness" not in df.columns:
        need.append("lwc_pct or wetness")
    if not ({"lon", "lat"} <= set(df.columns) or {"x", "y"} <= set(df.columns)):
        need.append("lon/lat or x/y")
    if need:
        raise InputError(f"the patch file lacks column(s) {', '.join(need)}", where=name,
                         fix="see docs/calibration.md for the columns")
    if len(df) == 0:
        raise InputError("the patch file has no rows", where=name, fix="give one row per reading of each rung")
    val = {c: _one_value(df, c, name, lines) for c in PATCH_VALUES}

    def req(col: str) -> tuple[str, str]:
        v, line = val[col]
        if v is None:
            raise InputError(f"{col} is not given on any row", where=name, fix=f"give {col} (docs/calibration.md)")
        return v, f"{name}:{line}"

    # place
    if val["lon"][0] is not None or val["lat"][0] is not None:
        (lo, wl), (la, wa) = req("lon"), req("lat")
        lon, lat = _number(lo, "lon", -180, 360, "°", wl), _number(la, "lat", -90, 90, "°", wa)
    else:
        (xs, wx), (ys, wy) = req("x"), req("y")
        crs_text = val["crs"][0] or xy_crs
        if not crs_text:
            raise CRSError("the patch has x/y but no CRS", where=name,
                           fix='add a crs column (e.g. "EPSG:32632") or give lon/lat')
        from pyproj import CRS, Transformer

        try:
            src = CRS.from_user_input(crs_text)
        except Exception:  # pyproj's CRSError and friends
            raise CRSError(f"unknown CRS {crs_text!r}", where=name, fix='write e.g. "EPSG:32632"') from None
        x, y = _number(xs, "x", -1e8, 1e8, "", wx), _number(ys, "y", -1e8, 1e8, "", wy)
        lon, lat = Transformer.from_crs(src, "EPSG:4326", always_xy=True).transform(x, y)
        if not (np.isfinite(lon) and np.isfinite(lat)):
            raise CRSError(f"x/y {x:g}, {y:g} are not a place in {crs_text}", where=name)
    terrain = {}
    for col, lo_, hi_, unit in (("slope_deg", 0, 70, "°"), ("aspect_deg", 0, 360, "°"),
                                ("altitude_m", -500, 9000, "m")):
        v, line = val[col]
        terrain[col] = None if v is None else _number(v, col, lo_, hi_, unit, f"{name}:{line}")
    spread_text, ws = req("spread_at")
    spread = _time(spread_text, date, timezone, ws, "spread_at")
    agent, wag = req("agent")
    try:
        get_agent(agent, catalogue)
    except CourseplanError:
        raise InputError(f"unknown agent {agent!r}", where=wag,
                         fix="use a name from `courseplan agents` (or add it in [inputs] agents)") from None
    rho_t, wr = req("density_kg_m3")
    rho = _number(rho_t, "density_kg_m3", 100, 917, "kg/m³", wr)
    lwc_t, wl_ = val["lwc_pct"]
    wet_t, ww = val["wetness"]
    if wet_t is not None and wet_t.lower().replace(" ", "-").replace("_", "-") not in WETNESS_NAMES:
        raise InputError(f"wetness {wet_t!r} is not a class", where=f"{name}:{ww}",
                         fix=f"write one of {', '.join(WETNESS_NAMES)} (Fierz et al. 2009)")
    if lwc_t is not None:
        lwc = _number(lwc_t, "lwc_pct", 0, 25, "% vol", f"{name}:{wl_}")
        wet, from_class = (wet_t.lower() if wet_t else wetness_of(lwc)), False
    elif wet_t is not None:
        wet = wet_t.lower().replace(" ", "-").replace("_", "-")
        lwc, from_class = class_lwc_pct(wet), True
    else:
        raise InputError("neither lwc_pct nor wetness is given on any row", where=name,
                         fix="give the snow's liquid water content or wetness class at spreading")
    rows = []
    for i, r in enumerate(df.to_dict("records")):
        here = f"{name}:{lines[i]}"
        d = _number(str(r["dose_g_m2"]), "dose_g_m2", 1e-6, 5000, "g/m²", here)
        t = _time(str(r["read_at"]), spread.strftime("%Y-%m-%d"), timezone, here, "read_at")
        if t <= spread:
            raise InputError(f"read at {t:%Y-%m-%d %H:%M}, not after spreading at {spread:%Y-%m-%d %H:%M}",
                             where=here, fix="read each rung after the ladder was spread (check the dates)")
        res = str(r["result"]).strip()
        method = str(r.get("method", "")).strip()
        if res.lower() in RESULTS:
            held, hardness = res.lower() == "held", ""
        elif res and method:
            held, hardness = None, res
        else:
            raise InputError(f"result {res!r} is neither held nor soft", where=here,
                             fix="write held or soft; a hardness value needs a method column (hand, penetrometer)")
        rows.append({"line": lines[i], "dose_g_m2": d, "read_at": t, "held": held, "hardness": hardness,
                     "method": method, "note": str(r.get("note", "")).strip()})
    return PatchFile(name=name, sha256=hashlib.sha256(raw).hexdigest(), lon=float(lon), lat=float(lat),
                     slope_deg=terrain["slope_deg"], aspect_deg=terrain["aspect_deg"],
                     altitude_m=terrain["altitude_m"], spread_at=spread, agent=agent, lwc_pct=float(lwc),
                     wetness=wet, lwc_from_class=from_class, density_kg_m3=rho, readings=pd.DataFrame(rows))


def terrain_at(dem_path: str | Path, lon: float, lat: float) -> tuple[float, float, float]:
    """Horn slope, aspect [deg] and elevation [m] of a DEM at a place (its nearest cell).

    Raises
    ------
    InputError
        The place is outside the DEM or on a nodata cell (and what :func:`~courseplan.io.rasters.read_dem`
        raises).
    """
    from pyproj import Transformer

    from courseplan.io.rasters import read_dem
    from courseplan.physics.terrain import slope_aspect_horn

    b = (lon, lat, lon, lat)
    dem = read_dem(dem_path, bounds=b, bounds_crs="EPSG:4326", margin_m=60.0)
    x, y = Transformer.from_crs("EPSG:4326", dem.crs, always_xy=True).transform(lon, lat)
    col, row = ~dem.transform @ (x, y)
    r, c = int(math.floor(row)), int(math.floor(col))
    z = np.asarray(dem.values, dtype=float)
    if not (1 <= r < z.shape[0] - 1 and 1 <= c < z.shape[1] - 1) or not np.all(np.isfinite(z[r - 1:r + 2, c - 1:c + 2])):
        raise InputError(f"the patch at {lon:.5f}, {lat:.5f} is outside the DEM or on its edge", where=str(dem_path),
                         fix="give slope_deg and aspect_deg in the patch file")
    dx, dy = dem.cell_size
    if dem.transform.e > 0:  # south-up: Horn wants north-up rows
        z, r = z[::-1], z.shape[0] - 1 - r
    slope, aspect = slope_aspect_horn(z[r - 1:r + 2, c - 1:c + 2], dx, dy, dtype=np.float64)
    return float(slope[1, 1]), float(aspect[1, 1]), float(z[r, c])
