"""Parts B–E of the dosing model: cold needed, dose, passes, verdicts, calibration, sampling.

All functions are vectorised over numpy arrays (scalars work too) and pure.

Cold needed (Part B)::

    water to remove  X = k_f · W_d + E_in / L_f          [kg/m²]                (B3)
    W_d = ρ_w · θ · d                                    free water in the hardening depth

Dose (Part C)::

    salt  s* = X / r(T_b),   product  D* = s* / purity                            (C2)

with the refreeze ratio r of :func:`courseplan.physics.brine.refreeze_ratio`.

Per-pass slush limit: one pass mixes into the top layer of depth d_mix (ice I_mix = (ρ_s − ρ_w θ)·d_mix,
water W_mix = ρ_w θ d_mix); its closed-layer equilibrium may melt at most f_slush·I_mix, which gives
the largest salt per pass s_max (:func:`courseplan.physics.brine.salt_for_melt`) and the passes
n = ⌈s*/s_max⌉ (C3).

Uncertainty (Part E): :func:`sample_lwc_pct` draws the liquid water content uniformly inside its
wetness class (Fierz et al. 2009 [1]_) and :func:`latin_hypercube` gives stratified, seeded
quantiles; P50/P90 are percentiles over the samples.

Calibration (Part D): :func:`calibrate_patch` inverts (B3)/(C2) in closed form for T_b or k_f from one
test patch.

References
----------
.. [1] Fierz, C. et al. (2009). *The International Classification for Seasonal Snow on the Ground*.
   IHP-VII Technical Documents in Hydrology 83, UNESCO-IHP, Paris (after Colbeck et al. 1990).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from courseplan.agents import get_agent
from courseplan.constants import L_FUSION, RHO_WATER
from courseplan.errors import InputError
from courseplan.physics import brine
from courseplan.physics.snow import WETNESS_CLASSES

__all__ = [
    "ColdBalance", "Calibration", "NEW_SNOW_GRAINS", "VERDICTS", "VERDICT_ORDER",
    "calibrate_patch", "cold_balance", "latin_hypercube", "layer_water_ice", "max_salt_per_pass_kg_m2",
    "pass_temperature_c", "passes_needed", "salt_dose_kg_m2", "sample_lwc_pct", "verdicts",
    "water_to_remove_kg_m2",
]

NEW_SNOW_GRAINS = ("PP", "DF")
"""Grain classes of new snow (precipitation particles, decomposing fragments), Fierz et al. 2009."""

VERDICTS: dict[str, str] = {
    "treat": "Spread the dose evenly in one pass before the first run; no clumps, cover the turn apexes.",
    "treat-in-passes": "Split the dose into the passes shown, at the times shown, so the surface does "
                       "not turn to slush.",
    "water-first": "Too dry for the salt to dissolve: water and groom first (or scrape down to moister "
                   "snow), then measure again.",
    "too-cold": "Cold snow without free water: salt brings nothing here; wait until the snow is at "
                "0 °C and wet.",
    "slush": "Soaked snow has lost its structure: drain or groom it and let it firm before salting.",
    "new-snow": "New snow soaks up brine without bonding: compact or remove it before salting.",
    "no-need": "Nothing to refreeze or offset in this window: no salt needed; check again if the "
               "weather turns.",
}
"""Verdict name → one line of advice (the project's own words)."""

VERDICT_ORDER = ("new-snow", "slush", "too-cold", "water-first", "no-need", "treat-in-passes", "treat")
"""Precedence of the verdicts: the first that applies wins."""

TREATED = ("treat", "treat-in-passes")


def _out(x):
    x = np.asarray(x)
    return x.item() if x.ndim == 0 else x


def layer_water_ice(lwc_pct, density_kg_m3, depth_m):
    """Free water and ice in a snow layer per square metre [kg/m²].

    ``W = ρ_w·θ·d`` and ``I = (ρ_s − ρ_w·θ)·d`` (the snow density includes its water), I ≥ 0.
    """
    theta = np.asarray(lwc_pct, dtype=float) / 100.0
    d = np.asarray(depth_m, dtype=float)
    water = RHO_WATER * theta * d
    ice = np.maximum(np.asarray(density_kg_m3, dtype=float) * d - water, 0.0)
    return _out(water), _out(ice)


def water_to_remove_kg_m2(lwc_pct, depth_m, refreeze_share, energy_in_j_m2):
    """Water the salt's cold must take out of the snow, Eq. (B3) [kg/m²].

    Parameters
    ----------
    lwc_pct
        Liquid water content θ [% vol].
    depth_m
        Hardening depth d [m].
    refreeze_share
        Share k_f of the free water that must refreeze for a firm layer [-].
    energy_in_j_m2
        Energy income over the hold window E_in [J/m²] (≥ 0).
    """
    theta = np.asarray(lwc_pct, dtype=float) / 100.0
    return _out(np.asarray(refreeze_share, dtype=float) * RHO_WATER * theta * np.asarray(depth_m, dtype=float)
                + np.maximum(np.asarray(energy_in_j_m2, dtype=float), 0.0) / L_FUSION)


def salt_dose_kg_m2(agent, water_kg_m2, brine_exit_temp_c):
    """Salt dose s* = X / r(T_b), Eq. (C2) [kg salt per m²]."""
    r = brine.refreeze_ratio(agent, brine_exit_temp_c)
    return _out(np.asarray(water_kg_m2, dtype=float) / r)


def max_salt_per_pass_kg_m2(agent, lwc_pct, density_kg_m3, mix_depth_m, slush_limit, water_per_salt=None):
    """Largest salt per pass whose closed-layer equilibrium melts at most f_slush of the mixing layer's ice.

    Returns +inf where even a saturated brine cannot melt that much (any dose is safe in one
    pass), NaN where the layer holds no ice.  [kg salt per m²]
    """
    ag = get_agent(agent)
    xw = ag.water_per_salt if water_per_salt is None else float(water_per_salt)
    water, ice = layer_water_ice(lwc_pct, density_kg_m3, mix_depth_m)
    return brine.salt_for_melt(ag, np.asarray(slush_limit, dtype=float) * ice, ice, water, water_per_salt=xw)


def passes_needed(salt_kg_m2, max_salt_per_pass_kg_m2):
    """Count the passes n = ⌈s*/s_max⌉, at least 1 (Eq. C3); 0 where there is no dose."""
    s = np.asarray(salt_kg_m2, dtype=float)
    smax = np.asarray(max_salt_per_pass_kg_m2, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        n = np.ceil(s / smax - 1e-9)
    n = np.where(np.isfinite(n), np.maximum(n, 1.0), 1.0)
    n = np.where(s > 0, n, 0.0)
    return _out(n.astype(np.int64))


def pass_temperature_c(agent, salt_per_pass_kg_m2, lwc_pct, density_kg_m3, mix_depth_m, water_per_salt=None):
    """Closed-layer temperature after one pass mixed into the top layer [°C]."""
    ag = get_agent(agent)
    xw = ag.water_per_salt if water_per_salt is None else float(water_per_salt)
    water, ice = layer_water_ice(lwc_pct, density_kg_m3, mix_depth_m)
    s = np.asarray(salt_per_pass_kg_m2, dtype=float)
    return brine.mixture_equilibrium(ag, s, ice, water, product_water_kg=xw * s).temperature_c


@dataclass(frozen=True)
class ColdBalance:
    """Result of :func:`cold_balance` (arrays or floats, per zone or zone-sample).

    Attributes
    ----------
    water_to_remove_kg_m2
        X of Eq. (B3) [kg/m²].
    salt_kg_m2
        Salt dose s* [kg/m²].
    product_g_m2
        Product dose D* [g/m²].
    max_salt_per_pass_kg_m2
        Slush limit per pass s_max [kg/m²] (inf: no limit).
    passes
        Passes n.
    pass_temp_c
        Closed-layer temperature after one pass of s*/n [°C].
    """

    water_to_remove_kg_m2: object
    salt_kg_m2: object
    product_g_m2: object
    max_salt_per_pass_kg_m2: object
    passes: object
    pass_temp_c: object


def cold_balance(agent, lwc_pct, density_kg_m3, energy_in_j_m2, *, depth_m=0.04, refreeze_share=0.5,
                 brine_exit_temp_c=-2.0, mix_depth_m=0.01, slush_limit=0.10, purity=None,
                 with_passes: bool = True) -> ColdBalance:
    """Compute the whole cold balance of Parts B–C for arrays of zone states.

    Parameters
    ----------
    agent
        Catalogue name, alias or agent.
    lwc_pct, density_kg_m3
        Snow liquid water content [% vol] and density [kg/m³].
    energy_in_j_m2
        Energy income over the hold window [J/m²].
    depth_m, refreeze_share, brine_exit_temp_c, mix_depth_m, slush_limit
        Model parameters d, k_f, T_b, d_mix, f_slush (see :class:`courseplan.settings.Dosing`).
    purity
        Product purity overriding the agent's.
    with_passes
        Also solve the slush limit and the pass temperature (the costly part).
    """
    ag = get_agent(agent)
    p = ag.purity if purity is None else float(purity)
    xw = ag.crystal_water_fraction / p
    x = water_to_remove_kg_m2(lwc_pct, depth_m, refreeze_share, energy_in_j_m2)
    r = brine.refreeze_ratio(ag, brine_exit_temp_c) + ag.water_per_salt - xw
    s = np.asarray(x, dtype=float) / r
    prod = s / p * 1000.0
    if with_passes:
        smax = max_salt_per_pass_kg_m2(ag, lwc_pct, density_kg_m3, mix_depth_m, slush_limit, xw)
        n = np.asarray(passes_needed(s, smax))
        per = np.where(n > 0, s / np.maximum(n, 1), 0.0)
        tp = pass_temperature_c(ag, per, lwc_pct, density_kg_m3, mix_depth_m, xw)
    else:
        smax = n = tp = np.full(np.shape(s), np.nan)
    return ColdBalance(_out(x), _out(s), _out(prod), _out(smax), _out(n), _out(tp))


def verdicts(lwc_pct, density_kg_m3, snow_temp_c, grain, water_to_remove_kg_m2, passes, *,
             lwc_min_pct=1.0, lwc_max_pct=15.0, min_density_kg_m3=350.0, min_water_kg_m2=1e-3):
    """Verdict per zone (first match in :data:`VERDICT_ORDER`).

    - ``new-snow``: density below ``min_density_kg_m3`` or a new-snow grain class (PP, DF);
    - ``slush``: θ above ``lwc_max_pct``;
    - ``too-cold``: snow below 0 °C and θ below ``lwc_min_pct`` (no free water to use);
    - ``water-first``: θ below ``lwc_min_pct``;
    - ``no-need``: less than ``min_water_kg_m2`` to remove;
    - ``treat-in-passes``: more than one pass; ``treat`` otherwise.

    Returns
    -------
    numpy.ndarray
        Verdict names (object array), same shape as the inputs.
    """
    lwc = np.asarray(lwc_pct, dtype=float)
    rho = np.asarray(density_kg_m3, dtype=float)
    ts = np.asarray(snow_temp_c, dtype=float)
    g = np.char.upper(np.asarray(grain, dtype=str))
    x = np.asarray(water_to_remove_kg_m2, dtype=float)
    n = np.asarray(passes, dtype=float)
    new = (rho < min_density_kg_m3) | np.isin(g, NEW_SNOW_GRAINS)
    conds = [new, lwc > lwc_max_pct, (ts < 0) & (lwc < lwc_min_pct), lwc < lwc_min_pct,
             ~(x >= min_water_kg_m2), n > 1]
    return np.select(conds, list(VERDICT_ORDER[:-1]), default="treat").astype(object)


# ---- sampling (Part E) ---------------------------------------------------------------------------
def latin_hypercube(n: int, dims: int, seed: int) -> np.ndarray:
    """Stratified uniform quantiles, shape (dims, n): each row hits every 1/n stratum once (seeded)."""
    rng = np.random.default_rng(seed)
    u = np.empty((dims, n))
    for k in range(dims):
        u[k] = (rng.permutation(n) + rng.random(n)) / n
    return u


def sample_lwc_pct(lwc_pct, wetness, sampled, u):
    """Liquid water content samples [% vol], shape (zones, samples).

    Where ``sampled`` is True and ``wetness`` names a class of :data:`WETNESS_CLASSES`, θ is drawn
    uniformly inside the class bounds at the quantiles ``u``; elsewhere it stays at ``lwc_pct``.
    """
    lwc = np.asarray(lwc_pct, dtype=float)[:, None]
    wet = np.asarray(wetness, dtype=object)
    lo = np.array([WETNESS_CLASSES.get(str(w), (np.nan, np.nan))[0] for w in wet])[:, None]
    hi = np.array([WETNESS_CLASSES.get(str(w), (np.nan, np.nan))[1] for w in wet])[:, None]
    use = np.asarray(sampled, dtype=bool)[:, None] & np.isfinite(lo)
    uu = np.asarray(u, dtype=float)[None, :]
    return np.where(use, lo + uu * (hi - lo), lwc)


# ---- calibration (Part D) ------------------------------------------------------------------------
@dataclass(frozen=True)
class Calibration:
    """Result of :func:`calibrate_patch`.

    Attributes
    ----------
    parameter
        ``"brine_exit_temp_c"`` or ``"refreeze_share"``.
    value
        Fitted value (°C for T_b, - for k_f); NaN when no value in range reproduces the patch.
    bound
        ``"equal"`` (the patch just held: the model dose equals the dose used), else whether the
        true value is at most (``"upper"``) or at least (``"lower"``) the fitted one.  A patch that
        held means the need was at most the dose used: T_b is at least as warm (``"lower"``) and
        k_f at most the fitted value (``"upper"``); a soft patch gives the opposite bounds.
    water_to_remove_kg_m2, salt_kg_m2
        The patch's X and the salt used [kg/m²].
    note
        One line explaining the result.
    """

    parameter: str
    value: float
    bound: str
    water_to_remove_kg_m2: float
    salt_kg_m2: float
    note: str


def calibrate_patch(agent, *, lwc_pct: float, dose_g_m2: float, energy_in_mj_m2: float = 0.0,
                    outcome: str = "held", fit: str = "brine_exit_temp_c", depth_m: float = 0.04,
                    refreeze_share: float = 0.5, brine_exit_temp_c: float = -2.0,
                    purity: float | None = None) -> Calibration:
    """Fit T_b (or k_f) so the model reproduces one test patch (Part D).

    The model dose for the patch is ``D = X / r(T_b) / purity`` with ``X = k_f·W_d + E_in/L_f``.  For
    the dose used, solving for T_b gives ``w_L(T_b) = 1 / (s⁻¹X − q/L_f + x_w + 1)`` and
    ``T_b = T_f(w)``; solving for k_f gives ``k_f = (s·r(T_b) − E_in/L_f) / W_d``.

    Parameters
    ----------
    agent
        Agent used on the patch.
    lwc_pct
        Liquid water content of the patch [% vol].
    dose_g_m2
        Product dose spread on the patch [g/m²].
    energy_in_mj_m2
        Energy income of the patch between salting and the check [MJ/m²].
    outcome
        ``"just-held"`` (the smallest dose that held), ``"held"`` or ``"soft"`` (went soft).
    fit
        ``"brine_exit_temp_c"`` or ``"refreeze_share"``.
    depth_m, refreeze_share, brine_exit_temp_c, purity
        The other model parameters (the one not fitted is kept).

    Raises
    ------
    InputError
        Unknown ``fit`` or ``outcome``, or a non-positive dose.
    """
    ag = get_agent(agent)
    if fit not in ("brine_exit_temp_c", "refreeze_share"):
        raise InputError(f"cannot fit {fit!r}", where="calibration",
                         fix="fit brine_exit_temp_c or refreeze_share")
    bounds = {"just-held": "equal", "held": "upper", "soft": "lower"}
    if outcome not in bounds:
        raise InputError(f"unknown patch outcome {outcome!r}", where="calibration",
                         fix="give just-held, held or soft")
    if not dose_g_m2 > 0:
        raise InputError(f"dose {dose_g_m2} g/m² is not positive", where="calibration")
    p = ag.purity if purity is None else float(purity)
    xw = ag.crystal_water_fraction / p
    s = dose_g_m2 / 1000.0 * p
    e = energy_in_mj_m2 * 1e6
    wd = RHO_WATER * lwc_pct / 100.0 * depth_m
    q = ag.solution_heat_j_kg / L_FUSION
    if fit == "brine_exit_temp_c":
        x = float(water_to_remove_kg_m2(lwc_pct, depth_m, refreeze_share, e))
        w = 1.0 / (x / s - q + xw + 1.0)
        value = float(brine.freezing_point(ag, w)) if 0 < w <= ag.eutectic_mass_fraction else float("nan")
        unit = "°C"
    else:
        x = float(water_to_remove_kg_m2(lwc_pct, depth_m, 0.0, e))
        r = float(brine.refreeze_ratio(ag, brine_exit_temp_c)) + ag.water_per_salt - xw
        value = (s * r - e / L_FUSION) / wd if wd > 0 else float("nan")
        value = value if 0.0 < value <= 1.0 else float("nan")
        x = float(water_to_remove_kg_m2(lwc_pct, depth_m, value, e)) if np.isfinite(value) else x
        unit = ""
    b = bounds[outcome]
    if fit == "brine_exit_temp_c" and b != "equal":
        # a larger need means a colder T_b: 'held' bounds T_b from below, 'soft' from above
        b = {"upper": "lower", "lower": "upper"}[b]
    word = {"equal": "reproduces the patch",
            "upper": "is an upper bound", "lower": "is a lower bound"}[b]
    if b != "equal":
        word += f" (the patch {'held' if outcome == 'held' else 'went soft'})"
    note = (f"{fit} = {value:.2f} {unit} {word}".replace("  ", " ") if np.isfinite(value)
            else f"no {fit} in range reproduces {dose_g_m2:g} g/m² on this patch; check the inputs")
    return Calibration(fit, value, b, x, s, note)
