"""Cautions printed on every output that carries a dose.

The wording is the project's own.  Facts behind it: ammonium nitrate is an oxidiser (UN 1942,
class 5.1) and an EU-restricted explosives precursor (Regulation (EU) 2019/1148); nitrogen agents
fertilise alpine meadows (Rixen et al. 2003); crew safety lines are common practice, no source.
"""

from __future__ import annotations

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
