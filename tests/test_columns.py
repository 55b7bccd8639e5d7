"""Every stage's output against its declared columns (courseplan/columns.py), run on the demo plan.

Each stage must add exactly the columns it declares: each present, none undeclared; every declared
column has a unit (``-`` for text, ids, flags and pure numbers) and a meaning; the GeoPackage
``units`` table and docs/outputs.md are written from the same declarations.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pyogrio
import pytest

from courseplan import columns
from courseplan.errors import ContractError

ROOT = Path(__file__).resolve().parents[1]
STAGES = ("zoning", "edits", "sun", "conditions", "dosing", "logistics")


@pytest.fixture(scope="module")
def staged(tmp_path_factory):
    """Run the demo plan, recording the zones columns before and after each stage."""
    import courseplan.pipeline as pipeline
    from courseplan.io.loader import load_inputs
    from courseplan.io.outputs import write_outputs
    from courseplan.io.planfile import read_plan

    seen: dict[str, tuple[list[str], list[str]]] = {}
    real = pipeline.check_stage

    def spy(stage, before, after):
        seen[stage] = (list(before), list(after))
        return real(stage, before, after)

    pipeline.check_stage = spy
    try:
        s = read_plan(ROOT / "sample-geodata" / "plan.toml")
        result = pipeline.run_plan(s, load_inputs(s))
    finally:
        pipeline.check_stage = real
    out = tmp_path_factory.mktemp("plan") / "out"
    write_outputs(result, out)
    return seen, result, out


@pytest.mark.parametrize("stage", STAGES)
def test_each_stage_adds_exactly_its_declared_columns(staged, stage):
    seen, _, _ = staged
    before, after = seen[stage]
    added = set(after) - set(before) - {"geometry"}
    assert added == {c.name for c in columns.declared(stage)}


def test_zoning_table_itself_holds_the_zoning_columns(staged):
    _, result, _ = staged
    for c in columns.declared("zoning"):
        assert c.name in result.zones.columns


def test_every_declared_column_has_a_unit_and_a_meaning():
    for c in columns.ALL + columns.CREW_LAYER:
        assert c.unit.strip(), c.name
        assert len(c.meaning.split()) >= 2, c.name
        assert c.kind in ("float", "int", "str", "bool"), c.name
    assert len({c.name for c in columns.ALL}) == len(columns.ALL)  # one declaration per column


def test_geopackage_units_table_is_the_declarations(staged):
    _, _, out = staged
    units = pyogrio.read_dataframe(out / "zones.gpkg", layer="units")
    want = pd.DataFrame([{"column": c.name, "unit": c.unit, "meaning": c.meaning, "stage": c.stage}
                         for c in columns.ALL])
    pd.testing.assert_frame_equal(units[want.columns].reset_index(drop=True), want)
    zones = pyogrio.read_dataframe(out / "zones.gpkg", layer="zones")
    assert set(zones.columns) - {"geometry"} == {c.name for c in columns.ALL}


def test_outputs_doc_holds_the_generated_tables():
    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8")
    assert columns.markdown_table(columns.ALL) in text
    assert columns.markdown_table(columns.CREW_LAYER, with_stage=False) in text


def test_a_broken_contract_is_a_raised_error_not_an_assert():
    with pytest.raises(ContractError, match="undeclared surprise_col"):
        columns.check_stage("sun", ["zone_id"], ["zone_id", "irradiation_wh_m2", "surprise_col"])
    with pytest.raises(ContractError, match="missing irradiation_wh_m2"):
        columns.check_stage("sun", ["zone_id"], ["zone_id"])
