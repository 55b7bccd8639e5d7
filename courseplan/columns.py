"""Declared columns of the zones table: one place for name, unit, meaning and the stage that adds it.

Every stage declares the columns it adds here; ``tests/test_columns.py`` checks each stage's
output against its declaration, and the GeoPackage's ``units`` table, the map popups and the
sheets take their units and labels from these declarations.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Column:
    """One declared column of the zones table."""

    name: str
    unit: str
    meaning: str
    stage: str
    kind: str = "float"  # float | int | str | bool


NO_UNIT = "-"
"""Unit written for text, ids, flags and pure numbers."""


def _cols(stage: str, *rows: tuple[str, str, str, str]) -> list[Column]:
    return [Column(n, u or NO_UNIT, m, stage, k) for n, u, m, k in rows]


ZONING = _cols(
    "zoning",
    ("zone_id", "", "zone number, 1 … n in course order", "int"),
    ("course_order", "", "position along the course from the start, 1 … n", "int"),
    ("label", "", "short zone label: section number and a letter in course order (2B = second zone "
                  "of section 2)", "str"),
    ("section", "", "course section label (distance band from the start, or from marker to marker)", "str"),
    ("exposure_class", "", "sun exposure class from the sun/shade raster", "str"),
    ("slope_class", "", "slope class (from the DEM; 'n/a' without one)", "str"),
    ("sun_fraction", "0–1", "mean share of the hold window in direct sun (NaN when the raster holds "
                            "irradiation only)", "float"),
    ("raster_irradiation_wh_m2", "Wh/m²", "mean of the sun/shade raster over the window when it holds "
                                           "irradiation (NaN when it holds a sun share)", "float"),
    ("slope_deg", "°", "mean slope (0 without a DEM)", "float"),
    ("aspect_deg", "°", "mean aspect, clockwise from grid north (NaN without a DEM)", "float"),
    ("exposure_rank", "-", "exposure class index, 0 = darkest", "int"),
    ("section_index", "-", "course section index, 0 = first from the start", "int"),
    ("distance_from_start_m", "m", "mean distance from the start along the course", "float"),
    ("map_area_m2", "m²", "planimetric (map) area", "float"),
    ("area_m2", "m²", "snow-surface area used for quantities: map area / cos(slope)", "float"),
)

EDITS = _cols(
    "edits",
    ("edit_skip", "", "the chief of course's override: no salt on this zone (empty = no override; set it in "
                  "the zones layer and plan with --zones)", "bool"),
    ("edit_dose_g_m2", "g/m²", "the chief of course's override: this dose on every pass instead of the "
                               "model's (empty = no override)", "float"),
    ("edit_agent", "", "the chief of course's override: dose this zone with this catalogue agent (empty = "
                       "the plan's agent)", "str"),
)

SUN = _cols(
    "sun",
    ("irradiation_wh_m2", "Wh/m²", "irradiation on the zone's surface over the window: the raster's own "
                                   "figure, or clear sky on the zone's slope with the beam scaled by its "
                                   "sun share", "float"),
)

CONDITIONS = _cols(
    "conditions",
    ("lwc_pct", "% vol", "liquid water content used", "float"),
    ("wetness", "", "wetness class (Fierz et al. 2009) matching lwc_pct", "str"),
    ("density_kg_m3", "kg/m³", "snow density used", "float"),
    ("snow_temp_c", "°C", "snow temperature used", "float"),
    ("grain", "", "grain class used (Fierz et al. 2009 codes)", "str"),
    ("snow_source", "", "where the snow state came from: observation, nearby, class-default", "str"),
    ("snow_source_detail", "", "observation ids, distance and age behind the snow state", "str"),
    ("obs_distance_m", "m", "distance to the observation used (0 inside, NaN for class default)",
     "float"),
    ("obs_age_h", "h", "age of the observation at the window start (NaN for class default)", "float"),
    ("obs_stale", "", "observation older than the set age before the window", "bool"),
    ("lwc_from_class", "", "the liquid water content stands for a wetness class, not a measurement "
                           "(then it is sampled inside the class)", "bool"),
)

DOSING = _cols(
    "dosing",
    ("verdict", "", "what to do in this zone", "str"),
    ("agent", "", "the agent this zone is dosed with (catalogue name): the plan's, or its edit_agent", "str"),
    ("advice", "", "one line of advice for the verdict", "str"),
    ("energy_in_mj_m2", "MJ/m²", "net energy that arrives while pass 1 acts (peak over τ), nominal", "float"),
    ("dose_g_m2", "g/m²", "product over the race day, all passes, P50", "float"),
    ("dose_p90_g_m2", "g/m²", "product over the race day, all passes, P90", "float"),
    ("passes", "", "passes on the race day (see the passes table)", "int"),
    ("max_pass_g_m2", "g/m²", "the largest single pass, P50", "float"),
    ("pass_times", "HH:MM", "when each pass is spread, local time, '; '-separated", "str"),
    ("hard_until", "HH:MM", "when the last pass stops holding, local time ('end of day': past the last "
                            "run)", "str"),
    ("soft_min", "min", "minutes the zone is soft during its worst run (0: held through every run)",
     "float"),
    ("soft_in_run", "", "the run in which the zone is soft longest (0: none)", "int"),
    ("product_kg", "kg", "product mass over the race day, P50 (dose × surface area)", "float"),
    ("product_p90_kg", "kg", "product mass over the race day, P90", "float"),
    ("nitrogen_kg", "kg", "nitrogen put on the snow, P50", "float"),
    ("chloride_kg", "kg", "chloride put on the snow, P50", "float"),
    ("brine_exit_temp_c", "°C", "brine exit temperature T_b used", "float"),
    ("refreeze_share", "", "share of the free water that must refreeze (k_f) used", "float"),
    ("lwc_sampled", "", "liquid water content sampled inside its wetness class for P50/P90", "bool"),
    ("weather_source", "", "where the weather came from: plan constants or a forecast file", "str"),
    ("dose_inputs", "", "the inputs the dose used and where each came from", "str"),
)

CREWS = _cols(
    "crews",
    ("crew", "", "crew number (its zones are one stretch of the course)", "int"),
    ("work_order", "", "place in the crew's order of work (shaded zones first, sunny last)", "int"),
    ("spread_min", "min", "minutes one pass takes at the spreading rate", "float"),
)

LOGISTICS = _cols(
    "logistics",
    ("bags", "", "bags for this zone (whole bags, P90 with margin)", "int"),
    ("work_min", "min", "spreading and carrying time", "float"),
    ("handfuls_m2", "1/m²", "handfuls per square metre for hand spreading (estimate)", "float"),
)

PASSES = _cols(
    "passes",
    ("zone_id", "", "zone the pass is for", "int"),
    ("pass_no", "", "pass number in the zone, 1 = before inspection", "int"),
    ("slot", "", "when in the race day: before inspection, or the break before run k", "str"),
    ("agent", "", "the agent spread (catalogue name)", "str"),
    ("spread_at", "ISO 8601", "when the crew has spread the pass, local time with offset", "str"),
    ("dose_g_m2", "g/m²", "product dose of this pass, P50", "float"),
    ("dose_p90_g_m2", "g/m²", "product dose of this pass, P90", "float"),
    ("product_kg", "kg", "product mass of this pass, P50", "float"),
    ("product_p90_kg", "kg", "product mass of this pass, P90", "float"),
    ("sub_passes", "", "spreads this pass is split into under the slush limit", "int"),
    ("hard_from", "ISO 8601", "hard from (spread time + τ), local time with offset", "str"),
    ("hard_until", "ISO 8601", "hard until the sun has re-supplied the hardening reserve (empty: past "
                               "the last run)", "str"),
    ("held_to_day_end", "", "the pass holds past the end of the last run", "bool"),
    ("layer_temp_c", "°C", "closed-layer temperature of the pass in the hardening depth", "float"),
    ("layer_temp_off", "", "that temperature is more than 2 K from T_b", "bool"),
)
"""Columns of the ``passes`` table (one row per zone and pass)."""

CREW_LAYER = _cols(
    "crews",
    ("crew", "", "crew number, 1 … n in course order", "int"),
    ("label", "", "crew name on the sheets", "str"),
    ("zone_ids", "", "the crew's zones in walking (course) order, comma-separated", "str"),
    ("first_course_order", "", "course order of the crew's first zone", "int"),
    ("last_course_order", "", "course order of the crew's last zone", "int"),
    ("n_zones", "", "number of zones", "int"),
    ("area_m2", "m²", "snow-surface area of the crew's zones", "float"),
    ("product_kg", "kg", "product mass, P50", "float"),
    ("product_p90_kg", "kg", "product mass, P90", "float"),
    ("bags", "", "bags dropped at the crew's depot", "int"),
    ("work_min", "min", "spreading (all passes) and carrying time", "float"),
    ("pre_race_min", "min", "work before the first start (first pass and passes that find no break)",
     "float"),
    ("passes", "", "most passes any of the crew's zones needs", "int"),
    ("depot_x", "m", "depot (where the bags are dropped), x in the plan's CRS", "float"),
    ("depot_y", "m", "depot, y in the plan's CRS", "float"),
    ("start", "HH:MM", "when the crew starts, local time", "str"),
    ("done_by", "HH:MM", "when the crew's work before the race must be done (first start − wait)",
     "str"),
    ("second_pass", "HH:MM", "when the second pass is due (empty for one pass)", "str"),
)
"""Columns of the ``crews`` layer (one row per crew; not part of the zones table)."""

ALL: list[Column] = ZONING + EDITS + SUN + CONDITIONS + CREWS + DOSING + LOGISTICS
BY_NAME: dict[str, Column] = {c.name: c for c in ALL}


def declared(stage: str) -> list[Column]:
    """Columns a stage declares it adds."""
    return [c for c in ALL if c.stage == stage]


def check_stage(stage: str, before, after) -> None:
    """Raise :class:`~courseplan.errors.ContractError` unless *after* adds exactly *stage*'s declared columns.

    *before* and *after* are column names (or tables) of the zones table before and after the stage;
    ``geometry`` is ignored.
    """
    from courseplan.errors import ContractError

    b = {str(c) for c in before} - {"geometry"}
    a = {str(c) for c in after} - {"geometry"}
    want = {c.name for c in declared(stage)}
    missing = sorted(want - a)
    extra = sorted(a - b - want)
    if missing or extra:
        parts = ([f"missing {', '.join(missing)}"] if missing else []) + (
            [f"undeclared {', '.join(extra)}"] if extra else [])
        raise ContractError(f"the {stage} stage broke its column contract: {'; '.join(parts)}",
                            where=f"courseplan.columns ({stage})",
                            fix="declare the column in courseplan/columns.py or stop writing it")


def unit(name: str) -> str:
    """Unit of a declared column ('' when dimensionless or unknown)."""
    c = BY_NAME.get(name)
    return c.unit if c and c.unit != NO_UNIT else ""


def markdown_table(cols: list[Column], *, with_stage: bool = True) -> str:
    """The columns as the Markdown table of ``docs/outputs.md`` (that file must hold it verbatim)."""
    head = "| column | unit | stage | meaning |\n|---|---|---|---|" if with_stage else \
        "| column | unit | meaning |\n|---|---|---|"
    rows = [f"| `{c.name}` | {c.unit} | {c.stage} | {c.meaning} |" if with_stage
            else f"| `{c.name}` | {c.unit} | {c.meaning} |" for c in cols]
    return "\n".join([head, *rows])
