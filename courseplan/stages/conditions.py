"""Conditions stage: give every zone a snow state and say where it came from.

Order of preference, per zone:

1. ``observation`` — the median of the observations inside the zone;
2. ``nearby`` — the nearest observation of the same exposure class within
   ``[snow] max_distance_m`` of the zone;
3. ``class-default`` — the exposure class's default from ``[snow] classes``.

A field an observation leaves blank (say, density) is taken from the class default and the
detail says so.  Observations older than ``[snow] max_age_h`` at the start of the window are
flagged (``obs_stale``).  Wetness classes and their liquid-water bounds follow the International
Classification for Seasonal Snow on the Ground (Fierz et al. 2009); a class without a measured
percentage is represented by the middle of its range and marked for sampling (``lwc_from_class``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from courseplan.errors import SettingsError
from courseplan.physics.snow import WETNESS_CLASSES, class_lwc_pct, wetness_of
from courseplan.settings import PlanSettings

FIELDS = ("lwc_pct", "density_kg_m3", "snow_temp_c")


def class_default(settings: PlanSettings, exposure_class: str) -> dict:
    """The default snow state of an exposure class, with the liquid water resolved."""
    classes = settings.snow.classes
    if exposure_class in classes:
        d = dict(classes[exposure_class])
    else:
        labels = list(settings.zoning.exposure_labels)
        # nearest configured class by rank, else the first table entry
        rank = labels.index(exposure_class) if exposure_class in labels else 0
        known = [(abs(labels.index(k) - rank), k) for k in classes if k in labels]
        key = min(known)[1] if known else next(iter(classes))
        d = dict(classes[key])
    allowed = {"wetness", "lwc_pct", "density_kg_m3", "snow_temp_c", "grain"}
    unknown = set(d) - allowed
    if unknown:
        raise SettingsError(f"unknown key(s) {', '.join(sorted(unknown))} in the snow class {exposure_class!r}",
                            where="[snow] classes", fix="use " + ", ".join(sorted(allowed)))
    if "lwc_pct" in d:
        lwc, from_class = float(d["lwc_pct"]), False
        wet = d.get("wetness") or wetness_of(lwc)
    else:
        wet = str(d.get("wetness", "wet"))
        if wet not in WETNESS_CLASSES:
            raise SettingsError(f"wetness {wet!r} of snow class {exposure_class!r} is not a class",
                                where="[snow] classes", fix="use " + ", ".join(WETNESS_CLASSES))
        lwc, from_class = class_lwc_pct(wet), True
    return {"lwc_pct": lwc, "wetness": wet, "density_kg_m3": float(d.get("density_kg_m3", 550.0)),
            "snow_temp_c": float(d.get("snow_temp_c", 0.0)), "grain": str(d.get("grain", "MF")),
            "lwc_from_class": from_class}


def observation_lwc(obs: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Liquid water of each observation [% vol] and whether it stands for a class only."""
    lwc = obs["lwc_pct"].astype(float).to_numpy()
    only_class = ~np.isfinite(lwc)
    wet = obs["wetness"].to_numpy(object)
    lwc = np.where(only_class, [class_lwc_pct(w) if w in WETNESS_CLASSES else np.nan for w in wet], lwc)
    return lwc, only_class


def assign_snow(zones, observations, settings: PlanSettings, *, window_start: pd.Timestamp | None,
                obs_exposure: np.ndarray | None = None):
    """Add the conditions columns (see :data:`courseplan.columns.CONDITIONS`) to the zones.

    Parameters
    ----------
    zones
        GeoDataFrame from the zoning stage (working CRS).
    observations
        GeoDataFrame from :func:`courseplan.io.observations.read_observations`, or None.
    settings
        Plan settings (``[snow]``, ``[zoning]``).
    window_start
        Start of the hold window (tz-aware), for observation ages; None leaves ages NaN.
    obs_exposure
        Exposure class label of each observation (sampled from the sun raster), or None.

    Returns
    -------
    GeoDataFrame
        A copy with the conditions columns and ``lwc_from_class`` added.
    """
    import geopandas as gpd

    z = zones.copy()
    n = len(z)
    out = {k: np.full(n, np.nan) for k in ("lwc_pct", "density_kg_m3", "snow_temp_c", "obs_distance_m",
                                           "obs_age_h")}
    wet = np.empty(n, dtype=object)
    grain = np.empty(n, dtype=object)
    source = np.empty(n, dtype=object)
    detail = np.empty(n, dtype=object)
    from_class = np.zeros(n, dtype=bool)
    stale = np.zeros(n, dtype=bool)
    max_age = settings.snow.max_age_h

    have_obs = observations is not None and len(observations) > 0
    if have_obs:
        obs = observations.reset_index(drop=True)
        o_lwc, o_cls = observation_lwc(obs)
        o_age = (((window_start - obs["time"]).dt.total_seconds() / 3600.0).to_numpy()
                 if window_start is not None else np.full(len(obs), np.nan))
        joined = gpd.sjoin(obs[["geometry"]], z[["geometry"]], predicate="within", how="inner")
        inside: dict[int, list[int]] = {}
        for oi, zi in zip(joined.index.to_numpy(), joined["index_right"].to_numpy(), strict=True):
            inside.setdefault(int(zi), []).append(int(oi))
        o_exp = np.asarray(obs_exposure, dtype=object) if obs_exposure is not None else np.full(len(obs), None)
    for i in range(n):
        exp_class = z["exposure_class"].iat[i]
        dflt = class_default(settings, exp_class)
        chosen: list[int] = []
        kind = "class-default"
        dist = np.nan
        if have_obs:
            if i in inside:
                chosen, kind, dist = inside[i], "observation", 0.0
            else:
                same = np.nonzero(o_exp == exp_class)[0]
                if same.size:
                    d = obs.geometry.iloc[same].distance(z.geometry.iat[i]).to_numpy()
                    j = int(np.argmin(d))
                    if d[j] <= settings.snow.max_distance_m:
                        chosen, kind, dist = [int(same[j])], "nearby", float(d[j])
        if not chosen:
            for k in FIELDS:
                out[k][i] = dflt[k]
            wet[i], grain[i], from_class[i] = dflt["wetness"], dflt["grain"], dflt["lwc_from_class"]
            source[i] = "class-default"
            detail[i] = f"default of class {exp_class} ([snow] classes)"
            continue
        sel = obs.iloc[chosen]
        vals = {"lwc_pct": o_lwc[chosen], "density_kg_m3": sel["density_kg_m3"].astype(float).to_numpy(),
                "snow_temp_c": sel["snow_temp_c"].astype(float).to_numpy()}
        filled = []
        for k in FIELDS:
            v = vals[k][np.isfinite(vals[k])]
            if v.size:
                out[k][i] = float(np.median(v))
            else:
                out[k][i] = dflt[k]
                filled.append(k)
        gr = sel["grain"].dropna()
        grain[i] = str(gr.mode().iat[0]) if len(gr) else dflt["grain"]
        from_class[i] = bool(np.all(o_cls[chosen]))
        wet[i] = wetness_of(out["lwc_pct"][i])
        if from_class[i]:
            classes = sel["wetness"].dropna()
            wet[i] = str(classes.mode().iat[0]) if len(classes) else wet[i]
        ages = o_age[chosen]
        out["obs_age_h"][i] = float(np.nanmax(ages)) if np.isfinite(ages).any() else np.nan
        out["obs_distance_m"][i] = dist
        stale[i] = bool(np.isfinite(out["obs_age_h"][i]) and out["obs_age_h"][i] > max_age)
        ids = ", ".join(sel["obs_id"].astype(str))
        text = (f"median of {len(chosen)} observation(s) {ids} inside the zone" if kind == "observation"
                else f"observation {ids} of the same exposure class {dist:.0f} m away")
        if np.isfinite(out["obs_age_h"][i]):
            text += f", {out['obs_age_h'][i]:.1f} h before the window"
        if stale[i]:
            text += f" (older than {max_age:g} h)"
        if filled:
            text += f"; {', '.join(filled)} from the class default"
        source[i], detail[i] = kind, text
    for k, v in out.items():
        z[k] = v
    z["wetness"] = wet
    z["grain"] = grain
    z["snow_source"] = source
    z["snow_source_detail"] = detail
    z["obs_stale"] = stale
    z["lwc_from_class"] = from_class
    return z


def observation_exposure(observations, exposure_grid, labels):
    """The exposure class of each observation, sampled on the zoning's exposure grid.

    Returns the observations with an ``exposure_class`` column added and that column as an array
    (None where an observation lies off the grid), or ``(observations, None)`` without observations.
    """
    if observations is None or not len(observations) or exposure_grid is None:
        return observations, None
    idx = exposure_grid.sample(observations.geometry.x.to_numpy(), observations.geometry.y.to_numpy())
    exp = np.array([labels[int(i)] if np.isfinite(i) and i >= 0 else None for i in idx], dtype=object)
    obs = observations.copy()
    obs["exposure_class"] = exp
    return obs, exp
