"""Cautions printed on every output that carries a dose.

The wording is the project's own.  Facts behind it: ammonium nitrate is an oxidiser (UN 1942,
class 5.1) and an EU-restricted explosives precursor (Regulation (EU) 2019/1148); nitrogen agents
fertilise alpine meadows (Rixen et al. 2003); crew safety lines are common practice, no source.
"""

from __future__ import annotations

from typing import Any

GENERAL: tuple[str, ...] = (
    "Planning figures only: they are estimates from a model and the inputs given, not an instruction.",
    "Follow the product safety data sheet, local environmental rules, the race jury's decisions and "
    "licensed practice; they override this plan.",
    "Treat a small test patch first and wait for its result before treating the course.",
    "Hardened snow is icy: crews on steep pitches wear spikes or crampons and helmets, stay in radio "
    "contact, use ropes where needed, and nobody is on the course during runs.",
    "Wear gloves and eye protection; rinse metal tools and ski edges afterwards.",
    "Salt and its runoff reach soil and streams: spread no more than planned, keep bags closed and "
    "dry, and collect spills.",
)

NITRATE: tuple[str, ...] = (
    "Ammonium nitrate is an oxidiser (UN 1942, class 5.1) and, in the EU, a restricted explosives "
    "precursor: keep it away from fuels, oils, wood and organic matter.",
    "Never store or mix ammonium nitrate with chlorides (chloride speeds its decomposition).",
)

NITROGEN: tuple[str, ...] = (
    "Nitrogen agents fertilise alpine meadows and can change their plant species; report the "
    "nitrogen load to the landowner where rules ask for it.",
)


def cautions_for(agent_name: str, nitrogen_fraction: float = 0.0, *, nitrate: bool | None = None
                 ) -> list[str]:
    """Cautions for a plan that spreads the given agent.

    Parameters
    ----------
    agent_name
        Catalogue name of the agent.
    nitrogen_fraction
        Mass fraction of nitrogen in the product (adds the nitrogen caution when > 0).
    nitrate
        Whether the agent is a nitrate (oxidiser caution); default: guessed from the name.
    """
    lines = list(GENERAL)
    if nitrate is None:
        nitrate = "NO3" in agent_name.upper() or "NITRATE" in agent_name.upper()
    if nitrate:
        lines += NITRATE
    if nitrogen_fraction > 0:
        lines += NITROGEN
    return lines


def storage_cautions(agent: Any) -> tuple[str, ...]:
    """Storage cautions for the order (the project's own wording).

    Facts: ammonium nitrate is an oxidiser (UN 1942, class 5.1), not to be stored or mixed with
    chlorides, and an EU-restricted explosives precursor (Regulation (EU) 2019/1148) [V, domain-data
    §9]; the duty to report thefts and losses under that regulation is from memory; dry, covered storage
    and corrosion by chlorides are common practice, no source.
    """
    lines = ["Store bags closed, dry and off the ground, under cover and away from streams and drains."]
    formula = str(getattr(agent, "formula", "") or "").upper().replace(" ", "")
    name = str(getattr(agent, "name", "") or "").upper()
    if getattr(agent, "oxidiser", False):
        lines.append("Oxidiser: store apart from fuels, oils, wood, straw and other organic matter, and "
                     "away from heat and flames.")
        lines.append("Keep apart from chloride agents (road salt, calcium or magnesium chloride) in the "
                     "store, on the trucks and at the depots; never mix them.")
        if "NH4NO3" in formula or "NH4NO3" in name or "NITRATE" in name:
            lines.append("In the EU ammonium nitrate is a restricted explosives precursor (Regulation (EU) "
                         "2019/1148): keep it locked, count it in and out, and report losses or thefts.")
    if float(getattr(agent, "chloride_fraction", 0.0) or 0.0) > 0:
        lines.append("Chloride: keep apart from ammonium nitrate in the store and at the depots; it "
                     "corrodes steel, so keep it off bare metal and rinse tools and vehicles.")
    return tuple(lines)
