"""The one exception tree of calcsheaf.

Every error carries structured fields (file, line, column, key, problem, fix) so
that the CLI prints one consistent message and tests can pin each field. Bad
input raises one of these; a failed integration is *not* an error but data in
the analysis results.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path


class CalcsheafError(Exception):
    """Base of every error calcsheaf reports to the user (exit code 1)."""

    def __init__(self, problem: str, *, file: str | Path | None = None,
                 line: int | None = None, column: int | None = None,
                 key: str | None = None, fix: str | None = None) -> None:
        self.problem = problem
        self.file = str(file) if file is not None else None
        self.line = line
        self.column = column
        self.key = key
        self.fix = fix
        super().__init__(self.message)

    def __reduce__(self):
        """Pickle with every field (calcs are analysed in worker processes)."""
        return (_rebuild, (type(self), dict(self.__dict__)))

    @property
    def location(self) -> str:
        """`file:line:column` as far as known."""
        parts = [self.file or "<input>"]
        if self.line is not None:
            parts.append(str(self.line))
            if self.column is not None:
                parts.append(str(self.column))
        return ":".join(parts)

    @property
    def message(self) -> str:
        text = f"{self.location}: "
        if self.key:
            text += f"{self.key}: "
        text += self.problem
        if self.fix:
            text += f" Fix: {self.fix}"
        return text

    def located(self, *, file=None, line=None, key=None) -> "CalcsheafError":
        """Fill in location fields that are still unknown; returns self."""
        if self.file is None and file is not None:
            self.file = str(file)
        if self.line is None and line is not None:
            self.line = line
        if self.key is None and key is not None:
            self.key = key
        self.args = (self.message,)
        return self


def _rebuild(cls, fields: dict) -> "CalcsheafError":
    error = cls.__new__(cls)
    error.__dict__.update(fields)
    Exception.__init__(error, error.message)
    return error


class InputError(CalcsheafError):
    """A calc file or project file is malformed (syntax, keys, types, values)."""


class ExpressionError(InputError):
    """An expression is not in the safe expression language."""


class UnitError(InputError):
    """A value's unit is unknown or does not convert."""


class DimensionError(InputError):
    """An expression is dimensionally inconsistent."""


class DerivationError(CalcsheafError):
    """The equations of motion cannot be formed (e.g. singular mass matrix)."""


class AnalysisError(CalcsheafError):
    """An analysis cannot be carried out (e.g. no equilibrium found)."""


class BuildError(CalcsheafError):
    """Writing the site failed (template, lock, output folder)."""


class ArchiveError(CalcsheafError):
    """Signing, issuing or revision handling was refused."""


class VerificationError(CalcsheafError):
    """An issued package failed verification."""


class UsageError(CalcsheafError):
    """The command line itself is wrong (exit code 2)."""


@dataclass
class ProblemList(CalcsheafError):
    """Several problems found in one pass over a file, reported together."""

    problems: list[CalcsheafError]

    def __post_init__(self) -> None:
        first = self.problems[0] if self.problems else None
        CalcsheafError.__init__(
            self, f"{len(self.problems)} problem(s)",
            file=first.file if first else None)

    @property
    def message(self) -> str:
        return "\n".join(p.message for p in self.problems)

    def __str__(self) -> str:
        return self.message
