"""Fuzz the observations reader.

Whatever the file holds, it returns a GeoDataFrame or raises an :class:`~courseplan.errors.InputError`
(never another exception), and every bad value is reported with its line number.
"""

from __future__ import annotations

import csv
import io
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pyproj import CRS

from courseplan.errors import CRSError, InputError, ObservationError
from courseplan.io.observations import read_observations

WORK = CRS.from_epsg(32632)
FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
COLUMNS = ["obs_id", "time", "lon", "lat", "x", "y", "wetness", "lwc_pct", "snow_temp_c", "density_kg_m3",
           "grain", "hand_hardness", "note", "Longitude", "LWC", "timestamp", "density"]

_DIR = tempfile.TemporaryDirectory(prefix="obs-fuzz-")


def _write(data: str | bytes, name: str = "obs.csv") -> Path:
    p = Path(_DIR.name) / name
    if isinstance(data, bytes):
        p.write_bytes(data)
    else:
        p.write_text(data, encoding="utf-8", errors="surrogatepass")
    return p


def _read(p: Path, **kw):
    try:
        out = read_observations(p, WORK, timezone=kw.pop("timezone", "Europe/Zurich"), **kw)
    except InputError as exc:
        assert str(exc).strip(), "an error needs a message"
        assert "\n" not in exc.line()
        if isinstance(exc, ObservationError):
            assert exc.problems and all(p.name in ln for ln in exc.problems)
        return exc
    import geopandas as gpd

    assert isinstance(out, gpd.GeoDataFrame)
    assert out.crs == WORK and len(out) > 0
    return out


# ---------------------------------------------------------------- anything at all

@FUZZ
@given(st.text(max_size=400))
def test_any_text(text):
    _read(_write(text))


@FUZZ
@given(st.binary(max_size=300))
def test_any_bytes(data):
    _read(_write(data))


_cell = st.one_of(
    st.text(max_size=12),
    st.sampled_from(["", "nan", "NaN", "inf", "-inf", "1e400", "-0", "1,5", "0.0", "100", "100.0001", "916.7",
                     "917", "-60", "0.5", "0.6", "dry", "Moist", "very wet", "very_wet", "soaked", "slush",
                     "2027-03-18T07:30+01:00", "2027-03-18 07:30", "2027-03-28T02:30", "2027-10-31T02:30",
                     "1677-01-01", "2263-01-01", "99999-01-01", "now", "yesterday", "T", "-", "NA", "None",
                     "9.25", "46.56", "500000", "5150000", "181", "-91", '"', "a,b", "\t"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(min_value=-10**6, max_value=10**6).map(str),
)


@st.composite
def csv_tables(draw):
    cols = draw(st.lists(st.sampled_from(COLUMNS), min_size=1, max_size=10))
    rows = draw(st.lists(st.lists(_cell, min_size=len(cols), max_size=len(cols)), max_size=8))
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(cols)
    w.writerows(rows)
    return buf.getvalue()


@FUZZ
@given(csv_tables(), st.sampled_from([None, "EPSG:32632", "EPSG:2056"]))
def test_random_tables(text, xy_crs):
    _read(_write(text), xy_crs=xy_crs)


@st.composite
def mostly_valid_rows(draw):
    """Well-formed tables whose values drift in and out of range."""
    n = draw(st.integers(1, 6))
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["obs_id", "time", "lon", "lat", "wetness", "lwc_pct", "snow_temp_c", "density_kg_m3"])
    for i in range(n):
        w.writerow([f"o{i}",
                    draw(st.sampled_from(["2027-03-18T07:30+01:00", "2027-03-18 08:10", "bad"])),
                    repr(draw(st.floats(8.0, 10.5))), repr(draw(st.floats(45.5, 47.5))),
                    draw(st.sampled_from(["", "dry", "moist", "wet", "very-wet", "soaked", "mushy"])),
                    draw(st.sampled_from(["", "0", "3.5", "15", "99.9", "100", "120", "-1"])),
                    draw(st.sampled_from(["", "-5", "0", "0.2", "0.5", "2"])),
                    draw(st.sampled_from(["", "30", "560", "916.7", "920", "10"]))])
    return buf.getvalue()


@FUZZ
@given(mostly_valid_rows())
def test_mostly_valid_rows(text):
    res = _read(_write(text))
    if not isinstance(res, Exception):
        assert (res["lwc_pct"].dropna().between(0, 100)).all()
        assert (res["density_kg_m3"].dropna() <= 916.7).all()
        assert (res["snow_temp_c"].dropna() <= 0).all()


# ---------------------------------------------------------------- every bad value with its line

GOOD = ["g", "2027-03-18T07:30+01:00", "9.25", "46.56", "wet", "4.0", "0.0", "560"]
HEAD = ["obs_id", "time", "lon", "lat", "wetness", "lwc_pct", "snow_temp_c", "density_kg_m3"]
BAD = {  # kind: (column index, value, wetness override, words expected in the problem)
    "lwc_above_100": (5, "140", None, "lwc_pct 140"),
    "density_above_ice": (7, "950", None, "density_kg_m3 950"),
    "warm_dry_snow": (6, "0.3", "dry", "is positive but the snow is dry"),
    "bad_time": (1, "half past seven", None, "time 'half past seven' cannot be read"),
    "bad_number": (7, "heavy", None, "density_kg_m3 'heavy' is not a number"),
    "bad_wetness": (4, "damp", None, "wetness 'damp' is not a class"),
    "lon_not_degrees": (2, "500000", None, "lon/lat 500000, 46.56 are not degrees"),
}


@FUZZ
@given(st.lists(st.one_of(st.none(), st.sampled_from(sorted(BAD))), min_size=1, max_size=12))
def test_each_bad_value_reported_with_its_line(kinds):
    rows = []
    for k in kinds:
        r = list(GOOD)
        if k is not None:
            col, val, wet, _ = BAD[k]
            r[col] = val
            if wet is not None:
                r[4], r[5] = wet, ""
        rows.append(r)
    buf = io.StringIO()
    csv.writer(buf).writerows([HEAD, *rows])
    res = _read(_write(buf.getvalue()))
    bad_lines = {i + 2: k for i, k in enumerate(kinds) if k is not None}
    if not bad_lines:
        assert not isinstance(res, Exception), res
        assert list(res["line"]) == list(range(2, len(kinds) + 2))
        return
    assert isinstance(res, ObservationError), res
    by_line: dict[int, list[str]] = {}
    for ln in res.problems:
        by_line.setdefault(int(ln.split(":", 2)[1]), []).append(ln)
    assert set(by_line) == set(bad_lines)  # every bad line, and no good line, is named
    for line, kind in bad_lines.items():
        assert any(BAD[kind][3] in msg for msg in by_line[line]), (kind, by_line[line])
        assert all("Fix:" in msg for msg in by_line[line])


@pytest.mark.parametrize("kind", sorted(BAD))
def test_single_bad_value(kind):
    col, val, wet, words = BAD[kind]
    r = list(GOOD)
    r[col] = val
    if wet is not None:
        r[4], r[5] = wet, ""
    buf = io.StringIO()
    csv.writer(buf).writerows([HEAD, GOOD, GOOD, r])
    res = _read(_write(buf.getvalue()))
    assert isinstance(res, ObservationError)
    assert len(res.problems) == 1 and res.problems[0].startswith("obs.csv:4: ") and words in res.problems[0]


def test_same_column_twice_is_refused():
    # "density" is another name of density_kg_m3: which one to believe is not guessed
    p = _write("time,lon,lat,wetness,density,density_kg_m3\n2027-03-18T07:30+01:00,9.25,46.56,wet,500,560\n")
    res = _read(p)
    assert isinstance(res, InputError) and "density_kg_m3 more than once" in res.line()
    assert "density, density_kg_m3" in res.line()


def test_unknown_xy_crs_is_an_input_error():
    p = _write("time,x,y,wetness\n2027-03-18T07:30+01:00,2600000,1200000,wet\n")
    res = _read(p, xy_crs="EPSG:99999999")
    assert isinstance(res, CRSError) and "observations_crs" in res.line()


def test_nonexistent_local_time_is_reported():
    # 02:30 on the night clocks go forward does not exist in Zurich
    p = _write("time,lon,lat,wetness\n2027-03-28T02:30,9.25,46.56,wet\n")
    res = _read(p)
    assert isinstance(res, InputError)
    assert "obs.csv:2" in res.line()
