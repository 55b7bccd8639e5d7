"""What the commands print: consoles, word-wrapped lines that never split a number, and ``--json``.

Text goes through rich consoles that are never forced wide nor forced into colour, so the terminal
width (or ``COLUMNS``, or 80 when stdout is not a terminal) and ``NO_COLOR`` are honoured. Lines are
wrapped here at spaces only (never inside a word, so never inside a number) and then printed
without rich's own wrapping. With ``--json`` a command prints exactly one JSON document on stdout;
every message goes to stderr.
"""

from __future__ import annotations

import json
import math
import textwrap
from typing import Any

import click


def stdout_console(quiet: bool = False):
    """A console on stdout: terminal width (``COLUMNS``; 80 when not a terminal), colour per ``NO_COLOR``."""
    from rich.console import Console

    return Console(highlight=False, quiet=quiet)


def stderr_console(quiet: bool = False):
    """A console on stderr for messages and progress."""
    from rich.console import Console

    return Console(stderr=True, highlight=False, quiet=quiet)


def wrap(text: str, width: int, indent: str = "  ") -> list[str]:
    """Split *text* into lines of at most *width* characters, breaking at spaces only.

    A word longer than the width (a long path) stays whole on its own line; numbers are never cut.
    """
    width = max(int(width), 20)
    return textwrap.wrap(text, width=width, subsequent_indent=indent, break_long_words=False,
                         break_on_hyphens=False) or [""]


def print_wrapped(con, text: str, *, prefix: str = "", style: str | None = None,
                  prefix_style: str | None = None) -> None:
    """Print *prefix* + *text* wrapped to the console's width, styling the prefix and/or the text."""
    from rich.text import Text

    for i, ln in enumerate(wrap(prefix + text, con.width)):
        t = Text(ln, style=style or "")
        if i == 0 and prefix and prefix_style:
            t.stylize(prefix_style, 0, len(prefix))
        con.print(t, soft_wrap=True)


def plain(v: Any) -> Any:
    """JSON-ready copy of *v*: NaN and infinities become null, numpy scalars plain numbers."""
    if isinstance(v, dict):
        return {str(k): plain(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [plain(x) for x in v]
    if hasattr(v, "item") and not isinstance(v, str | bytes):
        try:
            v = v.item()
        except (TypeError, ValueError):
            pass
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def echo_json(doc: Any) -> None:
    """Print *doc* as one JSON document on stdout (and nothing else there)."""
    click.echo(json.dumps(plain(doc), indent=2, ensure_ascii=False, allow_nan=False, default=str))


def json_option(help_text: str):
    """The ``--json`` flag: one JSON document on stdout, messages on stderr."""
    return click.option("--json", "as_json", is_flag=True, help=help_text)
