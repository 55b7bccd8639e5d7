"""``courseplan agents``: list the agent catalogue (a rich table, or JSON with ``--json``).

Registered on the main command group by :mod:`courseplan.cli.main`.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded


def _rows(cat):
    yield from cat.values()


@click.command("agents")
@click.option("--json", "as_json", is_flag=True,
              help="Print the catalogue as JSON (every value with its source).")
@click.option("--agents-file", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="TOML file adding or overriding agents (as [inputs] agents in a plan).")
@click.option("--sources", is_flag=True, help="Also print the source of every value.")
@debug_option
@guarded
def agents_command(as_json: bool, agents_file: Path | None, sources: bool, debug: bool = False) -> None:
    """List the hardening agents: properties, eutectic, heat of solution, packaging and sources."""
    from courseplan.io.agentfile import load_catalogue

    cat = load_catalogue(agents_file)
    if as_json:
        out = {name: ag.as_dict() for name, ag in cat.items()}
        for name, ag in cat.items():
            out[name]["reference_only"] = ag.reference_only
        click.echo(json.dumps(out, indent=2, ensure_ascii=False, allow_nan=False, default=str))
        return

    from rich.console import Console
    from rich.table import Table

    t = Table(title="Agent catalogue", show_lines=False)
    for col, kw in (("name", {}), ("label", {}), ("M g/mol", {"justify": "right"}),
                    ("ions", {"justify": "right"}),
                    ("N %", {"justify": "right"}), ("Cl %", {"justify": "right"}),
                    ("eutectic °C / %", {"justify": "right"}), ("ΔsolH kJ/mol", {"justify": "right"}),
                    ("kJ/kg", {"justify": "right"}), ("purity", {"justify": "right"}),
                    ("bulk kg/m³", {"justify": "right"}), ("bags kg", {}), ("curve", {}), ("notes", {})):
        t.add_column(col, no_wrap=col not in ("label", "notes"), **kw)
    for ag in _rows(cat):
        notes = []
        if ag.oxidiser:
            notes.append("oxidiser")
        if ag.reference_only:
            notes.append("reference curve only")
        if ag.crystal_water_fraction:
            notes.append(f"crystal water {ag.crystal_water_fraction:.2f}")
        t.add_row(ag.name, ag.label, f"{ag.molar_mass_g_mol:.3f}", str(ag.ions),
                  f"{100 * ag.nitrogen_fraction:.1f}", f"{100 * ag.chloride_fraction:.1f}",
                  f"{ag.eutectic_c:.1f} / {100 * ag.eutectic_mass_fraction:.1f}",
                  f"{ag.enthalpy_solution_kj_mol:+.2f}", f"{ag.solution_heat_j_kg / 1e3:+.0f}",
                  f"{ag.purity:.2f}", f"{ag.bulk_density_kg_m3:.0f}",
                  ", ".join(f"{b:g}" for b in ag.bag_sizes_kg) + f" (big bag {ag.big_bag_kg:g})",
                  "approximate" if ag.curve_approximate else "tabulated", "; ".join(notes))
    con = Console(file=sys.stdout, width=max(200, Console().width))
    con.print(t)
    con.print("kJ/kg: heat absorbed (+) or released (−) per kg of salt on dissolving. "
              "Confidence of each value: `courseplan agents --sources` or `--json`.")
    if sources:
        for ag in _rows(cat):
            con.print(f"[bold]{ag.name}[/bold]")
            for k, v in sorted(ag.sources.items()):
                con.print(f"  {k}: {v}")
