"""No input destroyed: --out never holds an input, --overwrite replaces only our own folders, one run
per output at a time, and SIGTERM/SIGHUP/Ctrl-C clean up like an interruption.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from courseplan.cli.main import main

X0, Y0 = 500_000.0, 5_150_000.0
ROOT = Path(__file__).resolve().parents[1]


def make_inputs(folder: Path) -> tuple[Path, Path]:
    import rasterio
    from rasterio.transform import from_origin

    folder.mkdir(parents=True, exist_ok=True)
    ring = [[X0, Y0], [X0 + 200, Y0], [X0 + 200, Y0 + 300], [X0, Y0 + 300], [X0, Y0]]
    course = folder / "course.geojson"
    course.write_text(json.dumps({
        "type": "FeatureCollection",
        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32632"}},
        "features": [{"type": "Feature", "properties": {"name": "c"},
                      "geometry": {"type": "Polygon", "coordinates": [ring]}}]}))
    sun = folder / "sun.tif"
    a = np.tile(np.linspace(0, 1, 60, dtype=np.float32), (80, 1))
    with rasterio.open(sun, "w", driver="GTiff", height=80, width=60, count=1, dtype="float32",
                       crs="EPSG:32632", transform=from_origin(X0 - 50, Y0 + 350, 5, 5), nodata=-9999) as ds:
        ds.write(a, 1)
    return course, sun


def args(course, sun, out, *extra):
    return ["plan", "--course", str(course), "--sun", str(sun), "--date", "2027-03-18", "--quiet",
            "--out", str(out), *extra]


def run(a):
    return CliRunner().invoke(main, [str(x) for x in a])


def files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.mark.parametrize("overwrite", [False, True])
@pytest.mark.parametrize("where", ["same", "parent"])
def test_out_holding_an_input_is_refused(tmp_path, where, overwrite):
    course, sun = make_inputs(tmp_path / "data" / "in")
    out = course.parent if where == "same" else tmp_path / "data"
    before = files(tmp_path)
    res = run(args(course, sun, out, *(["--overwrite"] if overwrite else [])))
    assert res.exit_code == 2, res.output
    assert "error:" in res.output and "input" in res.output and "Traceback" not in res.output
    assert "course" in res.output
    assert files(tmp_path) == before


def test_out_is_an_input_file(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    res = run(args(course, sun, sun, "--overwrite"))
    assert res.exit_code == 2 and "sun raster input" in res.output, res.output
    assert sun.is_file()


def test_plan_file_folder_is_protected(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    plan = tmp_path / "cfg" / "plan.toml"
    plan.parent.mkdir()
    plan.write_text(f'[inputs]\ncourse = "{course}"\nsun = "{sun}"\n[plan]\ndate = "2027-03-18"\n')
    (plan.parent / ".courseplan-output").write_text("")  # even a marker does not let it go
    res = run(["plan", plan, "--out", plan.parent, "--overwrite", "--quiet"])
    assert res.exit_code == 2 and "plan file" in res.output, res.output
    assert plan.is_file()


def test_new_folder_beside_the_inputs_is_fine(tmp_path):
    course, sun = make_inputs(tmp_path)
    res = run(args(course, sun, tmp_path / "out"))
    assert res.exit_code == 0, res.output
    assert (tmp_path / "out" / ".courseplan-output").is_file()


def test_overwrite_refuses_a_folder_we_did_not_write(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "photos"
    out.mkdir()
    (out / "holiday.jpg").write_bytes(b"\xff\xd8 precious")
    res = run(args(course, sun, out, "--overwrite"))
    assert res.exit_code == 2, res.output
    assert "not written by courseplan" in res.output and ".courseplan-output" in res.output
    assert (out / "holiday.jpg").read_bytes() == b"\xff\xd8 precious"


def test_overwrite_replaces_our_own_folder(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "out"
    assert run(args(course, sun, out)).exit_code == 0
    res = run(args(course, sun, out, "--overwrite"))
    assert res.exit_code == 0, res.output
    assert (out / ".courseplan-output").is_file()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out.")]


def test_second_run_into_a_locked_output_says_so(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "out"
    lock = tmp_path / ".out.courseplan-lock"
    lock.write_text(str(os.getppid()))  # a live process holds it
    res = run(args(course, sun, out))
    assert res.exit_code == 2, res.output
    errors = [ln for ln in res.output.splitlines() if ln.startswith("error:")]
    assert len(errors) == 1 and "another courseplan run" in errors[0]
    assert not out.exists() and lock.exists()


def test_stale_lock_of_a_dead_process_is_taken_over(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "out"
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    (tmp_path / ".out.courseplan-lock").write_text(str(p.pid))
    res = run(args(course, sun, out))
    assert res.exit_code == 0, res.output
    assert not (tmp_path / ".out.courseplan-lock").exists()


def test_two_locks_cannot_both_be_held(tmp_path):
    from courseplan.errors import OutputError
    from courseplan.io.files import OutputLock

    with OutputLock(tmp_path / "out"):
        with pytest.raises(OutputError, match="another courseplan run"):
            with OutputLock(tmp_path / "out"):
                pass
    assert not (tmp_path / ".out.courseplan-lock").exists()


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGHUP])
def test_sigterm_and_sighup_clean_up_like_ctrl_c(tmp_path, monkeypatch, sig):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "out"

    def killed(*_a, **_k):
        os.kill(os.getpid(), sig)
        raise AssertionError("the signal should have interrupted the run")

    monkeypatch.setattr("courseplan.io.outputs.write_map", killed)
    before = signal.getsignal(sig)
    res = run(args(course, sun, out))
    assert res.exit_code == 130, res.output
    assert "interrupted: nothing was written" in res.output and "Traceback" not in res.output
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == ["in"]  # no half-written folder, no lock
    assert signal.getsignal(sig) == before  # the handlers are put back


def test_sigterm_in_a_real_process(tmp_path):
    course, sun = make_inputs(tmp_path / "in")
    out = tmp_path / "out"
    code = ("import os, signal, courseplan.io.outputs as o\n"
            "def slow(*a, **k):\n    os.kill(os.getpid(), signal.SIGTERM)\n"
            "o.write_map = slow\n"
            "from courseplan.cli import run\nrun()\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    p = subprocess.run([sys.executable, "-c", code, *args(course, sun, out)[0:]], env=env,
                       capture_output=True, text=True, timeout=300)
    assert p.returncode == 130, p.stderr
    assert p.stderr.strip().splitlines()[-1] == "interrupted: nothing was written"
    assert "Traceback" not in p.stderr
    assert [q.name for q in tmp_path.iterdir()] == ["in"]


def test_ctrl_c_while_loading_is_one_line(monkeypatch, capsys):
    import importlib.abc

    import courseplan.cli as cli

    class Interrupting(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name == "courseplan.cli.main":
                raise KeyboardInterrupt
            return None

    monkeypatch.delitem(sys.modules, "courseplan.cli.main")
    monkeypatch.setattr(sys, "meta_path", [Interrupting(), *sys.meta_path])
    with pytest.raises(SystemExit) as e:
        cli.run()
    assert e.value.code == 130
    err = capsys.readouterr().err
    assert err.strip() == "interrupted: nothing was written"


def test_ctrl_c_during_argument_parsing_is_one_line(monkeypatch, capsys):
    from courseplan.cli import main as m

    def boom(*_a, **_k):
        raise KeyboardInterrupt

    monkeypatch.setattr(m.main, "make_context", boom)
    with pytest.raises(SystemExit) as e:
        m.entry(["plan", "--help"])
    assert e.value.code == 130
    assert "interrupted" in capsys.readouterr().err
