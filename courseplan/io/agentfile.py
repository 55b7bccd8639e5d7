"""Read a user's agents TOML file into a mapping for :func:`courseplan.agents.catalogue`.

The file holds one table per agent (see :mod:`courseplan.agents` for the keys)::

    ["sea salt"]
    base = "NaCl"
    purity = 0.85
    sources = { purity = "practice: supplier data sheet 2026" }

This module only parses and checks the shape; the catalogue validates keys and values.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from courseplan.errors import AgentError, MissingInputError

__all__ = ["read_agents_file", "load_catalogue"]


def read_agents_file(path: str | Path) -> dict[str, Any]:
    """Parse an agents TOML file.

    Parameters
    ----------
    path
        The TOML file.

    Returns
    -------
    dict
        Agent name → table of fields (an ``[agents]`` wrapper table is unwrapped).

    Raises
    ------
    MissingInputError
        The file does not exist.
    AgentError
        The file is not valid TOML, or a top-level entry is not a table.
    """
    p = Path(path)
    if not p.is_file():
        raise MissingInputError(f"agents file {p} does not exist", where="[inputs] agents",
                                fix="check the path (relative paths start at the plan file's folder)")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8-sig"))
    except tomllib.TOMLDecodeError as exc:
        raise AgentError(f"not valid TOML: {exc}", where=str(p),
                         fix='write one table per agent, e.g. ["sea salt"] then key = value lines') from None
    except (OSError, UnicodeDecodeError) as exc:
        raise AgentError(f"cannot read the agents file: {exc}", where=str(p)) from None
    if set(data) == {"agents"} and isinstance(data["agents"], dict):
        data = data["agents"]
    for name, table in data.items():
        if not isinstance(table, dict):
            raise AgentError(f"top-level key {name!r} is not a table", where=str(p),
                             fix=f'put the agent\'s keys under a ["{name}"] header')
    return data


def load_catalogue(path: str | Path | None):
    """Return the catalogue with the agents file at ``path`` merged in (built-in only when None)."""
    from courseplan.agents import catalogue

    if path is None:
        return catalogue()
    return catalogue(read_agents_file(path), source=Path(path).name)
