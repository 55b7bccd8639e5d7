"""Race-day schedule: course inspection and runs, read from the plan file's ``[race]`` table.

The schedule times the salting passes (design note *dosing-model*, "Timing from the race"): pass 1
goes in before inspection, pass k ≥ 2 in the break before run k.  This module is pure: it gets the
raw ``[race]`` mapping, the plan's date and time zone, and returns tz-aware times.  Format::

    [race]
    inspection = ["08:15", "09:00"]                   # course inspection from, to
    runs = [["09:30", "10:45"], ["12:30", "13:45"]]   # each run: start, expected end
    # a run may also be a table: {start = "09:30", end = "10:45"}

A time is ``"HH:MM"`` on the plan's date or an explicit local ``"YYYY-MM-DDTHH:MM"`` (needed past
midnight, at most one day from the race date).  On the autumn clock change a repeated local time is
read as its first occurrence (a note says so); an offset such as ``"2027-10-31T02:30+01:00"``
picks the second.  A local time that does not exist (spring forward) is refused.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any
from zoneinfo import ZoneInfo, available_timezones

import pandas as pd

from .errors import SettingsError

MAX_RUNS = 10
"""Most runs one race day may have."""

_KEYS = ("inspection", "runs")
_INSPECTION_EX = 'inspection = ["08:15", "09:00"]'
_RUNS_EX = 'runs = [["09:30", "10:45"], ["12:30", "13:45"]]'
_RUN_EX = '["09:30", "10:45"] or {start = "09:30", end = "10:45"}'
_CLOCK = re.compile(r"(\d{1,2}):(\d{2})(?::(\d{2}))?")
_STAMP = re.compile(r"(\d{4}-\d{2}-\d{2})[T ](\d{2}):(\d{2})(?::(\d{2}))?(Z|[+-]\d{2}:?\d{2})?")


def _suggest(name: str, valid: tuple[str, ...] | list[str]) -> str:
    near = difflib.get_close_matches(name, list(valid), n=1, cutoff=0.5)
    return f"did you mean {near[0]!r}?" if near else "valid keys: " + ", ".join(valid)


@dataclass(frozen=True)
class Run:
    """One race run: its number (1-based), start and expected end (tz-aware)."""

    number: int
    start: pd.Timestamp
    end: pd.Timestamp


@dataclass(frozen=True)
class PassSlot:
    """When one salting pass can go in; slot 1 is before inspection, slot k ≥ 2 the break before run k."""

    number: int
    label: str                      # "before inspection", "break before run k"
    run: int                        # the run the pass serves
    opens: pd.Timestamp | None      # end of the previous run; None for slot 1
    deadline: pd.Timestamp          # hard by then: inspection start, or the start of run k
    must_hold_until: pd.Timestamp   # end of the run served
    short_break: bool               # break shorter than τ: the pass cannot act before the run


def _clock(ts: pd.Timestamp, day: dt.date) -> str:
    shift = (ts.date() - day).days
    return f"{ts:%H:%M}" + (f" {shift:+d} d" if shift else "")


@dataclass(frozen=True)
class RaceSchedule:
    """The race day: inspection and runs in the plan's time zone, with notes on how times were read."""

    date: str
    timezone: str
    inspection_from: pd.Timestamp
    inspection_to: pd.Timestamp
    runs: tuple[Run, ...]
    notes: tuple[str, ...] = ()

    @property
    def first_start(self) -> pd.Timestamp:
        """Start of run 1."""
        return self.runs[0].start

    @property
    def last_end(self) -> pd.Timestamp:
        """Expected end of the last run."""
        return self.runs[-1].end

    @property
    def breaks(self) -> list[tuple[int, pd.Timestamp, pd.Timestamp]]:
        """Breaks between runs as ``(before_run_number, from, to)``."""
        return [(b.number, a.end, b.start) for a, b in zip(self.runs, self.runs[1:], strict=False)]

    def local_hhmm(self, ts: pd.Timestamp) -> str:
        """Return a tz-aware time as local ``HH:MM`` in the schedule's zone."""
        return f"{pd.Timestamp(ts).tz_convert(self.timezone):%H:%M}"

    def day_shift(self, ts: pd.Timestamp) -> int:
        """Calendar days between the local date of *ts* and the race date (0: same day, 1: next day)."""
        return (pd.Timestamp(ts).tz_convert(self.timezone).date() - dt.date.fromisoformat(self.date)).days

    def clock(self, ts: pd.Timestamp) -> str:
        """Return local ``HH:MM``, with ``" +1 d"`` (or ``" -1 d"``) only when on another day."""
        return _clock(pd.Timestamp(ts).tz_convert(self.timezone), dt.date.fromisoformat(self.date))

    def describe(self) -> str:
        """Return one line for outputs, e.g. ``race 2027-03-10 (Europe/Zurich): inspection …``."""
        runs = ", ".join(f"run {r.number} {self.clock(r.start)}–{self.clock(r.end)}" for r in self.runs)
        return (f"race {self.date} ({self.timezone}): inspection {self.clock(self.inspection_from)}–"
                f"{self.clock(self.inspection_to)}, {runs}")

    def to_dict(self) -> dict[str, Any]:
        """Return plain data with ISO 8601 times carrying their UTC offsets."""
        return {"date": self.date, "timezone": self.timezone,
                "inspection": [self.inspection_from.isoformat(), self.inspection_to.isoformat()],
                "runs": [{"number": r.number, "start": r.start.isoformat(), "end": r.end.isoformat()}
                         for r in self.runs],
                "notes": list(self.notes)}


def _race_date(date: str | None) -> dt.date:
    if date is None:
        raise SettingsError("the race schedule needs the race date", where="[plan] date",
                            fix='add date = "YYYY-MM-DD" to [plan], e.g. date = "2027-03-10"')
    if isinstance(date, dt.date) and not isinstance(date, dt.datetime):  # unquoted TOML date
        return date
    if isinstance(date, str) and re.fullmatch(r"\d{4}-\d{2}-\d{2}", date):
        try:
            return dt.date.fromisoformat(date)
        except ValueError:
            pass
    raise SettingsError(f"date {date!r} is not a YYYY-MM-DD date", where="[plan] date",
                        fix='write it like "2027-03-10"')


def _zone(name: str) -> ZoneInfo:
    try:
        return ZoneInfo(name)
    except (KeyError, ValueError, TypeError, OSError):
        zones = {z.lower(): z for z in available_timezones()}
        near = difflib.get_close_matches(str(name).lower(), list(zones), n=1, cutoff=0.5)
        raise SettingsError(f"unknown time zone {name!r}", where="[plan] timezone",
                            fix=(f"did you mean {zones[near[0]]!r}?" if near else
                                 "use an IANA zone name such as Europe/Zurich")) from None


def _gap_error(wall: pd.Timestamp, tz: ZoneInfo, where: str) -> SettingsError:
    after = wall.tz_localize(tz, nonexistent="shift_forward")
    before = (after - pd.Timedelta(seconds=1)).tz_convert(tz)
    jump_from = after.tz_localize(None) - (after.utcoffset() - before.utcoffset())
    return SettingsError(f"{wall:%Y-%m-%d %H:%M} does not exist in {tz.key}: the clock jumps from "
                         f"{jump_from:%H:%M} to {after:%H:%M}", where=where,
                         fix=f"give a time before {jump_from:%H:%M} or from {after:%H:%M} on; those exist")


def _parse_time(value: Any, day: dt.date, tz: ZoneInfo, where: str,
                notes: list[str]) -> tuple[pd.Timestamp, bool]:
    """Read one time; return it tz-aware and whether it carried its own date."""
    if isinstance(value, dt.datetime | dt.time):  # unquoted TOML date-time or time
        value = value.isoformat()
    bad = SettingsError(f"cannot read time {value!r}", where=where,
                        fix='write "HH:MM" on the race day or "YYYY-MM-DDTHH:MM", e.g. "09:30"')
    if not isinstance(value, str):
        raise bad
    text = value.strip()
    if m := _CLOCK.fullmatch(text):
        date, (hh, mm, ss), offset, explicit = day, m.groups(), None, False
    elif m := _STAMP.fullmatch(text):
        try:
            date = dt.date.fromisoformat(m[1])
        except ValueError:
            raise bad from None
        hh, mm, ss, offset, explicit = m[2], m[3], m[4], m[5], True
    else:
        raise bad
    if int(hh) > 23 or int(mm) > 59 or int(ss or 0) > 59:
        raise bad
    if abs((date - day).days) > 1:
        raise SettingsError(f"{text!r} is {abs((date - day).days)} days from the race date {day}",
                            where=where, fix="give a date within one day of the race date")
    wall = pd.Timestamp(date.year, date.month, date.day, int(hh), int(mm), int(ss or 0))
    first = wall.tz_localize(tz, ambiguous=True, nonexistent="NaT")
    if pd.isna(first):
        raise _gap_error(wall, tz, where)
    second = wall.tz_localize(tz, ambiguous=False, nonexistent="NaT")
    if offset is not None:
        for cand in (first, second):
            if cand.utcoffset() == dt.datetime.fromisoformat(text).utcoffset():
                return cand, explicit
        used = " or ".join(dict.fromkeys(c.isoformat()[-6:] for c in (first, second)))
        raise SettingsError(f"{text!r}: {tz.key} is at UTC{used} at that local time, not {offset}",
                            where=where, fix="drop the offset or give the zone's own one")
    if second != first:
        summer = " (summer time)" if first.dst() else ""
        notes.append(f"{where}: {wall:%Y-%m-%d %H:%M} happens twice in {tz.key}; read as the first, "
                     f"UTC{first.isoformat()[-6:]}{summer}; write \"{wall:%Y-%m-%dT%H:%M}"
                     f"{second.isoformat()[-6:]}\" for the second")
    return first, explicit


def _pair(value: Any, names: tuple[str, str], where: str, example: str) -> tuple[Any, Any]:
    if isinstance(value, Mapping):
        for key in value:
            if key not in names:
                raise SettingsError(f"unknown key {key!r}", where=where, fix=_suggest(str(key), names))
        for key in names:
            if key not in value:
                raise SettingsError(f"key {key!r} is missing", where=where, fix=f"write {example}")
        return value[names[0]], value[names[1]]
    if isinstance(value, list | tuple) and len(value) == 2:
        return value[0], value[1]
    raise SettingsError(f"expected [{names[0]}, {names[1]}], got {value!r}", where=where,
                        fix=f"write {example}")


def schedule_from_mapping(race: Mapping[str, Any] | None, *, date: str | None, timezone: str,
                          where: str = "[race]") -> RaceSchedule:
    """Build the race schedule from the plan file's ``[race]`` table.

    Parameters
    ----------
    race
        The raw table (``inspection`` and ``runs``), or ``None`` when the plan file has none.
    date
        Race date ``YYYY-MM-DD`` (``[plan] date``).
    timezone
        IANA zone of the times (``[plan] timezone``), e.g. ``Europe/Zurich``.
    where
        Name of the table in messages.

    Returns
    -------
    RaceSchedule

    Raises
    ------
    SettingsError
        One line naming the key and the fix, for any missing, unknown or inconsistent entry.
    """
    if race is None:
        raise SettingsError("the plan has no race schedule", where=where,
                            fix=f"add a [race] table with {_INSPECTION_EX} and {_RUNS_EX}")
    if not isinstance(race, Mapping):
        raise SettingsError(f"expected a table, got {race!r}", where=where,
                            fix=f"write [race] with {_INSPECTION_EX} and {_RUNS_EX}")
    for key in race:
        if key not in _KEYS:
            raise SettingsError(f"unknown key {key!r}", where=where, fix=_suggest(str(key), _KEYS))
    for key, example in zip(_KEYS, (_INSPECTION_EX, _RUNS_EX), strict=True):
        if key not in race:
            raise SettingsError(f"key {key!r} is missing", where=where, fix=f"add {example}")
    day, tz, notes = _race_date(date), _zone(timezone), []
    w_insp = f"{where} inspection"
    a, b = _pair(race["inspection"], ("from", "to"), w_insp, _INSPECTION_EX)
    i0, _ = _parse_time(a, day, tz, f"{w_insp} from", notes)
    i1, _ = _parse_time(b, day, tz, f"{w_insp} to", notes)
    if i1 <= i0:
        raise SettingsError(f"inspection ends at {_clock(i1, day)}, not after it starts at {_clock(i0, day)}",
                            where=w_insp, fix=f"give [from, to] with 'to' later, e.g. {_INSPECTION_EX}")
    raw, w_runs = race["runs"], f"{where} runs"
    if not isinstance(raw, list | tuple):
        raise SettingsError(f"expected a list of runs, got {raw!r}", where=w_runs, fix=f"write {_RUNS_EX}")
    if not raw:
        raise SettingsError("no runs given", where=w_runs, fix=f"add each run's start and end: {_RUNS_EX}")
    if len(raw) > MAX_RUNS:
        raise SettingsError(f"{len(raw)} runs given, at most {MAX_RUNS} are planned", where=w_runs,
                            fix=f"give at most {MAX_RUNS} runs; plan a longer day as two plans")
    if len(raw) == 2 and all(isinstance(v, str) for v in raw):
        raise SettingsError(f"expected a list of runs, got {list(raw)!r}", where=w_runs,
                            fix=f'a single run still needs the outer brackets: runs = [{list(raw)!r}]'
                            .replace("'", '"'))
    runs: list[Run] = []
    for k, item in enumerate(raw, start=1):
        w = f"{w_runs}: run {k}"
        a, b = _pair(item, ("start", "end"), w, _RUN_EX)
        start, s_explicit = _parse_time(a, day, tz, f"{w} start", notes)
        end, e_explicit = _parse_time(b, day, tz, f"{w} end", notes)
        if end <= start:
            fix = "give an end later than the start"
            if end < start and not (s_explicit or e_explicit):
                fix = (f'a run over midnight needs dates: end = "YYYY-MM-DDTHH:MM", here '
                       f'"{day + dt.timedelta(days=1)}T{end:%H:%M}"')
            raise SettingsError(f"run {k} ends at {_clock(end, day)}, not after its start "
                                f"{_clock(start, day)}", where=f"{w} end", fix=fix)
        if runs and start < runs[-1].end:
            prev = runs[-1]
            raise SettingsError(f"run {k} starts at {_clock(start, day)}, before run {k - 1} ends at "
                                f"{_clock(prev.end, day)}", where=f"{w} start",
                                fix=f"list the runs in order; start run {k} at or after run {k - 1}'s end")
        if k == 1 and i1 > start:
            raise SettingsError(f"inspection ends at {_clock(i1, day)}, after run 1 starts at "
                                f"{_clock(start, day)}", where=w_insp,
                                fix="end the inspection by run 1's start, or correct run 1's start")
        runs.append(Run(k, start, end))
    return RaceSchedule(day.isoformat(), tz.key, i0, i1, tuple(runs), tuple(notes))


def pass_slots(schedule: RaceSchedule, tau_min: float) -> tuple[PassSlot, ...]:
    """Slots for the salting passes: one before inspection, one in each break.

    Parameters
    ----------
    schedule
        The race day.
    tau_min
        τ, the time the salt acts in the layer [min]; a break shorter than τ is flagged
        ``short_break`` (the slot is kept for the caller to report).

    Returns
    -------
    tuple of PassSlot
        In time order; slot k ≥ 2 serves run k.
    """
    try:
        tau = float(tau_min)
    except (TypeError, ValueError):
        tau = math.nan
    if not math.isfinite(tau) or tau < 0 or isinstance(tau_min, bool):
        raise SettingsError(f"tau_min = {tau_min!r} is not a duration", where="tau_min",
                            fix="give τ in minutes, 0 or more (default 20)")
    runs = schedule.runs
    slots = [PassSlot(1, "before inspection", 1, None, schedule.inspection_from, runs[0].end, False)]
    for k, opens, deadline in schedule.breaks:
        slots.append(PassSlot(k, f"break before run {k}", k, opens, deadline, runs[k - 1].end,
                              deadline - opens < pd.Timedelta(minutes=tau)))
    return tuple(slots)


LEGACY_INSPECTION_MIN = 30
"""Without a ``[race]`` table, ``[window]`` is read as one run with inspection the 30 min before it."""


def plan_schedule(settings) -> RaceSchedule:
    """The plan's schedule: ``[race]``, or — for older plan files — ``[window]`` read as one run.

    Without ``[race]``, the window's start and end become one run's start and end, inspection the
    :data:`LEGACY_INSPECTION_MIN` minutes before it, and a note says so (passes between runs need
    ``[race]``).
    """
    race = settings.race
    pl = settings.plan
    if race.inspection is None and race.runs is None:
        win = settings.window
        t0, _ = _parse_time(win.start, _race_date(pl.date), _zone(pl.timezone), "[window] start", [])
        insp = t0 - pd.Timedelta(minutes=LEGACY_INSPECTION_MIN)
        mapping = {"inspection": [insp.strftime("%H:%M"), win.start], "runs": [[win.start, win.end]]}
        s = schedule_from_mapping(mapping, date=pl.date, timezone=pl.timezone, where="[window]")
        note = (f"no [race] table: [window] {win.start}–{win.end} read as one run, inspection the "
                f"{LEGACY_INSPECTION_MIN} min before; give [race] inspection and runs for passes between runs")
        return RaceSchedule(s.date, s.timezone, s.inspection_from, s.inspection_to, s.runs, s.notes + (note,))
    return schedule_from_mapping({k: v for k, v in (("inspection", race.inspection), ("runs", race.runs))
                                  if v is not None}, date=pl.date, timezone=pl.timezone)
