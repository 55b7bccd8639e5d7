"""Fit the harden-and-hold knobs to a test patch: a dose ladder, held or soft.

A test patch is a few square metres salted at known doses (a ladder such as 20 / 40 / 80 g/m²) at a
known time and place, read after the salt has acted: each rung held (hard) or went soft.  In the
model of :mod:`courseplan.physics.hold` a pass hardens the layer when its salt covers the need

    s_need = (k_f · ρ_w · θ · d + X_c + E_k / L_f) / r(T_b)                    (C1)

so the smallest rung that held and the largest that went soft bracket s_need.  Eq. (C1) is linear in
k_f, so the bracket of s_need is a bracket of k_f, the share of the free water that must refreeze:

    k_f = (s · r(T_b) − X_c − E_k / L_f) / (ρ_w · θ · d)

A ladder with both outcomes gives an interval (its middle is reported as the value); held-only
gives an upper bound, soft-only a lower bound (design note *dosing-model*, "Parameters a test patch
fixes").  E_k is the patch's own sun while the salt acted, from its energy series: the user never
types MJ/m².  The other knobs (τ, T_b) stay as set.

Readings at known times (:func:`rung_outcomes`, :func:`tau_bounds`): a rung is *held* when any of its
readings held (a later soft reading is the sun taking the hold back); it is *soft* when it was read
soft at or after spread + τ and never held; a rung read soft only before spread + τ says nothing (the
salt had not finished acting).  The times bound τ: a held reading r after spreading gives τ ≤ r, a
soft reading of a rung that held later gives τ > that reading.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from courseplan.agents import get_agent
from courseplan.constants import L_FUSION, RHO_WATER
from courseplan.errors import InputError
from courseplan.physics import brine
from courseplan.physics.hold import TAU_S, EnergySeries, pass_dose

__all__ = ["LadderReadings", "PatchFit", "fit_refreeze_share", "patch_outcomes", "rung_outcomes", "tau_bounds"]


@dataclass(frozen=True)
class PatchFit:
    """Result of :func:`fit_refreeze_share`.

    Attributes
    ----------
    low, high
        The bracket of k_f from the ladder (``low`` 0 or ``high`` 1 where a side is open).
    value
        The middle of the bracket when both sides are closed, else NaN.
    kind
        ``"interval"``, ``"upper bound"`` (held only) or ``"lower bound"`` (soft only).
    residuals
        For each rung: the model's need minus the rung's salt at ``value`` [g/m² of product]
        (negative: the model says it holds), NaN without a value.
    """

    low: float
    high: float
    value: float
    kind: str
    residuals: tuple[float, ...]


def _scalar(x) -> float:
    """The one value of a patch result (a patch is one point)."""
    return float(np.ravel(np.asarray(x, dtype=float))[0])


def _need_terms(ag, series, t_s, lwc_pct, density_kg_m3, purity, kw):
    """X_c + E_k/L_f [kg/m²], the free water ρ_w θ d [kg/m²] and r(T_b), for the patch."""
    probe = pass_dose(ag, series, t_s, lwc_pct, density_kg_m3, refreeze_share=1.0, purity=purity, **kw)
    p = ag.purity if purity is None else float(purity)
    xw = ag.crystal_water_fraction / p
    r = float(brine.refreeze_ratio(ag, kw.get("brine_exit_temp_c", -2.0))) + ag.water_per_salt - xw
    fixed = _scalar(probe.x_c) + _scalar(probe.e_k) / L_FUSION
    water = RHO_WATER * float(lwc_pct) / 100.0 * kw.get("depth_m", 0.04)
    return fixed, water, r, p


def patch_outcomes(agent, series: EnergySeries, t_s: float, lwc_pct: float, density_kg_m3: float,
                   doses_g_m2, *, refreeze_share: float, purity=None, **kw) -> np.ndarray:
    """What the model says each rung does: True = holds (its salt covers the need)."""
    ag = get_agent(agent)
    d = pass_dose(ag, series, t_s, lwc_pct, density_kg_m3, refreeze_share=refreeze_share, purity=purity, **kw)
    return np.asarray(doses_g_m2, dtype=float) >= _scalar(d.product_uncapped_g_m2) - 1e-9


def fit_refreeze_share(agent, series: EnergySeries, t_s: float, lwc_pct: float, density_kg_m3: float,
                       doses_g_m2, held, *, purity=None, tau_s: float = TAU_S, depth_m: float = 0.04,
                       brine_exit_temp_c: float = -2.0) -> PatchFit:
    """Bracket k_f from a dose ladder read as held / soft (module docstring).

    Parameters
    ----------
    agent
        Agent spread on the patch.
    series
        The patch's net energy series (:class:`~courseplan.physics.hold.EnergySeries`, one row).
    t_s
        When the ladder was spread [s from the series origin].
    lwc_pct, density_kg_m3
        Snow state at spreading.
    doses_g_m2, held
        The rungs' product doses [g/m²] and whether each held.
    purity, tau_s, depth_m, brine_exit_temp_c
        The model's other knobs, kept fixed.

    Raises
    ------
    InputError
        No rungs, doses not positive, or a ladder that contradicts itself (a rung held below one that
        went soft).
    """
    ag = get_agent(agent)
    doses = np.asarray(doses_g_m2, dtype=float)
    ok = np.asarray(held, dtype=bool)
    if doses.size == 0 or doses.shape != ok.shape:
        raise InputError("the patch has no dose rungs (or doses and readings differ in number)",
                         where="test patch", fix="give one reading per dose rung")
    if not np.all(np.isfinite(doses) & (doses > 0)):
        raise InputError("patch doses must be positive numbers in g/m²", where="test patch")
    if ok.any() and (~ok).any() and doses[ok].min() < doses[~ok].max():
        raise InputError(f"a rung held at {doses[ok].min():g} g/m² below one that went soft at "
                         f"{doses[~ok].max():g} g/m²", where="test patch",
                         fix="check the readings: a larger dose should hold at least as well")
    kw = dict(tau_s=tau_s, depth_m=depth_m, brine_exit_temp_c=brine_exit_temp_c)
    fixed, water, r, p = _need_terms(ag, series, t_s, lwc_pct, density_kg_m3, purity, kw)
    if not water > 0:
        raise InputError("the patch snow holds no free water: k_f cannot be fitted", where="test patch")

    def kf_of(dose_g_m2: float) -> float:
        return (dose_g_m2 / 1000.0 * p * r - fixed) / water

    high = float(np.clip(kf_of(doses[ok].min()), 0.0, 1.0)) if ok.any() else 1.0
    low = float(np.clip(kf_of(doses[~ok].max()), 0.0, 1.0)) if (~ok).any() else 0.0
    if ok.any() and (~ok).any():
        kind, value = "interval", 0.5 * (low + high)
    else:
        kind, value = ("upper bound" if ok.any() else "lower bound"), float("nan")
    if np.isfinite(value):
        need = (value * water + fixed) / r / p * 1000.0
        res = tuple(float(need - d) for d in doses)
    else:
        res = tuple(float("nan") for _ in doses)
    return PatchFit(low=low, high=high, value=value, kind=kind, residuals=res)


@dataclass(frozen=True)
class LadderReadings:
    """Result of :func:`rung_outcomes`: one outcome per rung that says something.

    Attributes
    ----------
    doses_g_m2, held, read_s
        The decided rungs' doses [g/m²], outcomes, and the reading each outcome rests on [s after
        spreading]: the first held reading, or the first soft one at or after τ.
    undecided_g_m2
        Doses of the rungs read soft only before spread + τ (they say nothing about k_f).
    """

    doses_g_m2: np.ndarray
    held: np.ndarray
    read_s: np.ndarray
    undecided_g_m2: tuple[float, ...]


def _readings(doses_g_m2, read_s, held):
    d = np.asarray(doses_g_m2, dtype=float).ravel()
    r = np.asarray(read_s, dtype=float).ravel()
    h = np.asarray(held, dtype=bool).ravel()
    if not (d.shape == r.shape == h.shape):
        raise InputError("doses, reading times and outcomes differ in number", where="test patch")
    if np.any(~np.isfinite(r)) or np.any(r < 0):
        raise InputError("a reading is before spreading (or has no time)", where="test patch",
                         fix="read each rung after the ladder was spread")
    return d, r, h


def rung_outcomes(doses_g_m2, read_s, held, tau_s: float = TAU_S) -> LadderReadings:
    """Reduce timed readings (one entry per reading) to one outcome per rung (module docstring).

    Parameters
    ----------
    doses_g_m2
        Dose of the rung each reading is of [g/m²]; equal doses are one rung.
    read_s
        Time of each reading after spreading [s] (≥ 0).
    held
        Whether the rung held at that reading.
    tau_s
        Time the salt acts, τ [s].
    """
    d, r, h = _readings(doses_g_m2, read_s, held)
    out_d, out_h, out_r, none = [], [], [], []
    for dose in np.unique(d):
        sel = d == dose
        rh, rs = r[sel & h], r[sel & ~h]
        if rh.size:
            out_d.append(dose), out_h.append(True), out_r.append(float(rh.min()))
        elif np.any(rs >= tau_s - 1e-6):
            out_d.append(dose), out_h.append(False), out_r.append(float(rs[rs >= tau_s - 1e-6].min()))
        else:
            none.append(float(dose))
    return LadderReadings(doses_g_m2=np.asarray(out_d, dtype=float), held=np.asarray(out_h, dtype=bool),
                          read_s=np.asarray(out_r, dtype=float), undecided_g_m2=tuple(none))


def tau_bounds(doses_g_m2, read_s, held) -> tuple[float, float]:
    """Bounds on τ from the reading times [s]: (low, high), 0 / +inf where open (module docstring).

    ``low > high`` means the rungs disagree (one held before another had hardened): τ then depends on
    the dose, which the model does not have.
    """
    d, r, h = _readings(doses_g_m2, read_s, held)
    high = float(r[h].min()) if h.any() else float("inf")
    low = 0.0
    for dose in np.unique(d[h]):
        sel = d == dose
        first_held = r[sel & h].min()
        early = r[sel & ~h & (r < first_held)]
        if early.size:
            low = max(low, float(early.max()))
    return low, high
