"""``courseplan replan``: top-ups from a time on, from what was spread and new observations."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from courseplan.cli.common import EXIT_SHORTFALL, debug_option, guarded
from courseplan.cli.output import echo_json, json_option, print_wrapped, stderr_console, stdout_console


@click.command("replan")
@click.argument("plan_file", type=click.Path(path_type=Path))
@click.option("--at", "at", required=True, metavar="HH:MM", help="Replan from this time on the race day.")
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path), help="Output folder (new).")
@click.option("--observations", type=click.Path(path_type=Path),
              help="New observations (same format as the plan's; no row after --at).")
@click.option("--spread", type=click.Path(path_type=Path),
              help="What was spread: CSV with zone_id, time and kg or g_m2.")
@click.option("--as-planned", is_flag=True, help="The morning plan's passes before --at were spread as planned.")
@click.option("--previous", type=click.Path(path_type=Path),
              help="The morning plan's output folder (its passes and bags); else the plan is run again.")
@debug_option
@json_option("Print the replan summary (as in summary.json) as JSON on stdout; messages go to stderr.")
@guarded
def replan_command(plan_file, at, out_dir, observations, spread, as_planned, previous, as_json, debug):
    """Replan from --at: top-ups into the breaks left, zones to leave alone, bags at each depot."""
    from courseplan.api import replan

    err = stderr_console(quiet=as_json)
    with err.status("replanning…"):
        rep = replan(plan_file, out_dir, at=at, observations=observations, spread=spread, as_planned=as_planned,
                     previous=previous)
    result = rep["result"]
    if as_json:
        import json

        echo_json(json.loads((Path(out_dir) / "summary.json").read_text(encoding="utf-8")))
    else:
        _print(rep, out_dir)
    if result.shortfall is not None:
        click.echo(f"shortfall: the crews cannot do the top-ups in time (outputs written; exit {EXIT_SHORTFALL})",
                   err=True)
        sys.exit(EXIT_SHORTFALL)


def _print(rep, out_dir: Path) -> None:
    con = stdout_console()
    result, t, d = rep["result"], rep["topups"], rep["depots"]
    print_wrapped(con, f"{result.settings.plan.name} — issued {rep['issued_at']}", style="bold")
    top = t[t["status"] == "top-up"]
    con.print(f"top-ups: {len(top)} zone(s), {top['product_kg'].sum():,.0f} kg", highlight=False)
    for r in top.itertuples():
        con.print(f"  zone {r.zone_id:>3}  crew {r.crew}  at {r.topup_at}  {r.dose_g_m2:5.0f} g/m²  "
                  f"{r.product_kg:6.1f} kg  {r.bags} bag(s)  (hard until {r.hard_until_now}"
                  f"{', observed ' + r.observed if r.observed else ''})", highlight=False)
    for status in ("leave alone", "soft, no top-up", "no salt"):
        ids = t.loc[t["status"] == status, "zone_id"].astype(str).tolist()
        if ids:
            print_wrapped(con, ", ".join(ids), prefix=f"{status}: ")
    con.print("depots:   crew  morning  used  left  needed  short", highlight=False)
    for r in d.itertuples():
        con.print(f"          {r.crew:>4}  {r.bags_morning:>7}  {r.bags_used:>4}  {r.bags_left:>4}  "
                  f"{r.bags_needed:>6}  {r.bags_short:>5}", highlight=False)
    for n in result.notes:
        print_wrapped(con, n, prefix="note: ", prefix_style="yellow")
    print_wrapped(con, f"{out_dir}/: zones.gpkg, map.html, summary.json, order.pdf, crews.pdf, topups.csv, "
                  "depots.csv", prefix="written to ")
