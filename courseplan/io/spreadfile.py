"""Replan files: the spread records in, the morning plan's folder in, the replan folder out.

Spread records (CSV, names case-insensitive): ``zone_id``, ``time`` (``HH:MM`` on the race day or
ISO 8601; without an offset local time in ``[plan] timezone``) and the salt spread as ``kg`` (on the
whole zone) or ``g_m2``.  One row per pass spread on a zone.  Every bad row is refused (one line for
the first, all listed with ``--debug``): nothing is written.
"""

from __future__ import annotations

import io
import json
import re
from pathlib import Path

import numpy as np
import pandas as pd

from courseplan.errors import InputError, ObservationError
from courseplan.io.files import check_readable, read_text, sniff_delimiter

_CLOCK = re.compile(r"\d{1,2}:\d{2}")


def _time(raw: str, date: str, timezone: str) -> pd.Timestamp:
    t = pd.Timestamp(f"{date} {raw}" if _CLOCK.fullmatch(raw) else raw)
    if pd.isna(t):
        raise ValueError(raw)
    return t.tz_localize(timezone) if t.tzinfo is None else t.tz_convert(timezone)


def read_spread(path, *, date: str, timezone: str, at: pd.Timestamp, zone_ids) -> pd.DataFrame:
    """Read the spread records: ``zone_id``, ``time`` (tz-aware), ``kg``, ``g_m2`` (NaN where not given).

    Raises
    ------
    ObservationError
        Listing every bad row: unknown zone, time after *at*, neither kg nor g_m2, bad numbers.
    """
    p = check_readable(Path(path), "spread records")
    text = read_text(p, "spread records")
    try:
        df = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, sep=sniff_delimiter(text),
                         skipinitialspace=True)
    except (pd.errors.ParserError, ValueError):
        raise InputError("cannot read the spread records", where=str(p),
                         fix="give a CSV with zone_id, time and kg or g_m2 columns") from None
    df.columns = [str(c).strip().lower() for c in df.columns]
    for col in ("zone_id", "time"):
        if col not in df.columns:
            raise InputError(f"the spread records have no {col} column", where=str(p),
                             fix="give zone_id, time and kg or g_m2 columns")
    if "kg" not in df.columns and "g_m2" not in df.columns:
        raise InputError("the spread records have neither a kg nor a g_m2 column", where=str(p),
                         fix="add kg (on the whole zone) or g_m2 for each pass spread")
    known = {int(z) for z in zone_ids}
    rows, problems = [], []
    for i, r in enumerate(df.to_dict("records")):
        here = f"{p.name}:{i + 2}"
        errs = []
        try:
            zid = int(str(r["zone_id"]).strip())
            if zid not in known:
                errs.append(f"zone {zid} is not a zone of this plan. Fix: use the zone ids of the morning plan "
                            f"({min(known)}–{max(known)})")
        except ValueError:
            zid = None
            errs.append(f"zone_id {r['zone_id']!r} is not a number. Fix: give the zone's id")
        try:
            t = _time(str(r["time"]).strip(), date, timezone)
            if t > at:
                errs.append(f"time {t:%H:%M} is after --at {at:%H:%M}. Fix: record only what was spread by then")
        except (ValueError, TypeError):
            t = None
            errs.append(f"time {r['time']!r} cannot be read. Fix: write HH:MM or ISO 8601")
        vals = {}
        for c in ("kg", "g_m2"):
            raw = str(r.get(c, "") or "").strip().replace(",", ".")
            if raw:
                try:
                    vals[c] = float(raw)
                    if not vals[c] >= 0:
                        raise ValueError
                except ValueError:
                    errs.append(f"{c} {raw!r} is not an amount. Fix: give a number, 0 or more")
        if not vals and not errs:
            errs.append("neither kg nor g_m2 is given. Fix: give one of them")
        if len(vals) == 2:
            errs.append("both kg and g_m2 are given. Fix: give one of them")
        if errs:
            problems += [f"{here}: {e}" for e in errs]
            continue
        rows.append({"zone_id": zid, "time": t, "kg": vals.get("kg", float("nan")),
                     "g_m2": vals.get("g_m2", float("nan")), "line": i + 2})
    if problems:
        n = len(problems)
        raise ObservationError(f"{n} bad spread record{'s' if n > 1 else ''}; first: {problems[0]}", where=str(p),
                               fix="correct the rows listed", problems=problems)
    return pd.DataFrame(rows, columns=["zone_id", "time", "kg", "g_m2", "line"])


def read_previous(folder) -> dict:
    """The morning plan's folder: its ``zones`` and ``passes`` (times parsed) and its plan version."""
    import pyogrio

    d = Path(folder)
    gpkg = check_readable(d / "zones.gpkg", "previous plan")
    try:
        zones = pyogrio.read_dataframe(gpkg, layer="zones", read_geometry=False)
        passes = pyogrio.read_dataframe(gpkg, layer="passes", read_geometry=False)
    except Exception as exc:  # pyogrio's errors: a file that is not a plan's GeoPackage
        raise InputError(f"cannot read the zones and passes of the previous plan ({type(exc).__name__})",
                         where=str(gpkg), fix="give the folder a plan or replan wrote") from None
    for c in ("spread_at", "hard_from", "hard_until"):
        if c in passes.columns:
            passes[c] = pd.to_datetime(passes[c].replace("", None), utc=True)
    version = None
    if (d / "summary.json").exists():
        try:
            version = json.loads(read_text(d / "summary.json", "previous summary")).get("plan_version")
        except ValueError:
            version = None
    return {"zones": zones, "passes": passes, "plan_version": version}


def write_replan(result, out_dir, *, extra: dict, tables: dict) -> list[Path]:
    """Write a replan folder, all or nothing: the plan writers' files, *extra* fields in summary.json,
    and each of *tables* (name → DataFrame) as ``name.csv`` (:func:`courseplan.io.outputs.write_outputs`)."""
    from courseplan.io.outputs import write_outputs

    return write_outputs(result, Path(out_dir), summary_extra=extra, tables=tables)


def replan_tables(result, at, sp, hold, seen, bags0, bag_kg: float, crews):
    """Per zone: top-up, leave alone, soft without a top-up, or no salt; per depot: bags left and needed."""
    z, sched = result.zones, result.schedule
    nxt = next((r for r in sched.runs if r.start > at), None)
    tops = result.passes[~result.passes["slot"].str.startswith("spread before")]
    first = tops.sort_values("spread_at").groupby("zone_id").first()
    kg_spread = sp.groupby("zone_id")["kg"].sum()
    crew_of = dict(zip(bags0["zone_id"].astype(int), bags0["crew"].astype(int), strict=True))
    rows = []
    for r, h, s in zip(z.itertuples(), hold, seen, strict=True):
        t = first.loc[r.zone_id] if r.zone_id in first.index else None
        held = h == "end of day" or (pd.notna(h) and (nxt is None or h >= nxt.end))
        status = ("top-up" if t is not None else "leave alone" if held else
                  "no salt" if r.verdict not in ("treat", "treat-in-passes", "slush-risk") else "soft, no top-up")
        rows.append({"zone_id": int(r.zone_id), "crew": crew_of.get(int(r.zone_id), 0), "status": status, "observed": s,
                     "spread_kg": round(float(kg_spread.get(r.zone_id, 0.0)), 1),
                     "hard_until_now": h if isinstance(h, str) else "soft" if pd.isna(h) else f"{h:%H:%M}",
                     "topup_at": "" if t is None else f"{t['spread_at']:%H:%M}",
                     "dose_g_m2": round(float(r.dose_g_m2), 1), "product_kg": round(float(r.product_kg), 1),
                     "bags": int(r.bags)})
    topups = pd.DataFrame(rows)
    b0 = bags0.assign(crew=bags0["crew"].astype(int)).groupby("crew")["bags"].sum()
    used = topups.groupby("crew")["spread_kg"].sum()
    need = topups.groupby("crew")["bags"].sum()
    dep = crews.set_index("crew")
    d = []
    for c in sorted((set(b0.index) | set(need.index)) - {0}):
        left = int(b0.get(c, 0)) - int(np.ceil(used.get(c, 0.0) / bag_kg - 1e-9))
        d.append({"crew": int(c), "depot_x": round(float(dep["depot_x"].get(c, np.nan)), 1),
                  "depot_y": round(float(dep["depot_y"].get(c, np.nan)), 1), "bags_morning": int(b0.get(c, 0)),
                  "bags_used": int(b0.get(c, 0)) - left, "bags_left": left, "bags_needed": int(need.get(c, 0)),
                  "bags_short": max(0, int(need.get(c, 0)) - left)})
    return topups, pd.DataFrame(d)
