"""Read a plan file (TOML) into validated :class:`~courseplan.settings.PlanSettings`."""

from __future__ import annotations

import tomllib
from pathlib import Path

from courseplan.errors import InputError, SettingsError
from courseplan.io.files import check_readable, read_text
from courseplan.settings import PlanSettings, settings_from_mapping

_READ: list[Path] = []


def plan_files_read() -> tuple[Path, ...]:
    """The plan files read in this process (the outputs must never replace their folder)."""
    return tuple(_READ)


def read_plan(path: Path | str) -> PlanSettings:
    """Read and validate a plan file; relative paths resolve against its folder."""
    p = check_readable(Path(path), "plan")
    if p not in _READ:
        _READ.append(p)
        del _READ[:-8]
    try:
        text = read_text(p, "plan")  # a byte-order mark (Windows Notepad) is dropped
    except InputError as exc:
        raise SettingsError(exc.what, where=exc.where, fix="save the plan file as UTF-8") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"not valid TOML ({exc})", where=str(p), fix="check the quoting and brackets") from None
    return settings_from_mapping(data, source=p.name, base=p.parent)
