"""``courseplan ledger``: season totals of a venue ledger, against the season limits.

Registered on the main command group by :mod:`courseplan.cli.main`.  Exit 0 whether or not a
limit is exceeded (the report says "over"); 2 for a missing or malformed ledger or plan file.
"""

from __future__ import annotations

import json
from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded

_DAY = click.DateTime(formats=["%Y-%m-%d"])


def _kg(x: float) -> str:
    return f"{x:,.1f}"


def report_lines(rep: dict) -> list[str]:
    """The report as lines of at most 80 characters."""
    se = rep["season"]
    venue = ", ".join(rep["venues"]) or "no venue named"
    lines = [f"venue ledger: {venue} ({Path(rep['ledger']).name})"[:80]]
    span = (f"{se['from'] or 'start'} to {se['to'] or 'end'}" if se["from"] or se["to"] else "all entries")
    days = (f"; race days {se['first_day']} to {se['last_day']}" if se["first_day"] else "")
    lines.append(f"season: {span}{days}"[:80])
    lines.append(f"{rep['plans']} plan{'s' if rep['plans'] != 1 else ''} on {rep['days']} "
                 f"day{'s' if rep['days'] != 1 else ''}, {rep['entries']} zone entries, treated area "
                 f"{rep['treated_area_m2']:,.0f} m²")
    lines += ["", f"{'':<12}{'season kg':>14}{'mean g/m²':>12}{'worst zone g/m²':>18}  zone"]
    for q, t in rep["totals"].items():
        lines.append(f"{q:<12}{_kg(t['kg']):>14}{t['mean_g_m2']:>12,.1f}{t['worst_g_m2']:>18,.1f}  "
                     f"{(t['worst_zone'] or '—')[:10]:<10}".rstrip())
    if rep["by_agent"]:
        lines += ["", f"{'by agent':<20}{'product kg':>14}{'nitrogen kg':>14}{'chloride kg':>14}{'plans':>7}"]
        for name, a in rep["by_agent"].items():
            lines.append(f"{name[:20]:<20}{_kg(a['product_kg']):>14}{_kg(a['nitrogen_kg']):>14}"
                         f"{_kg(a['chloride_kg']):>14}{a['plans']:>7}")
    if rep["limits_file"] is not None:
        src = f"limits ({Path(rep['limits_file']).name} [ledger])"
        if not rep["limits"]:
            lines += ["", f"{src}: none set"[:80]]
        else:
            lines += ["", f"{src[:30]:<30}{'limit':>14}{'used':>14}{'share':>10}"]
            for lim in rep["limits"]:
                what = f"{lim['what']} {lim['unit']}" + (" (worst zone)" if lim["unit"] == "g/m²" else "")
                share = f"{lim['share_pct']:.1f} %" if lim["share_pct"] is not None else "—"
                lines.append(f"{what:<30}{_kg(lim['limit']):>14}{_kg(lim['used']):>14}{share:>10}"
                             f"{'  over' if lim['over'] else ''}")
    return lines


@click.command("ledger")
@click.argument("ledger_file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--season-from", type=_DAY, default=None, help="First race day counted, YYYY-MM-DD.")
@click.option("--season-to", type=_DAY, default=None, help="Last race day counted, YYYY-MM-DD.")
@click.option("--limits", "limits_file", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Plan file whose [ledger] table holds the season limits.")
@click.option("--json", "as_json", is_flag=True, help="Print the report as one JSON document.")
@debug_option
@guarded
def ledger_command(ledger_file: Path, season_from, season_to, limits_file: Path | None, as_json: bool,
                   debug: bool = False) -> None:
    """Season totals of a venue ledger, per zone area, by agent and against the limits.

    Product, nitrogen and chloride; exit 0 even when a limit is over (the report says "over").
    """
    from courseplan.api import ledger

    rep = ledger(ledger_file, season_from=season_from.date().isoformat() if season_from else None,
                 season_to=season_to.date().isoformat() if season_to else None, limits=limits_file)
    if as_json:
        click.echo(json.dumps(rep, indent=2, ensure_ascii=False, allow_nan=False))
        return
    for ln in report_lines(rep):
        click.echo(ln)
