"""``courseplan agents``: list the agent catalogue (a narrow table, every column with ``--wide``, or JSON).

Registered on the main command group by :mod:`courseplan.cli.main`.
"""

from __future__ import annotations

from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded
from courseplan.cli.output import echo_json, json_option, print_wrapped, stdout_console


def _rows(cat):
    yield from cat.values()


NARROW = ("name", "label", "eutectic °C / %", "kJ/kg", "purity")


@click.command("agents")
@json_option("Print the catalogue as JSON (every value with its source).")
@click.option("--agents-file", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="TOML file adding or overriding agents (as [inputs] agents in a plan).")
@click.option("--wide", is_flag=True,
              help="Every column (molar mass, ions, N and Cl, ΔsolH, bulk density, bags, curve, notes), "
                   "however wide the lines get.")
@click.option("--sources", is_flag=True, help="Also print the source of every value.")
@debug_option
@guarded
def agents_command(as_json: bool, agents_file: Path | None, wide: bool, sources: bool,
                   debug: bool = False) -> None:
    """List the hardening agents: properties, eutectic, heat of solution, packaging and sources."""
    from courseplan.io.agentfile import load_catalogue

    cat = load_catalogue(agents_file)
    if as_json:
        out = {name: ag.as_dict() for name, ag in cat.items()}
        for name, ag in cat.items():
            out[name]["reference_only"] = ag.reference_only
        echo_json(out)
        return

    from rich.table import Table

    con = stdout_console()
    t = Table(title="Agent catalogue", show_lines=False)
    heads = (("name", "left"), ("label", "left"), ("M g/mol", "right"), ("ions", "right"), ("N %", "right"),
             ("Cl %", "right"), ("eutectic °C / %", "right"), ("ΔsolH kJ/mol", "right"), ("kJ/kg", "right"),
             ("purity", "right"), ("bulk kg/m³", "right"), ("bags kg", "left"), ("curve", "left"),
             ("notes", "left"))
    keep = [i for i, (h, _) in enumerate(heads) if wide or h in NARROW]
    rows = []
    for ag in _rows(cat):
        notes = []
        if ag.oxidiser:
            notes.append("oxidiser")
        if ag.reference_only:
            notes.append("reference curve only")
        if ag.crystal_water_fraction:
            notes.append(f"crystal water {ag.crystal_water_fraction:.2f}")
        rows.append((ag.name, ag.label, f"{ag.molar_mass_g_mol:.3f}", str(ag.ions),
                     f"{100 * ag.nitrogen_fraction:.1f}", f"{100 * ag.chloride_fraction:.1f}",
                     f"{ag.eutectic_c:.1f} / {100 * ag.eutectic_mass_fraction:.1f}",
                     f"{ag.enthalpy_solution_kj_mol:+.2f}", f"{ag.solution_heat_j_kg / 1e3:+.0f}",
                     f"{ag.purity:.2f}", f"{ag.bulk_density_kg_m3:.0f}",
                     ", ".join(f"{b:g}" for b in ag.bag_sizes_kg) + f" (big bag {ag.big_bag_kg:g})",
                     "approximate" if ag.curve_approximate else "tabulated", "; ".join(notes)))
    for i in keep:
        h, j = heads[i]
        # names and labels may wrap between words; numbers and everything holding one never wrap
        t.add_column(h, justify=j, no_wrap=h not in ("label", "notes"),
                     overflow="fold" if h in ("label", "notes") else "ellipsis")
    for row in rows:
        t.add_row(*(row[i] for i in keep))
    if wide:  # as wide as the table needs: --wide asks for long lines rather than cut numbers
        from rich.measure import Measurement

        need = Measurement.get(con, con.options.update(width=10_000), t).maximum
        con.width = max(con.width, need)
    con.print(t)
    print_wrapped(con, "kJ/kg: heat absorbed (+) or released (−) per kg of salt on dissolving. "
                  "Every column: "
                  "`courseplan agents --wide`; the confidence of each value: `--sources` or `--json`.")
    if sources:
        for ag in _rows(cat):
            con.print(f"[bold]{ag.name}[/bold]", soft_wrap=True)
            for k, v in sorted(ag.sources.items()):
                print_wrapped(con, f"{k}: {v}", prefix="  ", prefix_style=None, style=None)
