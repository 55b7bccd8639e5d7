"""Read a plan file (TOML) into validated :class:`~courseplan.settings.PlanSettings`, and write its
``[calibration]`` table back without touching the rest (comments, key order, spacing: ``tomlkit``)."""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from courseplan.errors import InputError, SettingsError
from courseplan.io.files import check_readable, read_text, write_text_atomic
from courseplan.settings import PlanSettings, settings_from_mapping

_READ: list[Path] = []

CALIBRATION_COMMENT = ("written by `courseplan calibrate` from a test patch (docs/calibration.md); "
                       "calibrate again rather than edit")


def plan_files_read() -> tuple[Path, ...]:
    """The plan files read in this process (the outputs must never replace their folder)."""
    return tuple(_READ)


def read_plan_text(path: Path | str) -> tuple[Path, str]:
    """The plan file's path and UTF-8 text (a byte-order mark, as Windows Notepad writes, is dropped)."""
    p = check_readable(Path(path), "plan")
    if p not in _READ:
        _READ.append(p)
        del _READ[:-8]
    try:
        return p, read_text(p, "plan")
    except InputError as exc:
        raise SettingsError(exc.what, where=exc.where, fix="save the plan file as UTF-8") from None


def plan_from_text(text: str, p: Path) -> PlanSettings:
    """Validate plan-file text (its name and folder from *p*)."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"not valid TOML ({exc})", where=str(p), fix="check the quoting and brackets") from None
    return settings_from_mapping(data, source=p.name, base=p.parent)


def read_plan(path: Path | str) -> PlanSettings:
    """Read and validate a plan file; relative paths resolve against its folder."""
    p, text = read_plan_text(path)
    return plan_from_text(text, p)


def with_calibration(text: str, values: dict[str, Any]) -> str:
    """Plan-file text with its ``[calibration]`` table set to *values* (None: the key is removed).

    Everything outside the table keeps its bytes: comments, key order and blank lines.  A table that is
    already there is updated in place (its own comments and other keys stay); otherwise it is added at
    the end of the file.
    """
    import tomlkit

    doc = tomlkit.parse(text)
    if "calibration" in doc:
        table = doc["calibration"]
        for k, v in values.items():
            if v is None:
                if k in table:
                    del table[k]
            else:
                table[k] = v
    else:
        table = tomlkit.table()
        table.add(tomlkit.comment(CALIBRATION_COMMENT))
        for k, v in values.items():
            if v is not None:
                table.add(k, v)
        if text and not text.endswith("\n"):
            doc.add(tomlkit.nl())
        doc.add(tomlkit.nl())
        doc.add("calibration", table)
    return tomlkit.dumps(doc)


def write_plan_text(path: Path, text: str) -> Path:
    """Replace the plan file atomically (nothing half-written under its name)."""
    return write_text_atomic(Path(path), text, what="plan file")
