"""Benchmark: zone-samples per second of the vectorised cold-balance model vs a scipy brentq loop.

One zone-sample = energy income over a 4-step window (zone shortwave + sampled weather), water to
remove, salt and product dose, the per-pass slush limit (an inverse closed-layer equilibrium),
the passes and the closed-layer temperature of one pass (a forward equilibrium).

The loop does the same per element in Python with ``scipy.optimize.brentq`` for both equilibria
(the same liquidus tables, scalar arithmetic); it runs on a subset and its rate is extrapolated.
The two results are compared (largest differences printed).

Run::

    /work/venv/bin/python benchmarks/bench_dose.py                 # sizes 1e4, 1e5, 1e6
    /work/venv/bin/python benchmarks/bench_dose.py --sizes 200000 --repeat 5 --loop 3000

Goal (issue 3): ≥ 1,000,000 zone-samples per second and ≥ 50× the loop.
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
from courseplan.physics import brine
from courseplan.physics.dose import cold_balance

AGENT = "NaCl"
PARAMS = dict(depth_m=0.04, refreeze_share=0.5, brine_exit_temp_c=-2.0, mix_depth_m=0.01, slush_limit=0.10)
N_STEPS = 4


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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10000,100000,1000000", help="comma-separated zone-sample counts")
    ap.add_argument("--repeat", type=int, default=5, help="timed repeats per size (median reported)")
    ap.add_argument("--loop", type=int, default=2000, help="elements timed in the brentq loop")
    args = ap.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]

    # warm-up: curve tables, imports
    vectorised(*make_inputs(1000))
    li = make_inputs(args.loop, seed=2)
    t0 = time.perf_counter()
    ld, ln, lt = loop(*li)
    loop_rate = args.loop / (time.perf_counter() - t0)
    vd, vn, vt = vectorised(*li)
    agree = (np.max(np.abs(vd - ld) / np.maximum(ld, 1e-12)), int(np.sum(vn != ln)), np.max(np.abs(vt - lt)))

    print(f"agent {AGENT}, {N_STEPS} window steps; brentq loop on {args.loop} elements: {loop_rate:,.0f} /s")
    print(f"agreement with the loop: dose max rel diff {agree[0]:.1e}, passes differing {agree[1]}, "
          f"pass temperature max diff {agree[2]:.1e} K")
    print()
    print(f"{'zone-samples':>14} {'median s':>10} {'min s':>9} {'per second':>14} {'× loop':>8}")
    for n in sizes:
        inp = make_inputs(n)
        times = []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            vectorised(*inp)
            times.append(time.perf_counter() - t0)
        med = statistics.median(times)
        rate = n / med
        print(f"{n:>14,} {med:>10.4f} {min(times):>9.4f} {rate:>14,.0f} {rate / loop_rate:>8.0f}")
    print()
    print("goal: >= 1,000,000 zone-samples per second and >= 50x the loop")


if __name__ == "__main__":
    main()
