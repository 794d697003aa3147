"""One exception family for user mistakes; the CLI catches only these."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Problem:
    """One problem in a user's input: where it is, what was found, what is allowed."""

    where: str  # "file:key.path" or "file:line"
    message: str

    def __str__(self) -> str:
        return f"{self.where}: {self.message}"


class BuildsheetError(Exception):
    """Base for every error caused by the user's input or environment (exit code 1)."""

    def __init__(self, problems: list[Problem] | str):
        if isinstance(problems, str):
            problems = [Problem("buildsheet", problems)]
        self.problems: list[Problem] = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))


class SpecError(BuildsheetError):
    """The spec file is malformed or invalid."""


class BuildError(BuildsheetError):
    """The packet could not be built (e.g. no resonance found, output not writable)."""


class RecordError(BuildsheetError):
    """A problem with the element record store or a record command."""


class UsageError(BuildsheetError):
    """The command line itself is wrong (a missing or conflicting option): exit code 2."""
