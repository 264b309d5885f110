"""The error class for user mistakes and the warning class for numerical trouble."""

from __future__ import annotations

__all__ = ["FilterFileError", "QuantizationWarning"]


class FilterFileError(ValueError):
    """A mistake in a filter file or in the options given to a command.

    The message names the file (when there is one), the field and the problem, so the
    command line can print it as one line and exit with status 2.
    """

    def __init__(self, problem: str, *, source: str | None = None, field: str | None = None):
        self.source = source
        self.field = field
        self.problem = problem
        where = ": ".join(p for p in (source, field) if p)
        super().__init__(f"{where}: {problem}" if where else problem)


class QuantizationWarning(UserWarning):
    """Numerical trouble: poles pushed toward the unit circle, lost precision, overflow."""
