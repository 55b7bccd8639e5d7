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
    paths = input_paths(settings, plan_file)
    zones = settings.inputs.zones
    if zones is not None and Path(zones).resolve() == (out / "zones.gpkg").resolve():
        paths.pop("edited zones")  # the folder's own zones, edited: read before the folder is replaced
    refuse_out_over_inputs(out, paths)
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
             "agents file": ins.agents, "ledger": settings.ledger.file, "edited zones": ins.zones}
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


def replan(settings: PlanSettings | str | Path, out_dir: str | Path, *, at: str, observations=None, spread=None,
           as_planned: bool = False, previous=None, issued_at=None, progress=None) -> dict:
    """Replan from *at* (``HH:MM``): top-ups into the breaks left, from what was spread and new observations.

    The morning plan (zones, energy) is run again in memory; with *previous* (its folder) its passes
    and bags come from there.  *spread* is a spread-record CSV (:mod:`courseplan.io.spreadfile`), or
    *as_planned* takes the morning plan's passes spread before *at*.  Writes *out_dir* all or nothing
    and returns ``result`` (the replan's PlanResult), ``topups`` and ``depots`` (tables),
    ``plan_version`` and ``issued_at``.  See docs/replan.md.
    """
    import dataclasses
    import re

    import numpy as np
    import pandas as pd

    from courseplan.errors import InputError
    from courseplan.io.files import OutputLock, refuse_existing, refuse_out_over_inputs
    from courseplan.io.loader import load_inputs
    from courseplan.io.observations import read_observations
    from courseplan.io.planfile import read_plan
    from courseplan.io.spreadfile import read_previous, read_spread, replan_tables, write_replan
    from courseplan.pipeline import run_plan
    from courseplan.replan import run_replan
    from courseplan.stages.crews import crew_bag_kg

    plan_file = None
    if not isinstance(settings, PlanSettings):
        plan_file, settings = Path(settings), read_plan(settings)
    pl = settings.plan
    if (spread is None) == (not as_planned):
        raise InputError("say what was spread", where="replan", fix="give --spread FILE or --as-planned (one)")
    if not re.fullmatch(r"\d{1,2}:\d{2}", str(at)) or pl.date is None:
        raise InputError(f"--at {at!r} is not a time on the race day", where="--at",
                         fix='give HH:MM, e.g. --at 10:50, and set [plan] date')
    try:
        t_at = pd.Timestamp(f"{pl.date} {at}").tz_localize(pl.timezone, nonexistent="raise")
    except Exception:
        raise InputError(f"--at {at} does not exist on {pl.date}", where="--at", fix="give another time") from None
    issued = issued_at or pd.Timestamp.now(tz=pl.timezone).isoformat(timespec="minutes")
    out = Path(out_dir)
    extra = {k: Path(v) for k, v in (("observations (replan)", observations), ("spread records", spread)) if v}
    refuse_out_over_inputs(out, {**input_paths(settings, plan_file), **extra})
    refuse_existing(out, False, kind="folder")
    prev = read_previous(previous) if previous else None
    with OutputLock(out):
        inputs = load_inputs(settings)
        morning = run_plan(settings, inputs, progress=progress)
        z0 = morning.zones
        ids = z0["zone_id"].to_numpy()
        if prev is not None and sorted(prev["zones"]["zone_id"]) != sorted(ids):
            raise InputError("the previous plan's zones are not this plan file's zones", where=str(previous),
                             fix="give the folder this plan file wrote, or leave --previous out")
        obs = None
        if observations:
            obs = read_observations(Path(observations), inputs.crs, timezone=pl.timezone,
                                    xy_crs=settings.inputs.observations_crs)
            late = obs[obs["time"] > t_at]
            if len(late):
                raise InputError(f"observation(s) {', '.join(late['obs_id'].astype(str))} are after --at {at}",
                                 where=str(observations), fix="replan at a later --at, or leave those rows out")
            obs["soft"] = observed_soft(obs)
        passes0 = prev["passes"] if prev is not None else morning.passes
        bags0 = prev["zones"] if prev is not None else z0
        area = dict(zip(ids, z0["area_m2"].to_numpy(float), strict=True))
        if as_planned:
            p = passes0[pd.to_datetime(passes0["spread_at"], utc=True) < t_at]
            sp = pd.DataFrame({"zone_id": p["zone_id"].astype(int), "time": pd.to_datetime(p["spread_at"], utc=True),
                               "g_m2": p["dose_g_m2"].astype(float), "kg": p["product_kg"].astype(float)})
        else:
            sp = read_spread(spread, date=pl.date, timezone=pl.timezone, at=t_at, zone_ids=ids)
            a = sp["zone_id"].map(area).to_numpy(float)
            sp["g_m2"] = np.where(np.isnan(sp["g_m2"]), sp["kg"] * 1000.0 / a, sp["g_m2"])
            sp["kg"] = np.where(np.isnan(sp["kg"]), sp["g_m2"] * a / 1000.0, sp["kg"])
        m = re.search(r"v(\d+)$", str(((prev or {}).get("replan") or {}).get("version") or ""))
        label = f"replan {t_at:%H:%M}, v{int(m[1]) + 1 if m else 2}"
        lead = (f"REPLAN {label[7:]}, issued {issued}: top-ups after {t_at:%H:%M} from what was spread "
                f"({'as planned' if as_planned else Path(spread).name}) and the observations to {t_at:%H:%M}")
        result, hold, seen = run_replan(morning, t_at, sp, obs, label=label, lead=lead)
        if obs is not None:  # the map and the GeoPackage show the morning's and the new observations
            both = [o for o in (morning.observations, obs) if o is not None]
            result = dataclasses.replace(result, observations=pd.concat(both, ignore_index=True))
        topups, depots = replan_tables(result, t_at, sp, hold, seen, bags0, crew_bag_kg(settings, morning.agent),
                                       morning.logistics.crews)
        info = {"issued_at": issued,
                "replan": {"version": label, "at": t_at.isoformat(timespec="minutes"), "spread": "as planned" if as_planned
                           else str(spread), "observations": str(observations) if observations else None,
                           "previous": str(previous) if previous else None,
                           "topups": topups.to_dict("records"), "depots": depots.to_dict("records")}}
        write_replan(result, out, extra=info, tables={"topups": topups, "depots": depots})
        if settings.ledger.file is not None and not as_planned:  # what was really spread goes to the ledger
            from courseplan.io.ledger import append_spread

            append_spread(settings.ledger.file, morning, sp, venue=settings.ledger.venue)
    return {"result": result, "topups": topups, "depots": depots, "plan_version": label, "issued_at": issued}


def observed_soft(obs):
    """Whether each observation says soft: hand hardness 1–2 (fist, four fingers) where given, else
    liquid water in the wet class or wetter (θ ≥ 3 %, Fierz et al. 2009); harder or drier is holding."""
    import numpy as np
    import pandas as pd

    from courseplan.physics.snow import WETNESS_CLASSES
    from courseplan.stages.conditions import observation_lwc

    hh = pd.to_numeric(obs["hand_hardness"], errors="coerce").to_numpy(float)
    wet = observation_lwc(obs)[0] >= WETNESS_CLASSES["wet"][0]
    return np.where(np.isfinite(hh), hh <= 2, wet)

