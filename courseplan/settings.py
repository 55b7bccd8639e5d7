"""Plan settings: frozen dataclasses, one per plan-file table, loaded and validated from TOML.

A plan file is TOML with the tables ``[plan]``, ``[inputs]``, ``[window]``, ``[race]``, ``[zoning]``,
``[snow]``, ``[dosing]``, ``[forecast]``, ``[logistics]``, ``[calibration]`` and ``[ledger]``.  Every key has a documented
default (``docs/plan-file.md``), so a plan file may be empty.  Unknown keys, wrong types and out-of-range
values raise :class:`~courseplan.errors.SettingsError` naming the key, with the nearest valid key
suggested.  Paths in ``[inputs]`` and ``[ledger]`` are relative to the plan file's folder.  This module opens no files.
"""

from __future__ import annotations

import dataclasses
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from courseplan.errors import SettingsError, SettingsProblems
from courseplan.errors import did_you_mean as _suggest

SUN_ENCODINGS = ("fraction", "percent", "wh_m2")
"""Accepted encodings of a sun/shade raster: share of the window in sun (0–1), the same in
percent (0–100), or irradiation on the surface over the hold window (Wh/m²)."""


def _f(default: Any, doc: str, unit: str = "", lo: float | None = None, hi: float | None = None,
       choices: tuple[str, ...] | None = None, factory: Any = None):
    meta = {"doc": doc, "unit": unit, "lo": lo, "hi": hi, "choices": choices}
    if factory is not None:
        return field(default_factory=factory, metadata=meta)
    return field(default=default, metadata=meta)


@dataclass(frozen=True)
class PlanInfo:
    """``[plan]``: what the plan is for."""

    name: str = _f("Untitled plan", "plan name printed on every output")
    date: str | None = _f(None, "race day, YYYY-MM-DD (needed to compute sun from a DEM and to "
                                "date observations)")
    timezone: str = _f("UTC", "IANA time zone of the window times, e.g. Europe/Zurich")
    agent: str = _f("NaCl", "agent from the catalogue (`courseplan agents`)")


@dataclass(frozen=True)
class Inputs:
    """``[inputs]``: the files a plan reads."""

    course: Path | None = _f(None, "course outline: a polygon in any vector format GDAL reads (KML/KMZ "
                                   "too), or a closed GPX track or route")
    course_feature: str | None = _f(None, "which feature to use when the course file holds several "
                                          "polygons: a value of the `name` field or a 0-based index")
    course_layer: str | None = _f(None, "which layer of a GeoPackage (or other multi-layer file) holds the "
                                        "course, when several hold polygons")
    sun: Path | None = _f(None, "sun/shade raster (GeoTIFF)")
    sun_encoding: str = _f("fraction", "what the sun raster holds", choices=SUN_ENCODINGS)
    sun_band: int | None = _f(None, "band of the sun raster to read (default: band 1, or for a raster "
                                    "written by `courseplan sun` band 1 for fraction and band 2 for wh_m2)",
                              lo=1, hi=10000)
    dem: Path | None = _f(None, "terrain model (GeoTIFF, heights in metres)")
    observations: Path | None = _f(None, "field observations (CSV or a vector point file)")
    observations_crs: str | None = _f(None, "CRS of x/y columns in an observations CSV (lon/lat columns "
                                            "need none)")
    max_uncovered_pct: float = _f(5.0, "refuse a sun raster or DEM that leaves more than this share of the "
                                       "course without data", unit="%", lo=0.0, hi=100.0)
    forecast: Path | None = _f(None, "hourly forecast CSV; without it [forecast] constants are used")
    centreline: Path | None = _f(None, "course centreline from start to finish (vector line; a GPX "
                                       "track or route works)")
    centreline_feature: str | None = _f(None, "which line of several (GPX tracks and routes, KML "
                                              "placemarks) is the centreline: a `name` or a 0-based index")
    markers: Path | None = _f(None, "named section markers along the course (vector points)")
    no_salt: list[Path] = _f(None, "areas that get no salt (finish area, streams, timing cables, lift "
                                   "crossings): vector files of polygons, lines or points", factory=list)
    no_salt_buffer_m: list[float] = _f(None, "buffer around each no_salt file, in the same order (lines and "
                                             "points need one; missing entries are 0)", unit="m",
                                       factory=list)
    agents: Path | None = _f(None, "TOML file adding or overriding catalogue agents")
    zones: Path | None = _f(None, "zones edited in a desktop GIS (the `zones` layer of a plan's zones.gpkg, "
                                  "merged, split or reshaped, overrides set): kept instead of zoning; see "
                                  "docs/zone-edits.md")
    crs: str | None = _f(None, "working metric CRS (default: the sun raster's if metric, else the "
                               "course's if metric, else the local UTM zone)")


@dataclass(frozen=True)
class Window:
    """``[window]``: the hold window, from salting until the last run ends (local times)."""

    start: str = _f("10:00", "start of the hold window, HH:MM local time")
    end: str = _f("13:00", "end of the hold window, HH:MM local time")
    runs: int = _f(2, "number of race runs in the window", lo=1, hi=10)

    @property
    def hours(self) -> float:
        """Length of the window [h]."""
        return (minutes_of(self.end, "window.end") - minutes_of(self.start, "window.start")) / 60.0


@dataclass(frozen=True)
class Race:
    """``[race]``: the race day's schedule (local times on ``[plan] date``; see courseplan.schedule)."""

    inspection: list[Any] | None = _f(None, 'course inspection from, to, e.g. ["08:15", "09:00"]')
    runs: list[Any] | None = _f(None, "each run's start and expected end, e.g. [['09:30', '10:45'], "
                                      "['12:30', '13:45']]; 'YYYY-MM-DDTHH:MM' past midnight")


@dataclass(frozen=True)
class Zoning:
    """``[zoning]``: how the course is split into zones."""

    exposure_breaks: list[float] | None = _f(
        None, "class breaks in the sun raster's units, ascending; default [0.35, 0.70] for a fraction, "
              "[35, 70] for percent, [150, 350] Wh/m² per hour of window for irradiation")
    exposure_labels: list[str] = _f(None, "names of the exposure classes, darkest first (one more "
                                          "than breaks)", factory=lambda: ["shaded", "part-sun", "full-sun"])
    slope_breaks_deg: list[float] = _f(None, "slope class breaks when a DEM is given", unit="°",
                                       factory=lambda: [15.0, 25.0])
    min_zone_area_m2: float = _f(400.0, "zones smaller than this merge into the most similar neighbour",
                                 unit="m²", lo=0.0, hi=1e6)
    min_zone_width_m: float = _f(15.0, "narrower zones (largest inscribed circle; at most half the "
                                       "course width there; 0 = off) merge into a neighbour; [P] common "
                                       "practice, no published source", unit="m", lo=0.0, hi=1000.0)
    max_zone_area_m2: float = _f(10000.0, "larger zones are cut across the course into equal parts, so "
                                          "that one crew can spread a zone in one window (about 30 min "
                                          "with push spreaders; 0 = off); [P] practice, no published source",
                                 unit="m²", lo=0.0, hi=1e7)
    alike_sun_share: float = _f(0.5, "touching zones of one section are one zone when their mean sun "
                                      "differs by less than this share of the spacing of the exposure "
                                      "breaks (a class break that only grazes them; 0 = off); [P] "
                                      "practice, no published source", lo=0.0, hi=1.0)
    alike_slope_deg: float = _f(10.0, "… and their mean slope by less than this (0 = slope must be the "
                                      "same class); [P] practice, no published source", unit="°",
                                lo=0.0, hi=90.0)
    section_length_m: float = _f(250.0, "course sections every this many metres from the start",
                                 unit="m", lo=10.0, hi=1e5)
    start_xy: list[float] | None = _f(None, "start point [x, y] in the course file's CRS (default: "
                                            "highest point of the DEM, else the northern end)")


def _default_snow_classes() -> dict[str, dict[str, Any]]:
    # Class defaults used where no observation is near; every value a setting.
    # Wetness classes after Fierz et al. (2009); densities of prepared pistes 500–650 kg/m³
    # [from memory, domain-data §6]; these defaults are planning assumptions, not measurements.
    return {
        "shaded": {"wetness": "moist", "density_kg_m3": 560.0, "snow_temp_c": 0.0, "grain": "RG"},
        "part-sun": {"wetness": "wet", "density_kg_m3": 560.0, "snow_temp_c": 0.0, "grain": "MF"},
        "full-sun": {"wetness": "wet", "density_kg_m3": 560.0, "snow_temp_c": 0.0, "grain": "MF"},
    }


@dataclass(frozen=True)
class Snow:
    """``[snow]``: snow state where no observation applies, and how observations are used."""

    classes: dict[str, dict[str, Any]] = _f(None, "default snow state per exposure class "
                                                  "(wetness or lwc_pct, density_kg_m3, snow_temp_c, grain)",
                                            factory=_default_snow_classes)
    max_distance_m: float = _f(150.0, "use the nearest observation of the same exposure class within "
                                      "this distance", unit="m", lo=0.0, hi=1e5)
    max_age_h: float = _f(6.0, "observations older than this before the window are flagged", unit="h",
                          lo=0.0, hi=1e4)


@dataclass(frozen=True)
class Dosing:
    """``[dosing]``: the cold-balance model's parameters (see docs/model.md)."""

    depth_m: float = _f(0.04, "depth of the layer to harden", unit="m", lo=0.005, hi=0.5)
    refreeze_share: float = _f(0.5, "share of the free water that must refreeze (k_f)", lo=0.01, hi=1.0)
    brine_exit_temp_c: float = _f(-2.0, "brine temperature when it leaves the layer (T_b)", unit="°C",
                                  lo=-15.0, hi=-0.05)
    lwc_min_pct: float = _f(1.0, "below this liquid water content the snow is too dry", unit="% vol",
                            lo=0.0, hi=20.0)
    lwc_max_pct: float = _f(15.0, "above this the snow is slush", unit="% vol", lo=1.0, hi=60.0)
    min_density_kg_m3: float = _f(350.0, "below this the snow counts as new snow", unit="kg/m³",
                                  lo=50.0, hi=900.0)
    mix_depth_m: float = _f(0.01, "top layer one pass mixes into", unit="m", lo=0.001, hi=0.1)
    slush_limit: float = _f(0.10, "largest share of the mixing layer's ice one pass may melt", lo=0.01,
                            hi=0.9)
    albedo: float = _f(0.6, "albedo of the wet snow surface", lo=0.1, hi=0.95)
    albedo_spread: float = _f(0.1, "half-width of the uniform albedo range sampled for P50/P90 (old clean "
                                   "wet snow 0.46–0.70 [from memory, domain-data §8])", lo=0.0, hi=0.4)
    tau_min: float = _f(20.0, "time the salt acts in the layer before the brine drains (field: 15–20 min "
                              "on alpine slopes in spring sun, 30 min rest, 45–60 min on cross-country "
                              "tracks; field-evidence §2)", unit="min", lo=1.0, hi=180.0)
    min_useful_hold_min: float = _f(10.0, "a pass in a break is spread only where it keeps the zone hard at "
                                          "least this long into the run (common practice, no source: salt "
                                          "that the sun spends before the racers come is wasted)",
                                    unit="min", lo=0.0, hi=120.0)
    compare_keep_hard: bool = _f(True, "also print what re-salting every zone each time it softens "
                                       "would cost (a comparison, never the plan)")
    lead_h: float = _f(4.0, "how long before the inspection the plan's day starts (the crews' first "
                            "pass fits in it)", unit="h", lo=0.5, hi=12.0)
    purity: float | None = _f(None, "product purity, overriding the catalogue", lo=0.05, hi=1.0)
    samples: int = _f(200, "samples for P50/P90", lo=1, hi=100000)
    seed: int = _f(20261202, "random seed of the sampling (same seed, same numbers)", lo=0)
    calibrated: str | None = _f(None, "free-text note on where the knobs came from; informs, silences "
                                      "nothing (the fit itself is the [calibration] table)")


FIT_KINDS = ("interval", "upper bound", "lower bound")


@dataclass(frozen=True)
class Calibration:
    """``[calibration]``: the last test-patch fit, written by ``courseplan calibrate``."""

    refreeze_share: float | None = _f(None, "k_f fitted on a patch: the middle or the bound", lo=0, hi=1)
    refreeze_share_kind: str | None = _f(None, "what the ladder gave", choices=FIT_KINDS)
    refreeze_share_low: float | None = _f(None, "low end of the fitted k_f range (0: open)", lo=0, hi=1)
    refreeze_share_high: float | None = _f(None, "high end of the fitted k_f range (1: open)", lo=0, hi=1)
    tau_min_low: float | None = _f(None, "τ bounded from below by the reading times", unit="min", lo=0.0)
    tau_min_high: float | None = _f(None, "τ bounded from above by the reading times", unit="min", lo=0.0)
    tau_min: float | None = _f(None, "τ kept in the fit ([dosing] tau_min then)", unit="min", lo=0.0)
    brine_exit_temp_c: float | None = _f(None, "T_b kept in the fit", unit="°C", lo=-30.0, hi=0.0)
    date: str | None = _f(None, "day the patch was spread, YYYY-MM-DD")
    lon: float | None = _f(None, "patch longitude (WGS 84)", unit="°", lo=-180.0, hi=360.0)
    lat: float | None = _f(None, "patch latitude (WGS 84)", unit="°", lo=-90.0, hi=90.0)
    agent: str | None = _f(None, "agent spread on the patch")
    wetness: str | None = _f(None, "wetness class of the patch snow at spreading (Fierz et al. 2009)")
    patch_file: str | None = _f(None, "name of the patch file fitted")
    patch_sha256: str | None = _f(None, "SHA-256 of the patch file fitted")


@dataclass(frozen=True)
class Forecast:
    """``[forecast]``: plan-wide weather over the window, used when no forecast file is given."""

    air_temp_c: float = _f(4.0, "air temperature at 2 m", unit="°C", lo=-40.0, hi=35.0)
    rh_pct: float = _f(70.0, "relative humidity", unit="%", lo=1.0, hi=100.0)
    wind_m_s: float = _f(2.0, "wind speed at 2 m", unit="m/s", lo=0.0, hi=40.0)
    cloud_fraction: float = _f(0.2, "cloud cover", lo=0.0, hi=1.0)
    air_temp_spread_k: float = _f(1.5, "forecast spread (one standard deviation) of air temperature",
                                  unit="K", lo=0.0, hi=15.0)
    pressure_hpa: float = _f(850.0, "air pressure at the course (about 850 hPa at 1500 m)", unit="hPa",
                             lo=400.0, hi=1100.0)


@dataclass(frozen=True)
class Logistics:
    """``[logistics]``: order, crews and timing."""

    margin_pct: float = _f(10.0, "safety margin added to the P90 mass before rounding to bags",
                           unit="%", lo=0.0, hi=200.0)
    bag_kg: float | None = _f(None, "bag size, overriding the catalogue", unit="kg", lo=0.1, hi=2000.0)
    price_per_kg: float | None = _f(None, "product price", unit="currency/kg", lo=0.0)
    currency: str = _f("EUR", "currency of the price")
    crews: int = _f(3, "number of crews", lo=1, hi=50)
    method: str = _f("push", "how the crews spread: by hand from bags, push spreaders, or a spreader towed "
                             "by a snowmobile (rates in docs/logistics.md)", choices=("hand", "push", "towed"))
    people_per_crew: int = _f(3, "people in one crew (hand: each throws; push: each pushes a spreader; "
                                 "towed: one spreader per crew)", lo=1, hi=20)
    spread_rate_m2_min: float | None = _f(None, "fixed area one crew spreads per minute, overriding the "
                                                "method's dose-dependent rate", unit="m²/min", lo=1.0,
                                          hi=10000.0)
    earliest_start: str = _f("05:00", "earliest time a crew can start on race day, HH:MM local time "
                                      "(common practice, no source: crews work by headlamp before dawn)")
    carry_min_per_bag: float = _f(2.0, "time to carry one bag from the depot into its zone",
                                  unit="min", lo=0.0, hi=120.0)
    handful_g: float = _f(40.0, "mass of one handful for hand spreading (an estimate)", unit="g",
                          lo=5.0, hi=500.0)
    wait_min: float = _f(50.0, "time the agent needs before skiing (guidance: 45–60 min)", unit="min",
                         lo=0.0, hi=600.0)
    first_start: str | None = _f(None, "first race start, HH:MM local time; crews finish their first "
                                       "pass wait_min before it (default: window start + the longest "
                                       "crew's work before the race + wait_min)")
    big_bag_kg: float | None = _f(None, "big-bag size, overriding the catalogue", unit="kg", lo=50.0,
                                  hi=5000.0)
    big_bag_from_kg: float = _f(1000.0, "order in big bags (rest in bags) from this total; crews fill "
                                        "their bags from them at the depots", unit="kg", lo=0.0)
    bags_per_pallet: int | None = _f(None, "bags per pallet, overriding the catalogue", lo=1, hi=500)


@dataclass(frozen=True)
class Ledger:
    """``[ledger]``: the venue's season ledger of what was spread, and the season limits."""

    file: Path | None = _f(None, "venue ledger CSV that every plan written appends its spread to, relative "
                                 "to the plan file (default: no ledger; docs/logistics.md)")
    venue: str | None = _f(None, "venue name written into the ledger")
    max_product_kg: float | None = _f(None, "season limit of product (`courseplan ledger --limits`)",
                                      unit="kg", lo=0.0)
    max_nitrogen_kg: float | None = _f(None, "season limit of nitrogen", unit="kg", lo=0.0)
    max_chloride_kg: float | None = _f(None, "season limit of chloride", unit="kg", lo=0.0)
    max_product_g_m2: float | None = _f(None, "season limit of product per zone area (worst zone)",
                                        unit="g/m²", lo=0.0)


@dataclass(frozen=True)
class PlanSettings:
    """All settings of one plan, one attribute per plan-file table."""

    plan: PlanInfo = field(default_factory=PlanInfo)
    inputs: Inputs = field(default_factory=Inputs)
    window: Window = field(default_factory=Window)
    race: Race = field(default_factory=Race)
    zoning: Zoning = field(default_factory=Zoning)
    snow: Snow = field(default_factory=Snow)
    dosing: Dosing = field(default_factory=Dosing)
    forecast: Forecast = field(default_factory=Forecast)
    logistics: Logistics = field(default_factory=Logistics)
    calibration: Calibration = field(default_factory=Calibration)
    ledger: Ledger = field(default_factory=Ledger)

    def replace(self, **sections: Any) -> PlanSettings:
        """Return a copy with whole sections replaced."""
        return dataclasses.replace(self, **sections)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data view (paths as strings, None left out) for JSON and the GeoPackage."""
        def plain(v: Any) -> Any:
            if isinstance(v, Path):
                return str(v)
            if isinstance(v, dict):
                return {k: plain(x) for k, x in v.items()}
            if isinstance(v, list | tuple):
                return [plain(x) for x in v]
            return v
        out: dict[str, Any] = {}
        for sec in dataclasses.fields(self):
            obj = getattr(self, sec.name)
            out[sec.name] = {f.name: plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)
                             if getattr(obj, f.name) is not None}
        return out


SECTIONS: dict[str, type] = {f.name: f.default_factory().__class__  # type: ignore[misc]
                             for f in dataclasses.fields(PlanSettings)}


def minutes_of(hhmm: str, where: str) -> int:
    try:
        h, m = hhmm.split(":")
        hi, mi = int(h), int(m)
        if not (0 <= hi <= 23 and 0 <= mi <= 59):
            raise ValueError
    except ValueError:
        raise SettingsError(f"time {hhmm!r} is not HH:MM", where=where,
                            fix="write a 24-hour local time such as \"10:30\"") from None
    return hi * 60 + mi


def _check_value(value: Any, tp: Any, where: str, meta: dict[str, Any], base: Path | None) -> Any:
    origin = typing.get_origin(tp)
    args = typing.get_args(tp)
    if origin in (typing.Union, types.UnionType):
        if value is None and type(None) in args:
            return None
        inner = [a for a in args if a is not type(None)]
        return _check_value(value, inner[0], where, meta, base)
    if tp is Path:
        if not isinstance(value, str | Path) or str(value) == "":
            raise SettingsError(f"expected a file path, got {value!r}", where=where,
                                fix="write the path as a quoted string")
        p = Path(value).expanduser()
        return (base / p) if (base is not None and not p.is_absolute()) else p
    if tp is bool:
        if not isinstance(value, bool):
            raise SettingsError(f"expected true or false, got {value!r}", where=where)
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise SettingsError(f"expected a whole number, got {value!r}", where=where,
                                fix="write it without quotes or decimals")
        return _check_range(value, where, meta)
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise SettingsError(f"expected a number, got {value!r}", where=where,
                                fix="write it without quotes, e.g. 0.5")
        return _check_range(float(value), where, meta)
    if tp is str:
        if not isinstance(value, str):
            raise SettingsError(f"expected text, got {value!r}", where=where, fix="put it in quotes")
        choices = meta.get("choices")
        if choices and value not in choices:
            raise SettingsError(f"{value!r} is not one of {', '.join(choices)}", where=where,
                                fix=_suggest(value, list(choices)))
        return value
    if origin is list:
        if not isinstance(value, list):
            raise SettingsError(f"expected a list, got {value!r}", where=where, fix="write e.g. [1.0, 2.0]")
        return [_check_value(v, args[0], f"{where}[{i}]", meta, base) for i, v in enumerate(value)]
    if origin is dict:
        if not isinstance(value, dict):
            raise SettingsError(f"expected a table, got {value!r}", where=where)
        return dict(value)
    return value


def _check_range(value: float, where: str, meta: dict[str, Any]) -> float:
    lo, hi, unit = meta.get("lo"), meta.get("hi"), meta.get("unit") or ""
    if value != value:  # NaN
        raise SettingsError("value is NaN", where=where, fix="give a number")
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        rng = f"{lo if lo is not None else '-inf'} to {hi if hi is not None else 'inf'} {unit}".strip()
        raise SettingsError(f"{value} is outside the accepted range {rng}", where=where,
                            fix="give a value in that range")
    return value


def section_from_mapping(cls: type, data: dict[str, Any], where: str, base: Path | None = None,
                         start: Any = None):
    """Build section *cls* from a mapping (plan file or overrides), validating keys, types and ranges.

    *where* names it in messages (``"plan.toml [dosing]"``), *base* is the folder relative paths resolve
    against, *start* an instance to update (default: the section's defaults).
    """
    if not isinstance(data, dict):
        raise SettingsError(f"expected a table, got {data!r}", where=where)
    hints = typing.get_type_hints(cls)
    fields_ = {f.name: f for f in dataclasses.fields(cls)}
    values: dict[str, Any] = {}
    problems: list[SettingsError] = []
    for key, value in data.items():  # every bad key and value, not just the first
        try:
            if key not in fields_:
                raise SettingsError(f"unknown key {key!r}", where=where, fix=_suggest(key, list(fields_)))
            values[key] = _check_value(value, hints[key], f"{where} {key}", dict(fields_[key].metadata), base)
        except SettingsError as exc:
            problems.append(exc)
    SettingsProblems.raise_all(problems)
    obj = dataclasses.replace(start if start is not None else cls(), **values)
    _check_section(obj, where)
    return obj


def _check_section(obj: Any, where: str) -> None:
    if isinstance(obj, Window):
        if obj.hours <= 0:
            raise SettingsError(f"the window ends ({obj.end}) before it starts ({obj.start})", where=where,
                                fix="give end later than start on the same day")
    if isinstance(obj, Zoning):
        if obj.exposure_breaks is not None:
            b = obj.exposure_breaks
            if any(b2 <= b1 for b1, b2 in zip(b, b[1:], strict=False)):
                raise SettingsError(f"exposure_breaks {b} are not ascending", where=where,
                                    fix="list them from low to high")
            if len(obj.exposure_labels) != len(b) + 1:
                raise SettingsError(f"{len(b)} breaks need {len(b) + 1} exposure_labels, got "
                                    f"{len(obj.exposure_labels)}", where=where,
                                    fix="give one label more than breaks")
        if len(obj.exposure_labels) < 3:
            raise SettingsError("at least three exposure classes are needed", where=where,
                                fix="give three or more exposure_labels")
        if len(set(obj.exposure_labels)) != len(obj.exposure_labels):
            raise SettingsError("exposure_labels repeat a name", where=where, fix="make each label unique")
        if obj.start_xy is not None and len(obj.start_xy) != 2:
            raise SettingsError(f"start_xy needs two numbers, got {obj.start_xy}", where=where)
    if isinstance(obj, Dosing) and obj.lwc_min_pct >= obj.lwc_max_pct:
        raise SettingsError(f"lwc_min_pct ({obj.lwc_min_pct}) must be below lwc_max_pct "
                            f"({obj.lwc_max_pct})", where=where)
    if isinstance(obj, PlanInfo | Calibration) and obj.date is not None:
        import datetime as _dt
        try:
            _dt.date.fromisoformat(obj.date)
        except ValueError:
            raise SettingsError(f"date {obj.date!r} is not YYYY-MM-DD", where=where,
                                fix='write e.g. "2027-03-14"') from None


def settings_from_mapping(data: dict[str, Any], source: str = "plan file", base: Path | None = None,
                          start: PlanSettings | None = None) -> PlanSettings:
    """Validate a whole plan mapping (tables keyed by section name, as parsed from TOML).

    *source* names the plan file in messages, *base* is its folder (relative paths resolve against it),
    *start* the settings to update (default: all defaults).
    """
    current = start or PlanSettings()
    sections: dict[str, Any] = {}
    problems: list[SettingsError] = []
    for name, table in data.items():
        try:
            if name not in SECTIONS:
                raise SettingsError(f"unknown table [{name}]", where=source,
                                    fix=_suggest(name, list(SECTIONS)))
            sections[name] = section_from_mapping(SECTIONS[name], table, f"{source} [{name}]", base,
                                                  getattr(current, name))
        except SettingsError as exc:
            problems.append(exc)
    SettingsProblems.raise_all(problems)
    return current.replace(**sections)


def parse_override(text: str) -> tuple[str, str, Any]:
    """Parse a ``--set table.key=value`` override; the value is read as TOML, else as text."""
    import tomllib

    if "=" not in text or "." not in text.split("=", 1)[0]:
        raise SettingsError(f"override {text!r} is not table.key=value", where="--set",
                            fix="write e.g. --set dosing.depth_m=0.05")
    lhs, rhs = text.split("=", 1)
    table, key = lhs.strip().split(".", 1)
    try:
        value = tomllib.loads(f"v = {rhs.strip()}")["v"]
    except tomllib.TOMLDecodeError:
        value = rhs.strip()
    return table, key, value


def describe() -> list[dict[str, Any]]:
    """Every setting with its table, key, default, unit and meaning (for docs and `--help`)."""
    rows = []
    for name, cls in SECTIONS.items():
        for f in dataclasses.fields(cls):
            default = f.default if f.default is not dataclasses.MISSING else f.default_factory()  # type: ignore[misc]
            rows.append({"table": name, "key": f.name, "default": default,
                         "unit": f.metadata.get("unit", ""), "doc": f.metadata.get("doc", "")})
    return rows
