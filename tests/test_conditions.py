"""Conditions stage: observation inside → median; same class nearby → nearest; else class default."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Point, box

from courseplan.physics.snow import class_lwc_pct, wetness_of
from courseplan.settings import PlanSettings, Snow
from courseplan.stages.conditions import assign_snow

CRS = "EPSG:32632"


def zones():
    return gpd.GeoDataFrame({"zone_id": [1, 2, 3], "exposure_class": ["full-sun", "full-sun", "shaded"]},
                            geometry=[box(0, 0, 100, 40), box(100, 0, 200, 40), box(200, 0, 300, 40)], crs=CRS)


def obs(rows):
    df = pd.DataFrame(rows)
    df["time"] = pd.to_datetime(df["time"], utc=True)
    return gpd.GeoDataFrame(df.drop(columns=["x", "y"]), geometry=[Point(x, y) for x, y in zip(df.x, df.y)], crs=CRS)


BASE = {"wetness": None, "grain": "MF", "hand_hardness": None, "note": "", "line": 2}


def test_wetness_classes_follow_fierz_2009():
    # Source: Fierz et al. (2009), International Classification for Seasonal Snow on the Ground,
    # liquid water content classes by volume: moist 0-3, wet 3-8, very wet 8-15, soaked > 15.
    assert wetness_of(0.0) == "dry"
    assert wetness_of(2.9) == "moist"
    assert wetness_of(3.1) == "wet"
    assert wetness_of(8.5) == "very-wet"
    assert wetness_of(16.0) == "soaked"
    assert class_lwc_pct("wet") == pytest.approx(5.5)  # middle of 3-8 %


def test_three_sources_and_age():
    o = obs([
        {**BASE, "obs_id": "A", "time": "2027-03-18T07:30+01:00", "x": 20, "y": 20, "lwc_pct": 4.0,
         "snow_temp_c": 0.0, "density_kg_m3": 540.0, "exposure_class": "full-sun"},
        {**BASE, "obs_id": "B", "time": "2027-03-18T08:30+01:00", "x": 60, "y": 20, "lwc_pct": 6.0,
         "snow_temp_c": 0.0, "density_kg_m3": np.nan, "exposure_class": "full-sun"},
        # outside every zone, 30 m north of zone 2, same class: used as "nearby" for zone 2 only
        {**BASE, "obs_id": "C", "time": "2027-03-18T02:00+01:00", "x": 150, "y": 70, "lwc_pct": 9.0,
         "snow_temp_c": -0.5, "density_kg_m3": 600.0, "exposure_class": "full-sun"},
    ])
    s = PlanSettings()
    start = pd.Timestamp("2027-03-18T09:30+01:00")
    z = assign_snow(zones(), o, s, window_start=start, obs_exposure=o["exposure_class"].to_numpy())
    z1, z2, z3 = (z.iloc[i] for i in range(3))
    assert z1.snow_source == "observation"
    assert z1.lwc_pct == pytest.approx(5.0)  # median of 4 and 6
    assert z1.density_kg_m3 == pytest.approx(540.0)  # NaN left out of the median
    assert z1.obs_age_h == pytest.approx(2.0)  # oldest of the two: 07:30 → 09:30
    assert z1.obs_distance_m == 0.0
    assert z2.snow_source == "nearby"
    assert z2.obs_distance_m == pytest.approx(30.0)
    assert z2.lwc_pct == pytest.approx(9.0) and z2.wetness == "very-wet"
    assert z2.obs_age_h == pytest.approx(7.5) and bool(z2.obs_stale)  # default max age 6 h
    assert z3.snow_source == "class-default"  # the shaded zone: C is full-sun, never borrowed
    d = s.snow.classes["shaded"]
    assert z3.lwc_pct == pytest.approx(class_lwc_pct(d["wetness"]))
    assert bool(z3.lwc_from_class)
    assert "C" in z2.snow_source_detail and "30 m" in z2.snow_source_detail


def test_distance_limit():
    o = obs([{**BASE, "obs_id": "C", "time": "2027-03-18T08:00+01:00", "x": 150, "y": 70, "lwc_pct": 9.0,
              "snow_temp_c": 0.0, "density_kg_m3": 600.0}])
    s = PlanSettings().replace(snow=Snow(max_distance_m=20.0))
    z = assign_snow(zones(), o, s, window_start=None, obs_exposure=np.array(["full-sun"], dtype=object))
    assert list(z["snow_source"]) == ["class-default"] * 3
