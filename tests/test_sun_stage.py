"""The plan's sun stage: the hold window starts where the clear-sky window says, whatever its step."""

from __future__ import annotations

import numpy as np
import pandas as pd
from affine import Affine
from pyproj import CRS

from courseplan.grid import Grid
from courseplan.stages.sun import plan_sun


def test_window_start_is_the_clear_sky_start_with_12_5_minute_steps():
    # 10:00–10:50 splits into four 12.5-min steps (15-min longest step); the first step mid-point
    # minus 7.5 min would say 09:58:45 — the window starts at 10:00 local time.
    sun = Grid(np.full((4, 4), 0.5, dtype=np.float32), Affine(10, 0, 500_000, 0, -10, 5_150_000),
               CRS.from_epsg(32632))
    ps = plan_sun(lon=9.0, lat=46.5, date="2027-03-18", start="10:00", end="10:50", timezone="Europe/Zurich",
                  sun=sun, encoding="fraction", dem=None, crs=sun.crs, sources={})
    assert ps.clear_sky.step_hours * 60 == 12.5
    assert ps.window_start == pd.Timestamp("2027-03-18 10:00", tz="Europe/Zurich")
    assert ps.window_start != ps.clear_sky.times[0] - pd.Timedelta(minutes=7.5)
