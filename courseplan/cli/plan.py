"""``courseplan plan`` and ``courseplan check``: parse, build settings, call :mod:`courseplan.api`, print."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from courseplan.cli.common import EXIT_SHORTFALL, debug_option, guarded, problem_lines
from courseplan.cli.output import echo_json, json_option, print_wrapped, stderr_console, stdout_console

WIDE_COLUMNS = 150  # the per-zone table is printed unasked from this terminal width on
OUTPUT_FILES = ("zones.gpkg", "map.html", "summary.json", "order.pdf", "crews.pdf")


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
        click.option("--zones", type=click.Path(path_type=Path),
                     help="Zones edited in a GIS (a plan's zones.gpkg): kept, overrides and all, instead of "
                          "zoning."),
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
                   crews=None, overrides=(), zones=None, **_):
    """Settings from the plan file (if any), then flags, then ``--set`` overrides."""
    from courseplan.io.planfile import read_plan
    from courseplan.settings import PlanSettings, parse_override, settings_from_mapping

    s = read_plan(plan_file) if plan_file else PlanSettings()
    flags = {"inputs": {k: v for k, v in dict(course=course, course_feature=course_feature, sun=sun,
                                              sun_encoding=sun_encoding, dem=dem, observations=observations,
                                              forecast=forecast, centreline=centreline, zones=zones).items()
                        if v is not None},
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
@click.option("--zone-table", "show_zones", is_flag=True,
              help=f"Also print the per-zone table (shown anyway on terminals of {WIDE_COLUMNS}+ columns).")
@json_option("Print the plan summary (as in summary.json) as JSON on stdout; messages go to stderr.")
@guarded
def plan_command(plan_file, out_dir, overwrite, quiet, show_zones, as_json, debug, **kw):
    """Make a treatment plan: zones, doses, order, map, GeoPackage and crew sheets."""
    from courseplan.api import plan as run

    s = build_settings(plan_file, **kw)
    s, note = _with_date(s)
    err = stderr_console(quiet=quiet)
    if note:
        print_wrapped(err, note, prefix="note: ", prefix_style="yellow")
    with err.status("planning…") as status:
        result = run(s, out_dir, overwrite=overwrite, progress=lambda name: status.update(f"{name}…"))
    if as_json:
        from courseplan.io.outputs import read_summary

        echo_json(read_summary(out_dir))  # the very document written (one time of issue)
        if result.shortfall is not None:
            sys.exit(EXIT_SHORTFALL)
        return
    if not quiet:
        render_result(result, out_dir, show_zones=show_zones)
    if result.shortfall is not None:
        click.echo(f"shortfall: the crews cannot do this plan in time (outputs written; exit {EXIT_SHORTFALL})",
                   err=True)
        sys.exit(EXIT_SHORTFALL)


def summary_lines(result, out_dir: Path) -> list[tuple[str, str, str | None]]:
    """The compact summary as ``(prefix, text, style)`` entries (one entry may wrap to several lines)."""
    tot = result.totals()
    log = result.logistics.summary()
    pl = result.settings.plan
    out: list[tuple[str, str, str | None]] = [("", f"{pl.name} — {pl.date} — {result.agent.label}", "bold")]
    orders = result.logistics.order_lines
    mixed = len(orders) > 1  # zones with their own agent: a product and an order line per agent
    for od in orders:
        kg = tot["by_agent"][od.agent]["product_kg"] if mixed else tot["total_product_kg"]
        out.append(("product: ", f"{kg:,.0f} kg (P50), {od.p90_kg:,.0f} kg (P90)"
                    + (f" of {od.agent_label}" if mixed else ""), "bold"))
    for od in orders:
        packs = ", ".join(f"{p.count} {p.kind}{'s' if p.count != 1 else ''} of {p.size_kg:g} kg"
                          for p in od.packages if p.count)
        pallets = f" on {od.pallets} pallet{'s' if od.pallets != 1 else ''}" if od.pallets else ""
        out.append(("order: ", f"{od.order_kg:,.0f} kg = {od.tonnes:.2f} t" + (f" of {od.agent_label}" if mixed else "")
                    + (f": {packs}{pallets}" if packs else ""), None))
    crews = (log.get("crews") or {}).get("count", 0)
    verdicts = ", ".join(f"{k} {v}" for k, v in tot["verdicts"].items())
    out.append(("zones: ", f"{tot['treated_zone_count']} of {tot['zone_count']} treated ({verdicts}); "
                f"{crews} crew{'s' if crews != 1 else ''}", None))
    out.append(("course: ", f"{tot['course_area_m2']:,.0f} m² map, {tot['course_surface_area_m2']:,.0f} m² "
                f"snow surface; nitrogen {tot['nitrogen_kg']:,.1f} kg, chloride {tot['chloride_kg']:,.1f} kg",
                None))
    for n in result.notes:
        out.append(("note: ", n, None))
    out.append(("written to ", f"{out_dir}/: " + ", ".join(OUTPUT_FILES), None))
    for c in result.cautions:
        out.append(("caution: ", c, "italic"))
    return out


def _words(label) -> str:
    """A class or verdict label with spaces for hyphens, so a narrow column wraps it between words."""
    return str(label).replace("-", " ")


def fit_widths(natural: list[int], least: list[int], room: int) -> list[int] | None:
    """Widths for the text columns of a table: natural when they fit in *room*, else at least *least*
    each (their longest word) plus a share of what is left; None when even *least* does not fit.
    """
    if sum(natural) <= room:
        return list(natural)
    if sum(least) > room:
        return None
    w = list(least)
    spare = room - sum(w)
    while spare > 0:  # one column at a time, the one furthest below its natural width first
        i = max(range(len(w)), key=lambda k: natural[k] - w[k])
        if natural[i] <= w[i]:
            break
        w[i] += 1
        spare -= 1
    return w


def zones_table(result, width: int):
    """The per-zone table within *width* columns.

    Numbers, and text holding numbers (the section), never wrap nor shrink; the word columns
    (exposure, snow, verdict) wrap between words, and are left out, snow first, on a terminal too
    narrow for their longest word.
    """
    from rich import box
    from rich.table import Table

    pl = result.settings.plan
    rows = []
    for r in result.zones.itertuples():
        rows.append((str(r.zone_id), str(r.section), _words(r.exposure_class), _words(r.wetness),
                     f"{r.lwc_pct:.1f}", f"{r.area_m2:,.0f}", f"{r.dose_g_m2:.0f}", f"{r.dose_p90_g_m2:.0f}",
                     str(r.passes), f"{r.product_kg:,.0f}", str(getattr(r, "crew", "")), _words(r.verdict)))
    cols = [("zone", True), ("section", True), ("exposure", False), ("snow", False), ("LWC\n%", True),
            ("area\nm²", True), ("dose\ng/m²", True), ("P90\ng/m²", True), ("passes", True), ("kg", True),
            ("crew", True), ("verdict", False)]
    natural = [max(len(x) for cell in [h] + [row[i] for row in rows] for x in cell.split("\n"))
               for i, (h, _) in enumerate(cols)]
    least = [max(len(x) for cell in [h] + [row[i] for row in rows] for x in cell.split())
             for i, (h, _) in enumerate(cols)]
    keep = list(range(len(cols)))
    while True:
        text = [i for i in keep if not cols[i][1]]
        room = width - sum(natural[i] for i in keep if cols[i][1]) - (len(keep) - 1)
        fit = fit_widths([natural[i] for i in text], [least[i] for i in text], room)
        if fit is not None or not text:
            break
        keep.remove(next(i for i in (3, 2, 11) if i in keep))  # snow, then exposure, then verdict
    fixed = dict(zip(text, fit or [], strict=False))
    t = Table(title=f"zones — {pl.name}", box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False,
              padding=(0, 0), title_justify="left")
    for i in keep:
        h, numeric = cols[i]
        if numeric:
            t.add_column(h, justify="left" if i == 1 else "right", no_wrap=True, min_width=natural[i])
        else:
            t.add_column(h, justify="left", overflow="fold", width=fixed.get(i))
    for row in rows:
        t.add_row(*(row[i] for i in keep))
    return t


def render_result(result, out_dir: Path, *, show_zones: bool = False) -> None:
    """Print the compact summary, and the per-zone table when asked or when the terminal is wide."""
    con = stdout_console()
    if show_zones or con.width >= WIDE_COLUMNS:
        con.print(zones_table(result, con.width))
    for prefix, text, style in summary_lines(result, out_dir):
        pstyle = {"note: ": "yellow", "caution: ": "italic"}.get(prefix, style)
        print_wrapped(con, text, prefix=prefix, style=style, prefix_style=pstyle)


@click.command("check")
@click.argument("plan_file", required=False, type=click.Path(path_type=Path))
@_input_options
@debug_option
@json_option("Print {ok, problems, warnings, zones, total_product_kg} as JSON on stdout; "
             "messages go to stderr.")
@guarded
def check_command(plan_file, as_json, debug, **kw):
    """Check every input and setting of a plan; list all problems at once."""
    from courseplan.api import check
    from courseplan.errors import CourseplanError

    try:
        s = build_settings(plan_file, **kw)
        s, note = _with_date(s)
        input_notes, result = check(s)
    except CourseplanError as exc:
        if as_json:
            echo_json({"ok": False, "problems": problem_lines(exc), "warnings": []})
        raise
    warnings = list(input_notes) + list(result.notes)
    total = result.totals()["total_product_kg"]
    if as_json:
        for n in warnings:
            click.echo(f"warning: {n}", err=True)
        echo_json({"ok": result.shortfall is None, "problems": [], "warnings": warnings,
                   "zones": len(result.zones), "total_product_kg": total, "agent": result.agent.name,
                   "shortfall": result.shortfall})
        if result.shortfall is not None:
            sys.exit(EXIT_SHORTFALL)
        return
    sf = result.shortfall
    con = stdout_console()
    for n in warnings:
        print_wrapped(con, n, prefix="warning: ", prefix_style="yellow")
    print_wrapped(con, f"{len(result.zones)} zones, {total:,.0f} kg of {result.agent.label} (P50); "
                  "nothing written", prefix="ok: ", prefix_style="green")
    if sf is not None:
        print_wrapped(con, f"{sf['crews']} crew(s) cannot do this plan in time; "
                      f"{sf['crews_needed'] or 'more than 50'} crews would (see the SHORTFALL warning)",
                      prefix="problem: ", prefix_style="red")
        sys.exit(EXIT_SHORTFALL)

