"""Command line: ``courseplan plan | check | sun | agents | calibrate | replan | ledger``.

A thin layer: parse, build settings, call one library function (:mod:`courseplan.api`), print.
Every command shares one error path (:mod:`courseplan.cli.common`): ``error: …`` on one line, exit
code 2 for bad input, ``--debug`` for a traceback.  Heavy imports happen inside the commands so
that ``courseplan --help`` is instant.
"""

from __future__ import annotations

import sys

import click

from courseplan.cli.agents import agents_command
from courseplan.cli.calibrate import calibrate_command
from courseplan.cli.common import (
    EXIT_INTERRUPTED,
    INTERRUPTED_LINE,
    install_signal_handlers,
    restore_signal_handlers,
)
from courseplan.cli.ledger import ledger_command
from courseplan.cli.plan import check_command, plan_command
from courseplan.cli.replan import replan_command
from courseplan.cli.sun import sun_command


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="courseplan")
def main() -> None:
    """Plan salt hardening of a wet race course, zone by zone.

    Reads a course outline and a sun/shade raster (or a terrain model), splits the course into
    zones, doses each from a cold balance, and writes the order, an offline map, a GeoPackage and
    crew sheets. Planning figures only: the product safety data sheet, local rules, the race jury
    and licensed practice decide.
    """


for _cmd in (plan_command, check_command, sun_command, agents_command, calibrate_command, replan_command,
             ledger_command):
    main.add_command(_cmd)


def entry(argv=None) -> None:
    """The ``courseplan`` program: the click group, with Ctrl-C before any command starts (while the
    modules load or the arguments are parsed) also one ``interrupted`` line and exit 130.
    """
    old = install_signal_handlers()
    try:
        rv = main.main(args=argv, prog_name="courseplan", standalone_mode=False)
    except (KeyboardInterrupt, click.Abort):
        click.echo(INTERRUPTED_LINE, err=True)
        sys.exit(EXIT_INTERRUPTED)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    finally:
        restore_signal_handlers(old)
    sys.exit(rv if isinstance(rv, int) else 0)
