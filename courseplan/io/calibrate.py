"""Calibrate on a test patch: read the patch file, work out its own energy, fit, write the plan file."""

from __future__ import annotations

from pathlib import Path

PATCH_STEP_MIN = 5.0
"""Longest step of a test patch's energy series [min] (the patch lasts tens of minutes)."""



def _kept_fit_values(settings, patch, fit, tau, agent) -> dict:
    c = {"refreeze_share": (fit.value if fit.kind == "interval" else
                            fit.high if fit.kind == "upper bound" else fit.low),
         "refreeze_share_kind": fit.kind, "refreeze_share_low": fit.low, "refreeze_share_high": fit.high,
         "tau_min_low": tau[0] / 60.0 if tau[0] > 0 else None,
         "tau_min_high": tau[1] / 60.0 if tau[1] < float("inf") else None,
         "tau_min": float(settings.dosing.tau_min), "brine_exit_temp_c": float(settings.dosing.brine_exit_temp_c),
         "date": patch.spread_at.strftime("%Y-%m-%d"), "lon": round(patch.lon, 6), "lat": round(patch.lat, 6),
         "agent": agent.name, "wetness": patch.wetness, "patch_file": patch.name, "patch_sha256": patch.sha256}
    return {k: (round(float(v), 4) if isinstance(v, float) and k not in ("lon", "lat") else v) for k, v in c.items()}



def calibrate(plan_path: str | Path, patch_path: str | Path, *, dry_run: bool = False,
              forecast: str | Path | None = None) -> dict:
    """Fit k_f to a test patch and write it into the plan file's ``[calibration]`` table.

    The patch's own energy: clear sky (pvlib Ineichen–Perez) at its place and time on its slope and
    aspect (full sun), the plan's forecast (file or ``[forecast]`` constants), equal steps of at most
    5 min from spreading to the last reading, the net flux built as the dosing stage builds it
    (:func:`courseplan.stages.dosing.prepare_dosing`).  k_f from
    :func:`courseplan.physics.patch.fit_refreeze_share`; τ and T_b are kept, τ is bounded from the
    reading times (:func:`courseplan.physics.patch.tau_bounds`).  See docs/calibration.md.

    Parameters
    ----------
    plan_path, patch_path
        The plan file (TOML) and the patch file (CSV).
    dry_run
        Compute and return the change (``diff``) but write nothing.
    forecast
        A forecast CSV for the patch's day instead of the plan's, or ``"constants"`` for the
        ``[forecast]`` constants.

    Returns
    -------
    dict
        Plain data: ``patch``, ``energy``, ``rungs``, ``fit``, ``tau``, ``notes``, ``calibration`` (the
        table written), ``diff`` (unified diff of the plan file), ``written``.
    """
    import difflib
    import math

    import numpy as np
    import pandas as pd

    from courseplan.errors import InputError
    from courseplan.io.agentfile import load_catalogue
    from courseplan.io.patchfile import read_patch
    from courseplan.io.planfile import plan_from_text, read_plan_text, with_calibration, write_plan_text
    from courseplan.physics.hold import pass_dose
    from courseplan.physics.patch import fit_refreeze_share, rung_outcomes, tau_bounds

    p, text = read_plan_text(plan_path)
    settings = plan_from_text(text, p)
    pl, ds = settings.plan, settings.dosing
    cat = load_catalogue(settings.inputs.agents)
    patch = read_patch(patch_path, timezone=pl.timezone, date=pl.date, xy_crs=settings.inputs.observations_crs,
                       catalogue=cat)
    e = patch_energy(settings, patch, cat, forecast)
    agent, ctx, cs, weather, irr, notes = e["agent"], e["ctx"], e["clear_sky"], e["weather"], e["irr"], e["notes"]
    slope, aspect, alt, terrain_src = e["slope"], e["aspect"], e["altitude"], e["terrain"]
    reads, t0, tau_s = patch.readings, patch.spread_at, ds.tau_min * 60.0
    # readings → rungs → fit
    fitted = reads[reads["held"].notna()]
    for r in reads[reads["held"].isna()].itertuples():
        notes.append(f"line {r.line}: {r.dose_g_m2:g} g/m² read {r.hardness} ({r.method}) at {r.read_at:%H:%M}: "
                     "recorded, not fitted (only held/soft is fitted)")
    if not len(fitted):
        raise InputError("no reading says held or soft", where=patch.name, fix="give result held or soft for each rung")
    read_s = (pd.DatetimeIndex(fitted["read_at"]) - t0).total_seconds().to_numpy(float)
    held = fitted["held"].astype(bool).to_numpy()
    lad = rung_outcomes(fitted["dose_g_m2"].to_numpy(float), read_s, held, tau_s)
    for d in lad.undecided_g_m2:
        notes.append(f"{d:g} g/m² was read soft only before spread + τ ({ds.tau_min:g} min): it says nothing")
    if not lad.doses_g_m2.size:
        raise InputError(f"every rung was read soft before spread + τ ({ds.tau_min:g} min)", where=patch.name,
                         fix="read the rungs again after the salt has acted")
    kw = dict(tau_s=tau_s, depth_m=ds.depth_m, brine_exit_temp_c=ds.brine_exit_temp_c)
    fit = fit_refreeze_share(agent, ctx.nominal, 0.0, patch.lwc_pct, patch.density_kg_m3, lad.doses_g_m2, lad.held,
                             purity=ctx.purity, **kw)
    tau = tau_bounds(fitted["dose_g_m2"].to_numpy(float), read_s, held)
    kf_used = fit.value if fit.kind == "interval" else (fit.high if fit.kind == "upper bound" else fit.low)
    probe = pass_dose(agent, ctx.nominal, 0.0, patch.lwc_pct, patch.density_kg_m3, refreeze_share=kf_used,
                      purity=ctx.purity, **kw)
    until = float(np.ravel(probe.hard_until_s)[0])
    late = [float(d) for d, h, r in zip(lad.doses_g_m2, lad.held, lad.read_s, strict=True) if not h and r > until]
    if late:
        notes.append(f"{', '.join(f'{d:g}' for d in late)} g/m² read soft after the model's hold end "
                     f"({(t0 + pd.Timedelta(seconds=until)):%H:%M}): the sun may have taken the hold back, so "
                     "k_f may be lower than fitted; read sooner after spread + τ")
    if tau[0] > tau[1]:
        notes.append("the reading times disagree on τ (a rung held before another had hardened)")
    elif not (tau[0] <= tau_s <= tau[1]):
        notes.append(f"τ = {ds.tau_min:g} min (kept) is outside what the readings allow "
                     f"({tau[0] / 60:.0f}–{'∞' if math.isinf(tau[1]) else f'{tau[1] / 60:.0f}'} min): "
                     "set [dosing] tau_min inside and calibrate again")
    values = _kept_fit_values(settings, patch, fit, tau, agent)
    new = with_calibration(text, values)
    plan_from_text(new, p)  # never write a plan that does not load
    diff = "".join(difflib.unified_diff(text.splitlines(keepends=True), new.splitlines(keepends=True),
                                        fromfile=f"{p.name} (before)", tofile=f"{p.name} (after)"))
    written = False
    if not dry_run and new != text:
        write_plan_text(p, new)
        written = True
    res = dict(zip(lad.doses_g_m2.tolist(), zip(lad.held.tolist(), lad.read_s.tolist(), strict=True), strict=True))
    rungs = []
    for d, resid in zip(lad.doses_g_m2.tolist(), fit.residuals, strict=True):
        h, r = res[d]
        rungs.append({"dose_g_m2": d, "held": h, "read_at": (t0 + pd.Timedelta(seconds=r)).isoformat(),
                      "residual_g_m2": None if not np.isfinite(resid) else round(resid, 2)})
    e_k = float(np.ravel(probe.e_k)[0])
    return {"plan": str(p), "patch": {"file": patch.name, "sha256": patch.sha256, "lon": patch.lon, "lat": patch.lat,
                                      "slope_deg": round(slope, 1), "aspect_deg": round(aspect, 1),
                                      "altitude_m": round(alt, 0), "terrain": terrain_src,
                                      "spread_at": t0.isoformat(), "agent": agent.name, "lwc_pct": patch.lwc_pct,
                                      "wetness": patch.wetness, "lwc_from_class": patch.lwc_from_class,
                                      "density_kg_m3": patch.density_kg_m3},
            "energy": {"steps": cs.n_steps, "step_min": cs.step_hours * 60.0, "start": cs.start.isoformat(),
                       "end": cs.end.isoformat(), "irradiation_wh_m2": round(irr, 1), "weather": weather.source,
                       "e_k_kj_m2": round(e_k / 1000.0, 1), "hard_until": None if not np.isfinite(until) else
                       (t0 + pd.Timedelta(seconds=until)).isoformat()},
            "rungs": rungs, "undecided_g_m2": list(lad.undecided_g_m2),
            "fit": {"kind": fit.kind, "value": None if math.isnan(fit.value) else round(fit.value, 4),
                    "low": round(fit.low, 4), "high": round(fit.high, 4)},
            "tau": {"kept_min": ds.tau_min, "low_min": tau[0] / 60.0,
                    "high_min": None if math.isinf(tau[1]) else tau[1] / 60.0},
            "brine_exit_temp_c": ds.brine_exit_temp_c, "notes": notes, "calibration": values,
            "diff": diff, "written": written}



def patch_energy(settings, patch, catalogue=None, forecast: str | Path | None = None) -> dict:
    """The test patch's net energy series and dosing context (used by :func:`calibrate`).

    Returns
    -------
    dict
        ``agent``, ``ctx`` (:class:`~courseplan.stages.dosing.DoseContext` of the patch as one zone, one
        sample; ``ctx.nominal`` is the series, its origin the spreading), ``clear_sky``, ``weather``,
        ``irr`` [Wh/m² on the slope], ``slope``, ``aspect``, ``altitude``, ``terrain`` (their source),
        ``notes``.
    """
    import dataclasses

    import pandas as pd

    from courseplan.agents import get_agent
    from courseplan.errors import InputError
    from courseplan.io.forecast import read_forecast_csv
    from courseplan.io.patchfile import terrain_at
    from courseplan.physics.solar import clear_sky_window, irradiation_on_slope_wh_m2
    from courseplan.stages.dosing import prepare_dosing
    from courseplan.stages.sun import DEFAULT_SITE_ALTITUDE_M
    from courseplan.stages.weather import uniform_steps, weather_from_settings, weather_from_table

    pl, ds, cat = settings.plan, settings.dosing, catalogue
    agent = get_agent(patch.agent, cat)
    notes: list[str] = []
    slope, aspect, alt = patch.slope_deg, patch.aspect_deg, patch.altitude_m
    terrain_src = "patch file"
    if slope is None or aspect is None or alt is None:
        if settings.inputs.dem is not None:
            s_d, a_d, z_d = terrain_at(settings.inputs.dem, patch.lon, patch.lat)
            got = [n for n, v in (("slope", slope), ("aspect", aspect), ("altitude", alt)) if v is None]
            slope, aspect, alt = (s_d if slope is None else slope, a_d if aspect is None else aspect,
                                  z_d if alt is None else alt)
            terrain_src = f"{', '.join(got)} from the plan's DEM at the place"
        elif slope is None or aspect is None:
            raise InputError("the patch gives no slope_deg/aspect_deg and the plan has no DEM", where=patch.name,
                             fix="add slope_deg and aspect_deg columns, or set [inputs] dem")
        else:
            alt = DEFAULT_SITE_ALTITUDE_M
            notes.append(f"no altitude_m and no DEM: clear sky for an assumed {alt:.0f} m")
    # the patch's time grid: spreading → last reading (and at least τ)
    reads = patch.readings
    t0 = patch.spread_at
    tau_s = ds.tau_min * 60.0
    t_last = max(pd.Timestamp(reads["read_at"].max()), t0 + pd.Timedelta(seconds=tau_s))
    if t_last.date() != t0.date():
        raise InputError("the readings run past midnight", where=patch.name, fix="read the patch on the day it was spread")
    cs = clear_sky_window(patch.lat, patch.lon, alt, t0.strftime("%Y-%m-%d"), t0.strftime("%H:%M:%S"),
                          t_last.strftime("%H:%M:%S"), pl.timezone, step_minutes=PATCH_STEP_MIN)
    steps = uniform_steps(cs.start, cs.end, cs.n_steps)
    fc = settings.inputs.forecast if forecast is None else (None if str(forecast) == "constants" else Path(forecast))
    if fc is None:
        weather = weather_from_settings(settings, cs, steps=steps)
    else:
        df = read_forecast_csv(fc)
        tt = pd.DatetimeIndex(pd.to_datetime(df["time"]))
        tt = tt.tz_localize(pl.timezone) if tt.tz is None else tt.tz_convert(pl.timezone)
        if tt.min() > cs.start + pd.Timedelta(hours=1) or tt.max() < cs.end - pd.Timedelta(hours=1):
            raise InputError(f"the forecast covers {tt.min():%Y-%m-%d %H:%M}–{tt.max():%Y-%m-%d %H:%M}, not the patch "
                             f"({cs.start:%Y-%m-%d %H:%M}–{cs.end:%H:%M})", where=Path(fc).name,
                             fix="give --forecast FILE for the patch's day, or --forecast constants")
        weather = weather_from_table(df, settings, cs, steps=steps, source=f"forecast file {Path(fc).name}")
    irr = float(irradiation_on_slope_wh_m2(cs, slope, aspect))
    zone = pd.DataFrame({"zone_id": [0], "irradiation_wh_m2": [irr], "area_m2": [1.0], "lwc_pct": [patch.lwc_pct],
                         "wetness": [patch.wetness], "density_kg_m3": [patch.density_kg_m3], "snow_temp_c": [0.0],
                         "grain": ["MF"], "snow_source": ["patch file"]})
    same = agent.name == get_agent(pl.agent, cat).name
    one = settings.replace(dosing=dataclasses.replace(ds, samples=1, purity=ds.purity if same else None))
    ctx = prepare_dosing(zone, one, agent, weather)
    if ctx.blocked[0]:
        notes.append(f"the patch snow counts as {ctx.blocked[0]} in the model: a plan would not salt it")
    return dict(agent=agent, ctx=ctx, clear_sky=cs, weather=weather, irr=irr, slope=slope, aspect=aspect,
                altitude=alt, terrain=terrain_src, notes=notes)
