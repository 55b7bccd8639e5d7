"""The package's layer rules, read from every import statement (module level and inside functions).

Layers, bottom up (DEVELOPERS.md, "Layout"): core records → physics / geo → stages → pipeline →
render → io → api → cli.  Each layer lists what it may import from the package; third-party
imports are free.  A stage never imports another stage.  The import graph has no cycles.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "courseplan"
CORE = {"errors", "constants", "grid", "columns", "settings", "schedule", "cautions", "agents", "calibration"}
ALLOWED: dict[str, set[str]] = {
    # core records: only each other (the graph check below rules out cycles)
    **{c: CORE for c in CORE},
    "physics": {"errors", "constants", "agents", "physics"},
    "geo": {"errors", "grid", "geo"},
    "stages": CORE | {"physics", "geo"},          # + its own module only (checked separately)
    "pipeline": CORE | {"physics", "geo", "stages"},
    "replan": CORE | {"physics", "geo", "stages", "pipeline"},   # the pipeline's second entry
    "render": CORE | {"physics", "geo", "render"},
    "io": CORE | {"physics", "geo", "stages", "pipeline", "render", "io", "__init__"},
    "api": CORE | {"physics", "geo", "stages", "pipeline", "replan", "render", "io"},
    "cli": {"api", "io", "settings", "errors", "cli", "__init__"},
    "__init__": set(),
}


def _unit(module: str) -> str:
    parts = module.split(".")
    return "__init__" if len(parts) == 1 else parts[1]


def _modules() -> dict[str, Path]:
    out = {}
    for p in PKG.rglob("*.py"):
        rel = p.relative_to(PKG.parent).with_suffix("")
        name = ".".join(rel.parts)
        out[name[: -len(".__init__")] if name.endswith(".__init__") else name] = p
    return out


def _imports(path: Path, module: str) -> list[tuple[int, str]]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    pkg = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = []
    type_only = set()
    for node in ast.walk(tree):              # imports under `if TYPE_CHECKING:` never run
        if isinstance(node, ast.If) and getattr(node.test, "id", getattr(node.test, "attr", "")) == "TYPE_CHECKING":
            type_only |= {id(n) for b in node.body for n in ast.walk(b)}
    for node in ast.walk(tree):              # every import, inside functions too
        if id(node) in type_only:
            continue
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names if a.name.split(".")[0] == "courseplan"]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg.split(".")[: len(pkg.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.split(".")[0] != "courseplan":
                continue
            if target == "courseplan":   # from courseplan import x: x may be a module
                mods = _modules()
                found += [(node.lineno, f"courseplan.{a.name}" if f"courseplan.{a.name}" in mods
                           else "courseplan") for a in node.names]
            else:
                found.append((node.lineno, target))
    return found


def _resolve(target: str, mods: dict[str, Path]) -> str:
    while target not in mods and "." in target:
        target = target.rpartition(".")[0]
    return target


def test_every_import_follows_the_layer_rules():
    mods = _modules()
    bad = []
    for mod, path in mods.items():
        unit = _unit(mod)
        for line, target in _imports(path, mod):
            tunit = _unit(target)
            if tunit == "__init__" and target != "courseplan":
                continue
            if target == "courseplan" and unit in ("io", "api", "cli", "__init__"):
                continue  # __version__
            ok = tunit in ALLOWED[unit] or (tunit == unit and unit in CORE)
            if unit == "stages" and tunit == "stages":   # a stage may import only its own modules
                tgt = _resolve(target, mods).split(".")
                ok = len(tgt) < 3 or tgt[2] == mod.split(".")[2]
            if not ok:
                bad.append(f"{path.relative_to(PKG.parent)}:{line} {mod} imports {target}")
    assert not bad, "layer rule broken:\n" + "\n".join(bad)


def test_no_import_cycles():
    mods = _modules()
    graph = {m: {_resolve(t, mods) for _, t in _imports(p, m)} - {m} for m, p in mods.items()}
    # packages' __init__ are nodes too; ignore the root package's lazy map (it imports nothing)
    state: dict[str, int] = {}
    stack: list[str] = []
    cycles = []

    def visit(m: str) -> None:
        state[m] = 1
        stack.append(m)
        for n in sorted(graph.get(m, ())):
            if n not in mods:
                continue
            if state.get(n) == 1:
                cycles.append(" → ".join(stack[stack.index(n):] + [n]))
            elif n not in state:
                visit(n)
        stack.pop()
        state[m] = 2

    for m in sorted(mods):
        if m not in state:
            visit(m)
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


@pytest.mark.parametrize("text, broken", [
    ("from courseplan.io.loader import load_inputs\n", True),
    ("def f():\n    from courseplan.render.webmap import render_map_html\n", True),
    ("from courseplan.physics import brine\n", False),
])
def test_the_checker_sees_imports_inside_functions(tmp_path, text, broken):
    # the rule check itself can fail: a stage importing io or render (even lazily) is caught
    p = tmp_path / "zoning.py"
    p.write_text(text)
    targets = [t for _, t in _imports(p, "courseplan.stages.zoning")]
    assert any(_unit(t) not in ALLOWED["stages"] for t in targets) is broken


def test_no_module_over_450_lines_without_a_reason():
    # DEVELOPERS.md names the exceptions and why
    allowed = {"courseplan/physics/brine.py", "courseplan/settings.py"}
    long = [f"{p.relative_to(PKG.parent)}: {n}" for p in PKG.rglob("*.py")
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > 450
            and str(p.relative_to(PKG.parent)) not in allowed]
    assert not long, long
