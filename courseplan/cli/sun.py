"""``courseplan sun``: sun and shade over a time window from a terrain model, as a two-band GeoTIFF.

Registered on the main command group by :mod:`courseplan.cli.main`; errors go through
:func:`courseplan.cli.common.guarded` like every command's.
"""

from __future__ import annotations

from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded

#: Work (cells × time steps) above which a progress bar is shown on a terminal.
_PROGRESS_WORK = 20_000_000


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
@debug_option
@guarded
def sun_command(dem_path: Path, date: str, start: str, end: str, step_minutes: float, timezone: str,
                out: Path, overwrite: bool, debug: bool = False) -> None:
    """Sun and shade from a terrain model over a time window.

    Writes a GeoTIFF on the DEM's grid (a geographic DEM is first reprojected to its UTM zone):
    band 1 is the share of the window in direct sun, counting cast shadows of all terrain in the
    DEM; band 2 is the clear-sky irradiation on each cell's slope, direct + diffuse, in Wh/m².
    """
    from courseplan.io.files import refuse_existing

    refuse_existing(out, overwrite, kind="file")
    _run(dem_path, date, start, end, step_minutes, timezone, out, overwrite)


def _run(dem_path: Path, date: str, start: str, end: str, step_minutes: float, timezone: str, out: Path,
         overwrite: bool) -> None:
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from courseplan import __version__
    from courseplan.io.rasters import read_dem, write_sun_tiff
    from courseplan.physics.solar import window_times
    from courseplan.stages.sun import sun_from_dem

    err = Console(stderr=True)
    times, _, _, _ = window_times(date, start, end, timezone, step_minutes)  # validate before reading
    dem = read_dem(dem_path)
    n_cells = dem.values.size
    show = err.is_terminal and n_cells * len(times) >= _PROGRESS_WORK
    with Progress(TextColumn("sun and shade"), BarColumn(), MofNCompleteColumn(), TextColumn("steps"),
                  TimeRemainingColumn(), console=err, disable=not show, transient=True) as bar:
        task = bar.add_task("steps", total=len(times))

        def tick(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        grids = sun_from_dem(dem.values, dem.transform, dem.crs, date=date, start=start, end=end,
                             timezone=timezone, step_minutes=step_minutes, progress=tick)
    cs = grids.window
    tags = {"date": date, "window_start": cs.start.isoformat(), "window_end": cs.end.isoformat(),
            "timezone": timezone, "step_minutes": f"{cs.step_hours * 60:.6g}", "time_steps": cs.n_steps,
            "site_lat_lon_alt": f"{cs.latitude:.6f} {cs.longitude:.6f} {cs.altitude_m:.1f}",
            "grid_north_deg": f"{grids.grid_north_deg:.4f}", "method": grids.method,
            "source_dem": str(dem_path), "software": f"courseplan {__version__}"}
    path = write_sun_tiff(out, grids.sun_fraction, grids.irradiation_wh_m2, dem.transform, dem.crs,
                          tags=tags, overwrite=overwrite)
    import numpy as np

    ok = np.isfinite(grids.sun_fraction)
    mean_f = float(np.mean(grids.sun_fraction[ok])) if ok.any() else float("nan")
    mean_e = float(np.mean(grids.irradiation_wh_m2[ok])) if ok.any() else float("nan")
    n_rows, n_cols = dem.values.shape
    click.echo(f"wrote {path}: {n_rows} × {n_cols} cells of {abs(dem.transform.a):.3g} m in {dem.crs.name}, "
               f"{cs.n_steps} steps of {cs.step_hours * 60:.3g} min; mean sun fraction {mean_f:.2f}, "
               f"mean irradiation {mean_e:,.0f} Wh/m²")
