"""Mixed plans: zones the chief of course doses with another agent (``edit_agent``).

The dose model is per agent (its freezing curve, ions and purity, :mod:`courseplan.physics.hold`),
so a plan whose zones name several agents doses each agent's zones with a dosing context of its own
(:func:`agent_groups`) and puts the passes back together in zone order (:func:`scatter`).  Timing,
crews and the race-day loop see one table of zones, as in a plan of one agent; the order gets one
line per agent (:func:`courseplan.stages.logistics.orders_by_agent`).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from courseplan.errors import SettingsError


def zone_agent_names(zones: pd.DataFrame, plan_agent: str) -> np.ndarray:
    """Per zone, the name of the agent it is dosed with: its ``edit_agent``, else the plan's."""
    if "edit_agent" not in zones.columns:
        return np.full(len(zones), plan_agent, dtype=object)
    own = zones["edit_agent"].astype(object).to_numpy()
    return np.array([a if isinstance(a, str) and a else plan_agent for a in own], dtype=object)


def is_mixed(zones: pd.DataFrame, plan_agent: str) -> bool:
    """Whether some zone names an agent other than the plan's."""
    return bool(np.any(zone_agent_names(zones, plan_agent) != plan_agent))


def agent_groups(zones: pd.DataFrame, settings, agent, agents: dict, build) -> tuple:
    """``(zone index, context)`` per agent of a mixed plan, the plan's agent first.

    *build(zones, settings, agent)* makes one agent's dosing context from its zones
    (:func:`courseplan.stages.dosing.prepare_dosing`).  ``[dosing] purity`` is the purity of the
    plan's product; another agent doses with its catalogue purity.
    """
    names = zone_agent_names(zones, agent.name)
    other = settings.replace(dosing=dataclasses.replace(settings.dosing, purity=None))
    out = []
    for name in [agent.name] + sorted(set(names) - {agent.name}):
        idx = np.flatnonzero(names == name)
        if idx.size:
            sub = zones.iloc[idx].reset_index(drop=True)
            out.append((idx, build(sub, settings if name == agent.name else other, agents[name])))
    return tuple(out)


def scatter(n: int, parts, result_type):
    """One *result_type* (a :class:`~courseplan.stages.dosing.PassResult`) for *n* zones from the
    per-agent ``(index, result)`` *parts*; ``sample_kg`` (per sample) is summed over the parts.
    """
    fields = {}
    for name in result_type.__dataclass_fields__:
        if name == "sample_kg":
            fields[name] = sum((np.asarray(getattr(r, name), dtype=float) for _, r in parts), np.zeros(1))
            continue
        first = np.asarray(getattr(parts[0][1], name))
        a = np.zeros(n, dtype=first.dtype) if first.dtype.kind in "bi" else np.full(n, np.nan)
        for idx, r in parts:
            a[idx] = getattr(r, name)
        fields[name] = a
    return result_type(**fields)


def spread_by_agent(ctx, zone_index, spread_at_s, g_m2, one, result_type):
    """:func:`~courseplan.stages.dosing.spread_pass` of a mixed plan: each record with its zone's agent."""
    i = np.asarray(zone_index, dtype=int)
    t, d = np.asarray(spread_at_s, dtype=float), np.asarray(g_m2, dtype=float)
    parts = []
    for idx, sub in ctx.groups:
        pos = np.full(len(ctx.zones), -1)
        pos[idx] = np.arange(idx.size)
        sel = np.flatnonzero(pos[i] >= 0)
        if sel.size:
            parts.append((sel, one(sub, pos[i[sel]], t[sel], d[sel])))
    if not parts:
        return one(ctx.groups[0][1], i, t, d)
    return scatter(i.size, parts, result_type)


def per_zone(ctx) -> dict[str, np.ndarray]:
    """Per zone: agent name, purity, nitrogen and chloride fractions of the agent it is dosed with."""
    n = len(ctx.zones)
    groups = ctx.groups or ((np.arange(n), ctx),)
    out = {"agent": np.empty(n, dtype=object), "purity": np.zeros(n), "nitrogen": np.zeros(n),
           "chloride": np.zeros(n)}
    for idx, sub in groups:
        out["agent"][idx] = sub.agent.name
        out["purity"][idx] = sub.purity
        out["nitrogen"][idx] = sub.agent.nitrogen_fraction
        out["chloride"][idx] = sub.agent.chloride_fraction
    return out


def plan_agents(zones: pd.DataFrame, agent, catalogue, crew_bag_kg, settings, where: str = "") -> dict:
    """The agents of a plan by catalogue name, the plan's first (``edit_agent`` holds catalogue names).

    Raises :class:`SettingsError` when another agent's bags are not the size the crews carry: the
    crews carry one bag size, and the order and the sheets count bags of it.
    """
    from courseplan.agents import get_agent

    agents = {agent.name: agent}
    for name in sorted({a for a in zone_agent_names(zones, agent.name) if a != agent.name}):
        agents[name] = get_agent(name, catalogue)
    bag = crew_bag_kg(settings, agent)
    for ag in agents.values():
        if ag is not agent and crew_bag_kg(settings, ag) != bag:
            raise SettingsError(f"{ag.name} comes in {crew_bag_kg(settings, ag):g} kg bags, the crews carry "
                                f"{bag:g} kg bags of {agent.name}", where=where or "edit_agent",
                                fix="set [logistics] bag_kg to the bag size the crews carry")
    return agents
