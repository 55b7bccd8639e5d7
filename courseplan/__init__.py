"""courseplan: zone-by-zone salt-hardening plans for wet race snow.

Public API (lazy imports keep ``import courseplan`` and ``courseplan --help`` fast):

- :func:`read_plan`, :func:`plan` — read a plan file; run a whole plan and write its outputs;
- :func:`freezing_point`, :func:`liquidus_mass_fraction`, :func:`mixture_equilibrium`,
  :func:`refreeze_ratio` — brine thermodynamics for a catalogue agent;
- :func:`get_agent`, :func:`catalogue` — the agent catalogue.
"""

from __future__ import annotations

__version__ = "0.1.0"

_LAZY = {
    "read_plan": ("courseplan.io.planfile", "read_plan"),
    "plan": ("courseplan.api", "plan"),
    "run_plan": ("courseplan.pipeline", "run_plan"),
    "load_inputs": ("courseplan.io.loader", "load_inputs"),
    "PlanSettings": ("courseplan.settings", "PlanSettings"),
    "freezing_point": ("courseplan.physics.brine", "freezing_point"),
    "liquidus_mass_fraction": ("courseplan.physics.brine", "liquidus_mass_fraction"),
    "mixture_equilibrium": ("courseplan.physics.brine", "mixture_equilibrium"),
    "refreeze_ratio": ("courseplan.physics.brine", "refreeze_ratio"),
    "get_agent": ("courseplan.agents", "get_agent"),
    "catalogue": ("courseplan.agents", "catalogue"),
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        mod, attr = _LAZY[name]
        return getattr(importlib.import_module(mod), attr)
    raise AttributeError(f"module 'courseplan' has no attribute {name!r}")
