"""Exception hierarchy of xcheck.

Every error a user can cause derives from :class:`XcheckError`. The command line
turns any of them into one paragraph on stderr and exit status 2, with no traceback.
Messages name the input (file, key, line or column), the offending value and what
was expected, and say how to fix it.
"""

from __future__ import annotations

from collections.abc import Iterable


class XcheckError(Exception):
    """Base class of every error xcheck reports to a user."""


class ValueParseError(XcheckError):
    """A value such as ``4.7u`` or ``10meg`` could not be read."""


class _ProblemList(XcheckError):
    """An error that carries every problem found in one input, not just the first."""

    #: Word used in the summary line ("fixture", "trace", ...).
    subject = "input"

    def __init__(self, source: str, problems: Iterable[str]) -> None:
        self.source = str(source)
        self.problems: tuple[str, ...] = tuple(problems)
        if not self.problems:
            raise ValueError("an error needs at least one problem")
        super().__init__(self._render())

    def _render(self) -> str:
        count = len(self.problems)
        head = (
            f"{self.source}: {count} problem{'s' if count != 1 else ''} "
            f"in this {self.subject}"
        )
        return head + ": " + " ".join(
            f"({i}) {p.rstrip('.')}." for i, p in enumerate(self.problems, 1)
        )


class FixtureError(_ProblemList):
    """A fixture description is malformed; ``problems`` lists every problem found."""

    subject = "fixture"


class TraceError(_ProblemList):
    """A measured trace or peak table cannot be used; ``problems`` lists why."""

    subject = "trace"


class SimulationError(XcheckError):
    """ngspice or another engine failed, hung, or is not installed."""


class FitError(XcheckError):
    """A fit could not even be set up (a failed convergence is a result, not this)."""
