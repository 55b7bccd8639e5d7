"""Same inputs, same numbers: two runs of the demo plan agree to the last bit."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from courseplan.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "sample-geodata" / "plan.toml"


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    outs = []
    for name in ("first", "second"):
        out = tmp_path_factory.mktemp(name) / "plan"
        res = CliRunner().invoke(main, ["plan", str(PLAN), "--out", str(out), "--quiet"])
        assert res.exit_code == 0, res.output
        outs.append(out)
    return outs


def _numbers(v, path=""):
    """Every number in a JSON value, keyed by its path."""
    if isinstance(v, dict):
        for k, x in v.items():
            yield from _numbers(x, f"{path}.{k}")
    elif isinstance(v, list):
        for i, x in enumerate(v):
            yield from _numbers(x, f"{path}[{i}]")
    elif isinstance(v, int | float) and not isinstance(v, bool):
        yield path, v


def test_summary_numbers_identical(two_runs):
    a, b = (json.loads((o / "summary.json").read_text()) for o in two_runs)
    na, nb = dict(_numbers(a)), dict(_numbers(b))
    assert len(na) > 100  # totals, order, crews and every zone's figures
    assert na.keys() == nb.keys()
    diff = {k: (na[k], nb[k]) for k in na if na[k] != nb[k]}
    assert diff == {}
    for key in ("total_product_kg", "total_product_p90_kg", "course_area_m2", "zone_count"):
        assert key in a and a[key] == b[key]


def test_summary_identical_apart_from_the_time_of_issue(two_runs):
    # not only the numbers: labels, verdicts, notes, settings and the plan version agree too; only
    # the time of issue differs
    import json

    a, b = (json.loads((o / "summary.json").read_text()) for o in two_runs)
    assert a.pop("issued_at") and b.pop("issued_at")
    assert a == b


def test_zone_layers_identical(two_runs):
    import geopandas as gpd

    za, zb = (gpd.read_file(o / "zones.gpkg", layer="zones") for o in two_runs)
    assert list(za.columns) == list(zb.columns)
    assert za.drop(columns="geometry").equals(zb.drop(columns="geometry"))
    assert list(za.geometry.to_wkb()) == list(zb.geometry.to_wkb())


def test_library_run_is_deterministic_in_process():
    # the same settings and loaded inputs, planned twice in one process (no state carried over)
    from courseplan.io.loader import load_inputs
    from courseplan.io.planfile import read_plan
    from courseplan.pipeline import run_plan

    s = read_plan(PLAN)
    inputs = load_inputs(s)
    r1, r2 = run_plan(s, inputs), run_plan(s, inputs)
    cols = [c for c in r1.zones.columns if c != "geometry"]
    assert r1.zones[cols].equals(r2.zones[cols])
    assert r1.totals() == r2.totals()
