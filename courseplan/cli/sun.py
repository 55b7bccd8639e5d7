"""``courseplan sun``: sun and shade over a time window from a terrain model, as a two-band GeoTIFF.

Registered on the main command group by :mod:`courseplan.cli.main`; errors go through
:func:`courseplan.cli.common.guarded` like every command's.
"""

from __future__ import annotations

from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded
from courseplan.cli.output import echo_json, json_option, print_wrapped, stdout_console


@click.command("sun")
@click.argument("dem_path", type=click.Path(path_type=Path))
@click.option("--date", "date", required=True, metavar="YYYY-MM-DD", help="Day of the window.")
@click.option("--start", required=True, metavar="HH:MM", help="Local start time of the window.")
@click.option("--end", required=True, metavar="HH:MM", help="Local end time of the window.")
@click.option("--step-minutes", type=click.FloatRange(min=0, min_open=True), default=15.0, show_default=True,
              help="Longest time step [min]; the window is split into equal steps.")
@click.option("--timezone", required=True, metavar="TZ",
              help="IANA time zone of the clock times, e.g. Europe/Zurich.")
@click.option("--out", "out", required=True, type=click.Path(path_type=Path, dir_okay=False),
              help="Output GeoTIFF: band 1 sun fraction (0–1), band 2 irradiation [Wh/m²].")
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
@json_option("Print the result (path, grid, steps, means) as JSON on stdout; progress goes to stderr.")
@debug_option
@guarded
def sun_command(dem_path: Path, date: str, start: str, end: str, step_minutes: float, timezone: str,
                out: Path, overwrite: bool, as_json: bool = False, debug: bool = False) -> None:
    """Sun and shade from a terrain model over a time window.

    Writes a GeoTIFF on the DEM's grid (a geographic DEM is first reprojected to its UTM zone):
    band 1 is the share of the window in direct sun, counting cast shadows of all terrain in the
    DEM; band 2 is the clear-sky irradiation on each cell's slope, direct + diffuse, in Wh/m².
    """
    from courseplan.io.files import refuse_existing

    refuse_existing(out, overwrite, kind="file")
    r = _run(dem_path, date, start, end, step_minutes, timezone, out, overwrite)
    if as_json:
        echo_json(r)
        return
    print_wrapped(stdout_console(), f"{r['path']}: {r['rows']} × {r['cols']} cells of {r['cell_m']:.3g} m "
                  f"in {r['crs']}, {r['steps']} steps of {r['step_min']:.3g} min; mean sun fraction "
                  f"{r['mean_sun_fraction']:.2f}, mean irradiation {r['mean_irradiation_wh_m2']:,.0f} Wh/m²",
                  prefix="wrote ")


def _run(dem_path: Path, date: str, start: str, end: str, step_minutes: float, timezone: str, out: Path,
         overwrite: bool) -> dict:
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from courseplan.api import sun

    err = Console(stderr=True, highlight=False)
    with Progress(TextColumn("sun and shade"), BarColumn(), MofNCompleteColumn(), TextColumn("steps"),
                  TimeRemainingColumn(), console=err, disable=not err.is_terminal, transient=True) as bar:
        task = bar.add_task("steps", total=None)

        def tick(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        r = sun(dem_path, out, date=date, start=start, end=end, step_minutes=step_minutes,
                timezone=timezone, overwrite=overwrite, progress=tick)
    return r
