"""Harden and hold: the dose of one salting pass, and how long the pass keeps the layer hard.

Second design of the dosing model (design note ``dosing-model.md``, "harden and hold").  A pass k spread
on a zone at t_k refreezes the free water of the top layer, cools its ice skeleton to the brine exit
temperature T_b and offsets the sun while the salt acts (τ, 10–30 min on alpine slopes, 45–60 min on
cross-country tracks; field-evidence.md §2)::

    X_h = k_f · ρ_w · θ · d                      free water to refreeze            [kg/m²]
    X_c = c̄_ice · I_d · |T_b| / L_f,  I_d = (ρ_s − ρ_w θ) d      skeleton cold    [kg/m²]
    E_k = max_{u ∈ [t_k, t_k+τ]} C(u) − C(t_k), ≥ 0               sun while acting  [J/m²]
    s_k = (X_h + X_c + E_k / L_f) / r(T_b),   D_k = s_k / purity                    [kg/m²]
    n_k = ⌈s_k / s_max⌉                          sub-passes under the slush limit (C3)
    R   = L_f · X_h + c̄_ice · I_d · |T_b|       hardening reserve                  [J/m²]
    hard from t_k + τ until the first u with C(u) − C(t_k + τ) ≥ R

C(t) is the cumulative net energy of Eq. (B1) (:mod:`courseplan.physics.energy`) on a uniform grid:
the flux of step j is constant over [j·dt, (j+1)·dt), so C is piecewise linear and every time above
is found by linear interpolation inside its step (no jumps by a step).  r is the effective refreeze
ratio of :func:`courseplan.physics.dose.cold_balance` (Eq. C1 with the product's crystal water); c̄_ice
is the mean heat capacity of ice Ih between T_b and 0 °C and L_f its enthalpy of melting, both from
IAPWS R10-06 [1]_ (:mod:`courseplan.constants`, :func:`courseplan.physics.brine.ice_heat_capacity_mean`).
Once the reserve is spent the layer is back at 0 °C with its free water, so a re-salt meets the same
θ (:func:`keep_hard`).

Verdicts on physics rather than thresholds alone:

- *water first*: below θ_min the sun melts E_k/L_f within τ, raising θ by Δθ = 100·E_k/(L_f ρ_w d) %;
  only where θ + Δθ < θ_min is the zone "water first".  Elsewhere the pass meets the layer at
  θ_eff = θ + Δθ (slush limit, wetness class, closed-layer check).  The melt itself is already the
  E_k/L_f term, so X_h keeps the measured θ: the dose is continuous in θ and at the verdict boundary
  it is at most (ρ_w θ_min d + X_c)/r, tens of g/m², never hundreds.
- *slush risk*: where a pass needs more than one sub-pass and θ_eff is below the wet class (3 %,
  Fierz et al. 2009 [2]_), the over-dose is the slush the trade warns about (field-evidence.md §2,
  "over-dose and wrong snow"): the pass is capped at the slush limit and flagged; the uncapped dose is
  reported too.  Wet snow keeps its sub-passes.
- *closed-layer check* (optional: Eqs. A2–A3, :func:`courseplan.physics.brine.mixture_equilibrium`):
  the dose mixed into the layer of depth d should settle within a tolerance (2 K) of T_b; otherwise
  the brine spreads deeper than d or T_b is wrong.

Arrays broadcast (numpy rules) between the series' leading shape ``flux_w_m2.shape[:-1]`` and the zone
inputs (spread times, θ, ρ and the parameters); out-of-domain elements give NaN (booleans False,
counts 0).  Loops run over grid steps inside a window and over passes, never over zones or samples.

References
----------
.. [1] IAPWS R10-06 (2009), Revised Release on the Equation of State 2006 for H2O Ice Ih;
   Feistel, R. & Wagner, W. (2006). *J. Phys. Chem. Ref. Data* 35(2), 1021–1047. doi:10.1063/1.2183324
.. [2] Fierz, C. et al. (2009). *The International Classification for Seasonal Snow on the Ground*.
   IHP-VII Technical Documents in Hydrology 83, UNESCO-IHP, Paris.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from courseplan.agents import get_agent
from courseplan.constants import L_FUSION, RHO_WATER
from courseplan.errors import InputError
from courseplan.physics import brine
from courseplan.physics.dose import layer_water_ice, max_salt_per_pass_kg_m2, passes_needed
from courseplan.physics.snow import WETNESS_CLASSES

__all__ = [
    "EnergySeries", "KeepHard", "PassDose", "TAU_S", "WET_PCT", "cumulative_energy_j_m2",
    "first_gain_time_s", "hardening_reserve_j_m2", "hold_end_s", "keep_hard", "pass_dose",
    "sun_while_acting_j_m2",
]

TAU_S = 1200.0
"""Default time the salt acts in the layer, τ = 20 min [s] (field-evidence.md §2: 15–20 min in spring sun)."""
WET_PCT = WETNESS_CLASSES["wet"][0]
"""Lower bound of the 'wet' class, 3 % vol (Fierz et al. 2009): below it an over-dose is a slush risk."""


def _out(x):
    x = np.asarray(x)
    return x.item() if x.ndim == 0 else x


@dataclass(frozen=True, eq=False)
class EnergySeries:
    """Net energy flux into the snow surface on a uniform time grid.

    Parameters
    ----------
    flux_w_m2
        Net flux of Eq. (B1) per step [W/m²], shape (..., T); step j holds over [j·dt, (j+1)·dt) with
        times in seconds from the caller's origin t0.  The leading shape broadcasts with the zones.
    dt_s
        Step length [s] (> 0).

    Attributes
    ----------
    cum_j_m2
        Cumulative net energy C at the T + 1 grid nodes, C(0) = 0 [J/m²].
    """

    flux_w_m2: np.ndarray
    dt_s: float
    cum_j_m2: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        f = np.ascontiguousarray(self.flux_w_m2, dtype=float)  # kept by reference: do not modify it later
        dt = float(self.dt_s)
        if f.ndim == 0 or f.shape[-1] < 1:
            raise InputError("energy series has no time steps", where="hold",
                             fix="give the flux as an array of shape (..., T) with T >= 1")
        if not (np.isfinite(dt) and dt > 0):
            raise InputError(f"time step {self.dt_s!r} s is not positive", where="hold")
        pad = np.empty(f.shape[:-1] + (f.shape[-1] + 2,))  # nodes 0…T and a +inf sentinel per row
        pad[..., 0], pad[..., -1] = 0.0, np.inf
        np.cumsum(f, axis=-1, out=pad[..., 1:-1])
        pad[..., 1:-1] *= dt
        for k, v in dict(flux_w_m2=f, dt_s=dt, cum_j_m2=pad[..., :-1], _c=pad.ravel(),
                         _nan=np.isnan(pad[..., -2]).ravel()).items():  # _c flat nodes, _nan NaN rows
            object.__setattr__(self, k, v)

    steps = property(lambda self: self.flux_w_m2.shape[-1], doc="Number of steps T.")
    end_s = property(lambda self: self.steps * self.dt_s, doc="End of the grid, T·dt [s].")


# ---- flat kernels (elements in a 1-d array, each with the flat index of its series row) ------------
def _flatten(series: EnergySeries, *arrays):
    """Broadcast inputs with the series rows: shape, row of each element, flat arrays (0-d stay 0-d)."""
    rs = series.flux_w_m2.shape[:-1]
    shape = np.broadcast_shapes(rs, *(np.shape(a) for a in arrays))
    rows = np.broadcast_to(np.arange(int(np.prod(rs)), dtype=np.intp).reshape(rs), shape).ravel()
    flat = [np.asarray(a, dtype=float) if np.ndim(a) == 0 else
            np.broadcast_to(np.asarray(a, dtype=float), shape).ravel() for a in arrays]
    return shape, rows, flat


def _take(a, idx):
    return a if np.ndim(a) == 0 else a[idx]


def _at(s: EnergySeries, rows, t):
    """Step j holding t, flat index b of its first node, and C(t) interpolated (NaN off [0, T·dt])."""
    j = np.fmin(np.fmax(t / s.dt_s, 0.0), s.steps - 1).astype(np.intp)  # fmax/fmin: NaN → 0
    b = rows * (s.steps + 2) + j
    c0 = s._c[b]
    c = c0 + (s._c[b + 1] - c0) * (t / s.dt_s - j)
    return j, b, np.where((t >= 0) & (t <= s.end_s), c, np.nan)


def _peak_gain(s: EnergySeries, rows, t, tau):
    """Peak of C(u) − C(t) over u in [t, t + τ], ≥ 0 (window cut at the grid end), and _at of its end."""
    t = np.broadcast_to(t, rows.shape)
    j0, b0, c0 = _at(s, rows, t)
    je, be, ce = _at(s, rows, np.minimum(t + tau, s.end_s))
    span, best = je - j0, ce  # nodes j0+1 … je lie inside the window
    for m in range(1, int(span.max(initial=0)) + 1):
        best = np.where(m <= span, np.maximum(best, s._c[b0 + np.minimum(m, span)]), best)
    e = np.maximum(best - c0, 0.0)  # NaN stays NaN
    e = e if np.all(np.asarray(tau) >= 0) else np.where(np.asarray(tau) >= 0, e, np.nan)
    return e, (je, be, ce)


def _first_gain(s: EnergySeries, rows, h, gain, at=None):
    """First u ≥ h with C(u) − C(h) ≥ gain, interpolated inside its step; +inf if not in the grid.

    ``at``: :func:`_at` of h if already known.  Steps are searched forward until the row's +inf sentinel.
    """
    h = np.broadcast_to(h, rows.shape)
    gain = np.broadcast_to(gain, rows.shape)
    _, b, ch = _at(s, rows, h) if at is None else at
    target = ch + gain
    out = np.where((h >= 0) & ~np.isnan(gain), np.where(gain > 0, np.inf, h), np.nan)
    live = (gain > 0) & (h < s.end_s)
    idx = None if live.all() else np.flatnonzero(live)  # None: every element, no gather
    hit_b = np.full(out.shape, -1, dtype=np.intp)  # first node of the step where C crosses the target
    bb, tt = (b, target) if idx is None else (b[idx], target[idx])
    while bb.size:
        c1 = s._c[bb + 1]
        hit = c1 >= tt  # C rises through the target inside this step (it was below at the step start)
        hit_b[np.flatnonzero(hit) if idx is None else idx[hit]] = bb[hit]
        keep = c1 < tt  # NaN drops out (set below)
        idx = np.flatnonzero(keep) if idx is None else idx[keep]
        bb, tt = bb[keep] + 1, tt[keep]
    f = np.flatnonzero(hit_b >= 0)
    bf, c0, c1 = hit_b[f], s._c[hit_b[f]], s._c[hit_b[f] + 1]
    u = (bf % (s.steps + 2) + (target[f] - c0) / (c1 - c0)) * s.dt_s
    out[f] = np.where(np.isinf(c1), np.inf, np.maximum(u, h[f]))  # inf: the row's sentinel
    if s._nan.any():
        out[s._nan[rows]] = np.nan  # a NaN flux anywhere in the row: no hold end
    return out


# ---- public energy-series functions --------------------------------------------------------------
def cumulative_energy_j_m2(series: EnergySeries, t_s):
    """Cumulative net energy C(t) since the grid origin, linear inside a step [J/m²] (NaN off the grid)."""
    shape, rows, (t,) = _flatten(series, t_s)
    return _out(_at(series, rows, np.broadcast_to(t, rows.shape))[2].reshape(shape))


def sun_while_acting_j_m2(series: EnergySeries, t_s, tau_s=TAU_S):
    """Sun while the salt acts, E_k = max over [t, t+τ] of C(u) − C(t), ≥ 0 [J/m²] (window cut at the end)."""
    shape, rows, (t, tau) = _flatten(series, t_s, tau_s)
    return _out(_peak_gain(series, rows, t, tau)[0].reshape(shape))


def first_gain_time_s(series: EnergySeries, start_s, gain_j_m2):
    """First u ≥ start with C(u) − C(start) ≥ gain [s], linear inside the step.

    ``start`` where gain ≤ 0; +inf where not reached within the grid; NaN for a start before 0 or NaN.
    """
    shape, rows, (h, g) = _flatten(series, start_s, gain_j_m2)
    return _out(_first_gain(series, rows, h, g).reshape(shape))


def _budget(lwc, rho, d, kf, tb):
    """X_h [kg/m²], skeleton cold c̄·I_d·|T_b| [J/m²] and the domain mask."""
    water, ice = (np.asarray(v, dtype=float) for v in layer_water_ice(lwc, rho, d))
    ok = (lwc >= 0) & (d > 0) & (rho * d >= water) & (kf >= 0) & (kf <= 1) & (tb < 0)
    cold = brine.ice_heat_capacity_mean(tb) * ice * np.abs(tb)
    return kf * water, cold, ok


def hardening_reserve_j_m2(lwc_pct, density_kg_m3, *, depth_m=0.04, refreeze_share=0.5,
                           brine_exit_temp_c=-2.0):
    """Hardening reserve R = L_f·X_h + c̄_ice·I_d·|T_b| of one pass [J/m²] (NaN out of domain)."""
    xh, cold, ok = _budget(*(np.asarray(v, dtype=float) for v in (lwc_pct, density_kg_m3, depth_m,
                                                                   refreeze_share, brine_exit_temp_c)))
    return _out(np.where(ok, L_FUSION * xh + cold, np.nan))


def hold_end_s(series: EnergySeries, t_k_s, lwc_pct, density_kg_m3, *, tau_s=TAU_S, depth_m=0.04,
               refreeze_share=0.5, brine_exit_temp_c=-2.0):
    """Hold end alone: first u ≥ t_k + τ where the net energy since t_k + τ re-supplied R [s].

    +inf where the layer holds to the grid end (the caller says "till end of day"); NaN out of domain.
    """
    r = hardening_reserve_j_m2(lwc_pct, density_kg_m3, depth_m=depth_m, refreeze_share=refreeze_share,
                               brine_exit_temp_c=brine_exit_temp_c)
    return first_gain_time_s(series, np.add(t_k_s, tau_s), r)


# ---- one pass --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PassDose:
    """Result of :func:`pass_dose` (floats for scalar input, else arrays of the broadcast shape).

    Attributes
    ----------
    x_h, x_c
        Free water to refreeze k_f·ρ_w·θ·d, skeleton cold c̄_ice·I_d·|T_b|/L_f [kg/m²].
    e_k
        Sun while the salt acts, peak of C over [t_k, t_k + τ] [J/m²].
    salt, salt_uncapped
        Salt s_k [kg/m²] as spread (capped where ``slush_risk``, 0 where water first) and uncapped.
    product_g_m2, product_uncapped_g_m2
        Product D_k = s_k/purity, as spread and uncapped [g/m²].
    max_salt_per_pass, sub_passes
        Slush limit s_max at θ_eff [kg/m²] (inf: none); sub-passes n_k (1 where capped, 0 where none).
    reserve, hard_from_s, hard_until_s
        Hardening reserve R [J/m²]; hard from t_k + τ until R is spent [s] (+inf: to the grid end).
    layer_temp_c, temp_mismatch, temp_flag
        Closed-layer temperature in depth d [°C] (NaN unless computed), |T_layer − T_b| [K], and
        whether that exceeds the tolerance.
    water_first, slush_risk, theta_eff
        Verdict flags (module docstring); θ the pass meets, θ + Δθ below θ_min, else θ [% vol].
    """

    x_h: object
    x_c: object
    e_k: object
    salt: object
    salt_uncapped: object
    product_g_m2: object
    product_uncapped_g_m2: object
    max_salt_per_pass: object
    sub_passes: object
    reserve: object
    hard_from_s: object
    hard_until_s: object
    layer_temp_c: object
    temp_mismatch: object
    temp_flag: object
    water_first: object
    slush_risk: object
    theta_eff: object


_PARAMS = ("tau_s", "depth_m", "refreeze_share", "brine_exit_temp_c", "mix_depth_m", "slush_limit",
           "lwc_min_pct")


def _pass_flat(ag, s, rows, t, lwc, rho, p, prm, tol, with_layer_temp):
    """One pass on flat element arrays; returns a dict of flat results."""
    tau, d, kf, tb, dmix, fsl, lmin = (prm[k] for k in _PARAMS)
    xw = ag.crystal_water_fraction / p
    r = np.asarray(brine.refreeze_ratio(ag, tb), dtype=float) + ag.water_per_salt - xw
    xh, cold, ok = _budget(lwc, rho, d, kf, tb)
    ok = ok & (tau >= 0) & np.isfinite(r) & (r > 0)
    e, at_h = _peak_gain(s, rows, t, tau)
    ok = ok & ~np.isnan(e)
    dry = lwc < lmin
    theta_eff = np.where(dry, lwc + 100.0 * e / (L_FUSION * RHO_WATER * d), lwc)
    wf = dry & (theta_eff < lmin)
    salt_u = (xh + cold / L_FUSION + e / L_FUSION) / r
    smax = np.asarray(max_salt_per_pass_kg_m2(ag, theta_eff, rho, dmix, fsl, xw), dtype=float)
    n = np.asarray(passes_needed(salt_u, smax), dtype=np.int64)
    slush = (n > 1) & (theta_eff < WET_PCT) & ok & ~wf
    salt = np.where(wf, 0.0, np.where(slush, smax, salt_u))
    n = np.where(wf | ~ok, 0, np.where(slush, 1, n))
    reserve = L_FUSION * xh + cold
    h = t + tau
    h_s = np.broadcast_to(np.where(wf, np.nan, h), rows.shape)
    until = _first_gain(s, rows, h_s, reserve, at_h if np.all(h_s[~wf] <= s.end_s) else None)
    res = dict(x_h=xh, x_c=cold / L_FUSION, e_k=e, salt=salt, salt_uncapped=salt_u,
               product_g_m2=salt / p * 1000.0, product_uncapped_g_m2=salt_u / p * 1000.0,
               max_salt_per_pass=smax, reserve=reserve, hard_from_s=np.where(wf, np.nan, h),
               hard_until_s=until, theta_eff=theta_eff)
    tl = np.full(np.shape(salt), np.nan)
    if with_layer_temp:
        w_l, i_l = layer_water_ice(theta_eff, rho, d)
        sel = ok & ~wf
        tl = np.where(sel, brine.mixture_equilibrium(ag, np.where(sel, salt, 0.0), i_l, w_l,
                                                     product_water_kg=xw * np.where(sel, salt, 0.0)
                                                     ).temperature_c, np.nan)
    mis = np.abs(tl - tb)
    def full(v):  # writable, element-shaped (ok and e always are)
        return v if np.shape(v) == rows.shape else np.broadcast_to(v, rows.shape).copy()

    res = {k: full(v) if ok.all() else np.where(ok, v, np.nan) for k, v in res.items()}
    res.update(sub_passes=full(n), layer_temp_c=full(tl), temp_mismatch=full(mis), temp_flag=full(mis > tol),
               water_first=full(wf & ok), slush_risk=full(slush))
    return res


def _prepare(agent, series, t_k_s, lwc_pct, density_kg_m3, purity, kw):
    ag = get_agent(agent)
    p = ag.purity if purity is None else float(purity)
    if not 0 < p <= 1:
        raise InputError(f"purity {purity!r} is not in (0, 1]", where="hold")
    names = ("t", "lwc", "rho") + _PARAMS
    shape, rows, flat = _flatten(series, t_k_s, lwc_pct, density_kg_m3, *(kw[k] for k in _PARAMS))
    a = dict(zip(names, flat, strict=True))
    return ag, p, shape, rows, a


def pass_dose(agent, series: EnergySeries, t_k_s, lwc_pct, density_kg_m3, *, tau_s=TAU_S, depth_m=0.04,
              refreeze_share=0.5, brine_exit_temp_c=-2.0, mix_depth_m=0.01, slush_limit=0.10,
              purity=None, lwc_min_pct=1.0, temp_tol_k=2.0, with_layer_temp: bool = False) -> PassDose:
    """Dose, sub-passes, verdicts and hold of one pass spread at t_k, for arrays of zones.

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    series
        Net energy flux of the zones (:class:`EnergySeries`).
    t_k_s
        Spread time of the pass [s from the grid origin], per zone or a scalar.
    lwc_pct, density_kg_m3
        Liquid water content θ [% vol] and snow density ρ_s [kg/m³] at the spread time.
    tau_s
        Time the salt acts in the layer τ [s].
    depth_m, refreeze_share, brine_exit_temp_c, mix_depth_m, slush_limit
        d [m], k_f [-], T_b [°C], d_mix [m], f_slush [-], as in :func:`~courseplan.physics.dose.cold_balance`.
    purity
        Product purity overriding the agent's.
    lwc_min_pct
        θ_min for the water-first verdict [% vol].
    temp_tol_k
        Tolerance of the closed-layer check [K].
    with_layer_temp
        Also solve the closed-layer equilibrium (the costly part); NaN otherwise.
    """
    kw = {k: v for k, v in locals().items() if k in _PARAMS}
    ag, p, shape, rows, a = _prepare(agent, series, t_k_s, lwc_pct, density_kg_m3, purity, kw)
    res = _pass_flat(ag, series, rows, a["t"], a["lwc"], a["rho"], p, a, float(temp_tol_k), with_layer_temp)
    return PassDose(**{k: _out(np.asarray(v).reshape(shape)) for k, v in res.items()})


# ---- keep hard ---------------------------------------------------------------------------------------
@dataclass(frozen=True)
class KeepHard:
    """Result of :func:`keep_hard`, per zone (floats/ints for scalar input, else arrays).

    Attributes
    ----------
    passes, sub_passes
        Passes spread in [t_start, t_end), and their sub-passes added up.
    product_g_m2, max_pass_g_m2
        Product over all passes, and the largest single pass [g/m²].
    held_until_s
        Hold end of the last pass [s] (+inf: to the grid end; NaN: no pass).
    water_first, slush_risk
        A pass time met a water-first zone (salting stopped there) / a pass was capped.
    truncated
        Still soft before t_end after ``max_passes`` passes.
    """

    passes: object
    sub_passes: object
    product_g_m2: object
    max_pass_g_m2: object
    held_until_s: object
    water_first: object
    slush_risk: object
    truncated: object


def keep_hard(agent, series: EnergySeries, lwc_pct, density_kg_m3, t_start_s, t_end_s, *, max_passes=200,
              purity=None, tau_s=TAU_S, depth_m=0.04, refreeze_share=0.5, brine_exit_temp_c=-2.0,
              mix_depth_m=0.01, slush_limit=0.10, lwc_min_pct=1.0) -> KeepHard:
    """Cost of keeping every zone hard: re-salt at each hold end from t_start until t_end.

    Pass 1 goes in at t_start; pass k+1 at the hold end of pass k while that is before t_end.  The
    snow state is the same at each pass (the spent reserve is the re-melted free water); θ_eff and
    E_k follow the pass time.  Vectorised over zones, looping over passes only.  Parameters as in
    :func:`pass_dose`; ``t_end_s`` broadcasts with the zones.
    """
    kw = {k: v for k, v in locals().items() if k in _PARAMS}
    ag, p, shape, rows, a = _prepare(agent, series, t_start_s, lwc_pct, density_kg_m3, purity, kw)
    size = rows.shape
    t = np.array(np.broadcast_to(a["t"], size))
    t_end = np.broadcast_to(np.asarray(t_end_s, dtype=float), shape).ravel()
    passes, subs = np.zeros(size, np.int64), np.zeros(size, np.int64)
    total, biggest, until = np.zeros(size), np.zeros(size), np.full(size, np.nan)
    wf_any, slush_any = np.zeros(size, bool), np.zeros(size, bool)
    active = np.isfinite(t) & (t < t_end)
    for _ in range(int(max_passes)):
        idx = np.flatnonzero(active)
        if not idx.size:
            break
        sub = {k: _take(a[k], idx) for k in a}
        res = _pass_flat(ag, series, rows[idx], t[idx], sub["lwc"], sub["rho"], p, sub, np.inf, False)
        wf = res["water_first"]
        done = ~wf & np.isfinite(res["product_g_m2"])
        ii = idx[done]
        passes[ii] += 1
        subs[ii] += res["sub_passes"][done]
        total[ii] += res["product_g_m2"][done]
        biggest[ii] = np.maximum(biggest[ii], res["product_g_m2"][done])
        until[ii] = res["hard_until_s"][done]
        slush_any[ii] |= res["slush_risk"][done]
        wf_any[idx[wf]] = True
        t[idx] = res["hard_until_s"]
        active[idx] = done & (res["hard_until_s"] < t_end[idx])
    out = dict(passes=passes, sub_passes=subs, product_g_m2=total, max_pass_g_m2=biggest,
               held_until_s=until, water_first=wf_any, slush_risk=slush_any, truncated=active)
    return KeepHard(**{k: _out(v.reshape(shape)) for k, v in out.items()})
