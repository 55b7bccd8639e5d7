"""Read field observations of the snow (CSV or any vector point file), validating every row.

Columns (names case-insensitive): ``obs_id`` (optional), ``time`` (ISO 8601; without an offset it
is local time in ``[plan] timezone``), position as ``lon``/``lat`` (WGS84) or ``x``/``y`` (with
``[inputs] observations_crs``) or the file's point geometry, ``wetness`` (dry, moist, wet, very-wet,
soaked: Fierz et al. 2009) and/or ``lwc_pct`` (liquid water, % by volume), ``snow_temp_c``,
``density_kg_m3``, and optional ``grain`` (code of Fierz et al. 2009), ``hand_hardness`` (1–6) and
``note``.  A CSV may be UTF-8 with or without a byte-order mark, comma- or semicolon-separated
(then with decimal commas).  A bad row is reported with its line number and never dropped silently: any bad row
stops the plan, and all problems are listed at once.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
from pyproj import CRS, Transformer

from courseplan.errors import CRSError, InputError, ObservationError
from courseplan.io.files import check_readable, read_text, sniff_delimiter
from courseplan.physics.snow import WETNESS_NAMES

ICE_DENSITY = 916.7  # kg/m³ at 0 °C, IAPWS-06 (Feistel & Wagner 2006)
ALIASES = {"id": "obs_id", "name": "obs_id", "datetime": "time", "timestamp": "time", "lng": "lon",
           "long": "lon", "longitude": "lon", "latitude": "lat", "lwc": "lwc_pct", "theta_pct": "lwc_pct",
           "temperature_c": "snow_temp_c", "snow_temp": "snow_temp_c", "density": "density_kg_m3",
           "hardness": "hand_hardness", "comment": "note", "notes": "note"}


def _norm_wetness(v: str) -> str:
    return v.strip().lower().replace(" ", "-").replace("_", "-")


def _num(v) -> float | None:
    if v is None:
        return None
    if isinstance(v, float) and math.isnan(v):
        return None
    s = str(v).strip()
    if s == "" or s.lower() in ("nan", "na", "none", "-"):
        return None
    return float(s.replace(",", ".")) if s.count(",") == 1 and "." not in s else float(s)


def read_observations(path: Path, work_crs: CRS, *, timezone: str = "UTC", xy_crs: str | None = None):
    """Read and validate observations; return a GeoDataFrame in *work_crs*.

    Raises
    ------
    ObservationError
        Listing every bad row as ``file:line: what is wrong; fix``.
    """
    import geopandas as gpd

    p = check_readable(path, "observations")
    is_csv = p.suffix.lower() in (".csv", ".txt", ".tsv")
    geoms = None
    src_crs = None
    try:
        if is_csv:
            import io

            text = read_text(p, "observations")
            sep = "\t" if p.suffix.lower() == ".tsv" else sniff_delimiter(text)
            df = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, sep=sep, skipinitialspace=True)
        else:
            g = gpd.read_file(p)
            if g.crs is None:
                raise CRSError("the observations file has no CRS", where=str(p), fix="save it with a CRS")
            src_crs = CRS.from_user_input(g.crs)
            geoms = g.geometry
            df = pd.DataFrame(g.drop(columns=g.geometry.name)).astype(object)
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"cannot read the observations ({type(exc).__name__}: {str(exc).splitlines()[0]})",
                         where=str(p), fix="give a comma-separated file with a header row") from None
    except Exception as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"cannot read the observations ({type(exc).__name__})", where=str(p),
                         fix="give a CSV or a vector point file") from None
    raw_cols = [str(c).strip() for c in df.columns]
    df.columns = [ALIASES.get(c.lower(), c.lower()) for c in raw_cols]
    dup = sorted({c for c in df.columns if list(df.columns).count(c) > 1})
    if dup:
        both = [r for r, c in zip(raw_cols, df.columns, strict=True) if c in dup]
        raise InputError(f"the observations give {', '.join(dup)} more than once (columns {', '.join(both)})",
                         where=str(p), fix="keep one column of each")
    problems: list[str] = []
    if geoms is None:
        if {"lon", "lat"} <= set(df.columns):
            xcol, ycol, src_crs = "lon", "lat", CRS.from_epsg(4326)
        elif {"x", "y"} <= set(df.columns):
            if not xy_crs:
                raise CRSError("the observations have x/y columns but no CRS is given", where=str(p),
                               fix="set [inputs] observations_crs (e.g. \"EPSG:32632\") or give lon/lat columns")
            try:
                src_crs = CRS.from_user_input(xy_crs)
            except Exception:  # pyproj.exceptions.CRSError and friends
                raise CRSError(f"unknown CRS {xy_crs!r} for the observations' x/y columns",
                               where="[inputs] observations_crs", fix='write e.g. "EPSG:32632"') from None
            xcol, ycol = "x", "y"
        else:
            raise InputError("the observations have no position columns", where=str(p),
                             fix="add lon and lat (WGS84) or x and y columns")
    if "time" not in df.columns:
        raise InputError("the observations have no time column", where=str(p),
                         fix="add a time column, e.g. 2027-03-18T07:30+01:00")
    if "wetness" not in df.columns and "lwc_pct" not in df.columns:
        raise InputError("the observations have neither a wetness nor an lwc_pct column", where=str(p),
                         fix="add wetness (dry, moist, wet, very-wet, soaked) or lwc_pct")
    recs = []
    for i, row in enumerate(df.to_dict("records")):
        line = i + 2 if is_csv else i + 1
        here = f"{p.name}:{line}" if is_csv else f"{p.name} feature {i}"
        errs: list[str] = []

        def bad(msg: str, fix: str) -> None:
            errs.append(f"{here}: {msg}. Fix: {fix}.")

        def number(col: str, lo: float, hi: float, unit: str, fix: str) -> float | None:
            try:
                v = _num(row.get(col))
            except ValueError:
                bad(f"{col} {row.get(col)!r} is not a number", "write a plain number")
                return None
            if v is not None and not (lo <= v <= hi) or (v is not None and not math.isfinite(v)):
                bad(f"{col} {v:g} {unit} is outside {lo:g} … {hi:g}", fix)
                return None
            return v

        # position
        if geoms is None:
            x = number(xcol, -1e8, 1e8, "", "give the position")
            y = number(ycol, -1e8, 1e8, "", "give the position")
            if x is None or y is None:
                if not any("position" in e or xcol in e or ycol in e for e in errs):
                    bad("position is missing", f"give {xcol} and {ycol}")
            elif src_crs.is_geographic and not (-180 <= x <= 180 and -90 <= y <= 90):
                bad(f"lon/lat {x:g}, {y:g} are not degrees", "give WGS84 longitude and latitude, or x/y columns")
        else:
            gm = geoms.iloc[i]
            if gm is None or gm.is_empty or gm.geom_type != "Point":
                bad("the feature is not a point", "give point features")
                x = y = None
            else:
                x, y = gm.x, gm.y
        # time
        t = None
        traw = str(row.get("time", "") or "").strip()
        try:
            t = pd.Timestamp(traw)
            if t is pd.NaT or traw == "":
                raise ValueError
            t = t.tz_localize(timezone) if t.tzinfo is None else t
        except (ValueError, TypeError):
            bad(f"time {traw!r} cannot be read", "write ISO 8601, e.g. 2027-03-18T07:30+01:00")
            t = None
        wet_raw = str(row.get("wetness", "") or "").strip()
        wet = _norm_wetness(wet_raw) if wet_raw else None
        if wet is not None and wet not in WETNESS_NAMES:
            bad(f"wetness {wet_raw!r} is not a class", "use dry, moist, wet, very-wet or soaked")
            wet = None
        lwc = number("lwc_pct", 0.0, 100.0, "%", "liquid water content is a volume share, 0–100 %")
        if wet is None and lwc is None and not any("wetness" in e or "lwc_pct" in e for e in errs):
            bad("neither wetness nor lwc_pct is given", "give one of them")
        temp = number("snow_temp_c", -60.0, 0.5, "°C",
                      "snow cannot be warmer than 0 °C; check the thermometer or the sign")
        if temp is None and "snow_temp_c" in df.columns and not any("snow_temp_c" in e for e in errs) \
                and _blank(row.get("snow_temp_c")):
            temp = None
        if temp is not None and temp > 0:
            temp = 0.0
        if temp is not None and ((wet == "dry") or (lwc == 0.0)) and _num_safe(row.get("snow_temp_c")) > 0:
            bad(f"snow_temp_c {_num_safe(row.get('snow_temp_c')):g} °C is positive but the snow is dry",
                "dry snow is at or below 0 °C: check the temperature or the wetness")
        rho = number("density_kg_m3", 30.0, ICE_DENSITY, "kg/m³",
                     f"snow density lies between new snow (~30) and ice ({ICE_DENSITY} kg/m³)")
        hh = number("hand_hardness", 1.0, 6.0, "", "hand hardness index is 1 (fist) to 6 (ice)")
        if errs:
            problems += errs
            continue
        recs.append({"obs_id": str(row.get("obs_id") or f"row {line}"), "time": t, "x": x, "y": y,
                     "wetness": wet, "lwc_pct": lwc, "snow_temp_c": temp, "density_kg_m3": rho,
                     "grain": (str(row.get("grain") or "").strip() or None),
                     "hand_hardness": hh, "note": str(row.get("note") or ""), "line": line})
    if problems:
        n = len(problems)
        raise ObservationError(f"{n} bad observation row{'s' if n > 1 else ''}; first: {problems[0]}",
                               where=str(p), fix="correct the rows listed", problems=problems)
    if not recs:
        raise InputError("the observations file holds no rows", where=str(p),
                         fix="add rows or leave [inputs] observations out")
    out = pd.DataFrame(recs)
    tr = Transformer.from_crs(src_crs, work_crs, always_xy=True)
    X, Y = tr.transform(out["x"].to_numpy(float), out["y"].to_numpy(float))
    gdf = gpd.GeoDataFrame(out.drop(columns=["x", "y"]), geometry=gpd.points_from_xy(X, Y), crs=work_crs)
    gdf["time"] = pd.to_datetime(gdf["time"], utc=True)
    return gdf


def _blank(v) -> bool:
    return v is None or (isinstance(v, float) and np.isnan(v)) or str(v).strip() == ""


def _num_safe(v) -> float:
    try:
        x = _num(v)
    except ValueError:
        return float("nan")
    return float("nan") if x is None else x
