"""Benchmark: zone-samples per second of the vectorised dose models vs a scipy brentq loop.

Two paths, each timed against a per-element Python loop that uses ``scipy.optimize.brentq`` for the
equilibria (the same liquidus tables, scalar arithmetic); the loops run on a subset and their rates
are extrapolated, and the results are compared (largest differences printed).

1. *Cold balance* (first design, ``physics.dose.cold_balance``).  One zone-sample = energy income over
   a 4-step window, water to remove, salt and product dose, the per-pass slush limit (an inverse
   closed-layer equilibrium), the passes and the closed-layer temperature of one pass.
2. *Harden and hold* (``physics.hold.pass_dose``).  One zone-sample = its own net-flux series
   (``--steps`` steps of ``--dt`` s), one pass spread at a random time: the cumulative energy, E_k over
   τ = 20 min with interpolation inside the steps, water-first, the dose, the slush limit and
   sub-passes with the slush-risk cap, the reserve and the hold end (first crossing after t_k + τ).
   Timed without and with the optional closed-layer check.

Run::

    /work/venv/bin/python benchmarks/bench_dose.py                 # sizes 1e4, 1e5, 1e6
    /work/venv/bin/python benchmarks/bench_dose.py --sizes 200000 --repeat 5 --loop 3000

Goal (issue 3, and the hold path): ≥ 1,000,000 zone-samples per second and ≥ 50× the loop.
"""

from __future__ import annotations

import argparse
import math
import statistics
import time

import numpy as np
from scipy.optimize import brentq

from courseplan.agents import get_agent
from courseplan.constants import CP_ICE_0C, CP_ICE_SLOPE, CP_WATER, L_FUSION, RHO_WATER
from courseplan.physics import brine, hold
from courseplan.physics.dose import cold_balance

AGENT = "NaCl"
PARAMS = dict(depth_m=0.04, refreeze_share=0.5, brine_exit_temp_c=-2.0, mix_depth_m=0.01, slush_limit=0.10)
N_STEPS = 4
TAU_S = 1200.0
HOLD_PARAMS = dict(PARAMS, lwc_min_pct=1.0)


def make_inputs(n: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    lwc = rng.uniform(1.0, 12.0, n)
    rho = rng.uniform(450.0, 650.0, n)
    sw = rng.uniform(0.0, 1000.0, (n, N_STEPS)) * 3600.0 * 0.4  # absorbed shortwave per step [J/m²]
    wx = rng.uniform(-60.0, 40.0, (n, N_STEPS)) * 3600.0  # weather part per step [J/m²]
    return lwc, rho, sw, wx


def vectorised(lwc, rho, sw, wx):
    e = np.maximum(np.max(np.cumsum(sw + wx, axis=1), axis=1), 0.0)
    cb = cold_balance(AGENT, lwc, rho, e, **PARAMS)
    return np.asarray(cb.product_g_m2), np.asarray(cb.passes), np.asarray(cb.pass_temp_c)


def loop(lwc, rho, sw, wx):
    ag = get_agent(AGENT)
    c = brine._curve(ag)
    q = ag.solution_heat_j_kg
    tt = np.linspace(c.t_eut, 0.0, len(c.w_of_t))
    wt = c.w_of_t
    r = float(brine.refreeze_ratio(ag, PARAMS["brine_exit_temp_c"]))

    def w_of(t):
        return float(np.interp(t, tt, wt))

    def cb(w):
        return CP_WATER + w * (-6600.0 + 12000.0 * w)

    out_d, out_n, out_t = [], [], []
    for i in range(len(lwc)):
        cum, peak = 0.0, 0.0
        for k in range(N_STEPS):
            cum += sw[i, k] + wx[i, k]
            peak = max(peak, cum)
        theta = lwc[i] / 100.0
        x = PARAMS["refreeze_share"] * RHO_WATER * theta * PARAMS["depth_m"] + peak / L_FUSION
        s = x / r
        water = RHO_WATER * theta * PARAMS["mix_depth_m"]
        ice = max(rho[i] * PARAMS["mix_depth_m"] - water, 0.0)
        m = PARAMS["slush_limit"] * ice

        def g(t, water=water, ice=ice, m=m):
            w = w_of(t)
            sm = w * (water + m) / (1.0 - w)
            ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
            return L_FUSION * m + q * sm + (ci * (ice - m) + cb(w) * sm / w) * t

        if g(c.t_eut) > 0:
            smax = math.inf
        else:
            t_m = brentq(g, c.t_eut, -1e-9, xtol=1e-10)
            w = w_of(t_m)
            smax = w * (water + m) / (1.0 - w)
        n = max(1, math.ceil(s / smax - 1e-9)) if s > 0 else 0
        sp = s / n

        def f(t, sp=sp, water=water, ice=ice):
            w = w_of(t)
            brine_kg = sp / w
            mm = brine_kg - sp - water
            ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
            return L_FUSION * mm + q * sp + (ci * (ice - mm) + cb(w) * brine_kg) * t

        t_p = brentq(f, c.t_eut, -1e-12, xtol=1e-10) if f(c.t_eut) <= 0 else c.t_eut
        out_d.append(s / ag.purity * 1000.0)
        out_n.append(n)
        out_t.append(t_p)
    return np.array(out_d), np.array(out_n), np.array(out_t)


def make_hold_inputs(n: int, steps: int, dt: float, seed: int = 1):
    """θ, ρ, per-sample net flux (n, steps) [W/m²] and spread times inside the first 2/3 of the day."""
    rng = np.random.default_rng(seed)
    lwc = rng.uniform(0.5, 12.0, n)
    rho = rng.uniform(450.0, 650.0, n)
    flux = rng.uniform(0.0, 1000.0, (n, steps)) * 0.4 + rng.uniform(-60.0, 40.0, (n, steps))
    t_k = rng.uniform(0.0, 2.0 / 3.0 * steps * dt, n)
    return lwc, rho, flux, t_k


def hold_vectorised(lwc, rho, flux, t_k, dt, with_temp=False):
    series = hold.EnergySeries(flux, dt)
    p = hold.pass_dose(AGENT, series, t_k, lwc, rho, tau_s=TAU_S, with_layer_temp=with_temp, **HOLD_PARAMS)
    return (np.asarray(p.product_g_m2), np.asarray(p.sub_passes), np.asarray(p.hard_until_s),
            np.asarray(p.layer_temp_c))


def _scalar_tools():
    ag = get_agent(AGENT)
    c = brine._curve(ag)
    tt = np.linspace(c.t_eut, 0.0, len(c.w_of_t))
    wt = c.w_of_t

    def w_of(t):
        return float(np.interp(t, tt, wt))

    def cb(w):
        return CP_WATER + w * (-6600.0 + 12000.0 * w)

    return ag, c, ag.solution_heat_j_kg, w_of, cb


def hold_loop(lwc, rho, flux, t_k, dt, with_temp=False):
    """Run the hold path per element in Python: step loops for C, E_k and the hold end, brentq."""
    ag, c, q, w_of, cb = _scalar_tools()
    pr = HOLD_PARAMS
    d, kf, tb, dmix, fsl = pr["depth_m"], pr["refreeze_share"], pr["brine_exit_temp_c"], pr["mix_depth_m"], \
        pr["slush_limit"]
    r = float(brine.refreeze_ratio(ag, tb))
    cmean = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * tb
    steps = flux.shape[1]
    end_t = steps * dt
    out_d, out_n, out_h, out_t = [], [], [], []
    for i in range(len(lwc)):
        f = flux[i]
        cum = [0.0]
        for k in range(steps):
            cum.append(cum[-1] + f[k] * dt)

        def c_at(t, f=f, cum=cum):
            j = min(int(t // dt), steps - 1)
            return cum[j] + f[j] * (t - j * dt)

        t0 = t_k[i]
        te = min(t0 + TAU_S, end_t)
        best = c_at(te)
        for j in range(int(t0 // dt) + 1, steps + 1):
            if j * dt >= te:
                break
            best = max(best, cum[j])
        e = max(best - c_at(t0), 0.0)
        theta = lwc[i]
        th_eff = theta + 100.0 * e / (L_FUSION * RHO_WATER * d) if theta < pr["lwc_min_pct"] else theta
        wf = th_eff < pr["lwc_min_pct"]
        water_d = RHO_WATER * theta / 100.0 * d
        ice_d = rho[i] * d - water_d
        xh = kf * water_d
        cold = cmean * ice_d * abs(tb)
        s = (xh + cold / L_FUSION + e / L_FUSION) / r
        water = RHO_WATER * th_eff / 100.0 * dmix
        ice = max(rho[i] * dmix - water, 0.0)
        m = fsl * ice

        def g(t, water=water, ice=ice, m=m):
            w = w_of(t)
            sm = w * (water + m) / (1.0 - w)
            ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
            return L_FUSION * m + q * sm + (ci * (ice - m) + cb(w) * sm / w) * t

        if g(c.t_eut) > 0:
            smax = math.inf
        else:
            w = w_of(brentq(g, c.t_eut, -1e-9, xtol=1e-10))
            smax = w * (water + m) / (1.0 - w)
        n = max(1, math.ceil(s / smax - 1e-9)) if s > 0 else 0
        if n > 1 and th_eff < 3.0:
            s, n = smax, 1
        if wf:
            s, n = 0.0, 0
        until = math.nan
        if not wf:
            h = t0 + TAU_S
            target_gain = L_FUSION * xh + cold
            until = math.inf
            if h < end_t:
                target = c_at(h) + target_gain
                for j in range(int(h // dt), steps):
                    if cum[j + 1] >= target:
                        until = max(j * dt + (target - cum[j]) / f[j], h)
                        break
        t_p = math.nan
        if with_temp and not wf:
            wl = RHO_WATER * th_eff / 100.0 * d
            il = rho[i] * d - wl

            def fz(t, sp=s, water=wl, ice=il):
                w = w_of(t)
                brine_kg = sp / w
                mm = brine_kg - sp - water
                ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
                return L_FUSION * mm + q * sp + (ci * (ice - mm) + cb(w) * brine_kg) * t

            t_p = brentq(fz, c.t_eut, -1e-12, xtol=1e-10) if fz(c.t_eut) <= 0 else c.t_eut
        out_d.append(s / ag.purity * 1000.0)
        out_n.append(n)
        out_h.append(until)
        out_t.append(t_p)
    return np.array(out_d), np.array(out_n), np.array(out_h), np.array(out_t)


def _timed(fun, inp, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fun(*inp)
        times.append(time.perf_counter() - t0)
    return statistics.median(times), min(times)


def _table(title, sizes, make, fun, repeat, loop_rate):
    print(title)
    print(f"{'zone-samples':>14} {'median s':>10} {'min s':>9} {'per second':>14} {'× loop':>8}")
    for n in sizes:
        med, best = _timed(fun, make(n), repeat)
        rate = n / med
        print(f"{n:>14,} {med:>10.4f} {best:>9.4f} {rate:>14,.0f} {rate / loop_rate:>8.0f}")
    print()


def _diff(a, b):
    both = np.isfinite(a) & np.isfinite(b)
    same_inf = np.array_equal(np.isinf(a), np.isinf(b)) and np.array_equal(np.isnan(a), np.isnan(b))
    return (float(np.max(np.abs(a[both] - b[both]))) if both.any() else 0.0), same_inf


def hold_section(sizes, repeat, n_loop, steps, dt):
    li = make_hold_inputs(n_loop, steps, dt, seed=2)
    hold_vectorised(*make_hold_inputs(1000, steps, dt), dt, True)  # warm-up
    for with_temp in (False, True):
        t0 = time.perf_counter()
        ld, ln, lh, lt = hold_loop(*li, dt, with_temp)
        loop_rate = n_loop / (time.perf_counter() - t0)
        vd, vn, vh, vt = hold_vectorised(*li, dt, with_temp)
        dd, _ = _diff(vd, ld)
        dh, hinf = _diff(vh, lh)
        dt_k, _ = _diff(vt, lt)
        name = "hold pass + closed-layer check" if with_temp else "hold pass (sampled path)"
        print(f"{name}: {steps} steps of {dt:g} s, τ {TAU_S:g} s; brentq loop on {n_loop} elements: "
              f"{loop_rate:,.0f} /s")
        print(f"agreement with the loop: dose max diff {dd:.1e} g/m², sub-passes differing "
              f"{int(np.sum(vn != ln))}, hold end max diff {dh:.1e} s (same inf/NaN: {hinf})"
              + (f", layer temperature max diff {dt_k:.1e} K" if with_temp else ""))
        print(f"water first {int(np.sum(vn == 0))}, holds to the grid end {int(np.sum(np.isinf(vh)))} "
              f"of {n_loop}")
        _table("", sizes, lambda n: make_hold_inputs(n, steps, dt),
               lambda *a, w=with_temp: hold_vectorised(*a, dt, w), repeat, loop_rate)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10000,100000,1000000", help="comma-separated zone-sample counts")
    ap.add_argument("--repeat", type=int, default=5, help="timed repeats per size (median reported)")
    ap.add_argument("--loop", type=int, default=2000, help="elements timed in the brentq loop")
    ap.add_argument("--steps", type=int, default=12, help="flux steps per zone-sample (hold path)")
    ap.add_argument("--dt", type=float, default=1800.0, help="flux step length [s] (hold path)")
    ap.add_argument("--only", choices=("cold", "hold"), help="run one path only")
    args = ap.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]

    if args.only != "hold":
        vectorised(*make_inputs(1000))  # warm-up: curve tables, imports
        li = make_inputs(args.loop, seed=2)
        t0 = time.perf_counter()
        ld, ln, lt = loop(*li)
        loop_rate = args.loop / (time.perf_counter() - t0)
        vd, vn, vt = vectorised(*li)
        agree = (np.max(np.abs(vd - ld) / np.maximum(ld, 1e-12)), int(np.sum(vn != ln)),
                 np.max(np.abs(vt - lt)))
        print(f"cold balance: agent {AGENT}, {N_STEPS} window steps; brentq loop on {args.loop} elements: "
              f"{loop_rate:,.0f} /s")
        print(f"agreement with the loop: dose max rel diff {agree[0]:.1e}, passes differing {agree[1]}, "
              f"pass temperature max diff {agree[2]:.1e} K")
        _table("", sizes, make_inputs, vectorised, args.repeat, loop_rate)
    if args.only != "cold":
        hold_section(sizes, args.repeat, args.loop, args.steps, args.dt)
    print("goal: >= 1,000,000 zone-samples per second and >= 50x the loop")


if __name__ == "__main__":
    main()
