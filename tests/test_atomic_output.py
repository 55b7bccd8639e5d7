"""All-or-nothing output.

A temporary folder is moved into place, existing folders are refused, interruptions leave nothing
behind, and inputs are never modified.
"""

from __future__ import annotations

import errno
import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from courseplan.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample-geodata"
X0, Y0 = 500_000.0, 5_150_000.0


@pytest.fixture
def tiny(tmp_path):
    """Make a 200 m × 300 m course in EPSG:32632 and a sun raster around it; return the plan arguments."""
    import rasterio
    from rasterio.transform import from_origin

    ring = [[X0, Y0], [X0 + 200, Y0], [X0 + 200, Y0 + 300], [X0, Y0 + 300], [X0, Y0]]
    course = tmp_path / "in" / "course.geojson"
    course.parent.mkdir()
    course.write_text(json.dumps({
        "type": "FeatureCollection",
        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32632"}},
        "features": [{"type": "Feature", "properties": {"name": "c"},
                      "geometry": {"type": "Polygon", "coordinates": [ring]}}]}))
    sun = tmp_path / "in" / "sun.tif"
    a = np.tile(np.linspace(0, 1, 60, dtype=np.float32), (80, 1))
    with rasterio.open(sun, "w", driver="GTiff", height=80, width=60, count=1, dtype="float32",
                       crs="EPSG:32632", transform=from_origin(X0 - 50, Y0 + 350, 5, 5), nodata=-9999) as ds:
        ds.write(a, 1)
    return ["plan", "--course", str(course), "--sun", str(sun), "--date", "2027-03-18", "--quiet"]


def run(args):
    return CliRunner().invoke(main, [str(a) for a in args])


def leftovers(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {str(p.relative_to(folder)): (p.read_bytes(), p.stat().st_mtime_ns)
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_fresh_run_leaves_only_the_output(tiny, tmp_path):
    out = tmp_path / "out"
    res = run([*tiny, "--out", out])
    assert res.exit_code == 0, res.output
    assert sorted(p.name for p in out.iterdir()) == sorted(
        ["zones.gpkg", "map.html", "summary.json", "order.pdf", "crews.pdf", ".courseplan-output"])
    assert leftovers(out) == []


def test_existing_folder_refused_and_untouched(tiny, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "mine.txt").write_text("keep me")
    before = snapshot(out)
    res = run([*tiny, "--out", out])
    assert res.exit_code == 2
    assert "already exists" in res.output and "--overwrite" in res.output
    assert "Traceback" not in res.output
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_existing_empty_folder_is_refused_too(tiny, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    res = run([*tiny, "--out", out])
    assert res.exit_code == 2 and "already exists" in res.output
    assert list(out.iterdir()) == []


def test_overwrite_replaces_the_folder(tiny, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "stale.txt").write_text("old plan")
    (out / "summary.json").write_text("{}")
    (out / ".courseplan-output").write_text("")  # an earlier run's folder: --overwrite may replace it
    res = run([*tiny, "--out", out, "--overwrite"])
    assert res.exit_code == 0, res.output
    assert not (out / "stale.txt").exists()
    assert json.loads((out / "summary.json").read_text())["zone_count"] > 0
    assert leftovers(out) == []


def test_overwrite_refuses_a_file(tiny, tmp_path):
    out = tmp_path / "out"
    out.write_text("a file, not a folder")
    res = run([*tiny, "--out", out, "--overwrite"])
    assert res.exit_code == 2
    assert "is a file" in res.output and "Traceback" not in res.output
    assert out.read_text() == "a file, not a folder"
    assert leftovers(out) == []


def _interrupt(*_a, **_k):
    raise KeyboardInterrupt


@pytest.mark.parametrize("target", ["courseplan.io.outputs.write_map", "courseplan.io.outputs.write_gpkg",
                                    "courseplan.io.outputs.write_crews_pdf"])
def test_interrupted_run_leaves_nothing(tiny, tmp_path, monkeypatch, target):
    monkeypatch.setattr(target, _interrupt)
    out = tmp_path / "out"
    res = run([*tiny, "--out", out])
    assert res.exit_code == 130, res.output
    assert "interrupted" in res.output and "nothing was written" in res.output
    assert "Traceback" not in res.output
    assert not out.exists()
    assert leftovers(out) == []


def test_interrupted_overwrite_keeps_the_old_folder(tiny, tmp_path, monkeypatch):
    out = tmp_path / "out"
    out.mkdir()
    (out / "summary.json").write_text('{"old": true}')
    (out / ".courseplan-output").write_text("")
    before = snapshot(out)
    monkeypatch.setattr("courseplan.io.outputs.write_crews_pdf", _interrupt)
    res = run([*tiny, "--out", out, "--overwrite"])
    assert res.exit_code == 130
    assert snapshot(out) == before
    assert leftovers(out) == []


def test_full_disk_is_one_line_and_leaves_nothing(tiny, tmp_path, monkeypatch):
    def full(*_a, **_k):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr("courseplan.io.outputs.write_map", full)
    out = tmp_path / "out"
    res = run([*tiny, "--out", out])
    assert res.exit_code == 2, res.output
    assert "No space left on device" in res.output and "Traceback" not in res.output
    assert not out.exists()
    assert leftovers(out) == []


def test_inputs_are_never_modified(tmp_path):
    # the demo plan reads every kind of input: course, sun, DEM, observations, forecast, centreline
    before = snapshot(SAMPLE)
    names = sorted(p.name for p in SAMPLE.iterdir())
    out = tmp_path / "out"
    res = run(["plan", SAMPLE / "plan.toml", "--out", out, "--quiet"])
    assert res.exit_code == 0, res.output
    assert snapshot(SAMPLE) == before
    assert sorted(p.name for p in SAMPLE.iterdir()) == names  # no .aux.xml or lock files beside them


def test_tiny_inputs_are_never_modified(tiny, tmp_path):
    before = snapshot(tmp_path / "in")
    res = run([*tiny, "--out", tmp_path / "out"])
    assert res.exit_code == 0, res.output
    assert snapshot(tmp_path / "in") == before


@pytest.mark.parametrize(("umask", "folder", "file"), [(0o022, 0o755, 0o644), (0o027, 0o750, 0o640)])
def test_output_modes_follow_the_umask(tiny, tmp_path, umask, folder, file):
    import os
    import stat

    from courseplan.io.files import write_text_atomic

    old = os.umask(umask)
    try:
        out = tmp_path / "out"
        res = run(tiny + ["--out", out])
        assert res.exit_code == 0, res.output
        single = write_text_atomic(tmp_path / "one.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE(out.stat().st_mode) == folder
    modes = {p.name: stat.S_IMODE(p.stat().st_mode) for p in out.iterdir()}
    assert set(modes) == {"zones.gpkg", "map.html", "summary.json", "order.pdf", "crews.pdf", ".courseplan-output"}
    assert set(modes.values()) == {file}, modes
    assert stat.S_IMODE(single.stat().st_mode) == file
    assert not leftovers(out)
