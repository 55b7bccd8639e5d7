"""The documentation stays true to the code: every setting and every declared column is documented."""

from pathlib import Path

from courseplan.columns import ALL
from courseplan.settings import describe

ROOT = Path(__file__).resolve().parents[1]


def test_every_setting_is_in_the_plan_file_doc():
    text = (ROOT / "docs" / "plan-file.md").read_text(encoding="utf-8")
    missing = [f"[{r['table']}] {r['key']}" for r in describe() if f"`{r['key']}`" not in text
               or f"## [{r['table']}]" not in text]
    assert not missing, f"add to docs/plan-file.md: {missing}"


def test_every_column_is_in_the_outputs_doc():
    text = (ROOT / "docs" / "outputs.md").read_text(encoding="utf-8")
    missing = [c.name for c in ALL if f"`{c.name}`" not in text]
    assert not missing, f"add to docs/outputs.md: {missing}"


def test_readme_has_exactly_two_quick_start_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    qs = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    assert qs.count("```") == 4
