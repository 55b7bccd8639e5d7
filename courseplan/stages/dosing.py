"""Dosing stage: the cold balance of every zone, with verdicts, passes, P50/P90 and provenance.

:func:`apply_dosing` takes the zones table after the conditions stage and adds the columns that
:mod:`courseplan.columns` declares for the ``dosing`` stage.  The physics lives in
:mod:`courseplan.physics` (brine, energy, dose); this module only gathers the inputs, samples the
uncertain ones (Part E of docs/model.md) and writes the results with where each input came from.

Sampling: ``[dosing] samples`` Latin-hypercube samples seeded by ``[dosing] seed`` (same seed, same
numbers).  Two inputs are uncertain: the liquid water content, drawn inside its wetness class
(Fierz et al. 2009) where the snow state came from a class rather than a measured percentage,
and the air temperature, shifted by a normal offset with the forecast spread
``[forecast] air_temp_spread_k`` (the same offset over the whole window and for all zones of a
sample, so plan totals add up per sample).  P50/P90 are percentiles over the samples; verdicts,
passes and pass times refer to the zone's nominal state and the P50 dose.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from courseplan.agents.record import Agent
from courseplan.errors import InputError
from courseplan.physics import brine, energy
from courseplan.physics.dose import (
    TREATED,
    VERDICTS,
    cold_balance,
    latin_hypercube,
    max_salt_per_pass_kg_m2,
    pass_temperature_c,
    passes_needed,
    sample_lwc_pct,
    verdicts,
)
from courseplan.physics.snow import WETNESS_CLASSES, class_range_text

if TYPE_CHECKING:  # the weather stage's record, for annotations only
    from courseplan.stages.weather import Weather

__all__ = ["apply_dosing", "zone_energy_j_m2"]

REQUIRED = ("zone_id", "irradiation_wh_m2", "area_m2", "lwc_pct", "wetness", "density_kg_m3",
            "snow_temp_c", "grain", "snow_source")


def zone_energy_j_m2(irradiation_wh_m2, weather: Weather, albedo: float, temp_offset_k=0.0):
    """Step net energy [J/m²] per zone, offset and step: shape (zones, offsets, steps).

    Shortwave of each step = zone window irradiation × the step's clear-sky share × the Kasten &
    Czeplak cloud factor × (1 − albedo); the weather part (longwave, sensible, latent) is computed
    once per offset and step (it does not depend on the zone).
    """
    irr = np.asarray(irradiation_wh_m2, dtype=float)[:, None, None]
    dt = np.atleast_1d(np.asarray(temp_offset_k, dtype=float))[None, :, None]
    kc = np.asarray(energy.cloud_shortwave_factor(weather.cloud_fraction))
    sw = (1.0 - albedo) * irr * 3600.0 * (weather.sw_share * kc)[None, None, :]
    flux = energy.weather_flux_w_m2(weather.air_temp_c[None, None, :] + dt, weather.rh_pct, weather.wind_m_s,
                                    weather.cloud_fraction, weather.pressure_pa)
    return sw + np.asarray(flux) * (weather.hours * 3600.0)[None, None, :]


def _pass_times(step_e: np.ndarray, weather: Weather, passes: np.ndarray) -> list[str]:
    """Spread the passes over the window in proportion to the cumulative energy (nominal state)."""
    edges = list(weather.hour_start) + [weather.hour_end[-1]]
    t_edges = np.array([pd.Timestamp(t).as_unit("ns").value for t in edges], dtype=float)
    out = []
    for e_z, n in zip(step_e, passes, strict=True):
        n = int(n)
        if n <= 0:
            out.append("")
            continue
        cum = np.concatenate([[0.0], np.maximum.accumulate(np.maximum(np.cumsum(e_z), 0.0))])
        total = cum[-1]
        times = []
        for k in range(n):
            frac = k / n
            if total > 0 and np.all(np.diff(cum) >= 0) and cum[-1] > cum[0]:
                t = np.interp(frac * total, cum, t_edges) if k else t_edges[0]
            else:
                t = t_edges[0] + frac * (t_edges[-1] - t_edges[0])
            times.append(pd.Timestamp(int(t), tz="UTC").tz_convert(weather.hour_start.tz).strftime("%H:%M"))
        out.append("; ".join(times))
    return out


def apply_dosing(zones: pd.DataFrame, settings, agent: Agent, weather: Weather) -> pd.DataFrame:
    """Add the dosing columns to the zones table.

    Parameters
    ----------
    zones
        One row per zone with at least ``zone_id, irradiation_wh_m2, area_m2, lwc_pct, wetness,
        density_kg_m3, snow_temp_c, grain, snow_source`` (see :mod:`courseplan.columns`).  An
        optional boolean column ``lwc_from_class`` says whether θ came from a wetness class (then it
        is sampled); without it, zones whose ``snow_source`` is ``class-default`` are sampled.
    settings
        Plan settings (``[dosing]``, ``[forecast]``, ``[window]``).
    agent
        The agent spread.
    weather
        Weather over the hold window (:mod:`courseplan.stages.weather`).

    Returns
    -------
    pandas.DataFrame
        A copy with every ``dosing`` column of :mod:`courseplan.columns` added.

    Raises
    ------
    InputError
        A required column is missing or holds NaN.
    """
    missing = [c for c in REQUIRED if c not in zones.columns]
    if missing:
        raise InputError(f"zones table lacks column(s) {', '.join(missing)}", where="dosing stage",
                         fix="run the zoning and conditions stages first")
    for c in ("irradiation_wh_m2", "area_m2", "lwc_pct", "density_kg_m3", "snow_temp_c"):
        bad = ~np.isfinite(np.asarray(zones[c], dtype=float))
        if bad.any():
            ids = ", ".join(str(z) for z in np.asarray(zones["zone_id"])[bad][:5])
            raise InputError(f"column {c} is empty (NaN) for zone(s) {ids}", where="dosing stage",
                             fix="fill it in the conditions/zoning stage")
    ds = settings.dosing
    purity = ds.purity if ds.purity is not None else agent.purity
    out = zones.copy()
    nz = len(out)
    lwc = np.asarray(out["lwc_pct"], dtype=float)
    rho = np.asarray(out["density_kg_m3"], dtype=float)
    ts = np.asarray(out["snow_temp_c"], dtype=float)
    irr = np.asarray(out["irradiation_wh_m2"], dtype=float)
    area = np.asarray(out["area_m2"], dtype=float)
    wet = out["wetness"].astype(object).to_numpy()
    src = out["snow_source"].astype(str).to_numpy()
    if "lwc_from_class" in out.columns:
        sampled = out["lwc_from_class"].fillna(False).astype(bool).to_numpy()
    else:
        sampled = src == "class-default"

    # ---- samples (Part E) ----
    n = int(ds.samples)
    spread = float(weather.air_temp_spread_k)
    if n == 1:
        u_lwc, d_t = np.array([np.nan]), np.array([0.0])
    else:
        from scipy.special import ndtri

        u = latin_hypercube(n, 2, int(ds.seed))
        u_lwc, d_t = u[0], spread * ndtri(u[1])
    lwc_s = sample_lwc_pct(lwc, wet, sampled & (n > 1), np.nan_to_num(u_lwc, nan=0.5))
    step_s = zone_energy_j_m2(irr, weather, ds.albedo, d_t)  # (Z, S, H)
    e_s = np.maximum(np.max(np.cumsum(step_s, axis=2), axis=2), 0.0)  # Eq. B2
    step_nom = zone_energy_j_m2(irr, weather, ds.albedo, 0.0)[:, 0, :]  # nominal weather, for pass times

    kw = dict(depth_m=ds.depth_m, refreeze_share=ds.refreeze_share, brine_exit_temp_c=ds.brine_exit_temp_c,
              mix_depth_m=ds.mix_depth_m, slush_limit=ds.slush_limit, purity=purity)
    rho_s = np.broadcast_to(rho[:, None], lwc_s.shape)
    cb_s = cold_balance(agent, lwc_s, rho_s, e_s, with_passes=False, **kw)
    prod_s = np.asarray(cb_s.product_g_m2, dtype=float).reshape(nz, -1)
    x_s = np.asarray(cb_s.water_to_remove_kg_m2, dtype=float).reshape(nz, -1)
    dose50 = np.percentile(prod_s, 50, axis=1)
    dose90 = np.percentile(prod_s, 90, axis=1)
    x50 = np.percentile(x_s, 50, axis=1)
    e50 = np.percentile(e_s, 50, axis=1)
    e90 = np.percentile(e_s, 90, axis=1)

    # ---- passes at the nominal state for the P50 dose ----
    xw = agent.crystal_water_fraction / purity
    salt50 = dose50 / 1000.0 * purity
    smax = max_salt_per_pass_kg_m2(agent, lwc, rho, ds.mix_depth_m, ds.slush_limit, xw)
    smax = np.atleast_1d(np.asarray(smax, dtype=float))
    npass = np.atleast_1d(np.asarray(passes_needed(salt50, smax)))
    per = np.where(npass > 0, salt50 / np.maximum(npass, 1), 0.0)
    tpass = np.atleast_1d(np.asarray(pass_temperature_c(agent, per, lwc, rho, ds.mix_depth_m, xw),
                                     dtype=float))

    verdict = verdicts(lwc, rho, ts, out["grain"].astype(str).to_numpy(), x50, npass,
                       lwc_min_pct=ds.lwc_min_pct, lwc_max_pct=ds.lwc_max_pct,
                       min_density_kg_m3=ds.min_density_kg_m3)
    treated = np.isin(verdict.astype(str), TREATED)
    r_tb = float(brine.refreeze_ratio(agent, ds.brine_exit_temp_c)) + agent.water_per_salt - xw

    out["verdict"] = verdict.astype(str)
    out["advice"] = [VERDICTS[v] for v in verdict]
    out["energy_in_mj_m2"] = e50 / 1e6
    out["energy_in_p90_mj_m2"] = e90 / 1e6
    out["water_to_remove_kg_m2"] = x50
    out["dose_g_m2"] = np.where(treated, dose50, 0.0)
    out["dose_p90_g_m2"] = np.where(treated, dose90, 0.0)
    out["passes"] = np.where(treated, npass, 0).astype(np.int64)
    out["dose_per_pass_g_m2"] = np.where(treated, dose50 / np.maximum(npass, 1), 0.0)
    out["max_pass_g_m2"] = smax / purity * 1000.0
    out["pass_temp_c"] = np.where(treated, tpass, np.nan)
    out["pass_times"] = _pass_times(step_nom, weather, np.where(treated, npass, 0))
    out["product_kg"] = out["dose_g_m2"].to_numpy() * area / 1000.0
    out["product_p90_kg"] = out["dose_p90_g_m2"].to_numpy() * area / 1000.0
    out["nitrogen_kg"] = out["product_kg"].to_numpy() * purity * agent.nitrogen_fraction
    out["chloride_kg"] = out["product_kg"].to_numpy() * purity * agent.chloride_fraction
    out["refreeze_ratio_kg_kg"] = r_tb
    out["brine_exit_temp_c"] = float(ds.brine_exit_temp_c)
    out["refreeze_share"] = float(ds.refreeze_share)
    out["lwc_sampled"] = sampled & (n > 1)
    out["weather_source"] = weather.source

    cal = f" (fitted on {ds.calibrated})" if getattr(ds, "calibrated", None) else " (setting)"
    wline = weather.describe()
    rows = []
    for i in range(nz):
        if out["lwc_sampled"].iat[i]:
            lo_hi = class_range_text(str(wet[i])) if str(wet[i]) in WETNESS_CLASSES else "?"
            lw = f"θ {lwc[i]:.1f} % ({src[i]}, class {wet[i]}: sampled {lo_hi} %)"
        else:
            lw = f"θ {lwc[i]:.1f} % ({src[i]})"
        rows.append(
            f"{lw}; ρ {rho[i]:.0f} kg/m³, T_s {ts[i]:.1f} °C, grain {out['grain'].iat[i]} ({src[i]}); "
            f"sun {irr[i]:.0f} Wh/m² clear-sky on the slope (sun/shade raster), "
            f"albedo {ds.albedo:.2f} (setting); "
            f"weather {wline}; shortwave shares: {weather.sw_share_source}; "
            f"T_b {ds.brine_exit_temp_c:.1f} °C{cal}, k_f {ds.refreeze_share:.2f}{cal}, "
            f"depth {ds.depth_m:.3f} m, "
            f"mix {ds.mix_depth_m:.3f} m, slush limit {ds.slush_limit:.2f} (settings); "
            f"agent {agent.name} purity {purity:.2f} "
            f"({'setting' if ds.purity is not None else 'catalogue'}); "
            f"{n} samples, seed {ds.seed}")
    out["dose_inputs"] = rows
    return out
