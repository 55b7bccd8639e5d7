"""Error classes of courseplan.

Every error the library raises on purpose derives from :class:`CourseplanError`, and each
subclass also inherits the built-in exception it refines, so callers can catch either.
Messages are one line: *what* is wrong, *where*, and *how to fix it*.  Code never branches on
message text; use the class and the attributes instead.
"""

from __future__ import annotations


class CourseplanError(Exception):
    """Root of all deliberate courseplan errors.

    Parameters
    ----------
    what
        What is wrong, with the offending values.
    where
        The file, key, line or layer concerned (optional).
    fix
        How to fix it (optional).
    """

    def __init__(self, what: str, *, where: str | None = None, fix: str | None = None):
        self.what = what
        self.where = where
        self.fix = fix
        super().__init__(self.line())

    def line(self) -> str:
        """Return the one-line message ``where: what; fix``."""
        text = self.what.rstrip(".")
        if self.where:
            text = f"{self.where}: {text}"
        if self.fix:
            fix = self.fix.rstrip(".")
            text = f"{text}. Fix: {fix}" + ("" if fix.endswith(("?", "!")) else ".")
        else:
            text = f"{text}."
        return " ".join(text.split())


def did_you_mean(name: str, valid: list[str]) -> str:
    """A fix hint for an unknown name: the nearest valid one, else the list of valid ones."""
    import difflib

    near = difflib.get_close_matches(name, valid, n=1, cutoff=0.5)
    return f"did you mean {near[0]!r}?" if near else "valid keys: " + ", ".join(valid)


class InputError(CourseplanError, ValueError):
    """An input file or value cannot be used as it is."""


class MissingInputError(InputError, FileNotFoundError):
    """An input file does not exist or cannot be read."""


class GeometryError(InputError):
    """A course or zone geometry is missing, ambiguous or invalid."""


class CRSError(InputError):
    """A coordinate reference system is missing, unknown or contradicts the coordinates."""


class OverlapError(InputError):
    """A raster does not cover the course (enough)."""


class ObservationError(InputError):
    """One or more rows of a field-observation file are invalid."""

    def __init__(self, what: str, *, where: str | None = None, fix: str | None = None,
                 problems: list[str] | None = None):
        self.problems = list(problems or [])
        super().__init__(what, where=where, fix=fix)


class SettingsError(CourseplanError, ValueError):
    """A plan-file key or setting is unknown, of the wrong type, or out of range."""


class AgentError(SettingsError, KeyError):
    """An agent name is not in the catalogue."""

    def __str__(self) -> str:  # KeyError would otherwise quote the message
        return self.line()


class OutputError(CourseplanError, OSError):
    """An output cannot be written (the folder exists, or the disk refused)."""


class ContractError(CourseplanError, RuntimeError):
    """A stage broke its declared contract (a missing or undeclared column): a bug, not bad input."""


class ProblemList(CourseplanError):
    """Several problems found at once (``courseplan check``).

    Parameters
    ----------
    problems
        The individual errors, each with its own one-line message.
    """

    def __init__(self, problems: list[CourseplanError]):
        self.problems = list(problems)
        n = len(self.problems)
        super().__init__(f"{n} problem{'s' if n != 1 else ''} found",
                         fix="see the lines above")


class SettingsProblems(ProblemList, SettingsError):
    """Several bad plan-file keys or values found in one pass (every one is reported, not the first)."""

    @classmethod
    def raise_all(cls, problems: list[SettingsError]) -> None:
        """Raise nothing, the one problem itself, or all of them (nested lists flattened) at once."""
        flat: list[CourseplanError] = []
        for p in problems:
            flat += p.problems if isinstance(p, ProblemList) else [p]
        if len(flat) == 1:
            raise flat[0]
        if flat:
            raise cls(flat)
