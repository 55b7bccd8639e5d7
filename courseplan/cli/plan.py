"""``courseplan plan`` and ``courseplan check``: parse, build settings, call :mod:`courseplan.api`, print."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from courseplan.cli.common import EXIT_SHORTFALL, debug_option, guarded


def _input_options(f):
    opts = [
        click.option("--course", type=click.Path(path_type=Path), help="Course outline (polygon vector file)."),
        click.option("--course-feature", help="Which polygon to use when the course file holds several."),
        click.option("--sun", type=click.Path(path_type=Path), help="Sun/shade raster (GeoTIFF)."),
        click.option("--sun-encoding", type=click.Choice(["fraction", "percent", "wh_m2"]),
                     help="What the sun raster holds (default: fraction, 0–1)."),
        click.option("--dem", type=click.Path(path_type=Path), help="Terrain model (GeoTIFF, metres)."),
        click.option("--observations", type=click.Path(path_type=Path), help="Field observations (CSV/points)."),
        click.option("--forecast", type=click.Path(path_type=Path), help="Hourly forecast CSV."),
        click.option("--centreline", type=click.Path(path_type=Path), help="Course line from start to finish."),
        click.option("--agent", help="Agent from the catalogue (see `courseplan agents`)."),
        click.option("--date", help="Race day, YYYY-MM-DD (default: today)."),
        click.option("--crews", type=int, help="Number of crews."),
        click.option("--set", "overrides", multiple=True, metavar="TABLE.KEY=VALUE",
                     help="Override any plan-file setting, e.g. --set dosing.depth_m=0.05 (repeatable)."),
    ]
    for o in reversed(opts):
        f = o(f)
    return f


def build_settings(plan_file: Path | None, *, course=None, course_feature=None, sun=None, sun_encoding=None,
                   dem=None, observations=None, forecast=None, centreline=None, agent=None, date=None,
                   crews=None, overrides=(), **_):
    """Settings from the plan file (if any), then flags, then ``--set`` overrides."""
    from courseplan.io.planfile import read_plan
    from courseplan.settings import PlanSettings, parse_override, settings_from_mapping

    s = read_plan(plan_file) if plan_file else PlanSettings()
    flags = {"inputs": {k: v for k, v in dict(course=course, course_feature=course_feature, sun=sun,
                                              sun_encoding=sun_encoding, dem=dem, observations=observations,
                                              forecast=forecast, centreline=centreline).items() if v is not None},
             "plan": {k: v for k, v in dict(agent=agent, date=date).items() if v is not None},
             "logistics": {"crews": crews} if crews is not None else {}}
    flags = {k: {kk: (str(vv) if isinstance(vv, Path) else vv) for kk, vv in v.items()} for k, v in flags.items() if v}
    s = settings_from_mapping(flags, source="command line", start=s)
    for text in overrides:
        table, key, value = parse_override(text)
        s = settings_from_mapping({table: {key: value}}, source="--set", start=s)
    return s


def _with_date(s):
    """Fill a missing race date with today's date in the plan's time zone."""
    import dataclasses
    import datetime as dt
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    from courseplan.errors import SettingsError

    try:
        tz = ZoneInfo(s.plan.timezone)
    except (ZoneInfoNotFoundError, ValueError):
        raise SettingsError(f"unknown time zone {s.plan.timezone!r}", where="[plan] timezone",
                            fix='use an IANA name such as "Europe/Zurich"') from None
    if s.plan.date is not None:
        return s, None
    today = dt.datetime.now(tz).date().isoformat()
    return s.replace(plan=dataclasses.replace(s.plan, date=today)), f"no race date given: planning for today, {today}"


@click.command("plan")
@click.argument("plan_file", required=False, type=click.Path(path_type=Path))
@_input_options
@debug_option
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path), help="Output folder (new).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output folder.")
@click.option("--quiet", is_flag=True, help="Print only errors.")
@guarded
def plan_command(plan_file, out_dir, overwrite, quiet, debug, **kw):
    """Make a treatment plan: zones, doses, order, map, GeoPackage and crew sheets."""
    from rich.console import Console

    from courseplan.api import plan as run

    s = build_settings(plan_file, **kw)
    s, note = _with_date(s)
    con = Console(stderr=True, quiet=quiet)
    if note:
        from rich.markup import escape

        con.print(f"[yellow]note:[/] {escape(note)}")
    with con.status("planning…") as status:
        result = run(s, out_dir, overwrite=overwrite, progress=lambda name: status.update(f"{name}…"))
    if not quiet:
        render_result(result, out_dir)
    if result.shortfall is not None:
        click.echo(f"shortfall: the crews cannot do this plan in time (outputs written; exit {EXIT_SHORTFALL})",
                   err=True)
        sys.exit(EXIT_SHORTFALL)


def render_result(result, out_dir: Path) -> None:
    """Print the short table of zones and totals."""
    from rich.console import Console
    from rich.table import Table

    con = Console()
    z = result.zones
    t = Table(title=f"{result.settings.plan.name} — {result.settings.plan.date} — {result.agent.label}",
              show_lines=False)
    for h, j in (("zone", "right"), ("section", "left"), ("exposure", "left"), ("snow", "left"),
                 ("area m²", "right"), ("dose g/m²", "right"), ("P90", "right"), ("passes", "right"),
                 ("kg", "right"), ("crew", "right"), ("verdict", "left")):
        t.add_column(h, justify=j)
    for r in z.itertuples():
        t.add_row(str(r.zone_id), str(r.section), str(r.exposure_class),
                  f"{r.wetness} {r.lwc_pct:.1f} % ({r.snow_source})", f"{r.area_m2:,.0f}", f"{r.dose_g_m2:.0f}",
                  f"{r.dose_p90_g_m2:.0f}", str(r.passes), f"{r.product_kg:,.1f}", str(getattr(r, "crew", "")),
                  str(r.verdict))
    con.print(t)
    tot = result.totals()
    o = result.logistics.order
    con.print(f"course {tot['course_area_m2']:,.0f} m² map, {tot['course_surface_area_m2']:,.0f} m² snow surface; "
              f"{tot['treated_zone_count']} of {tot['zone_count']} zones treated")
    con.print(f"[bold]product: {tot['total_product_kg']:,.0f} kg (P50), {tot['total_product_p90_kg']:,.0f} kg (P90); "
              f"order {o.order_kg:,.0f} kg = {o.tonnes:.2f} t[/]  nitrogen {tot['nitrogen_kg']:,.1f} kg, "
              f"chloride {tot['chloride_kg']:,.1f} kg")
    from rich.markup import escape

    for n in result.notes:
        con.print(f"[yellow]note:[/] {escape(n)}")
    con.print(f"written to {out_dir}/: zones.gpkg, map.html, summary.json, order.pdf, crews.pdf")
    con.print("[italic]" + result.cautions[0] + " " + result.cautions[1] + "[/]")


@click.command("check")
@click.argument("plan_file", required=False, type=click.Path(path_type=Path))
@_input_options
@debug_option
@guarded
def check_command(plan_file, debug, **kw):
    """Check every input and setting of a plan; list all problems at once."""
    from courseplan.api import check

    s = build_settings(plan_file, **kw)
    s, note = _with_date(s)
    input_notes, result = check(s)
    for n in input_notes:
        click.echo(f"warning: {n}")
    for n in result.notes:
        click.echo(f"warning: {n}")
    if result.shortfall is not None:
        sf = result.shortfall
        click.echo(f"problem: {sf['crews']} crew(s) cannot do this plan in time; "
                   f"{sf['crews_needed'] or 'more than 50'} crews would (see the SHORTFALL warning)")
        sys.exit(EXIT_SHORTFALL)
    click.echo(f"ok: {len(result.zones)} zones, {result.totals()['total_product_kg']:,.0f} kg of "
               f"{result.agent.label} (P50); nothing written")


