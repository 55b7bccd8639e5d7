"""Read an hourly forecast CSV into a validated table.

Columns: ``time`` (ISO 8601, local time without offset or with an offset such as ``+01:00``),
``air_temp_c`` [°C], ``rh_pct`` [%], ``wind_m_s`` [m/s], ``cloud_fraction`` [0–1].  Every row is
checked; all problems are reported at once with their line numbers.  The result goes to
:func:`courseplan.stages.weather.weather_from_table`.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import pandas as pd

from courseplan.errors import InputError, MissingInputError

__all__ = ["read_forecast_csv", "FORECAST_RANGES"]

FORECAST_RANGES: dict[str, tuple[float, float, str]] = {
    "air_temp_c": (-50.0, 45.0, "°C"),
    "rh_pct": (0.0, 100.0, "%"),
    "wind_m_s": (0.0, 60.0, "m/s"),
    "cloud_fraction": (0.0, 1.0, "fraction 0–1 (octas / 8)"),
}
"""Accepted range and unit of each value column."""

_MAX_LISTED = 8


def read_forecast_csv(path: str | Path) -> pd.DataFrame:
    """Read and validate an hourly forecast CSV.

    Parameters
    ----------
    path
        The CSV file (UTF-8, comma-separated, one header row).

    Returns
    -------
    pandas.DataFrame
        Columns ``time`` (tz-aware when the file gives offsets, else naive local time) and the four
        value columns as floats, sorted by time; ``attrs["source"]`` names the file.

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputError
        Missing columns, unreadable or out-of-range values, mixed offsets and local times, or
        repeated times; the message lists the line numbers.
    """
    p = Path(path)
    if not p.is_file():
        raise MissingInputError(f"forecast file {p} does not exist", where="[inputs] forecast",
                                fix="check the path (relative paths start at the plan file's folder)")
    try:
        text = p.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read forecast file: {exc}", where=str(p)) from None
    rows = list(csv.reader(text.splitlines()))
    if not rows:
        raise InputError("forecast file is empty", where=str(p), fix="add a header row and hourly rows")
    header = [h.strip() for h in rows[0]]
    need = ["time", *FORECAST_RANGES]
    missing = [c for c in need if c not in header]
    if missing:
        raise InputError(f"forecast file lacks column(s) {', '.join(missing)} (has {', '.join(header)})",
                         where=str(p), fix=f"give the header {','.join(need)}")
    col = {c: header.index(c) for c in need}
    problems: list[str] = []
    times: list[dt.datetime] = []
    values: dict[str, list[float]] = {c: [] for c in FORECAST_RANGES}
    lines: list[int] = []
    for ln, row in enumerate(rows[1:], start=2):
        if not row or all(not c.strip() for c in row):
            continue
        if len(row) < len(header):
            problems.append(f"line {ln}: {len(row)} fields, expected {len(header)}")
            continue
        raw_t = row[col["time"]].strip()
        try:
            t = dt.datetime.fromisoformat(raw_t.replace("Z", "+00:00"))
        except ValueError:
            problems.append(f"line {ln}: time {raw_t!r} is not ISO 8601 (e.g. 2027-03-18T10:00+01:00)")
            continue
        ok = True
        vals = {}
        for c, (lo, hi, unit) in FORECAST_RANGES.items():
            raw = row[col[c]].strip()
            try:
                v = float(raw)
            except ValueError:
                problems.append(f"line {ln}: {c} {raw!r} is not a number")
                ok = False
                continue
            if not lo <= v <= hi:
                problems.append(f"line {ln}: {c} {v:g} is outside {lo:g}–{hi:g} {unit}")
                ok = False
            vals[c] = v
        if ok:
            times.append(t)
            lines.append(ln)
            for c, v in vals.items():
                values[c].append(v)
    aware = {t.tzinfo is not None for t in times}
    if len(aware) > 1:
        problems.append("some times carry an offset and some do not; give all in the same form")
    if not times and not problems:
        problems.append("no data rows")
    if not problems:
        seen: dict[dt.datetime, int] = {}
        for t, ln in zip(times, lines, strict=True):
            if t in seen:
                problems.append(f"line {ln}: time {t.isoformat()} repeats line {seen[t]}")
            seen.setdefault(t, ln)
    if problems:
        more = f" (and {len(problems) - _MAX_LISTED} more)" if len(problems) > _MAX_LISTED else ""
        listed = "; ".join(problems[:_MAX_LISTED]) + more
        raise InputError(f"{len(problems)} problem(s) in the forecast: {listed}",
                         where=str(p), fix="correct the rows named")
    if aware == {True}:
        tcol = pd.DatetimeIndex(pd.to_datetime([t.astimezone(dt.UTC) for t in times], utc=True))
    else:
        tcol = pd.DatetimeIndex(pd.to_datetime(times))
    df = pd.DataFrame({"time": tcol, **values}).sort_values("time").reset_index(drop=True)
    df.attrs["source"] = f"forecast file {p.name}"
    return df
