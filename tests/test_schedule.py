"""Tests of the race-day schedule (``[race]`` table) and the pass slots it gives.

Outside source for the clock: Python's ``zoneinfo`` reading the IANA time zone database.  The
offsets and the daylight-saving days (Europe/Zurich: clocks forward 2027-03-28 02:00 → 03:00,
back 2027-10-31 03:00 → 02:00, the last Sundays of March and October) are checked against its
answers, not against numbers typed here.
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from courseplan.errors import SettingsError
from courseplan.schedule import MAX_RUNS, RaceSchedule, pass_slots, schedule_from_mapping

ZRH = "Europe/Zurich"
GOOD = {"inspection": ["08:15", "09:00"], "runs": [["09:30", "10:45"], ["12:30", "13:45"]]}


def parse(race, date="2027-03-10", timezone=ZRH):
    return schedule_from_mapping(race, date=date, timezone=timezone)


def zoneinfo_offset(y, mo, d, h, mi, tz=ZRH, fold=0):
    """UTC offset zoneinfo gives for a local wall time (fold=1: the second of a repeated time)."""
    return dt.datetime(y, mo, d, h, mi, tzinfo=ZoneInfo(tz), fold=fold).utcoffset()


def zoneinfo_exists(y, mo, d, h, mi, tz=ZRH, fold=0):
    """Whether the wall time survives a round trip through UTC in zoneinfo."""
    t = dt.datetime(y, mo, d, h, mi, tzinfo=ZoneInfo(tz), fold=fold)
    back = t.astimezone(dt.UTC).astimezone(ZoneInfo(tz))
    return back.replace(tzinfo=None) == t.replace(tzinfo=None)


def test_good_schedule_parses_tz_aware():
    s = parse(GOOD)
    assert isinstance(s, RaceSchedule) and s.date == "2027-03-10" and s.timezone == ZRH
    assert [r.number for r in s.runs] == [1, 2]
    # 10 March is before the change: zoneinfo says +01:00 (CET).
    assert zoneinfo_offset(2027, 3, 10, 8, 15) == dt.timedelta(hours=1)
    for ts in (s.inspection_from, s.inspection_to, s.first_start, s.last_end):
        assert ts.tzinfo is not None and ts.utcoffset() == zoneinfo_offset(2027, 3, 10, 8, 15)
    assert s.inspection_from == pd.Timestamp("2027-03-10T07:15Z")
    assert s.first_start == pd.Timestamp("2027-03-10T08:30Z")
    assert s.last_end == pd.Timestamp("2027-03-10T12:45Z")
    assert s.breaks == [(2, s.runs[0].end, s.runs[1].start)]
    assert s.local_hhmm(s.runs[1].start) == "12:30" and s.day_shift(s.runs[1].start) == 0
    assert s.describe() == ("race 2027-03-10 (Europe/Zurich): inspection 08:15–09:00, "
                            "run 1 09:30–10:45, run 2 12:30–13:45")
    d = s.to_dict()
    assert d["inspection"] == ["2027-03-10T08:15:00+01:00", "2027-03-10T09:00:00+01:00"]
    assert d["runs"][1] == {"number": 2, "start": "2027-03-10T12:30:00+01:00",
                            "end": "2027-03-10T13:45:00+01:00"}
    assert s.notes == () and d["notes"] == []


def test_run_as_table_and_summer_offset():
    s = parse({"inspection": ["08:15", "09:00"], "runs": [{"start": "09:30", "end": "10:45"}]},
              date="2027-07-10")
    assert s.first_start.utcoffset() == zoneinfo_offset(2027, 7, 10, 9, 30) == dt.timedelta(hours=2)


def test_run_over_midnight_with_explicit_date():
    s = parse({"inspection": ["21:00", "21:30"],
               "runs": [["22:00", "23:10"], ["23:40", "2027-03-11T00:50"]]})
    assert s.last_end == pd.Timestamp("2027-03-11T00:50", tz=ZRH)
    assert s.day_shift(s.last_end) == 1 and s.day_shift(s.first_start) == 0
    assert s.clock(s.last_end) == "00:50 +1 d" and s.clock(s.first_start) == "22:00"
    assert s.describe().endswith("run 2 23:40–00:50 +1 d")
    assert s.to_dict()["runs"][1]["end"] == "2027-03-11T00:50:00+01:00"


def test_spring_gap_refused():
    # zoneinfo: 02:30 on 2027-03-28 does not exist in Zurich (neither fold survives a round trip).
    assert not zoneinfo_exists(2027, 3, 28, 2, 30) and not zoneinfo_exists(2027, 3, 28, 2, 30, fold=1)
    with pytest.raises(SettingsError) as e:
        parse({"inspection": ["01:00", "01:30"], "runs": [["02:30", "04:00"]]}, date="2027-03-28")
    msg = str(e.value)
    assert "\n" not in msg and "runs: run 1 start" in msg
    assert "does not exist" in msg and "jumps from 02:00 to 03:00" in msg and "before 02:00" in msg


def test_autumn_repeat_first_with_note_and_offset_picks_second():
    # zoneinfo: 02:30 on 2027-10-31 exists twice, first +02:00 (fold=0), then +01:00 (fold=1).
    first, second = zoneinfo_offset(2027, 10, 31, 2, 30), zoneinfo_offset(2027, 10, 31, 2, 30, fold=1)
    assert zoneinfo_exists(2027, 10, 31, 2, 30, fold=1) and first != second
    s = parse({"inspection": ["01:00", "01:30"], "runs": [["02:30", "03:30"]]}, date="2027-10-31")
    assert s.first_start.utcoffset() == first == dt.timedelta(hours=2)
    assert len(s.notes) == 1 and "02:30 happens twice" in s.notes[0] and "summer time" in s.notes[0]
    assert '"2027-10-31T02:30+01:00"' in s.notes[0] and "runs: run 1 start" in s.notes[0]
    s2 = parse({"inspection": ["01:00", "01:30"], "runs": [["2027-10-31T02:30+01:00", "03:30"]]},
               date="2027-10-31")
    assert s2.first_start.utcoffset() == second == dt.timedelta(hours=1) and s2.notes == ()
    assert s2.first_start - s.first_start == pd.Timedelta(hours=1)
    assert s2.to_dict()["runs"][0]["start"] == "2027-10-31T02:30:00+01:00"


def test_slots_of_two_runs():
    s = parse(GOOD)
    one, two = pass_slots(s, 20.0)
    assert (one.number, one.label, one.opens, one.deadline) == (1, "before inspection", None,
                                                                 s.inspection_from)
    assert one.must_hold_until == s.runs[0].end and not one.short_break and one.run == 1
    assert (two.number, two.label, two.run) == (2, "break before run 2", 2)
    assert (two.opens, two.deadline, two.must_hold_until) == (s.runs[0].end, s.runs[1].start,
                                                              s.runs[1].end)
    assert not two.short_break


def test_short_break_flagged():
    s = parse({"inspection": ["08:15", "09:00"], "runs": [["09:30", "10:45"], ["11:00", "12:00"]]})
    assert pass_slots(s, 20.0)[1].short_break          # 15 min break < τ = 20 min
    assert not pass_slots(s, 15.0)[1].short_break      # equal to τ is enough
    with pytest.raises(SettingsError):
        pass_slots(s, -1.0)


R = ["09:30", "10:45"]
ERRORS = [  # (race table, date, timezone, text the one-line message must contain)
    (None, "2027-03-10", ZRH, "[race]: the plan has no race schedule"),
    ({"runs": [R]}, "2027-03-10", ZRH, "key 'inspection' is missing"),
    ({"inspection": ["08:15", "09:00"]}, "2027-03-10", ZRH, "key 'runs' is missing"),
    (GOOD, None, ZRH, "[plan] date"),
    (GOOD, "10.03.2027", ZRH, "[plan] date"),
    (GOOD, "2027-03-10", "Europe/Zurch", "did you mean 'Europe/Zurich'"),
    ({"inspection": ["08:15", "09:00"], "run": [R]}, "2027-03-10", ZRH, "did you mean 'runs'"),
    ({"inspection": ["08:15", "9h00"], "runs": [R]}, "2027-03-10", ZRH, "inspection to: cannot read"),
    ({"inspection": ["08:15", "09:00"], "runs": [["09:30", "25:00"]]}, "2027-03-10", ZRH, "run 1 end"),
    ({"inspection": ["08:15", "09:00"], "runs": [{"start": "09:30", "ende": "10:45"}]}, "2027-03-10",
     ZRH, "did you mean 'end'"),
    ({"inspection": ["09:00", "09:00"], "runs": [R]}, "2027-03-10", ZRH, "not after it starts"),
    ({"inspection": ["08:15", "09:40"], "runs": [R]}, "2027-03-10", ZRH, "after run 1 starts at 09:30"),
    ({"inspection": ["08:15", "09:00"], "runs": [["09:30", "09:30"]]}, "2027-03-10", ZRH,
     "run 1 ends at 09:30, not after its start"),
    ({"inspection": ["08:15", "09:00"], "runs": [["23:30", "00:40"]]}, "2027-03-10", ZRH,
     'a run over midnight needs dates: end = "YYYY-MM-DDTHH:MM"'),
    ({"inspection": ["08:15", "09:00"], "runs": [R, ["10:30", "11:00"]]}, "2027-03-10", ZRH,
     "run 2 starts at 10:30, before run 1 ends at 10:45"),
    ({"inspection": ["08:15", "09:00"], "runs": []}, "2027-03-10", ZRH, "no runs"),
    ({"inspection": ["08:15", "09:00"], "runs": [R] * (MAX_RUNS + 1)}, "2027-03-10", ZRH,
     f"at most {MAX_RUNS}"),
    ({"inspection": ["08:15", "09:00"], "runs": [["09:30", "2027-03-12T10:45"]]}, "2027-03-10", ZRH,
     "2 days from the race date"),
    ({"inspection": ["08:15", "09:00"], "runs": R}, "2027-03-10", ZRH, "outer brackets"),
    ({"inspection": ["08:15", "09:00"], "runs": [["2027-03-10T09:30+05:00", "10:45"]]}, "2027-03-10",
     ZRH, "not +05:00"),
]


@pytest.mark.parametrize(("race", "date", "timezone", "expect"), ERRORS)
def test_errors_are_one_line_and_name_the_key(race, date, timezone, expect):
    with pytest.raises(SettingsError) as e:
        parse(race, date=date, timezone=timezone)
    msg = str(e.value)
    assert "\n" not in msg and expect in msg and "Fix:" in msg
    assert msg.startswith(("[race]", "[plan] date", "[plan] timezone"))
    key_named = ["inspection", "runs", "date", "timezone", "[race]"]
    assert any(k in msg.split(":")[0] for k in key_named)


@st.composite
def ordered_schedules(draw):
    """Ordered race days on dates without a clock change, with times written in all accepted forms."""
    day = dt.date(2027, 1, 5) + dt.timedelta(days=draw(st.integers(0, 45)))
    tz = draw(st.sampled_from([ZRH, "UTC", "America/Denver", "Asia/Tokyo"]))
    minute = draw(st.integers(0, 600))

    def text(m):
        d, hm = divmod(m, 1440)
        if d == 0 and draw(st.booleans()):
            return f"{hm // 60:02d}:{hm % 60:02d}"
        return f"{day + dt.timedelta(days=d)}T{hm // 60:02d}:{hm % 60:02d}"

    insp = [text(minute), text(minute := minute + draw(st.integers(1, 120)))]
    minute += draw(st.integers(0, 120))
    runs = []
    for i in range(draw(st.integers(1, MAX_RUNS))):
        if i:
            minute += draw(st.integers(0, 90))
        a, minute = minute, minute + draw(st.integers(1, 120))
        run = [text(a), text(minute)]
        runs.append({"start": run[0], "end": run[1]} if draw(st.booleans()) else run)
    return {"inspection": insp, "runs": runs}, str(day), tz


@hsettings(max_examples=150, deadline=None)
@given(ordered_schedules(), st.floats(0.0, 120.0))
def test_ordered_schedules_parse_and_slots_in_order(case, tau):
    race, day, tz = case
    s = schedule_from_mapping(race, date=day, timezone=tz)
    slots = pass_slots(s, tau)
    assert len(slots) == len(s.runs) == len(race["runs"]) and s.notes == ()
    deadlines = [x.deadline for x in slots]
    assert deadlines == sorted(deadlines) and len(set(deadlines)) == len(deadlines)
    for x in slots[1:]:
        assert x.opens <= x.deadline < x.must_hold_until
        assert x.short_break == ((x.deadline - x.opens) < pd.Timedelta(minutes=tau))


@hsettings(max_examples=150, deadline=None)
@given(ordered_schedules(), st.data())
def test_swapping_two_runs_always_raises(case, data):
    race, day, tz = case
    n = len(race["runs"])
    if n < 2:
        return
    i = data.draw(st.integers(0, n - 2))
    j = data.draw(st.integers(i + 1, n - 1))
    runs = list(race["runs"])
    runs[i], runs[j] = runs[j], runs[i]
    with pytest.raises(SettingsError) as e:
        schedule_from_mapping({**race, "runs": runs}, date=day, timezone=tz)
    assert "\n" not in str(e.value) and "[race] runs: run " in str(e.value)
