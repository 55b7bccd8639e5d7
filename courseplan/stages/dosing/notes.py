"""Notes and provenance of the dosing stage.

:func:`pass_notes` says which runs the passes do not hold through, where the closed-layer check is
off, and (``[dosing] compare_keep_hard``) what re-salting at every hold end would take
(:func:`courseplan.physics.hold.keep_hard`); :func:`provenance` writes each zone's ``dose_inputs``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from courseplan.physics.hold import keep_hard
from courseplan.physics.snow import WETNESS_CLASSES, class_range_text
from courseplan.stages.dosing.mixed import per_zone

TREATED = ("treat", "treat-in-passes", "slush-risk")
"""Verdicts of zones that get salt."""
TEMP_TOL_K = 2.0
"""Tolerance of the closed-layer check: the pass's closed-layer temperature within 2 K of T_b."""


def provenance(ctx, z: pd.DataFrame) -> list[str]:
    """Per zone, the inputs its dose used and where each came from (the ``dose_inputs`` column)."""
    ds, pz = ctx.settings.dosing, per_zone(ctx)
    out = []
    for i in range(len(z)):
        w = str(z["wetness"].iat[i])
        src = str(z["snow_source"].iat[i])
        if ctx.sampled_lwc[i]:
            rng = class_range_text(w) if w in WETNESS_CLASSES else "?"
            lw = f"θ {ctx.lwc[i]:.1f} % ({src}, class {w}: sampled {rng} %)"
        else:
            lw = f"θ {ctx.lwc[i]:.1f} % ({src})"
        out.append(f"{lw}; ρ {ctx.rho[i]:.0f} kg/m³; sun {float(z['irradiation_wh_m2'].iat[i]):.0f} Wh/m² over "
                   f"the day; albedo {ds.albedo:.2f} ± {ds.albedo_spread:.2f} (setting); τ {ds.tau_min:.0f} min "
                   f"(setting, field 15–30 min); T_b {ds.brine_exit_temp_c:.1f} °C (setting), k_f "
                   f"{ctx.kw['refreeze_share']:.2f} ({ctx.k_f_source}), depth {ds.depth_m:.3f} m; agent {pz['agent'][i]} purity "
                   f"{pz['purity'][i]:.2f}; {int(ds.samples)} samples, seed {ds.seed}")
    return out


def pass_notes(ctx, z: pd.DataFrame, table: pd.DataFrame, passes, schedule, soft_by_run) -> list[str]:
    """Notes on a dosed plan: runs not held, the closed-layer check, the keep-hard comparison."""

    notes = []
    for run in schedule.runs:
        length = (run.end - run.start).total_seconds() / 60.0
        treated = z["verdict"].isin(TREATED).to_numpy()
        soft = z.assign(_soft=soft_by_run[run.number])[(soft_by_run[run.number] > 0.5) & treated]
        if not len(soft):
            continue
        whole = int((soft["_soft"] >= length - 0.5).sum())
        ids = ", ".join(str(int(i)) for i in soft.sort_values("_soft", ascending=False)["zone_id"])
        notes.append(f"not held through run {run.number} ({run.start:%H:%M}–{run.end:%H:%M}): {len(soft)} zone(s), "
                     f"{whole} of them soft for the whole run (zones {ids}); the sun spends a pass's hold "
                     "before the run ends, and no break is near enough to salt again")
    off = table[table["layer_temp_off"]] if len(table) else table
    if len(off):
        ids = ", ".join(str(int(i)) for i in sorted(set(off["zone_id"]))[:10])
        notes.append(f"closed-layer check: in zone(s) {ids} a pass settles more than {TEMP_TOL_K:.0f} K from "
                     f"T_b = {ctx.settings.dosing.brine_exit_temp_c:.1f} °C in the top "
                     f"{ctx.settings.dosing.depth_m * 100:.0f} cm: the brine spreads deeper, or T_b is off "
                     "for this snow; a test patch settles it")
    # keep-hard comparison: re-salting at every hold end from pass 1 to the last run's end
    if passes and ctx.settings.dosing.compare_keep_hard:
        t1 = passes[0][1].spread_at_s
        end = ctx.seconds([schedule.last_end])[0]
        go = np.isfinite(t1) & (z["verdict"].isin(TREATED).to_numpy())
        if go.any():
            kg, n_kh = 0.0, 0
            for i, c in ctx.groups or ((np.arange(len(z)), ctx),):  # each agent's zones with their agent
                kh = keep_hard(c.agent, c.nominal, c.lwc, c.rho, np.where(go[i], t1[i], np.inf), end, **c.kw)
                kg += float(np.sum(np.where(go[i], np.asarray(kh.product_g_m2), 0.0) * c.zones["area_m2"]) / 1000.0)
                n_kh += int(np.sum(np.where(go[i], kh.passes, 0)))
            plan_kg = float(z["product_kg"].sum())
            notes.append(f"keep-hard comparison: re-salting every zone each time it softens until "
                         f"{schedule.last_end:%H:%M} would take {n_kh} passes "
                         f"and {kg:,.0f} kg (P50), against {plan_kg:,.0f} kg in this plan")
    return notes
