"""Dosing stage, "harden and hold": per-pass doses timed to the race, with P50/P90 and provenance.

The physics is :mod:`courseplan.physics.hold` (free water + skeleton cold + the sun while the salt
acts, then how long the pass holds).  This module prepares each zone's net energy series over the
race day (:func:`prepare_dosing`), doses one pass for the zones that get it at the times the crews
stage gives (:func:`dose_pass`), and writes the zones' dosing columns and the ``passes`` table
(:func:`finish_dosing`).  The pipeline runs the passes in order: pass 1 before inspection, pass k in
the break before run k for the zones that would be soft again before run k ends.

Sampling: ``[dosing] samples`` Latin-hypercube samples seeded by ``[dosing] seed``.  Three inputs
are uncertain: the liquid water content (inside its wetness class, Fierz et al. 2009, where the
snow state came from a class), the air temperature (normal offset with ``[forecast]
air_temp_spread_k``, one offset for the whole day and all zones of a sample) and the albedo
(uniform in ``albedo ± albedo_spread``, one value per sample).  P50/P90 of each pass's dose are
percentiles over the samples; timing, holds and verdicts use the nominal state.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from courseplan.agents import Agent
from courseplan.calibration import calibrated_refreeze_share
from courseplan.errors import InputError
from courseplan.physics import energy
from courseplan.physics.dose import NEW_SNOW_GRAINS, latin_hypercube, sample_lwc_pct
from courseplan.physics.hold import EnergySeries, first_gain_time_s, pass_dose
from courseplan.stages.dosing.mixed import agent_groups, is_mixed, per_zone, scatter, spread_by_agent
from courseplan.stages.dosing.notes import TEMP_TOL_K, TREATED, pass_notes, provenance

if TYPE_CHECKING:  # the weather stage's record, for annotations only
    from courseplan.stages.weather import Weather

__all__ = ["DoseContext", "PassResult", "VERDICTS", "dose_pass", "finish_dosing", "prepare_dosing", "spread_pass", "spread_rounds"]

REQUIRED = ("zone_id", "irradiation_wh_m2", "area_m2", "lwc_pct", "wetness", "density_kg_m3",
            "snow_temp_c", "grain", "snow_source")

VERDICTS: dict[str, str] = {
    "treat": "One pass before inspection; spread evenly, no clumps, cover the turn apexes.",
    "treat-in-passes": "Salt again at the times shown: the sun softens this zone before its runs end.",
    "slush-risk": "Moist snow: more salt than this layer can take turns it to mush; spread the dose "
                  "shown only, and water or groom first if it stays soft.",
    "water-first": "Too dry for the salt to dissolve, and the sun will not wet it in time: water and "
                   "groom first (or scrape down to moister snow), then measure again.",
    "too-cold": "Cold snow without free water: salt brings nothing here; wait until the snow is at "
                "0 °C and wet.",
    "slush": "Soaked snow has lost its structure: drain or groom it and let it firm before salting.",
    "new-snow": "New snow soaks up brine without bonding: compact or remove it before salting.",
    "left-out": "Left out by the chief of course (edit_skip in the zones layer): no salt here.",
}
"""Verdict name → one line of advice (the project's own words)."""

FIXED_FIELDS = ("sub_passes", "hard_from_s", "hard_until_s", "layer_temp_c", "temp_flag", "slush_risk")


@dataclass(frozen=True, eq=False)
class DoseContext:
    """Everything the passes of one plan share: energy series, samples, settings, agent."""

    zones: pd.DataFrame
    agent: Agent
    settings: object
    purity: float
    t0: pd.Timestamp
    dt_s: float
    nominal: EnergySeries          # (Z, T)
    sampled: EnergySeries          # (Z, S, T)
    lwc: np.ndarray                # (Z,)
    lwc_s: np.ndarray              # (Z, S)
    rho: np.ndarray                # (Z,)
    blocked: np.ndarray            # (Z,) verdict that rules out salting, or ""
    kw: dict
    albedo_s: np.ndarray
    d_t: np.ndarray
    sampled_lwc: np.ndarray
    weather_source: str = ""
    k_f_source: str = "setting"
    groups: tuple = ()  # a mixed plan: (zone index, DoseContext) per agent (.mixed)

    def seconds(self, ts) -> np.ndarray:
        """Seconds from the series origin of tz-aware times (NaT → NaN)."""
        t = pd.DatetimeIndex(pd.to_datetime(pd.Series(ts), utc=True))
        out = (t - self.t0.tz_convert("UTC")).total_seconds().to_numpy(dtype=float)
        return np.where(pd.isna(t), np.nan, out)

    def timestamp(self, s) -> pd.DatetimeIndex:
        """Local times of seconds from the origin (NaN and inf → NaT)."""
        s = np.atleast_1d(np.asarray(s, dtype=float))
        ok = np.isfinite(s)
        return pd.DatetimeIndex(self.t0 + pd.to_timedelta(np.where(ok, s, 0.0), unit="s")).where(ok)


@dataclass(frozen=True)
class PassResult:
    """One pass for all zones (NaN / False where a zone gets no pass)."""

    spread_at_s: np.ndarray
    dose_g_m2: np.ndarray
    dose_p90_g_m2: np.ndarray
    sub_passes: np.ndarray
    hard_from_s: np.ndarray
    hard_until_s: np.ndarray
    layer_temp_c: np.ndarray
    temp_flag: np.ndarray
    water_first: np.ndarray
    slush_risk: np.ndarray
    energy_j_m2: np.ndarray
    sample_kg: np.ndarray          # (S,) product of this pass over all zones, per sample


def _check(zones: pd.DataFrame) -> None:
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


def prepare_dosing(zones: pd.DataFrame, settings, agent: Agent, weather: Weather, agents=None) -> DoseContext:
    """Net energy series of every zone over the race day (nominal and sampled) and the samples.

    The weather must come on equal steps (:func:`courseplan.stages.weather.uniform_steps`).  Each
    step's shortwave is the zone's irradiation × the step's clear-sky share × the Kasten & Czeplak
    cloud factor × (1 − albedo); longwave (Brutsaert), sensible and latent heat come from
    :func:`courseplan.physics.energy.weather_flux_w_m2` (Eq. B1).  With *agents* (name → agent) and
    zones naming another agent in ``edit_agent``, each agent's zones get a context of their own.
    """
    _check(zones)
    ds = settings.dosing
    purity = ds.purity if ds.purity is not None else agent.purity
    hours = np.asarray(weather.hours, dtype=float)
    if hours.size == 0 or np.ptp(hours) > 1e-6 * max(hours.max(), 1e-9):
        raise InputError("the weather steps are not equal", where="dosing stage",
                         fix="build the weather on uniform_steps")
    dt_s = float(hours[0] * 3600.0)
    irr = np.asarray(zones["irradiation_wh_m2"], dtype=float)
    lwc = np.asarray(zones["lwc_pct"], dtype=float)
    rho = np.asarray(zones["density_kg_m3"], dtype=float)
    ts = np.asarray(zones["snow_temp_c"], dtype=float)
    wet = zones["wetness"].astype(object).to_numpy()
    grain = np.char.upper(zones["grain"].astype(str).to_numpy().astype(str))
    if "lwc_from_class" in zones.columns:
        sampled = zones["lwc_from_class"].fillna(False).astype(bool).to_numpy()
    else:
        sampled = zones["snow_source"].astype(str).to_numpy() == "class-default"
    n = int(ds.samples)
    if n == 1:
        u = np.full((3, 1), 0.5)
        d_t, alb = np.array([0.0]), np.array([ds.albedo])
    else:
        from scipy.special import ndtri

        u = latin_hypercube(n, 3, int(ds.seed))
        d_t = float(weather.air_temp_spread_k) * ndtri(u[1])
        alb = np.clip(ds.albedo + ds.albedo_spread * (2.0 * u[2] - 1.0), 0.05, 0.95)
    sampled = sampled & (n > 1)
    lwc_s = sample_lwc_pct(lwc, wet, sampled, u[0])
    # shortwave before albedo [W/m²] per zone and step; weather part per sample and step
    kc = np.asarray(energy.cloud_shortwave_factor(weather.cloud_fraction), dtype=float)
    sw0 = irr[:, None] * (weather.sw_share * kc)[None, :] / hours[None, :]            # Wh/m² per h = W/m²
    wf_nom = np.asarray(energy.weather_flux_w_m2(weather.air_temp_c, weather.rh_pct, weather.wind_m_s,
                                                 weather.cloud_fraction, weather.pressure_pa), dtype=float)
    wf_s = np.asarray(energy.weather_flux_w_m2(weather.air_temp_c[None, :] + d_t[:, None], weather.rh_pct,
                                               weather.wind_m_s, weather.cloud_fraction, weather.pressure_pa),
                      dtype=float)
    nominal = EnergySeries((1.0 - ds.albedo) * sw0 + wf_nom[None, :], dt_s)
    flux_s = (1.0 - alb)[None, :, None] * sw0[:, None, :] + wf_s[None, :, :]
    sampled_series = EnergySeries(flux_s, dt_s)
    new = (rho < ds.min_density_kg_m3) | np.isin(grain, NEW_SNOW_GRAINS)
    blocked = np.select([new, lwc > ds.lwc_max_pct, (ts < 0) & (lwc < ds.lwc_min_pct)],
                        ["new-snow", "slush", "too-cold"], default="").astype(object)
    blocked[zones.get("edit_skip", pd.Series(False, index=zones.index)).to_numpy(bool)] = "left-out"
    k_f, k_f_source = calibrated_refreeze_share(settings)
    kw = dict(tau_s=ds.tau_min * 60.0, depth_m=ds.depth_m, refreeze_share=k_f,
              brine_exit_temp_c=ds.brine_exit_temp_c, mix_depth_m=ds.mix_depth_m, slush_limit=ds.slush_limit,
              purity=purity, lwc_min_pct=ds.lwc_min_pct)
    groups = ()
    if agents and is_mixed(zones, agent.name):
        groups = agent_groups(zones, settings, agent, agents, lambda z, s, a: prepare_dosing(z, s, a, weather))
    return DoseContext(zones=zones, agent=agent, settings=settings, purity=purity, groups=groups,
                       t0=pd.Timestamp(weather.hour_start[0]), dt_s=dt_s, nominal=nominal,
                       sampled=sampled_series, lwc=lwc, lwc_s=lwc_s, rho=rho, blocked=blocked, kw=kw,
                       albedo_s=alb, d_t=d_t, sampled_lwc=sampled, weather_source=weather.source,
                       k_f_source=k_f_source)


def dose_pass(ctx: DoseContext, spread_at_s) -> PassResult:
    """Dose one pass for the zones with a finite spread time [s from the day's origin]."""
    t = np.asarray(spread_at_s, dtype=float)
    if ctx.groups:
        return scatter(t.size, [(i, dose_pass(sub, t[i])) for i, sub in ctx.groups], PassResult)
    go = np.isfinite(t) & (ctx.blocked == "")
    tt = np.where(go, t, 0.0)
    nom = pass_dose(ctx.agent, ctx.nominal, tt, ctx.lwc, ctx.rho, temp_tol_k=TEMP_TOL_K,
                    with_layer_temp=True, **ctx.kw)
    smp = pass_dose(ctx.agent, ctx.sampled, tt[:, None], ctx.lwc_s, ctx.rho[:, None], **ctx.kw)
    fixed = np.asarray(ctx.zones.get("edit_dose_g_m2", pd.Series(np.nan, index=ctx.zones.index)), dtype=float)
    fx = go & np.isfinite(fixed)  # the chief's fixed dose (edits stage): that dose, held as long as it holds
    prod = np.where(fx[:, None], fixed[:, None], np.nan_to_num(np.asarray(smp.product_g_m2, dtype=float)))
    wf = np.asarray(nom.water_first, dtype=bool) & ~fx
    use = go & ~wf
    p50 = np.where(use, np.percentile(prod, 50, axis=1), 0.0)
    p90 = np.where(use, np.maximum(np.percentile(prod, 90, axis=1), p50), 0.0)
    area = np.asarray(ctx.zones["area_m2"], dtype=float)
    sample_kg = np.sum(np.where(use[:, None], prod, 0.0) * area[:, None], axis=0) / 1000.0

    def m(a, fill=np.nan):
        return np.where(use, np.asarray(a, dtype=float), fill)

    res = PassResult(spread_at_s=np.where(go, t, np.nan), dose_g_m2=p50, dose_p90_g_m2=p90,
                     sub_passes=np.where(use, np.asarray(nom.sub_passes), 0).astype(int),
                     hard_from_s=m(nom.hard_from_s), hard_until_s=m(nom.hard_until_s),
                     layer_temp_c=m(nom.layer_temp_c), temp_flag=use & np.asarray(nom.temp_flag, dtype=bool),
                     water_first=go & wf, slush_risk=use & np.asarray(nom.slush_risk, dtype=bool),
                     energy_j_m2=m(nom.e_k), sample_kg=sample_kg)
    f = spread_pass(ctx, np.arange(t.size), tt, np.where(fx, fixed, 0.0)) if fx.any() else res
    return replace(res, **{k: np.where(fx, getattr(f, k), getattr(res, k)) for k in FIXED_FIELDS})


def _hhmm(ts) -> str:
    return "" if pd.isna(ts) else pd.Timestamp(ts).strftime("%H:%M")


def finish_dosing(ctx: DoseContext, passes: list[tuple[object, PassResult]], schedule) -> tuple:
    """The zones' dosing columns, the ``passes`` table and the notes, from the passes spread.

    Parameters
    ----------
    ctx
        From :func:`prepare_dosing`.
    passes
        ``(slot, PassResult)`` in pass order (slots of :func:`courseplan.schedule.pass_slots`).
    schedule
        The race schedule (for the runs a zone must hold through).

    Returns
    -------
    tuple
        (zones with the ``dosing`` columns, passes table, notes, the plan's P90 [kg]: the 90th
        percentile over the samples of the whole day's product — not the sum of the zones' P90s,
        which would stack their uncertainty).
    """
    z = ctx.zones.copy()
    nz = len(z)
    ds = ctx.settings.dosing
    area = np.asarray(z["area_m2"], dtype=float)
    ids = np.asarray(z["zone_id"])
    rows = []
    total50 = np.zeros(nz)
    total90 = np.zeros(nz)
    count = np.zeros(nz, dtype=int)
    biggest = np.zeros(nz)
    times: list[list[str]] = [[] for _ in range(nz)]
    held_until = np.full(nz, np.nan)
    first = passes[0][1] if passes else None
    pz = per_zone(ctx)
    names = pz["agent"]
    for slot, r in passes:
        got = np.isfinite(r.spread_at_s) & (r.dose_g_m2 > 0)
        spread = ctx.timestamp(r.spread_at_s)
        hf = ctx.timestamp(r.hard_from_s)
        hu = ctx.timestamp(np.where(np.isinf(r.hard_until_s), np.nan, r.hard_until_s))
        for i in np.flatnonzero(got):
            rows.append({"zone_id": int(ids[i]), "pass_no": int(count[i] + 1), "slot": slot.label, "agent": names[i],
                         "spread_at": spread[i], "dose_g_m2": float(r.dose_g_m2[i]),
                         "dose_p90_g_m2": float(r.dose_p90_g_m2[i]),
                         "product_kg": float(r.dose_g_m2[i] * area[i] / 1000.0),
                         "product_p90_kg": float(r.dose_p90_g_m2[i] * area[i] / 1000.0),
                         "sub_passes": int(r.sub_passes[i]), "hard_from": hf[i],
                         "hard_until": hu[i] if np.isfinite(r.hard_until_s[i]) else pd.NaT,
                         "held_to_day_end": bool(np.isinf(r.hard_until_s[i])),
                         "layer_temp_c": float(r.layer_temp_c[i]), "layer_temp_off": bool(r.temp_flag[i])})
            count[i] += 1
            total50[i] += r.dose_g_m2[i]
            total90[i] += r.dose_p90_g_m2[i]
            biggest[i] = max(biggest[i], r.dose_g_m2[i])
            times[i].append(_hhmm(spread[i]))
            held_until[i] = r.hard_until_s[i]
    table = pd.DataFrame(rows, columns=["zone_id", "pass_no", "slot", "agent", "spread_at", "dose_g_m2", "dose_p90_g_m2",
                                        "product_kg", "product_p90_kg", "sub_passes", "hard_from", "hard_until",
                                        "held_to_day_end", "layer_temp_c", "layer_temp_off"])
    # verdicts
    wf = first.water_first if first is not None else np.zeros(nz, bool)
    slush = np.zeros(nz, bool)
    subs = np.zeros(nz, int)
    for _, r in passes:
        slush |= r.slush_risk
        subs = np.maximum(subs, r.sub_passes)
    verdict = np.where(ctx.blocked != "", ctx.blocked,
                       np.where(wf, "water-first", np.where(slush, "slush-risk",
                                np.where((count > 1) | (subs > 1), "treat-in-passes",
                                         np.where(count >= 1, "treat", "water-first"))))).astype(object)
    # holding through the runs: soft minutes during each run, from the passes actually spread
    short = np.zeros(nz)
    worst_run = np.zeros(nz, dtype=int)
    soft_by_run = {}
    for run in schedule.runs:
        rs, re_ = ctx.seconds([run.start])[0], ctx.seconds([run.end])[0]
        last_until = np.full(nz, -np.inf)
        last_from = np.full(nz, np.inf)
        for _, r in passes:
            before = np.isfinite(r.spread_at_s) & (r.spread_at_s <= rs) & (r.dose_g_m2 > 0)
            last_until = np.where(before, r.hard_until_s, last_until)
            last_from = np.where(before, r.hard_from_s, last_from)
        soft = np.maximum(0.0, re_ - np.maximum(last_until, rs)) + np.maximum(0.0, np.minimum(last_from, re_) - rs)
        soft = np.where(np.isinf(last_from), re_ - rs, np.minimum(soft, re_ - rs)) / 60.0
        soft_by_run[run.number] = soft
        worse = soft > short
        worst_run = np.where(worse, run.number, worst_run)
        short = np.maximum(short, soft)
    treated = np.isin(verdict.astype(str), TREATED)
    short = np.where(treated, short, 0.0)
    z["verdict"] = verdict.astype(str)
    z["advice"] = [VERDICTS[v] for v in verdict]
    z["dose_g_m2"] = np.where(treated, total50, 0.0)
    z["dose_p90_g_m2"] = np.where(treated, total90, 0.0)
    z["passes"] = np.where(treated, count, 0).astype(np.int64)
    z["max_pass_g_m2"] = np.where(treated, biggest, 0.0)
    z["pass_times"] = ["; ".join(t) if treated[i] else "" for i, t in enumerate(times)]
    hu_local = ctx.timestamp(held_until)
    z["hard_until"] = ["" if not treated[i] or np.isnan(held_until[i]) else
                       "end of day" if np.isinf(held_until[i]) else _hhmm(hu_local[i]) for i in range(nz)]
    z["soft_min"] = short
    z["soft_in_run"] = np.where(short > 0, worst_run, 0).astype(np.int64)
    z["energy_in_mj_m2"] = (np.where(treated, np.nan_to_num(first.energy_j_m2) / 1e6, 0.0)
                            if first is not None else np.zeros(nz))
    z["product_kg"] = z["dose_g_m2"].to_numpy() * area / 1000.0
    z["product_p90_kg"] = z["dose_p90_g_m2"].to_numpy() * area / 1000.0
    z["nitrogen_kg"] = z["product_kg"].to_numpy() * pz["purity"] * pz["nitrogen"]
    z["chloride_kg"] = z["product_kg"].to_numpy() * pz["purity"] * pz["chloride"]
    z["agent"] = pz["agent"].astype(str)
    z["brine_exit_temp_c"] = float(ds.brine_exit_temp_c)
    z["refreeze_share"] = float(ctx.kw["refreeze_share"])
    z["lwc_sampled"] = ctx.sampled_lwc
    z["weather_source"] = ctx.weather_source
    z["dose_inputs"] = provenance(ctx, z)
    notes = pass_notes(ctx, z, table, passes, schedule, soft_by_run)
    day_kg = sum((r.sample_kg for _, r in passes), np.zeros(1))
    plan_p90 = float(max(np.percentile(day_kg, 90), z["product_kg"].sum())) if passes else 0.0
    return z, table, notes, plan_p90


def spread_pass(ctx: DoseContext, zone_index, spread_at_s, g_m2) -> PassResult:
    """What a pass that was actually spread did: the hold of *g_m2* spread at *spread_at_s* (replan).

    One entry per spread record (``zone_index`` into ``ctx.zones``).  The pass the model would dose at
    that time gives the reserve R and the sun while acting E_k; a smaller spread pays the sun first and
    builds the rest, R_eff = min(R, (R + E_k)·D/D_k − E_k) ≥ 0 (Eq. C1 is linear in the salt), and the
    zone is hard from t + τ until the sun has re-supplied R_eff (Eq. C2).  R_eff = 0: never hardened.
    """
    if ctx.groups:
        return spread_by_agent(ctx, zone_index, spread_at_s, g_m2, spread_pass, PassResult)
    i, t, d = np.asarray(zone_index, dtype=int), np.asarray(spread_at_s, dtype=float), np.asarray(g_m2, dtype=float)
    series = EnergySeries(ctx.nominal.flux_w_m2[i], ctx.dt_s)
    nom = pass_dose(ctx.agent, series, t, ctx.lwc[i], ctx.rho[i], **ctx.kw)
    need = np.asarray(nom.product_g_m2, dtype=float)
    res, e_k = np.asarray(nom.reserve, dtype=float), np.asarray(nom.e_k, dtype=float)
    share = np.where(need > 0, d / np.where(need > 0, need, 1.0), 1.0)
    r_eff = np.clip(np.minimum(res, (res + e_k) * share - e_k), 0.0, None)
    r_eff = np.where(np.isfinite(r_eff) & (ctx.blocked[i] == ""), r_eff, 0.0)
    h = t + ctx.kw["tau_s"]
    until = np.where(r_eff > 0, np.asarray(first_gain_time_s(series, h, r_eff), dtype=float), -np.inf)
    nan = np.full(t.shape, np.nan)
    return PassResult(spread_at_s=t, dose_g_m2=d, dose_p90_g_m2=d, sub_passes=np.ones(t.shape, dtype=int),
                      hard_from_s=np.where(r_eff > 0, h, nan), hard_until_s=until, layer_temp_c=nan,
                      temp_flag=np.zeros(t.shape, bool), water_first=np.zeros(t.shape, bool),
                      slush_risk=np.zeros(t.shape, bool), energy_j_m2=e_k, sample_kg=np.zeros(1))


def spread_rounds(ctx: DoseContext, zone_index, spread_at_s, g_m2) -> tuple:
    """The spread records as passes for all zones: the k-th spread of each zone in round k.

    Returns (list of :class:`PassResult` per round, each zone's hold end [s; −inf soft], its last
    spread [s; −inf none]).  Records must come in time order.
    """
    idx = np.asarray(zone_index, dtype=int)
    rec = spread_pass(ctx, idx, spread_at_s, g_m2)
    n = len(ctx.zones)
    rank = pd.Series(idx).groupby(idx).cumcount().to_numpy()
    hold, last, rounds = np.full(n, -np.inf), np.full(n, -np.inf), []
    for k in range(int(rank.max()) + 1 if idx.size else 0):
        sel = rank == k
        f = {"sample_kg": np.zeros(1)}
        for name in PassResult.__dataclass_fields__:
            a = getattr(rec, name)
            if name != "sample_kg":
                f[name] = np.zeros(n, dtype=a.dtype) if a.dtype.kind in "bi" else np.full(n, np.nan)
                f[name][idx[sel]] = a[sel]
        rounds.append(PassResult(**f))
        hold[idx[sel]] = np.maximum(hold[idx[sel]], rec.hard_until_s[sel])
        last[idx[sel]] = rec.spread_at_s[sel]
    return rounds, hold, last
