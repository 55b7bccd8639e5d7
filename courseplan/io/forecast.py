"""Read an hourly forecast CSV into a validated table.

Columns: ``time`` (ISO 8601, local time without offset or with an offset such as ``+01:00``),
``air_temp_c`` [°C], ``rh_pct`` [%], ``wind_m_s`` [m/s], ``cloud_fraction`` [0–1].  Every row is
checked; all problems are reported at once with their line numbers.  The file may be UTF-8 with or
without a byte-order mark, comma- or semicolon-separated (then with decimal commas, ``1,5``).
Naive local times on a daylight-saving day are resolved in the plan's time zone: the repeated
hour of the autumn change by the file's order, a time the spring change skips is refused.
Air temperatures above 35 °C, or all between 30 and 80, look like °F and are refused.  The result goes to
:func:`courseplan.stages.weather.weather_from_table`.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import pandas as pd

from courseplan.errors import InputError, MissingInputError
from courseplan.io.files import decimal_number, read_text, sniff_delimiter

__all__ = ["read_forecast_csv", "FORECAST_RANGES"]

FORECAST_RANGES: dict[str, tuple[float, float, str]] = {
    "air_temp_c": (-50.0, 35.0, "°C"),
    "rh_pct": (0.0, 100.0, "%"),
    "wind_m_s": (0.0, 60.0, "m/s"),
    "cloud_fraction": (0.0, 1.0, "fraction 0–1 (octas / 8)"),
}
"""Accepted range and unit of each value column."""

_MAX_LISTED = 8


def _localize(times: list[dt.datetime], lines: list[int], timezone: str, problems: list[str]) -> list:
    """Naive local times → UTC, the autumn's repeated hour by file order, the spring's gap refused."""
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        tz = ZoneInfo(timezone)
    except (ZoneInfoNotFoundError, ValueError):
        return times  # the settings check names the bad time zone
    out: list[dt.datetime] = []
    prev: dt.datetime | None = None
    for t, ln in zip(times, lines, strict=True):
        a = t.replace(tzinfo=tz, fold=0)
        b = t.replace(tzinfo=tz, fold=1)
        ua, ub = a.astimezone(dt.UTC), b.astimezone(dt.UTC)
        if ua.astimezone(tz).replace(tzinfo=None) != t:
            problems.append(f"line {ln}: time {t:%Y-%m-%d %H:%M} does not exist in {timezone} (the clocks "
                            "skip it when summer time starts); give the times with offsets or drop the row")
            continue
        u = ua
        if ua != ub and prev is not None and prev >= ua:
            u = ub  # the second pass through the repeated hour, as the file's order says
        out.append(u)
        prev = u
    return out


def read_forecast_csv(path: str | Path, timezone: str | None = None) -> pd.DataFrame:
    """Read and validate an hourly forecast CSV.

    Parameters
    ----------
    path
        The CSV file (UTF-8, comma- or semicolon-separated, one header row).
    timezone
        IANA zone of naive local times; when given they come back as UTC (daylight-saving days
        resolved, see the module notes), else naive.

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
    text = read_text(p, "forecast")
    delim = sniff_delimiter(text)
    rows = list(csv.reader(text.splitlines(), delimiter=delim))
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
                v = decimal_number(raw) if delim != "," else float(raw)
            except ValueError:
                problems.append(f"line {ln}: {c} {raw!r} is not a number")
                ok = False
                continue
            if not lo <= v <= hi:
                hint = " (°F? give °C)" if c == "air_temp_c" and v > hi else ""
                problems.append(f"line {ln}: {c} {v:g} is outside {lo:g}–{hi:g} {unit}{hint}")
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
    temps = values["air_temp_c"]
    if len(temps) >= 2 and all(30.0 <= v <= 80.0 for v in temps) and not problems:
        problems.append(f"every air_temp_c lies between 30 and 80 ({min(temps):g} … {max(temps):g}): °F? "
                        "air_temp_c is in °C: convert with (°F − 32) × 5/9")
    if timezone is not None and aware == {False} and not problems:
        times = _localize(times, lines, timezone, problems)
        aware = {True}
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
