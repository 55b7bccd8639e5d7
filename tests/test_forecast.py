"""Weather over the window: steps, shares, constants, the forecast CSV and table interpolation."""

import dataclasses
import types

import numpy as np
import pandas as pd
import pytest

from courseplan.errors import InputError, MissingInputError
from courseplan.io.forecast import read_forecast_csv
from courseplan.settings import PlanInfo, PlanSettings, Window
from courseplan.stages.weather import weather_from_settings, weather_from_table, window_steps


def _st(start="09:30", end="13:30", date="2027-03-18", tz="Europe/Zurich"):
    return PlanSettings().replace(plan=PlanInfo(date=date, timezone=tz), window=Window(start=start, end=end))


def test_window_split_at_clock_hours():
    s, e = window_steps(_st())
    hours = ((e - s).total_seconds() / 3600).tolist()
    assert hours == [0.5, 1.0, 1.0, 1.0, 0.5]
    assert s[0].strftime("%H:%M") == "09:30" and e[-1].strftime("%H:%M") == "13:30"
    assert str(s.tz) == "Europe/Zurich"


def test_constants_weather_and_sinusoidal_shares():
    w = weather_from_settings(_st("11:00", "13:00"))
    assert w.n_steps == 2 and w.total_hours == 2.0
    assert np.all(w.air_temp_c == 4.0) and w.pressure_pa == 85000.0 and w.air_temp_spread_k == 1.5
    # sin day 06–18 h is symmetric about noon: 11–12 and 12–13 get equal shares
    np.testing.assert_allclose(w.sw_share, [0.5, 0.5])
    assert "constants" in w.source


def test_clear_sky_profile_object_and_weights():
    st = _st("10:00", "12:00", tz="UTC")
    times = pd.date_range("2027-03-18 10:07:30", periods=8, freq="15min", tz="UTC")  # step mid-points
    prof = types.SimpleNamespace(times=times, ghi_w_m2=np.array([100.0] * 4 + [300.0] * 4), step_hours=0.25)
    w = weather_from_settings(st, prof)
    np.testing.assert_allclose(w.sw_share, [0.25, 0.75])
    w2 = weather_from_settings(st, [1.0, 3.0])
    np.testing.assert_allclose(w2.sw_share, [0.25, 0.75])
    with pytest.raises(InputError):
        weather_from_settings(st, [1.0, 2.0, 3.0])


def _csv(tmp_path, body, name="f.csv"):
    p = tmp_path / name
    p.write_text("time,air_temp_c,rh_pct,wind_m_s,cloud_fraction\n" + body, encoding="utf-8")
    return p


def test_read_and_interpolate(tmp_path):
    p = _csv(tmp_path, "2027-03-18T10:00+01:00,2,60,1,0.0\n2027-03-18T11:00+01:00,4,80,3,0.5\n"
                       "2027-03-18T12:00+01:00,6,80,3,0.5\n")
    df = read_forecast_csv(p)
    assert list(df.columns) == ["time", "air_temp_c", "rh_pct", "wind_m_s", "cloud_fraction"]
    w = weather_from_table(df, _st("10:00", "12:00"), source=df.attrs["source"])
    # step mid-points 10:30 and 11:30 → halfway between the hourly values
    np.testing.assert_allclose(w.air_temp_c, [3.0, 5.0])
    np.testing.assert_allclose(w.rh_pct, [70.0, 80.0])
    np.testing.assert_allclose(w.cloud_fraction, [0.25, 0.5])
    assert w.source == "forecast file f.csv"


def test_naive_times_are_local(tmp_path):
    p = _csv(tmp_path, "2027-03-18T10:00,2,60,1,0\n2027-03-18T12:00,6,60,1,0\n")
    w = weather_from_table(read_forecast_csv(p), _st("10:00", "12:00"))
    np.testing.assert_allclose(w.air_temp_c, [3.0, 5.0])


def test_row_errors_name_lines(tmp_path):
    p = _csv(tmp_path, "2027-03-18T10:00+01:00,2,60,1,0\n2027-03-18T11:00+01:00,warm,60,1,0\n"
                       "2027-03-18T12:00+01:00,2,60,1,5\nnot-a-time,2,60,1,0\n")
    with pytest.raises(InputError) as err:
        read_forecast_csv(p)
    msg = str(err.value)
    assert "line 3" in msg and "air_temp_c" in msg and "line 4" in msg and "cloud_fraction" in msg
    assert "line 5" in msg and "ISO" in msg


def test_structural_errors(tmp_path):
    q = tmp_path / "cols.csv"
    q.write_text("time,temp\n2027-03-18T10:00,2\n", encoding="utf-8")
    with pytest.raises(InputError, match="lacks"):
        read_forecast_csv(q)
    with pytest.raises(MissingInputError):
        read_forecast_csv(tmp_path / "nope.csv")
    mixed = _csv(tmp_path, "2027-03-18T10:00+01:00,2,60,1,0\n2027-03-18T11:00,2,60,1,0\n", "m.csv")
    with pytest.raises(InputError, match="offset"):
        read_forecast_csv(mixed)
    rep = _csv(tmp_path, "2027-03-18T10:00,2,60,1,0\n2027-03-18T10:00,3,60,1,0\n", "r.csv")
    with pytest.raises(InputError, match="repeats"):
        read_forecast_csv(rep)


def test_table_must_cover_window(tmp_path):
    p = _csv(tmp_path, "2027-03-18T06:00+01:00,2,60,1,0\n2027-03-18T07:00+01:00,2,60,1,0\n")
    with pytest.raises(InputError, match="covers"):
        weather_from_table(read_forecast_csv(p), _st("10:00", "12:00"))


def test_plan_without_date_takes_the_table_date(tmp_path):
    p = _csv(tmp_path, "2027-03-18T10:00,2,60,1,0\n2027-03-18T12:00,6,60,1,0\n")
    st = dataclasses.replace(_st("10:00", "12:00"), plan=PlanInfo(date=None, timezone="Europe/Zurich"))
    w = weather_from_table(read_forecast_csv(p), st)
    assert w.hour_start[0].strftime("%Y-%m-%d %H:%M") == "2027-03-18 10:00"
