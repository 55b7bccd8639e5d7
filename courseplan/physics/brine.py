"""Part A of the dosing model: an agent's brine thermodynamics, vectorised.

- :func:`freezing_point` — the ice liquidus T_f(w) of the agent's brine, from published (or library)
  table rows down to the eutectic, with the dilute limit T_f → −n·K_f·b below the first row.
- :func:`liquidus_mass_fraction` — its inverse w_L(T), the brine concentration in equilibrium with
  ice at temperature T.
- :func:`mixture_equilibrium` — the closed-layer equilibrium of salt mixed into ice and free
  water (no heat exchange, reference 0 °C), including the eutectic case with undissolved salt.
- :func:`refreeze_ratio` — kg of free water removed from the snow per kg of salt when the brine
  leaves at T_b.
- :func:`salt_for_melt` — the salt that makes the closed layer melt a given mass of ice (used for
  the per-pass slush limit).

Every function takes scalars or numpy arrays (broadcast together) and an agent (name or
:class:`~courseplan.agents.Agent`); out-of-domain elements give NaN.  Nothing in the hot path loops
over elements or calls a scalar root finder: curves are tabulated once per agent on uniform grids
(O(1) lookups), and the equilibrium is solved by a fixed number of bracketed Newton steps on whole
arrays.

Curve representation
--------------------
Table rows ``(w, T_f)`` are converted to molality ``b = w / (M (1 − w))`` and an effective osmotic
coefficient ``φ = −T_f / (n K_f b)``; φ is interpolated with a monotone cubic (PCHIP [3]_) against
``√b`` from the ideal limit φ(0) = 1 through the rows to the eutectic.  The freezing point is then
``T_f = −n K_f b φ`` (Eq. A1).  Interpolating the nearly constant φ rather than T_f keeps sparse
curves (eutectic and dilute limit only) physically shaped; such curves are flagged
``Agent.curve_approximate``.  In the dilute limit this is the van 't Hoff law with i = n·φ [1]_.

Closed-layer equilibrium (dosing-model.md Part A)::

    s / (W + m + s) = w_L(T)                                              (A2, liquidus)
    L_f·m + q·s = [c_ice·(I − m) + c_brine·(W + m + s)]·(0 − T)           (A3, energy)

s salt [kg], I ice [kg], W free water plus crystal water [kg], m melted ice [kg] (negative when free
water freezes), q enthalpy of solution per kg of salt [J/kg] (+ absorbs heat).  If the residual of
(A3) along the liquidus has no root in (T_eut, 0), the mixture sits at the eutectic and part of the
salt stays undissolved; m then follows from (A3) with the brine at w_eut.

References
----------
.. [1] Atkins, P. & de Paula, J. *Physical Chemistry*, colligative properties: ΔT = i K_f b.
.. [2] IAPWS R10-06 (2009), ice Ih: L_f, c_ice (see :mod:`courseplan.constants`).
.. [3] Fritsch, F. N. & Carlson, R. E. (1980). Monotone piecewise cubic interpolation.
   *SIAM J. Numer. Anal.* 17(2), 238–246. doi:10.1137/0717021
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from courseplan.agents import get_agent
from courseplan.agents.record import Agent
from courseplan.constants import CP_ICE_0C, CP_ICE_SLOPE, CP_WATER, K_CRYOSCOPIC, L_FUSION

__all__ = [
    "Equilibrium",
    "brine_heat_capacity",
    "energy_residual",
    "freezing_point",
    "ice_heat_capacity_mean",
    "liquidus_mass_fraction",
    "mixture_equilibrium",
    "refreeze_ratio",
    "salt_for_melt",
]

N_GRID = 4097
"""Nodes of the uniform lookup grids in w and in T (per agent)."""
NEWTON_STEPS = 5
"""Fixed number of bracketed Newton steps of the equilibrium solvers (converged to < 1e-5 of L_f·s
in 4 steps over the tested ranges; see tests/test_brine.py)."""

# Brine specific heat, c = 4219 − 6600 w + 12000 w² [J/(kg·K)] [derived]: a quadratic through the
# 0 °C value of water (IAPWS-95) and CoolProp INCOMP::MNA values 3.91 (5 %), 3.69 (10 %), 3.38 kJ/(kg·K)
# (20 %) [library]; used for every agent (approximate for agents other than NaCl).
_CB1, _CB2 = -6600.0, 12000.0


def brine_heat_capacity(w):
    """Specific heat of brine at salt mass fraction ``w`` [J/(kg·K)] (quadratic fit, see module)."""
    w = np.asarray(w, dtype=float)
    return CP_WATER + _CB1 * w + _CB2 * w * w


def ice_heat_capacity_mean(temperature_c):
    """Mean specific heat of ice Ih between ``temperature_c`` and 0 °C [J/(kg·K)].

    Linear in T through the IAPWS-06 values 2.097 (0 °C), 2.023 (−10 °C), 1.950 (−20 °C) kJ/(kg·K)
    [library], averaged over [T, 0].
    """
    t = np.asarray(temperature_c, dtype=float)
    return CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t


@dataclass(frozen=True, eq=False)
class _Curve:
    """Tabulated liquidus of one agent on uniform grids (built once, cached)."""

    w_eut: float
    t_eut: float
    w_grid_step: float
    t_of_w: np.ndarray  # T_f at w = k·Δw
    t_grid_step: float
    w_of_t: np.ndarray  # w_L at T = T_eut + k·ΔT
    dw_dt: np.ndarray  # slope of w_L in each T cell (len N−1)
    slope0: float  # −dT/dw at w → 0 [K]


def _key(agent: Agent) -> tuple:
    return (agent.molar_mass_g_mol, agent.ions, agent.eutectic_c, agent.eutectic_mass_fraction,
            tuple(agent.curve))


@lru_cache(maxsize=64)
def _build(key: tuple) -> _Curve:
    from scipy.interpolate import PchipInterpolator

    m_g, n, t_e, w_e, rows = key
    mk = m_g / 1000.0
    pts = list(rows) + [(w_e, t_e)]
    w = np.array([p[0] for p in pts])
    t = np.array([p[1] for p in pts])
    b = w / (mk * (1.0 - w))
    phi = -t / (n * K_CRYOSCOPIC * b)  # Eq. A1 solved for φ
    x = np.concatenate([[0.0], np.sqrt(b)])
    y = np.concatenate([[1.0], phi])
    interp = PchipInterpolator(x, y, extrapolate=False)

    def t_of(wv):
        bv = wv / (mk * (1.0 - wv))
        return -n * K_CRYOSCOPIC * bv * interp(np.sqrt(bv))  # Eq. A1

    wg = np.linspace(0.0, w_e, N_GRID)
    tg = t_of(wg)
    tg[0] = 0.0
    tg[-1] = t_e
    fine_w = np.linspace(0.0, w_e, 16 * N_GRID)
    fine_t = t_of(fine_w)
    fine_t[0], fine_t[-1] = 0.0, t_e
    if not np.all(np.diff(fine_t) < 0):
        raise ValueError(f"freezing curve of agent with M={m_g} is not monotone; check its rows")
    tt = np.linspace(t_e, 0.0, N_GRID)
    ww = np.interp(tt, fine_t[::-1], fine_w[::-1])
    ww[0], ww[-1] = w_e, 0.0
    dt = tt[1] - tt[0]
    return _Curve(w_eut=w_e, t_eut=t_e, w_grid_step=wg[1] - wg[0], t_of_w=tg, t_grid_step=dt,
                  w_of_t=ww, dw_dt=np.diff(ww) / dt, slope0=n * K_CRYOSCOPIC / mk)


def _curve(agent) -> _Curve:
    return _build(_key(get_agent(agent)))


def _out(x):
    """Return a Python float for 0-d results, else the array."""
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


# ---- lookups (O(1) per element) ------------------------------------------------------------------
def _t_of_w(c: _Curve, w: np.ndarray) -> np.ndarray:
    u = w / c.w_grid_step
    i = np.clip(u.astype(np.intp), 0, N_GRID - 2)
    f = u - i
    tw = c.t_of_w
    return tw[i] + f * (tw[i + 1] - tw[i])


def _w_of_t(c: _Curve, t: np.ndarray):
    """w_L(T) and its slope dw/dT (piecewise linear on the uniform T grid)."""
    u = (t - c.t_eut) / c.t_grid_step
    i = np.clip(u.astype(np.intp), 0, N_GRID - 2)
    slope = c.dw_dt[i]
    w = c.w_of_t[i] + (u - i) * c.t_grid_step * slope
    return w, slope


def freezing_point(agent, mass_fraction):
    """Freezing point of the agent's brine (the ice liquidus) [°C].

    Parameters
    ----------
    agent
        Catalogue name, alias or :class:`~courseplan.agents.Agent`.
    mass_fraction
        Salt mass fraction of the brine, kg salt per kg brine [-], scalar or array.

    Returns
    -------
    float or numpy.ndarray
        T_f [°C]; NaN where the mass fraction is below 0 or above the eutectic's.
    """
    c = _curve(agent)
    w = np.asarray(mass_fraction, dtype=float)
    t = np.clip(_t_of_w(c, np.clip(w, 0.0, c.w_eut)), c.t_eut, 0.0)
    return _out(np.where((w >= 0.0) & (w <= c.w_eut * (1 + 1e-12)), t, np.nan))


def liquidus_mass_fraction(agent, temperature_c):
    """Brine salt mass fraction in equilibrium with ice at a temperature [-].

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    temperature_c
        Temperature [°C], scalar or array.

    Returns
    -------
    float or numpy.ndarray
        w_L(T) [kg/kg]; 0 at 0 °C, the eutectic mass fraction at the eutectic; NaN above 0 °C or
        below the eutectic temperature.
    """
    c = _curve(agent)
    t = np.asarray(temperature_c, dtype=float)
    w, _ = _w_of_t(c, np.clip(t, c.t_eut, 0.0))
    w = np.clip(w, 0.0, c.w_eut)  # rounding at the grid ends
    return _out(np.where((t <= 0.0) & (t >= c.t_eut), w, np.nan))


def refreeze_ratio(agent, brine_temperature_c):
    """Free water taken out of the snow per kilogram of salt when the brine leaves at T_b [kg/kg].

    ``r(T_b) = (1 / w_L(T_b) − 1) + q_sol / L_f − x_w`` (dosing-model.md Part C, Eq. C1): the water
    bound into the brine, plus the freezing paid for by the heat of solution (negative for
    exothermic agents), minus the crystal water and moisture the product brings itself
    (``x_w = crystal_water_fraction / purity`` per kg of salt).

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    brine_temperature_c
        Brine exit temperature T_b [°C] (between the eutectic and 0 °C).

    Returns
    -------
    float or numpy.ndarray
        r [kg water per kg salt]; NaN out of range; +inf at 0 °C.
    """
    ag = get_agent(agent)
    w = np.asarray(liquidus_mass_fraction(ag, brine_temperature_c), dtype=float)
    with np.errstate(divide="ignore"):
        r = 1.0 / w - 1.0 + ag.solution_heat_j_kg / L_FUSION - ag.water_per_salt  # Eq. C1
    return _out(r)


# ---- closed-layer equilibrium ----------------------------------------------------------------------
@dataclass(frozen=True)
class Equilibrium:
    """Result of :func:`mixture_equilibrium` (floats for scalar input, else arrays).

    Attributes
    ----------
    temperature_c
        Equilibrium temperature [°C].
    melted_kg
        Ice melted [kg] (negative: free water froze).
    undissolved_kg
        Salt left undissolved [kg] (> 0 only at the eutectic).
    brine_kg
        Brine mass [kg].
    brine_mass_fraction
        Salt mass fraction of the brine [-].
    at_eutectic
        True where the mixture sits at the eutectic.
    """

    temperature_c: object
    melted_kg: object
    undissolved_kg: object
    brine_kg: object
    brine_mass_fraction: object
    at_eutectic: object


def _residual_liquidus(c: _Curve, q: float, t, s, ice, water):
    """Residual F(T) of (A3) along the liquidus and its T-derivative (arrays)."""
    w, wp = _w_of_t(c, t)
    brine = s / w
    m = brine - s - water
    dbrine = -s * wp / (w * w)
    ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
    cb = CP_WATER + w * (_CB1 + _CB2 * w)
    dcb = (_CB1 + 2.0 * _CB2 * w) * wp
    heat = ci * (ice - m) + cb * brine
    f = L_FUSION * m + q * s + heat * t
    df = (L_FUSION * dbrine + heat
          + (0.5 * CP_ICE_SLOPE * (ice - m) - ci * dbrine + dcb * brine + cb * dbrine) * t)
    return f, df, m, brine, w


def _newton(fun, t0, lo, hi, steps=NEWTON_STEPS):
    """Bracketed Newton on arrays for an increasing residual; fixed step count, no element loop."""
    t = t0
    for _ in range(steps):
        f, df = fun(t)
        pos = f > 0
        hi = np.where(pos, t, hi)
        lo = np.where(pos, lo, t)
        with np.errstate(divide="ignore", invalid="ignore"):
            tn = t - f / df
        bad = ~((tn >= lo) & (tn <= hi))  # inclusive: a converged t sits on the bracket
        t = np.where(bad, 0.5 * (lo + hi), tn)
    return t


def mixture_equilibrium(agent, salt_kg, ice_kg, water_kg, *, product_water_kg=0.0):
    """Closed-layer equilibrium of salt mixed into ice and free water (no heat exchange).

    Solves the liquidus (A2) and the energy balance (A3) of the module docstring for the
    temperature and the melted ice; where (A3) has no root above the eutectic, the mixture sits at
    the eutectic with part of the salt undissolved.

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    salt_kg
        Anhydrous salt mass s [kg] (product mass × purity).
    ice_kg
        Ice mass I [kg] (all at 0 °C at the start).
    water_kg
        Free liquid water W [kg] at 0 °C.
    product_water_kg
        Crystal water and moisture of the product that joins the brine [kg] (x_w·D).

    Returns
    -------
    Equilibrium
        Temperature [°C], melted ice [kg], undissolved salt [kg], brine mass [kg] and mass
        fraction, eutectic flag.  NaN where the equilibrium would melt all the ice (outside the
        model) or an input is negative/NaN.
    """
    ag = get_agent(agent)
    c = _curve(ag)
    q = ag.solution_heat_j_kg
    s, ice, water = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in
                                          (salt_kg, ice_kg, np.add(water_kg, product_water_kg))))
    shape = s.shape
    parts = _chunked(lambda *a: _equilibrium_flat(c, q, *a), np.ravel(s), np.ravel(ice), np.ravel(water))
    res = [v.reshape(shape) for v in parts[:5]]
    flag = parts[5].reshape(shape)
    return Equilibrium(*(_out(v) for v in res), at_eutectic=bool(flag) if flag.ndim == 0 else flag)


CHUNK = 32768
"""Elements solved together: small enough to stay in the CPU cache (a loop over chunks, not elements)."""


def _chunked(fun, *arrays):
    """Apply ``fun`` to consecutive chunks of flat arrays and concatenate its tuple of results."""
    n = arrays[0].size
    if n <= CHUNK:
        return fun(*arrays)
    outs = [fun(*(a[i:i + CHUNK] for a in arrays)) for i in range(0, n, CHUNK)]
    return tuple(np.concatenate(parts) for parts in zip(*outs, strict=True))


def _equilibrium_flat(c: _Curve, q: float, s, ice, water):
    """Closed-layer equilibrium on flat arrays: (T, m, undissolved, brine, w, at_eutectic)."""
    valid = (s >= 0) & (ice >= 0) & (water >= 0)
    pos = valid & (s > 0)
    sp = np.where(pos, s, 1.0)
    ii = np.where(pos, ice, 0.0)
    ww = np.where(pos, water, 0.0)

    # eutectic check: residual (A3) at T_eut with all salt dissolved
    we, te = c.w_eut, c.t_eut
    ci_e = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * te
    cb_e = CP_WATER + we * (_CB1 + _CB2 * we)
    m_full = sp / we - sp - ww
    f_e = L_FUSION * m_full + q * sp + (ci_e * (ii - m_full) + cb_e * sp / we) * te
    eut = pos & (f_e > 0)

    # root along the liquidus: dilute-limit initial guess, then bracketed Newton
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        a = CP_ICE_0C * ii
        b = L_FUSION * (sp + ww) - q * sp
        cc = L_FUSION * c.slope0 * sp
        x0 = 2.0 * cc / (b + np.sqrt(np.maximum(b * b + 4.0 * a * cc, 0.0)))
        span = -te
        t0 = -np.clip(np.nan_to_num(x0, nan=0.5 * span, posinf=0.5 * span), 1e-9 * span, 0.999 * span)
        t = _newton(lambda tt: _residual_liquidus(c, q, tt, sp, ii, ww)[:2], t0, np.full_like(sp, te),
                    np.zeros_like(sp))
        _, _, m, brine, w = _residual_liquidus(c, q, t, sp, ii, ww)
    und = np.zeros_like(sp)

    # eutectic branch: brine at w_eut, m from (A3), which is linear in m there
    ar = we / (1.0 - we)
    g = cb_e / (1.0 - we)
    den = L_FUSION + q * ar - te * ci_e + te * g
    m_e = (-te * (ci_e * ii + g * ww) - q * ar * ww) / den
    s_d = ar * (ww + m_e)
    t = np.where(eut, te, t)
    m = np.where(eut, m_e, m)
    brine = np.where(eut, (ww + m_e) / (1.0 - we), brine)
    w = np.where(eut, we, w)
    und = np.where(eut, np.maximum(sp - s_d, 0.0), und)
    bad_e = eut & ((den <= 0) | (s_d < 0))

    zero = valid & (s == 0)
    t = np.where(zero, 0.0, t)
    m = np.where(zero, 0.0, m)
    brine = np.where(zero, water, brine)
    w = np.where(zero, 0.0, w)
    und = np.where(zero, 0.0, und)
    nan = ~valid | bad_e | (pos & (m > ii * (1 + 1e-12)))
    res = tuple(np.where(nan, np.nan, v) for v in (t, m, und, brine, w))
    return res + (eut & ~nan,)


def energy_residual(agent, temperature_c, melted_kg, salt_kg, ice_kg, water_kg, undissolved_kg=0.0):
    """Energy residual of (A3) for a given state [J]: L_f·m + q·s_d − [c_ice(I−m) + c_b·B]·(0 − T).

    ``s_d = salt − undissolved`` is the dissolved salt and ``B = water + m + s_d`` the brine.  Zero
    (to rounding) at the solution of :func:`mixture_equilibrium`; used by the tests.
    """
    ag = get_agent(agent)
    t, m, s, ice, water, und = (np.asarray(v, dtype=float) for v in
                                (temperature_c, melted_kg, salt_kg, ice_kg, water_kg, undissolved_kg))
    sd = s - und
    brine = water + m + sd
    w = np.where(brine > 0, sd / np.where(brine > 0, brine, 1.0), 0.0)
    heat = ice_heat_capacity_mean(t) * (ice - m) + brine_heat_capacity(w) * brine
    return _out(L_FUSION * m + ag.solution_heat_j_kg * sd + heat * t)


# ---- inverse: salt that melts a given ice mass ---------------------------------------------------
def salt_for_melt(agent, melt_kg, ice_kg, water_kg, *, water_per_salt=0.0):
    """Salt that makes the closed layer melt exactly ``melt_kg`` of its ice [kg].

    Solves (A2)–(A3) with m fixed and s unknown: along the liquidus
    ``s(T) = w (W + m) / (1 − w (1 + x_w))``.  Where even a saturated (eutectic) brine cannot melt
    that much, any dose is safe and the result is +inf.

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    melt_kg
        Ice to melt, m [kg] (> 0).
    ice_kg
        Ice in the layer, I [kg].
    water_kg
        Free water in the layer, W [kg].
    water_per_salt
        Crystal water brought per kg of salt, x_w [kg/kg].

    Returns
    -------
    float or numpy.ndarray
        Salt mass [kg]; +inf when unreachable; NaN for invalid input (m ≤ 0 or m > I).
    """
    ag = get_agent(agent)
    c = _curve(ag)
    q = ag.solution_heat_j_kg
    xw = float(water_per_salt)
    mm, ice, water = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (melt_kg, ice_kg, water_kg)))
    shape = mm.shape
    (out,) = _chunked(lambda *a: (_salt_for_melt_flat(c, q, xw, *a),), np.ravel(mm), np.ravel(ice),
                      np.ravel(water))
    return _out(out.reshape(shape))


def _salt_for_melt_flat(c: _Curve, q: float, xw: float, mm, ice, water):
    valid = (mm > 0) & (mm <= ice) & (water >= 0)
    mv = np.where(valid, mm, 0.5)
    iv = np.where(valid, ice, 1.0)
    wv = np.where(valid, water, 0.0)
    k = 1.0 + xw
    liq = wv + mv
    ice_left = iv - mv
    lm = L_FUSION * mv

    def g(t):
        w, wp = _w_of_t(c, t)
        d = 1.0 / (1.0 - w * k)
        brine = liq * d
        s = w * brine
        sp = wp * liq * d * d
        ci = CP_ICE_0C + 0.5 * CP_ICE_SLOPE * t
        cb = CP_WATER + w * (_CB1 + _CB2 * w)
        heat = ci * ice_left + cb * brine
        f = lm + q * s + heat * t
        df = (q * sp + heat
              + (0.5 * CP_ICE_SLOPE * ice_left + (_CB1 + 2.0 * _CB2 * w) * wp * brine + cb * k * sp) * t)
        return f, df, s

    te = c.t_eut
    g_e, _, _ = g(np.full_like(mv, te))
    unreachable = g_e > 0
    denom = CP_ICE_0C * ice_left + CP_WATER * liq - q * liq / c.slope0
    span = -te
    with np.errstate(divide="ignore", invalid="ignore"):
        x0 = lm / denom
    t0 = -np.clip(np.nan_to_num(x0, nan=0.5 * span, posinf=0.5 * span, neginf=0.5 * span),
                  1e-9 * span, 0.999 * span)
    t = _newton(lambda tt: g(tt)[:2], t0, np.full_like(mv, te), np.zeros_like(mv))
    s = g(t)[2]
    s = np.where(unreachable, np.inf, s)
    return np.where(valid, s, np.nan)
