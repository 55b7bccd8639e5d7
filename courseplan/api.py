"""One-call library entry point: read inputs, run the plan, write the outputs."""

from __future__ import annotations

from pathlib import Path

from courseplan.settings import PlanSettings


def plan(settings: PlanSettings | str | Path, out_dir: str | Path, *, overwrite: bool = False, progress=None):
    """Run a whole plan and write its outputs into *out_dir*.

    Parameters
    ----------
    settings
        Validated settings, or the path of a plan file.
    out_dir
        Output folder (must not exist unless *overwrite*); never a folder holding an input file.
    overwrite
        Replace an existing output folder that courseplan wrote (it holds the marker file), only once
        the new outputs are complete.  A lock beside the folder keeps a second run out meanwhile.
        With a ``[ledger] file`` the plan's spread is then appended to the venue ledger (checked
        before the plan runs; a plan version already there is skipped), and a note says what was done.
    progress
        Optional callable ``progress(stage_name)``.

    Returns
    -------
    PlanResult
        The result that was written.
    """
    import dataclasses

    from courseplan.io.files import OutputLock, refuse_existing, refuse_foreign_folder, refuse_out_over_inputs
    from courseplan.io.ledger import append_plan, check_ledger
    from courseplan.io.loader import load_inputs
    from courseplan.io.outputs import write_outputs
    from courseplan.io.planfile import read_plan
    from courseplan.pipeline import run_plan

    plan_file = None
    if not isinstance(settings, PlanSettings):
        plan_file = Path(settings)
        settings = read_plan(settings)
    out = Path(out_dir)
    refuse_out_over_inputs(out, input_paths(settings, plan_file))
    refuse_existing(out, overwrite, kind="folder")
    refuse_foreign_folder(out)
    ledger_file = settings.ledger.file
    if ledger_file is not None:
        check_ledger(ledger_file)  # a malformed ledger stops the plan before anything is written
    with OutputLock(out):
        inputs = load_inputs(settings)
        result = run_plan(settings, inputs, progress=progress)
        write_outputs(result, out, overwrite=overwrite)
    if ledger_file is not None:
        done = append_plan(ledger_file, result, venue=settings.ledger.venue)
        result = dataclasses.replace(result, notes=(*result.notes, done.note))
    return result


def input_paths(settings: PlanSettings, plan_file: Path | None = None) -> dict[str, Path]:
    """Every input file a plan reads (the plan files read in this process included), by what it is."""
    from courseplan.io.planfile import plan_files_read

    ins = settings.inputs
    named = {"course": ins.course, "sun raster": ins.sun, "DEM": ins.dem, "observations": ins.observations,
             "forecast": ins.forecast, "centreline": ins.centreline, "markers": ins.markers,
             "agents file": ins.agents, "ledger": settings.ledger.file}
    paths = {k: Path(v) for k, v in named.items() if v is not None}
    for i, p in enumerate([*([plan_file] if plan_file else []), *plan_files_read()]):
        paths[f"plan file{'' if i == 0 else f' {i + 1}'}"] = Path(p)
    return paths


def ledger(path: str | Path, *, season_from: str | None = None, season_to: str | None = None,
           limits: str | Path | None = None) -> dict:
    """Season totals of a venue ledger, against the season limits of a plan file's ``[ledger]`` table.

    Returns
    -------
    dict
        :func:`courseplan.io.ledger.season_totals`, plus ``ledger`` (the path) and ``limits_file``.
    """
    from courseplan.io.ledger import read_ledger, season_totals
    from courseplan.io.planfile import read_plan

    lim = read_plan(limits).ledger if limits is not None else None
    led = read_ledger(path)
    out = {"ledger": str(led.path), "limits_file": str(limits) if limits is not None else None}
    out.update(season_totals(led.rows, season_from=season_from, season_to=season_to, limits=lim))
    return out


def check(settings: PlanSettings):
    """Read every input and dry-run the stages, writing nothing.

    Returns
    -------
    tuple
        (notes from reading the inputs, the :class:`~courseplan.pipeline.PlanResult`).
    """
    from courseplan.io.loader import load_inputs
    from courseplan.pipeline import run_plan

    inputs = load_inputs(settings, collect=True)
    # a dry run of the stages catches what only the data can tell (coverage, encodings, classes)
    return tuple(inputs.notes), run_plan(settings, inputs)


def sun(dem_path: str | Path, out: str | Path, *, date: str, start: str, end: str, timezone: str,
        step_minutes: float = 15.0, overwrite: bool = False, progress=None) -> dict:
    """Sun and shade over a window from a DEM, written as the two-band sun GeoTIFF.

    Returns
    -------
    dict
        ``path``, grid size (``rows``, ``cols``, ``cell_m``, ``crs``), ``steps``, ``step_min``,
        ``mean_sun_fraction`` and ``mean_irradiation_wh_m2``.
    """
    import numpy as np

    from courseplan import __version__
    from courseplan.io.files import refuse_existing
    from courseplan.io.rasters import read_dem, write_sun_tiff
    from courseplan.physics.solar import window_times
    from courseplan.stages.sun import sun_from_dem

    refuse_existing(Path(out), overwrite, kind="file")
    window_times(date, start, end, timezone, step_minutes)  # validate before reading
    dem = read_dem(dem_path)
    grids = sun_from_dem(dem.values, dem.transform, dem.crs, date=date, start=start, end=end,
                         timezone=timezone, step_minutes=step_minutes, progress=progress)
    cs = grids.window
    tags = {"date": date, "window_start": cs.start.isoformat(), "window_end": cs.end.isoformat(),
            "timezone": timezone, "step_minutes": f"{cs.step_hours * 60:.6g}", "time_steps": cs.n_steps,
            "site_lat_lon_alt": f"{cs.latitude:.6f} {cs.longitude:.6f} {cs.altitude_m:.1f}",
            "grid_north_deg": f"{grids.grid_north_deg:.4f}", "method": grids.method,
            "source_dem": str(dem_path), "software": f"courseplan {__version__}"}
    path = write_sun_tiff(out, grids.sun_fraction, grids.irradiation_wh_m2, dem.transform, dem.crs,
                          tags=tags, overwrite=overwrite)
    ok = np.isfinite(grids.sun_fraction)
    n_rows, n_cols = dem.values.shape
    return {"path": str(path), "rows": n_rows, "cols": n_cols, "cell_m": abs(dem.transform.a),
            "crs": dem.crs.name, "steps": cs.n_steps, "step_min": cs.step_hours * 60,
            "mean_sun_fraction": float(np.mean(grids.sun_fraction[ok])) if ok.any() else float("nan"),
            "mean_irradiation_wh_m2": float(np.mean(grids.irradiation_wh_m2[ok])) if ok.any() else float("nan")}
