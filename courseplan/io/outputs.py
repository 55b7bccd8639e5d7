"""Write a plan's outputs into a folder, all or nothing.

Everything is written into a fresh temporary folder beside the target and moved into place at
the end, so an interrupted run (Ctrl-C, a full disk) leaves no half-written output; an existing
output folder is refused unless ``overwrite`` is set, and then replaced only after the new one is
complete, and only when it holds the marker file :data:`~courseplan.io.files.OUTPUT_MARKER` that
every output folder gets (a folder courseplan did not write is never replaced).  Inputs are never opened for writing.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import tempfile
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from courseplan import __version__
from courseplan.columns import ALL as ALL_COLUMNS
from courseplan.columns import NO_UNIT, unit
from courseplan.errors import OutputError
from courseplan.io.files import (
    OUTPUT_MARKER,
    file_mode,
    folder_mode,
    refuse_existing,
    refuse_foreign_folder,
    write_bytes_atomic,
    write_text_atomic,
)

FILES = ("zones.gpkg", "map.html", "summary.json", "order.pdf", "crews.pdf")
SCHEMA_VERSION = "1.2"
"""Version of ``summary.json`` (its JSON Schema: ``courseplan/schema/summary.schema.json``)."""


def _plain(v: Any) -> Any:
    if isinstance(v, dict):
        return {str(k): _plain(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [_plain(x) for x in v]
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, pd.Timestamp):
        return v.isoformat()
    if isinstance(v, Path):
        return str(v)
    return v


def read_summary(out_dir: Path) -> dict[str, Any]:
    """The ``summary.json`` a plan wrote into *out_dir*."""
    return json.loads((Path(out_dir) / "summary.json").read_text(encoding="utf-8"))


def plan_version(result) -> str:
    """The plan's version (:func:`courseplan.io.ledger.plan_version`): the same figures, the same version."""
    from courseplan.io.ledger import plan_version as version

    s = result.settings.plan
    return version(s.date, s.name, result.agent.name,
                   zip(result.zones["zone_id"], result.zones["product_kg"], strict=True))


def summary_dict(result, issued_at: str | None = None) -> dict[str, Any]:
    """The JSON summary: totals, order, crews, per-zone figures, settings, notes and cautions.

    Its fields are fixed by ``courseplan/schema/summary.schema.json`` (``schema_version``); a new
    field needs the schema, ``SCHEMA_VERSION`` and ``docs/outputs.md`` changed with it.
    """
    z = result.zones
    cols = [c for c in z.columns if c != "geometry"]
    zones = []
    for rec in z[cols].to_dict("records"):
        zones.append({k: _plain(v) for k, v in rec.items()})
    log = result.logistics.summary()
    out = {
        "schema_version": SCHEMA_VERSION,
        "courseplan_version": __version__,
        "plan_version": plan_version(result),
        "issued_at": issued_at or pd.Timestamp.now(tz=result.settings.plan.timezone).isoformat(timespec="seconds"),
        "plan": result.settings.plan.name,
        "date": result.settings.plan.date,
        "window": {"start": result.settings.window.start, "end": result.settings.window.end,
                   "timezone": result.settings.plan.timezone},
        **result.totals(),
        "crs": result.crs.to_string(),
        "start_xy": list(result.start_xy),
        "finish_xy": list(result.finish_xy),
        "order": log.get("order"),
        "other_orders": log.get("other_orders", []),
        "crews": log.get("crews"),
        "weather": result.weather.describe(),
        "sources": result.sources,
        "units": {c.name: c.unit for c in ALL_COLUMNS if c.unit != NO_UNIT},
        "notes": list(result.notes),
        "cautions": list(result.cautions),
        "shortfall": getattr(result, "shortfall", None),
        "settings": result.settings.to_dict(),
        "zones": zones,
    }
    if getattr(result, "passes", None) is not None:
        out["schedule"] = result.schedule.to_dict() if result.schedule is not None else None
        out["passes"] = passes_table(result).to_dict("records")
    return _plain(out)


LEADING_NOTES = ("SHORTFALL", "calibrated on", "not calibrated", "calibration ")
"""Notes every output shows first, above the cautions: the crews' shortfall and the calibration."""


def _leading(result) -> list[str]:
    """The cautions, led by the shortfall and the calibration notes (they must be on every output)."""
    lead = [n for n in result.notes if n.startswith(LEADING_NOTES)]
    return lead + list(result.cautions)


def passes_table(result) -> pd.DataFrame:
    """The passes as plain columns: times as ISO 8601 text with the UTC offset (empty where none)."""
    p = result.passes.copy()
    for c in ("spread_at", "hard_from", "hard_until"):
        p[c] = [("" if pd.isna(v) else pd.Timestamp(v).isoformat(timespec="minutes")) for v in p[c]]
    return p


def _gpkg_ready(gdf):
    g = gdf.copy()
    for c in g.columns:
        if c == g.geometry.name:
            continue
        if g[c].dtype == object:
            g[c] = g[c].map(lambda v: None if v is None else (json.dumps(_plain(v)) if isinstance(v, list | tuple | dict)
                                                             else str(v)))
        elif str(g[c].dtype).startswith("datetime64"):
            g[c] = [("" if pd.isna(v) else pd.Timestamp(v).isoformat()) for v in g[c]]
    return g  # booleans stay bool: pyogrio writes them as GeoPackage BOOLEAN fields


def settings_toml(settings) -> str:
    """The plan's settings as TOML text (``tomlkit``), keys without a value left out (TOML has no null),
    file paths absolute: read back by :func:`courseplan.io.planfile.read_plan` from anywhere, it gives
    the same settings.
    """
    import tomlkit

    doc = tomlkit.document()
    doc.add(tomlkit.comment("the settings this plan ran with (courseplan), every default written out"))
    for table, kv in settings.to_dict().items():
        t = tomlkit.table()
        for k, v in kv.items():
            v = _plain([str(Path(x).resolve()) for x in v] if isinstance(v, (list, tuple)) and v and
                       all(isinstance(x, Path) for x in v) else str(v.resolve()) if isinstance(v, Path) else v)
            if v is not None:
                t.add(k, v)
        doc.add(table, t)
    return tomlkit.dumps(doc)


def write_gpkg(path: Path, result) -> None:
    """Write ``zones``, ``course``, ``observations``, ``crews`` and the ``plan_settings``, ``plan_totals``,
    ``units`` and ``layer_styles`` tables into one GeoPackage.

    Booleans are GeoPackage BOOLEAN fields, times ISO 8601 text; ``plan_file`` holds the settings as
    TOML text; ``layer_styles`` holds the default style (SLD and QML) of ``zones`` (fill by
    ``dose_g_m2`` in the map's fixed classes, labelled by ``label``), ``no_salt``, ``crews``,
    ``depots`` and ``start_finish``, so the file opens styled in a desktop GIS.
    """
    from datetime import UTC, datetime

    import pyogrio

    from courseplan.render.gpkg_style import LAYER_STYLES, layer_style, zones_qml, zones_sld

    _gpkg_ready(result.zones).to_file(path, layer="zones", driver="GPKG", engine="pyogrio")
    result.course.to_file(path, layer="course", driver="GPKG", engine="pyogrio")
    if result.observations is not None and len(result.observations):
        obs = result.observations.copy()
        obs["time"] = [("" if pd.isna(v) else pd.Timestamp(v).isoformat()) for v in obs["time"]]
        _gpkg_ready(obs).to_file(path, layer="observations", driver="GPKG", engine="pyogrio")
    no_salt = getattr(result, "no_salt", None)
    if no_salt is not None and len(no_salt):
        _gpkg_ready(no_salt).to_file(path, layer="no_salt", driver="GPKG", engine="pyogrio")
    depots = getattr(result.logistics, "depots", None)
    if depots is not None and len(depots):
        _gpkg_ready(depots).to_file(path, layer="depots", driver="GPKG", engine="pyogrio")
    crews = result.logistics.crews
    if crews is not None and len(crews):
        _gpkg_ready(crews).to_file(path, layer="crews", driver="GPKG", engine="pyogrio")
    import geopandas as gpd
    from shapely.geometry import Point

    gpd.GeoDataFrame({"name": ["start", "finish"]}, geometry=[Point(result.start_xy), Point(result.finish_xy)],
                     crs=result.crs).to_file(path, layer="start_finish", driver="GPKG", engine="pyogrio")
    flat = []
    for table, kv in result.settings.to_dict().items():
        for k, v in kv.items():
            flat.append({"table": table, "key": k, "value": json.dumps(_plain(v), ensure_ascii=False)})
    pyogrio.write_dataframe(pd.DataFrame(flat), path, layer="plan_settings", driver="GPKG")
    pyogrio.write_dataframe(pd.DataFrame({"name": ["plan.toml"], "toml": [settings_toml(result.settings)]}), path,
                            layer="plan_file", driver="GPKG")
    tot = {k: json.dumps(_plain(v), ensure_ascii=False) for k, v in result.totals().items()}
    pyogrio.write_dataframe(pd.DataFrame({"key": list(tot), "value": list(tot.values())}), path,
                            layer="plan_totals", driver="GPKG")
    if getattr(result, "passes", None) is not None:
        pyogrio.write_dataframe(passes_table(result), path, layer="passes", driver="GPKG")
    units = pd.DataFrame([{"column": c.name, "unit": c.unit, "meaning": c.meaning, "stage": c.stage}
                          for c in ALL_COLUMNS])
    pyogrio.write_dataframe(units, path, layer="units", driver="GPKG")
    now = datetime.now(UTC).isoformat(timespec="seconds")
    layers = set(pyogrio.list_layers(path)[:, 0])

    def row(layer: str, name: str, qml: str, sld: str, what: str) -> dict:
        return {"f_table_catalog": "", "f_table_schema": "", "f_table_name": layer,
                "f_geometry_column": pyogrio.read_info(path, layer=layer)["geometry_name"] or "geom",
                "styleName": name, "styleQML": qml, "styleSLD": sld, "useAsDefault": True, "description": what,
                "owner": "", "ui": "", "update_time": now}

    rows = [row("zones", "zones by dose", zones_qml(), zones_sld(),
                "zones filled by dose_g_m2 in the map's fixed classes, no salt hatched, labelled by label")]
    for layer, (name, label) in LAYER_STYLES.items():
        if layer in layers:
            sld, qml = layer_style(layer)
            rows.append(row(layer, name, qml, sld, f"{name}, labelled by {label}"))
    styles = pd.DataFrame(rows)
    pyogrio.write_dataframe(styles, path, layer="layer_styles", driver="GPKG", layer_options={"FID": "id"})


def _agents_text(result) -> str:
    """The plan's agent, and the zones with their own (``rock salt (NaCl); zone 4 urea (CO(NH2)2)``)."""
    orders = result.logistics.order_lines
    if len(orders) < 2:
        return result.agent.label
    z = result.zones
    own = [f"zone{'s' if (z['agent'] == o.agent).sum() > 1 else ''} "
           f"{', '.join(str(int(i)) for i in z.loc[z['agent'] == o.agent, 'zone_id'])} {o.agent_label}"
           for o in orders[1:]]
    return f"{result.agent.label}; " + "; ".join(own)


def write_map(path: Path, result, issue: str = "") -> None:
    """Write the offline map page (*issue*: plan version and time of issue, shown with the title)."""
    from courseplan.columns import ALL
    from courseplan.render.context import context_from_raster
    from courseplan.render.webmap import render_map_html

    ctx = None
    if result.context is not None:
        kind = "terrain" if result.sources.get("dem") else "sun"
        vals = result.context.values
        sun_max = float(np.nanmax(vals)) if kind == "sun" and np.isfinite(vals).any() else 1.0
        ctx = context_from_raster(vals, result.context.transform, result.crs, kind=kind,
                                  sun_max=max(sun_max, 1e-9))
    title = result.settings.plan.name + (f" — {issue}" if issue else "")
    html = render_map_html(result.zones, result.course, title=title,
                           agent_label=_agents_text(result), cautions=_leading(result),
                           observations=result.observations, crews=result.logistics.crews, context=ctx,
                           start_xy=result.start_xy, finish_xy=result.finish_xy,
                           units={c.name: unit(c.name) for c in ALL},
                           no_salt=getattr(result, "no_salt", None))
    write_text_atomic(path, html, what="map")


def write_order_pdf(path: Path, result, **kw) -> Path:
    """Write the order sheet (:func:`courseplan.render.sheets.order_pdf`) to *path*, atomically."""
    from courseplan.render.sheets import order_pdf

    return write_bytes_atomic(Path(path), order_pdf(result, **kw), what="order sheet")


def write_crews_pdf(path: Path, result, course_geom, **kw) -> Path:
    """Write the crew sheets (:func:`courseplan.render.sheets.crews_pdf`) to *path*, atomically."""
    from courseplan.render.sheets import crews_pdf

    return write_bytes_atomic(Path(path), crews_pdf(result, course_geom, **kw), what="crew sheets")


def write_outputs(result, out_dir: Path, *, overwrite: bool = False, summary_extra: dict | None = None,
                  tables: dict | None = None) -> list[Path]:
    """Write every output of a plan into *out_dir* (all or nothing).

    Raises
    ------
    OutputError
        When *out_dir* exists and *overwrite* is False, or it cannot be written.
    """
    out_dir = Path(out_dir)
    refuse_existing(out_dir, overwrite, kind="folder")
    refuse_foreign_folder(out_dir)
    parent = out_dir.resolve().parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.part-", dir=parent))
    except OSError as exc:
        raise OutputError(f"cannot create the output folder ({exc.strerror})", where=str(out_dir),
                          fix="check the path and permissions") from None
    try:
        pl = result.settings.plan
        write_gpkg(tmp / "zones.gpkg", result)
        summary = summary_dict(result)
        summary.update(summary_extra or {})
        issue = f"plan {summary['plan_version']}, issued {summary['issued_at'][:16].replace('T', ' ')}"
        write_map(tmp / "map.html", result, issue=issue)
        write_text_atomic(tmp / "summary.json", json.dumps(summary, indent=2, ensure_ascii=False), what="summary")
        kw = dict(plan_name=pl.name, plan_date=pl.date, agent_label=result.agent.label,
                  cautions=_leading(result), issue=issue)
        write_order_pdf(tmp / "order.pdf", result.logistics, **kw)
        write_crews_pdf(tmp / "crews.pdf", result.logistics, result.course.geometry.iloc[0], **kw,
                        marks={"Start": tuple(result.start_xy), "Finish": tuple(result.finish_xy)},
                        no_salt=None if getattr(result, "no_salt", None) is None else list(result.no_salt.geometry))
        for name, table in (tables or {}).items():  # a replan's own tables, as CSV beside the outputs
            write_text_atomic(tmp / f"{name}.csv", table.to_csv(index=False), what=name)
        write_text_atomic(tmp / OUTPUT_MARKER, f"written by courseplan {__version__}; --overwrite may replace "
                          "this folder\n", what="output marker")
        for f in tmp.iterdir():  # as a plain mkdir/open would make them under the umask (0755/0644)
            os.chmod(f, folder_mode() if f.is_dir() else file_mode())
        os.chmod(tmp, folder_mode())  # mkdtemp made it 0700
        old = None
        if out_dir.exists():
            refuse_foreign_folder(out_dir)
            old = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.old-", dir=parent))
            out_dir.rename(old / "x")
        tmp.rename(out_dir)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(exc, OSError) and not isinstance(exc, OutputError):  # a full disk, a lost mount
            raise OutputError(f"cannot write the outputs ({exc.strerror or exc}); nothing was written",
                              where=str(out_dir), fix="check the free disk space and permissions") from exc
        raise
    return [out_dir / f for f in FILES] + [out_dir / f"{n}.csv" for n in (tables or {})]
