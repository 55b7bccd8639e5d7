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
EXIT_INTERRUPTED = 130


def _fail(lines: list[str], code: int = EXIT_INPUT) -> None:
    for ln in lines:
        click.echo(f"error: {ln}", err=True)
    sys.exit(code)


def problem_lines(exc) -> list[str]:
    """The one-line messages of a library error: one per problem (a ProblemList ends with its count)."""
    from courseplan.errors import ObservationError, ProblemList

    if isinstance(exc, ProblemList):
        lines = []
        for p in exc.problems:
            lines += (p.problems if isinstance(p, ObservationError) and p.problems else [p.line()])
        return lines + [exc.line()]
    if isinstance(exc, ObservationError):
        return exc.problems or [exc.line()]
    return [exc.line()]


def guarded(fn):
    """Turn library errors into one line each and a non-zero exit (tracebacks only with --debug)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        debug = kwargs.get("debug", False)
        from courseplan.errors import CourseplanError

        try:
            return fn(*args, **kwargs)
        except CourseplanError as exc:
            if debug:
                raise
            _fail(problem_lines(exc))
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
