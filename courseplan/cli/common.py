"""What every command shares: exit codes, the one error path (``guarded``) and ``--debug``.

Library errors become ``error: …`` on one line each on stderr and exit code 2 (bad input); Ctrl-C
gives one ``interrupted`` line and 130; anything else is a bug: one line, exit 1, and the traceback
only with ``--debug``.  SIGTERM and SIGHUP (a closed terminal, a stopped service) are turned into
Ctrl-C while a command runs, so they clean up the same way: nothing half-written, no lock left.
"""

from __future__ import annotations

import functools
import signal
import sys
import threading

import click

EXIT_INPUT = 2
EXIT_SHORTFALL = 3
"""`plan` wrote its outputs but the crews cannot do the plan in time; `check` found that."""
EXIT_INTERRUPTED = 130


def _fail(lines: list[str], code: int = EXIT_INPUT) -> None:
    for ln in lines:
        click.echo(f"error: {ln}", err=True)
    sys.exit(code)


INTERRUPTED_LINE = "interrupted: nothing was written"

#: The signals handled like Ctrl-C (those this platform has).
CLEAN_UP_SIGNALS = tuple(getattr(signal, n) for n in ("SIGTERM", "SIGHUP") if hasattr(signal, n))


def _as_interrupt(signum, _frame):
    raise KeyboardInterrupt(f"signal {signum}")


def install_signal_handlers() -> dict:
    """Make SIGTERM and SIGHUP raise :class:`KeyboardInterrupt`; return the previous handlers.

    Only the main thread may set handlers; elsewhere nothing changes (an empty dict is returned).
    """
    if threading.current_thread() is not threading.main_thread():
        return {}
    old = {}
    for sig in CLEAN_UP_SIGNALS:
        try:
            old[sig] = signal.signal(sig, _as_interrupt)
        except (OSError, ValueError):  # not allowed here
            pass
    return old


def restore_signal_handlers(old: dict) -> None:
    """Put back the handlers :func:`install_signal_handlers` replaced."""
    for sig, h in old.items():
        try:
            signal.signal(sig, h if h is not None else signal.SIG_DFL)
        except (OSError, ValueError, TypeError):
            pass


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
        old = install_signal_handlers()
        try:
            return _call(fn, args, kwargs, debug)
        finally:
            restore_signal_handlers(old)

    return wrapper


def _call(fn, args, kwargs, debug):
    """Run one command, turning errors into lines and exit codes."""
    from courseplan.errors import CourseplanError

    try:
        return fn(*args, **kwargs)
    except CourseplanError as exc:
        if debug:
            raise
        _fail(problem_lines(exc))
    except KeyboardInterrupt:
        click.echo(INTERRUPTED_LINE, err=True)
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


def debug_option(f):
    """The ``--debug`` flag every command takes (tracebacks instead of one-line errors)."""
    return click.option("--debug", is_flag=True, help="Show tracebacks.")(f)

