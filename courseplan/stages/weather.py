"""Weather over the hold window: the :class:`Weather` data object the dosing stage uses.

The window (``[window] start``–``end`` on ``[plan] date`` in ``[plan] timezone``) is split at the
clock hours into steps (the first and last may be shorter).  Each step carries air temperature,
relative humidity, wind and cloud, and the step's share of the window's clear-sky shortwave, which
spreads each zone's window irradiation (``irradiation_wh_m2``) over the steps.

Two sources: the plan-wide constants of ``[forecast]`` (:func:`weather_from_settings`) or an hourly
forecast table (:func:`weather_from_table`, read by :func:`courseplan.io.forecast.read_forecast_csv`),
interpolated linearly in time to each step's mid-point.

The shortwave shares come from a clear-sky profile when one is given (a
:class:`courseplan.physics.solar.ClearSkyWindow`, or one weight per step); without one, from a
sinusoidal day between 06:00 and 18:00 local time (a stand-in that ignores latitude and season).
This module opens no files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from courseplan.errors import InputError, SettingsError

__all__ = ["Weather", "weather_from_settings", "weather_from_table", "window_steps"]

FORECAST_COLUMNS = ("time", "air_temp_c", "rh_pct", "wind_m_s", "cloud_fraction")


@dataclass(frozen=True, eq=False)
class Weather:
    """Hourly weather over the hold window.

    Attributes
    ----------
    hour_start, hour_end
        Start and end of each step (tz-aware :class:`pandas.DatetimeIndex`).
    air_temp_c, rh_pct, wind_m_s, cloud_fraction
        Step values: air temperature at 2 m [°C], relative humidity [%], wind [m/s], cloud [0–1].
    sw_share
        Each step's share of the window's clear-sky shortwave [-] (sums to 1).
    pressure_pa
        Air pressure at the course [Pa].
    air_temp_spread_k
        One standard deviation of the air-temperature forecast [K] (sampled for P50/P90).
    source
        Where the values came from (``"plan constants"`` or ``"forecast file <name>"``).
    sw_share_source
        Where the shortwave shares came from.
    """

    hour_start: pd.DatetimeIndex
    hour_end: pd.DatetimeIndex
    air_temp_c: np.ndarray
    rh_pct: np.ndarray
    wind_m_s: np.ndarray
    cloud_fraction: np.ndarray
    sw_share: np.ndarray
    pressure_pa: float = 85000.0
    air_temp_spread_k: float = 0.0
    source: str = "plan constants"
    sw_share_source: str = "sinusoidal day 06–18 h"

    @property
    def hours(self) -> np.ndarray:
        """Length of each step [h]."""
        return np.asarray((self.hour_end - self.hour_start).total_seconds(), dtype=float) / 3600.0

    @property
    def n_steps(self) -> int:
        """Number of steps."""
        return len(self.hour_start)

    @property
    def total_hours(self) -> float:
        """Length of the window [h]."""
        return float(self.hours.sum())

    def describe(self) -> str:
        """One line: source, ranges of the values and the spread."""
        def rng(a, fmt):
            lo, hi = float(np.min(a)), float(np.max(a))
            return format(lo, fmt) if abs(hi - lo) < 1e-9 else f"{format(lo, fmt)}…{format(hi, fmt)}"
        return (f"{self.source}: air {rng(self.air_temp_c, '.1f')} °C ±{self.air_temp_spread_k:.1f} K, "
                f"RH {rng(self.rh_pct, '.0f')} %, wind {rng(self.wind_m_s, '.1f')} m/s, "
                f"cloud {rng(self.cloud_fraction, '.2f')}, {self.pressure_pa / 100:.0f} hPa, "
                f"{self.n_steps} steps over {self.total_hours:.2f} h")


def _tz(settings) -> str:
    return settings.plan.timezone or "UTC"


def window_steps(settings, date: str | None = None) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Step starts and ends of the hold window, split at the clock hours (tz-aware).

    Parameters
    ----------
    settings
        Plan settings (``window``, ``plan.date``, ``plan.timezone``).
    date
        Date to use when the plan has none (YYYY-MM-DD); default 2000-01-01.
    """
    day = settings.plan.date or date or "2000-01-01"
    tz = _tz(settings)
    try:
        t0 = pd.Timestamp(f"{day} {settings.window.start}").tz_localize(tz)
        t1 = pd.Timestamp(f"{day} {settings.window.end}").tz_localize(tz)
    except Exception as exc:  # bad zone names or times
        raise SettingsError(f"cannot place the window {settings.window.start}–{settings.window.end} on {day} "
                            f"in {tz}: {exc}", where="[window]",
                            fix="check [plan] date and timezone and the HH:MM times") from None
    if t1 <= t0:
        raise SettingsError("the window ends before it starts", where="[window]")
    inner = pd.date_range(t0.ceil("h"), t1.floor("h"), freq="h")
    edges = [t0] + [t for t in inner if t0 < t < t1] + [t1]
    idx = pd.DatetimeIndex(edges)
    return idx[:-1], idx[1:]


def _local_hours(ts: pd.DatetimeIndex) -> np.ndarray:
    return np.asarray(ts.hour + ts.minute / 60.0 + ts.second / 3600.0, dtype=float)


def _sw_shares(start: pd.DatetimeIndex, end: pd.DatetimeIndex, profile: Any) -> tuple[np.ndarray, str]:
    dur = np.asarray((end - start).total_seconds(), dtype=float) / 3600.0
    if profile is None:
        a = np.clip(_local_hours(start), 6.0, 18.0)
        b = np.clip(_local_hours(end), 6.0, 18.0)
        b = np.where(_local_hours(end) < _local_hours(start), 18.0, b)  # window past midnight
        wts = 12.0 / math.pi * (np.cos(math.pi * (a - 6.0) / 12.0) - np.cos(math.pi * (b - 6.0) / 12.0))
        src = "sinusoidal day 06–18 h (no clear-sky profile given)"
    elif hasattr(profile, "times") and hasattr(profile, "ghi_w_m2"):
        times = pd.DatetimeIndex(profile.times)
        if times.tz is None:
            times = times.tz_localize(start.tz)
        ghi = np.asarray(profile.ghi_w_m2, dtype=float)
        step_h = np.broadcast_to(np.asarray(getattr(profile, "step_hours", 1.0), dtype=float), ghi.shape)
        wts = np.zeros(len(start))
        for k, (s, e) in enumerate(zip(start, end, strict=True)):
            sel = (times >= s) & (times < e)
            wts[k] = float(np.sum(ghi[sel] * step_h[sel]))
        src = "clear-sky profile (Ineichen–Perez GHI over the window)"
    else:
        wts = np.asarray(profile, dtype=float).ravel()
        if wts.shape != dur.shape or np.any(~np.isfinite(wts)) or np.any(wts < 0):
            raise InputError(f"clear-sky profile needs {len(dur)} non-negative weights, got {wts.shape[0]}",
                             where="clear_sky_profile", fix="give one weight per window step")
        src = "clear-sky weights given per step"
    total = float(np.sum(wts))
    if not total > 0:
        wts, src = dur.copy(), src + "; sun below the horizon, shares by duration"
        total = float(np.sum(wts))
    return np.asarray(wts, dtype=float) / total, src


def _pressure(settings) -> float:
    hpa = getattr(settings.forecast, "pressure_hpa", None)
    return float(hpa) * 100.0 if hpa else 85000.0


def uniform_steps(t0: pd.Timestamp, t1: pd.Timestamp, n: int) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """*n* equal steps from *t0* to *t1* (tz-aware): step starts and ends."""
    edges = pd.DatetimeIndex([t0 + (t1 - t0) * (k / n) for k in range(n + 1)])
    return edges[:-1], edges[1:]


def weather_from_settings(settings, clear_sky_profile: Any = None, *, steps=None) -> Weather:
    """Weather over the window from the ``[forecast]`` constants of the plan.

    Parameters
    ----------
    settings
        Plan settings.
    clear_sky_profile
        A :class:`~courseplan.physics.solar.ClearSkyWindow` of the window, or one weight per
        step (see :func:`window_steps`), or None for the sinusoidal stand-in.
    steps
        Step starts and ends to use instead of the window's clock hours (:func:`uniform_steps`).
    """
    start, end = window_steps(settings) if steps is None else steps
    fc = settings.forecast
    n = len(start)
    share, src = _sw_shares(start, end, clear_sky_profile)
    return Weather(hour_start=start, hour_end=end, air_temp_c=np.full(n, float(fc.air_temp_c)),
                   rh_pct=np.full(n, float(fc.rh_pct)), wind_m_s=np.full(n, float(fc.wind_m_s)),
                   cloud_fraction=np.full(n, float(fc.cloud_fraction)), sw_share=share,
                   pressure_pa=_pressure(settings), air_temp_spread_k=float(fc.air_temp_spread_k),
                   source="plan constants [forecast]", sw_share_source=src)


def weather_from_table(df: pd.DataFrame, settings, clear_sky_profile: Any = None, *,
                       source: str = "forecast file", max_gap_h: float = 1.0, steps=None) -> Weather:
    """Weather over the window from an hourly forecast table.

    Values are interpolated linearly in time to each window step's mid-point; the table may stop
    up to ``max_gap_h`` short of the window's ends (the edge value is held there).

    Parameters
    ----------
    df
        Columns ``time`` (timestamps; naive ones are local time in ``[plan] timezone``),
        ``air_temp_c``, ``rh_pct``, ``wind_m_s``, ``cloud_fraction``.
    settings
        Plan settings (window, date, timezone, forecast spread and pressure).
    clear_sky_profile
        As in :func:`weather_from_settings`.
    source
        Name of the table for messages and provenance, e.g. ``"forecast file forecast.csv"``.
    max_gap_h
        Largest allowed distance between the window's ends and the table's first/last time [h].

    Raises
    ------
    InputError
        Missing columns, or a table that does not cover the window.
    """
    missing = [c for c in FORECAST_COLUMNS if c not in df.columns]
    if missing:
        raise InputError(f"forecast table lacks column(s) {', '.join(missing)}", where=source,
                         fix=f"give the columns {', '.join(FORECAST_COLUMNS)}")
    if len(df) == 0:
        raise InputError("forecast table has no rows", where=source)
    tz = _tz(settings)
    times = pd.DatetimeIndex(pd.to_datetime(df["time"]))
    times = times.tz_localize(tz) if times.tz is None else times.tz_convert(tz)
    date = None if settings.plan.date else str(times[0].date())
    start, end = window_steps(settings, date) if steps is None else steps
    t_sec = times.as_unit("ns").asi8 / 1e9
    order = np.argsort(t_sec)
    t_sec = t_sec[order]
    w0, w1 = start[0].as_unit("ns").value / 1e9, end[-1].as_unit("ns").value / 1e9
    gap = max_gap_h * 3600.0
    if t_sec[0] > w0 + gap or t_sec[-1] < w1 - gap:
        raise InputError(f"the forecast covers {times.min():%Y-%m-%d %H:%M}–{times.max():%H:%M} "
                         f"but the window "
                         f"is {start[0]:%Y-%m-%d %H:%M}–{end[-1]:%H:%M} ({tz})", where=source,
                         fix="give forecast rows for the whole hold window and the race date")
    mid = (start.as_unit("ns").asi8 / 1e9 + end.as_unit("ns").asi8 / 1e9) / 2.0
    vals = {}
    for c in FORECAST_COLUMNS[1:]:
        y = np.asarray(df[c], dtype=float)[order]
        vals[c] = np.interp(mid, t_sec, y)
    share, src = _sw_shares(start, end, clear_sky_profile)
    return Weather(hour_start=start, hour_end=end, air_temp_c=vals["air_temp_c"], rh_pct=vals["rh_pct"],
                   wind_m_s=vals["wind_m_s"], cloud_fraction=np.clip(vals["cloud_fraction"], 0.0, 1.0),
                   sw_share=share, pressure_pa=_pressure(settings),
                   air_temp_spread_k=float(settings.forecast.air_temp_spread_k), source=source,
                   sw_share_source=src)
