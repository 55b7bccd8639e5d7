"""Files as people have them: semicolons and decimal commas, byte-order marks, Windows-1252,
daylight-saving days in the forecast."""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest
from test_bad_input import DATE, good, refused, run  # noqa: F401
from test_meaning_of_numbers import OBS_HEAD, obs

from courseplan.errors import InputError
from courseplan.io.forecast import read_forecast_csv

FC_HEAD = "time,air_temp_c,rh_pct,wind_m_s,cloud_fraction\n"


def test_semicolon_observations_with_decimal_commas(good, tmp_path):
    from test_meaning_of_numbers import _lonlat

    lon, lat = _lonlat()
    c = lambda v: f"{v:.7f}".replace(".", ",")  # noqa: E731
    p = tmp_path / "obs.csv"
    p.write_text(OBS_HEAD.replace(",", ";") + f"A;2027-03-18T07:30+01:00;{c(lon)};{c(lat)};wet;4,5;0,0;560\n")
    from courseplan.io.observations import read_observations
    from pyproj import CRS

    g = read_observations(p, CRS.from_epsg(32632))
    assert g["lwc_pct"].iloc[0] == 4.5
    assert abs(g.geometry.iloc[0].x - 500_100) < 1 and abs(g.geometry.iloc[0].y - 5_150_150) < 1
    res = run(good.args("--observations", p))
    assert res.exit_code == 0, res.output


def test_semicolon_forecast_with_decimal_commas(tmp_path):
    p = tmp_path / "fc.csv"
    p.write_text(FC_HEAD.replace(",", ";") + "2027-03-18T10:00;1,5;80;2,5;0,25\n", encoding="utf-8")
    df = read_forecast_csv(p)
    assert df["air_temp_c"].iloc[0] == 1.5 and df["wind_m_s"].iloc[0] == 2.5
    assert df["cloud_fraction"].iloc[0] == 0.25


def test_bom_csv_and_plan_file_are_read(good, tmp_path):
    p = obs(tmp_path, ["A,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,560"], encoding="utf-8-sig")
    assert p.read_bytes().startswith(b"\xef\xbb\xbf")
    plan = tmp_path / "plan.toml"
    plan.write_bytes(f'[plan]\ndate = "{DATE}"\n[inputs]\ncourse = "{good.course.name}"\n'
                     f'sun = "{good.sun.name}"\nobservations = "obs.csv"\n'.encode("utf-8-sig"))
    res = run(["plan", plan, "--out", good.out, "--quiet"])
    assert res.exit_code == 0, res.output
    f = tmp_path / "fc.csv"
    f.write_bytes((FC_HEAD + "2027-03-18T10:00,1,80,2,0.2\n").encode("utf-8-sig"))
    assert len(read_forecast_csv(f)) == 1


def test_windows_1252_observations_name_the_encoding(good, tmp_path):
    p = obs(tmp_path, ["A,2027-03-18T07:30+01:00,{lon},{lat},wet,4.0,0.0,560"],
            head=OBS_HEAD.replace("density_kg_m3", "density_kg_m3,note"), encoding="cp1252")
    p.write_bytes(p.read_bytes().replace(b"560\n", "560,Pistenmitte Süd\n".encode("cp1252")))
    refused(run(good.args("--observations", p)), good.out, "not UTF-8", "Windows-1252", "save it as UTF-8")


def test_windows_1252_plan_file_names_the_encoding(good, tmp_path):
    plan = tmp_path / "plan.toml"
    plan.write_bytes(f'[plan]\nname = "Piste Süd"\ndate = "{DATE}"\n'.encode("cp1252"))
    refused(run(["plan", plan, "--out", good.out]), good.out, "not UTF-8", "save the plan file as UTF-8")


def test_windows_1252_forecast(tmp_path):
    p = tmp_path / "fc.csv"
    p.write_bytes((FC_HEAD + "2027-03-18T10:00,1,80,2,0.2\n# Prévision\n").encode("cp1252"))
    with pytest.raises(InputError, match="not UTF-8.*Windows-1252.*save it as UTF-8"):
        read_forecast_csv(p)


def test_autumn_repeated_hour_follows_the_file_order(tmp_path):
    p = tmp_path / "fc.csv"
    rows = ["2027-10-31T01:00", "2027-10-31T02:00", "2027-10-31T02:00", "2027-10-31T03:00"]
    p.write_text(FC_HEAD + "".join(f"{t},1,80,2,0.2\n" for t in rows), encoding="utf-8")
    df = read_forecast_csv(p, timezone="Europe/Zurich")
    t = pd.DatetimeIndex(df["time"])
    assert str(t.tz) == "UTC"
    assert list(t.diff()[1:]) == [pd.Timedelta(hours=1)] * 3
    assert t[0] == pd.Timestamp("2027-10-30T23:00Z")


def test_spring_missing_hour_refused(tmp_path):
    p = tmp_path / "fc.csv"
    rows = ["2027-03-28T01:00", "2027-03-28T02:30", "2027-03-28T03:00"]
    p.write_text(FC_HEAD + "".join(f"{t},1,80,2,0.2\n" for t in rows), encoding="utf-8")
    with pytest.raises(InputError, match="line 3: time 2027-03-28 02:30 does not exist in Europe/Zurich"):
        read_forecast_csv(p, timezone="Europe/Zurich")
    assert len(read_forecast_csv(p)) == 3  # without a zone the times stay naive, as before


def test_dst_day_plan_runs(good, tmp_path):
    day = "2027-10-31"
    p = tmp_path / "fc.csv"
    hours = [f"{day}T{h:02d}:00" for h in range(0, 3)] + [f"{day}T02:00"] + \
        [f"{day}T{h:02d}:00" for h in range(3, 16)]
    p.write_text(FC_HEAD + "".join(f"{t},1,80,2,0.2\n" for t in hours), encoding="utf-8")
    args = [a if a != DATE else day for a in good.args("--forecast", p, "--set", "plan.timezone=Europe/Zurich")]
    res = run(args)
    assert res.exit_code == 0, res.output
    assert dt.date.fromisoformat(day)
