"""cli layer.

:func:`run` is the ``courseplan`` program: it loads the commands under a guard so that Ctrl-C
while the modules load gives the one ``interrupted`` line (exit 130), not a traceback.
"""


def run() -> None:
    """Load the command line and run it (see :func:`courseplan.cli.main.entry`)."""
    import sys

    try:
        from courseplan.cli.main import entry
    except KeyboardInterrupt:
        sys.stderr.write("interrupted: nothing was written\n")
        sys.exit(130)
    entry()
