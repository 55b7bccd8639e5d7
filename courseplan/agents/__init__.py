"""Agent catalogue: the hardening agents, their properties, freezing-curve rows and sources.

The built-in catalogue is Python data (no file is read at run time).  Every number carries a
source with a confidence tag in ``Agent.sources``:

- ``published`` — confirmed against the named published source ([V] in the design notes);
- ``library`` — computed with a named general-purpose library and typed in ([L]);
- ``memory`` — from memory, unconfirmed: a placeholder until checked ([M]);
- ``practice`` — common practice of the trade, no published source ([P]);
- ``derived`` — derived here by arithmetic from the other values ([D]).

Users add or override agents with a TOML file (:func:`courseplan.io.agentfile.read_agents_file`
parses it; :func:`catalogue` merges the mapping)::

    [NaCl]                 # override fields of a built-in agent
    purity = 0.92
    bag_sizes_kg = [25, 50]

    ["sea salt"]            # a new agent based on a built-in one
    base = "NaCl"
    label = "sea salt (mostly NaCl)"
    purity = 0.85

A new agent without ``base`` must give at least ``label``, ``formula``, ``molar_mass_g_mol``,
``ions``, ``eutectic_c``, ``eutectic_mass_fraction`` and ``enthalpy_solution_kj_mol``; its
freezing curve is then approximate unless it gives ``curve = [[mass_fraction, temp_c], ...]``.

References
----------
.. [CRC-C] CRC Handbook of Chemistry and Physics, "Concentrative properties of aqueous solutions:
   density, refractive index, freezing point depression, and viscosity" (NaCl rows).
.. [CRC-F] CRC Handbook of Chemistry and Physics, "Freezing point lowering by electrolytes in aqueous
   solution", after Forsythe, W. E. (1956), *Smithsonian Physical Tables*, 9th ed.
.. [CRC-H] CRC Handbook of Chemistry and Physics, "Enthalpy of solution of electrolytes", after
   Parker, V. B. (1965), NSRDS-NBS 2.
.. [MEL] Melinder, Å. (2010). *Properties of secondary working fluids for indirect systems*, 2nd ed.,
   International Institute of Refrigeration; fits as implemented in CoolProp 8.0 (``INCOMP::MNA``,
   ``MCA``, ``MMG``), evaluated once and typed in.
"""

from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Mapping
from typing import Any

from courseplan.agents.builtin import _BUILTIN, builtin_agents
from courseplan.agents.record import AGENT_FIELDS, Agent
from courseplan.errors import AgentError

__all__ = ["Agent", "AGENT_FIELDS", "catalogue", "get_agent", "builtin_agents", "normalise_name"]




def normalise_name(name: str) -> str:
    """Lower-case a name and fold spaces, dots and the middle dot, for alias matching."""
    s = str(name).strip().lower().replace("·", ".").replace("_", " ").replace("-", " ")
    return re.sub(r"\s+", " ", s)


# ---- user overrides ----------------------------------------------------------------------------------
_REQUIRED_NEW = ("label", "formula", "molar_mass_g_mol", "ions", "eutectic_c", "eutectic_mass_fraction",
                 "enthalpy_solution_kj_mol")
_RANGES: dict[str, tuple[float, float]] = {
    "molar_mass_g_mol": (1.0, 1000.0), "ions": (1, 10), "nitrogen_fraction": (0.0, 1.0),
    "chloride_fraction": (0.0, 1.0), "eutectic_c": (-100.0, -0.01), "eutectic_mass_fraction": (1e-4, 0.9),
    "enthalpy_solution_kj_mol": (-500.0, 500.0), "purity": (0.01, 1.0), "crystal_water_fraction": (0.0, 0.9),
    "bulk_density_kg_m3": (50.0, 5000.0), "big_bag_kg": (1.0, 5000.0), "bags_per_pallet": (1, 1000),
    "hydrate_molar_mass_g_mol": (1.0, 2000.0),
}


def _convert(name: str, key: str, value: Any, where: str) -> Any:
    w = f"{where} [{name}] {key}"
    if key not in AGENT_FIELDS or key == "name":
        import difflib
        near = difflib.get_close_matches(key, AGENT_FIELDS, n=1)
        raise AgentError(f"unknown agent key {key!r}", where=w,
                         fix=(f"did you mean {near[0]!r}?" if near
                              else f"use one of: {', '.join(AGENT_FIELDS)}"))
    if key in ("label", "formula", "note"):
        if not isinstance(value, str):
            raise AgentError(f"expected text, got {value!r}", where=w, fix="put it in quotes")
        return value
    if key in ("oxidiser", "curve_approximate", "reference_only"):
        if not isinstance(value, bool):
            raise AgentError(f"expected true or false, got {value!r}", where=w)
        return value
    if key == "bag_sizes_kg":
        if not isinstance(value, list) or not value or not all(
                isinstance(v, int | float) and not isinstance(v, bool) and v > 0 for v in value):
            raise AgentError(f"expected a list of positive numbers, got {value!r}", where=w,
                             fix="write e.g. [25, 50]")
        return tuple(sorted(float(v) for v in value))
    if key == "aliases":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise AgentError(f"expected a list of names, got {value!r}", where=w)
        return tuple(value)
    if key == "sources":
        if not isinstance(value, dict) or not all(isinstance(v, str) for v in value.values()):
            raise AgentError("expected a table of text values", where=w,
                             fix='write e.g. sources = { purity = "practice: supplier sheet" }')
        return dict(value)
    if key == "curve":
        ok = isinstance(value, list) and all(
            isinstance(r, list) and len(r) == 2 and all(isinstance(x, int | float) and not isinstance(x, bool)
                                                      for x in r) for r in value)
        if not ok:
            raise AgentError(f"expected rows [[mass_fraction, temp_c], ...], got {value!r}", where=w)
        rows = tuple((float(r[0]), float(r[1])) for r in value)
        if any(not (0 < r[0] < 1) or r[1] >= 0 for r in rows):
            raise AgentError("curve rows need 0 < mass_fraction < 1 and temp_c < 0", where=w)
        if any(b[0] <= a_[0] or b[1] >= a_[1] for a_, b in zip(rows, rows[1:], strict=False)):
            raise AgentError("curve rows must rise in mass fraction and fall in temperature", where=w,
                             fix="sort the rows and check for typing errors")
        return rows
    if key == "hydrate_molar_mass_g_mol" and value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise AgentError(f"expected a number, got {value!r}", where=w, fix="write it without quotes")
    if key in ("ions", "bags_per_pallet"):
        if not float(value).is_integer():
            raise AgentError(f"expected a whole number, got {value!r}", where=w)
        value = int(value)
    else:
        value = float(value)
    if math.isnan(value):
        raise AgentError("value is NaN", where=w)
    lo, hi = _RANGES.get(key, (-math.inf, math.inf))
    if not lo <= value <= hi:
        raise AgentError(f"{value} is outside the accepted range {lo} to {hi}", where=w)
    return value


def catalogue(overrides: Mapping[str, Any] | None = None, *, source: str = "agents file") -> dict[str, Agent]:
    """Return the agent catalogue, with a user's additions and overrides merged in.

    Parameters
    ----------
    overrides
        Mapping as parsed from an agents TOML file: agent name → table of fields.  A table for a
        catalogue agent (matched by name or alias) overrides those fields; a table with
        ``base = "<agent>"`` copies that agent first; any other table is a new agent and must
        give the fields listed in the module docstring.  An optional top-level ``[agents]``
        wrapper table is accepted.
    source
        Name of the file, used in messages and in the ``sources`` of overridden values.

    Returns
    -------
    dict
        Catalogue name → :class:`Agent`.

    Raises
    ------
    AgentError
        Unknown keys, wrong types, out-of-range values or missing fields, naming the key.
    """
    cat = builtin_agents()
    if not overrides:
        return cat
    data = overrides
    if set(data) == {"agents"} and isinstance(data["agents"], Mapping):
        data = data["agents"]
    for name, table in data.items():
        if not isinstance(table, Mapping):
            raise AgentError(f"expected a table for agent {name!r}, got {table!r}", where=source,
                             fix=f'write it as ["{name}"] followed by key = value lines')
        table = dict(table)
        base_name = table.pop("base", None)
        existing = _lookup(name, cat)
        if base_name is not None:
            if not isinstance(base_name, str):
                raise AgentError(f"base must be an agent name, got {base_name!r}", where=f"{source} [{name}]")
            base = get_agent(base_name, cat)
        elif existing is not None:
            base = existing
        else:
            missing = [k for k in _REQUIRED_NEW if k not in table]
            if missing:
                raise AgentError(f"new agent {name!r} lacks {', '.join(missing)}", where=f"{source} [{name}]",
                                 fix='give them, or copy a catalogue agent with base = "NaCl"')
            base = None
        values = {k: _convert(name, k, v, source) for k, v in table.items()}
        user_sources = values.pop("sources", {})
        if base is not None:
            srcs = dict(base.sources)
            key = base.name if (existing is not None and base_name is None) else name
            if "curve" in values:
                values.setdefault("curve_approximate", False)
            agent = dataclasses.replace(base, name=key, **values)
            if key != base.name:
                agent = dataclasses.replace(agent, aliases=tuple(values.get("aliases", ())))
        else:
            srcs = {}
            values.setdefault("nitrogen_fraction", 0.0)
            values.setdefault("chloride_fraction", 0.0)
            values.setdefault("curve_approximate", "curve" not in values)
            agent = Agent(name=name, **values)
        for k in table:
            if k != "sources":
                srcs[k] = f"user: {source}"
        srcs.update(user_sources)
        agent = dataclasses.replace(agent, sources=srcs)
        _check_agent(agent, f"{source} [{name}]")
        cat[agent.name] = agent
    return cat


def _check_agent(agent: Agent, where: str) -> None:
    if agent.curve and agent.curve[-1][0] >= agent.eutectic_mass_fraction:
        raise AgentError(f"curve rows reach mass fraction {agent.curve[-1][0]}, at or past the eutectic "
                         f"{agent.eutectic_mass_fraction}", where=where,
                         fix="give only rows below the eutectic")
    if agent.curve and agent.curve[-1][1] <= agent.eutectic_c:
        raise AgentError(f"curve rows reach {agent.curve[-1][1]} °C, at or below the eutectic "
                         f"{agent.eutectic_c} °C", where=where)
    if agent.purity + agent.crystal_water_fraction > 1.0 + 1e-9:
        raise AgentError(f"purity ({agent.purity}) plus crystal_water_fraction "
                         f"({agent.crystal_water_fraction}) exceeds 1", where=where)


def _lookup(name: str, cat: Mapping[str, Agent]) -> Agent | None:
    if name in cat:
        return cat[name]
    key = normalise_name(name)
    for ag in cat.values():
        if normalise_name(ag.name) == key or key in (normalise_name(x) for x in ag.aliases):
            return ag
    return None


def get_agent(name: str | Agent, catalogue: Mapping[str, Agent] | None = None) -> Agent:
    """Look an agent up by catalogue name or alias (case-insensitive).

    Parameters
    ----------
    name
        Catalogue name (``"NaCl"``), alias (``"rock salt"``, ``"an"``, ``"urea"``) or an
        :class:`Agent` (returned as it is).
    catalogue
        Catalogue to search (default: the built-in one).

    Raises
    ------
    AgentError
        The name is not in the catalogue; the message lists the valid names.
    """
    if isinstance(name, Agent):
        return name
    cat = catalogue if catalogue is not None else _BUILTIN
    ag = _lookup(name, cat)
    if ag is None:
        import difflib
        names = list(cat)
        near = difflib.get_close_matches(str(name), names, n=1)
        hint = f"did you mean {near[0]!r}? " if near else ""
        raise AgentError(f"unknown agent {name!r}", where="agent",
                         fix=f"{hint}valid names: {', '.join(names)} (see `courseplan agents`)")
    return ag
