"""What every command shares: exit codes, the one error path (``guarded``) and ``--debug``.

Library errors become ``error: …`` on one line each on stderr and exit code 2 (bad input); Ctrl-C
gives one ``interrupted`` line and 130; anything else is a bug: one line, exit 1, and the traceback
only with ``--debug``.
"""

from __future__ import annotations

import functools
import sys

import click

EXIT_INPUT = 2
EXIT_SHORTFALL = 3
"""`plan` wrote its outputs but the crews cannot do the plan in time; `check` found that."""
EXIT_INTERRUPTED = 130


def _fail(lines: list[str], code: int = EXIT_INPUT) -> None:
    for ln in lines:
        click.echo(f"error: {ln}", err=True)
    sys.exit(code)


def guarded(fn):
    """Turn library errors into one line each and a non-zero exit (tracebacks only with --debug)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        debug = kwargs.get("debug", False)
        from courseplan.errors import CourseplanError, ObservationError, ProblemList

        try:
            return fn(*args, **kwargs)
        except ProblemList as exc:
            if debug:
                raise
            lines = []
            for p in exc.problems:
                lines += (p.problems if isinstance(p, ObservationError) and p.problems else [p.line()])
            _fail(lines + [exc.line()])
        except ObservationError as exc:
            if debug:
                raise
            _fail(exc.problems or [exc.line()])
        except CourseplanError as exc:
            if debug:
                raise
            _fail([exc.line()])
        except KeyboardInterrupt:
            click.echo("interrupted: nothing was written", err=True)
            sys.exit(EXIT_INTERRUPTED)
        except click.exceptions.Exit:
            raise
        except (click.ClickException, click.Abort):
            raise
        except Exception as exc:  # a bug: say so plainly
            if debug:
                raise
            _fail([f"internal error {type(exc).__name__}: {exc} (run again with --debug for the traceback "
                   "and please report it)"], code=1)

    return wrapper


def debug_option(f):
    """The ``--debug`` flag every command takes (tracebacks instead of one-line errors)."""
    return click.option("--debug", is_flag=True, help="Show tracebacks.")(f)
