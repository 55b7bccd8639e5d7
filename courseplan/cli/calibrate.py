"""``courseplan calibrate``: fit k_f to a test patch and write it into the plan file's ``[calibration]``.

Registered on the main command group by :mod:`courseplan.cli.main`; errors go through
:func:`courseplan.cli.common.guarded` (one line, exit 2, the plan file untouched).
"""

from __future__ import annotations

from pathlib import Path

import click

from courseplan.cli.common import debug_option, guarded


def _fmt_range(lo, hi, unit: str) -> str:
    if lo and hi is not None:
        return f"{lo:.0f}–{hi:.0f} {unit}"
    if hi is not None:
        return f"≤ {hi:.0f} {unit}"
    if lo:
        return f"> {lo:.0f} {unit}"
    return "not bounded"


def report_lines(r: dict) -> list[str]:
    """The text report of :func:`courseplan.api.calibrate`."""
    from datetime import datetime

    pa, en, fit, tau = r["patch"], r["energy"], r["fit"], r["tau"]
    t0 = datetime.fromisoformat(pa["spread_at"])
    hm = lambda s: datetime.fromisoformat(s).strftime("%H:%M")  # noqa: E731
    wet = f"{pa['wetness']} (θ {pa['lwc_pct']:.1f} %{', class middle' if pa['lwc_from_class'] else ''})"
    out = [f"patch {pa['file']} (sha256 {pa['sha256'][:12]}…): {pa['agent']} spread {t0:%Y-%m-%d %H:%M} at "
           f"{pa['lat']:.5f} N {pa['lon']:.5f} E, {pa['altitude_m']:.0f} m, slope {pa['slope_deg']:.0f}° facing "
           f"{pa['aspect_deg']:.0f}° ({pa['terrain']}); snow {wet}, {pa['density_kg_m3']:.0f} kg/m³",
           f"energy: clear sky on the patch's slope, full sun, {en['steps']} steps of {en['step_min']:.1f} min "
           f"{hm(en['start'])}–{hm(en['end'])}, {en['irradiation_wh_m2']:.0f} Wh/m²; {en['weather']}; "
           f"sun while the salt acts E_k {en['e_k_kj_m2']:.0f} kJ/m²"]
    for g in r["rungs"]:
        res = "" if g["residual_g_m2"] is None else f", model need − dose {g['residual_g_m2']:+.1f} g/m²"
        out.append(f"  {g['dose_g_m2']:6g} g/m²  {'held' if g['held'] else 'soft'} at {hm(g['read_at'])}{res}")
    if fit["kind"] == "interval":
        kf = f"k_f = {fit['value']:.2f} (interval {fit['low']:.2f}–{fit['high']:.2f})"
    elif fit["kind"] == "upper bound":
        kf = f"k_f ≤ {fit['high']:.2f} (upper bound: every rung held; add smaller rungs)"
    else:
        kf = f"k_f ≥ {fit['low']:.2f} (lower bound: every rung soft; add larger rungs)"
    out.append(kf)
    out.append(f"τ {tau['kept_min']:g} min kept (the readings allow {_fmt_range(tau['low_min'], tau['high_min'], 'min')}); "
               f"T_b {r['brine_exit_temp_c']:.1f} °C kept")
    out += [f"note: {n}" for n in r["notes"]]
    return out


@click.command("calibrate")
@click.argument("plan_file", type=click.Path(path_type=Path, dir_okay=False))
@click.argument("patch_file", type=click.Path(path_type=Path, dir_okay=False))
@click.option("--dry-run", is_flag=True, help="Print the change to the plan file (a unified diff); write nothing.")
@click.option("--forecast", metavar="FILE|constants",
              help="Forecast CSV for the patch's day instead of the plan's, or 'constants' for [forecast].")
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON.")
@debug_option
@guarded
def calibrate_command(plan_file: Path, patch_file: Path, dry_run: bool, forecast: str | None, as_json: bool,
                      debug: bool = False) -> None:
    """Fit the refreeze share k_f to a test patch and store it in the plan file.

    PATCH_FILE is a CSV of one dose ladder read held or soft (docs/calibration.md). The patch's own
    sun and weather are computed; k_f is bracketed from the ladder, τ bounded from the reading times,
    and the result written into the plan file's [calibration] table (the rest of the file unchanged).
    """
    import json

    from courseplan.io.calibrate import calibrate

    r = calibrate(plan_file, patch_file, dry_run=dry_run, forecast=forecast)
    if as_json:
        click.echo(json.dumps(r, indent=2, ensure_ascii=False))
        return
    for ln in report_lines(r):
        click.echo(ln)
    if dry_run:
        click.echo(f"dry run: {r['plan']} not written; the change would be:")
        click.echo(r["diff"].rstrip("\n") or "(no change)")
    else:
        click.echo(f"wrote [calibration] into {r['plan']}" if r["written"] else f"{r['plan']} already holds this fit")
