"""Errors that carry their place.

Every problem with a user's input becomes a :class:`Problem` (file, line, message, hint).
Readers collect problems instead of stopping at the first one; a stage that finds any raises
one :class:`AtlasError` holding all of them, and the command line prints them as
``file:line: message`` and exits 1. Nothing else is allowed to escape to the user.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from dataclasses import dataclass, field

EXIT_OK = 0
EXIT_INPUT = 1
EXIT_USAGE = 2


@dataclass(frozen=True, order=True)
class Problem:
    """One thing wrong with the input, or worth a warning."""

    file: str
    line: int | None
    message: str
    hint: str = ""
    level: str = "error"  # "error" or "warning"

    def format(self) -> str:
        place = self.file if self.line is None else f"{self.file}:{self.line}"
        text = f"{place}: {self.message}"
        if self.level == "warning":
            text = f"{place}: warning: {self.message}"
        if self.hint:
            text += f" ({self.hint})"
        return text


class AtlasError(Exception):
    """Bad input: one or more problems, all reported at once."""

    exit_code = EXIT_INPUT

    def __init__(self, problems: Iterable[Problem] | Problem | str):
        if isinstance(problems, str):
            problems = [Problem("atlas", None, problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = sorted(set(problems), key=_problem_order)
        super().__init__("\n".join(p.format() for p in self.problems))


class UsageError(AtlasError):
    """The command was called wrongly (exit code 2)."""

    exit_code = EXIT_USAGE


def _problem_order(p: Problem) -> tuple:
    return (p.file, p.line or 0, p.message)


@dataclass
class Problems:
    """A collector: readers add to it, a stage raises once at its end."""

    items: list[Problem] = field(default_factory=list)

    def error(self, file: str, line: int | None, message: str, hint: str = "") -> None:
        self.items.append(Problem(str(file), line, message, hint, "error"))

    def warn(self, file: str, line: int | None, message: str, hint: str = "") -> None:
        self.items.append(Problem(str(file), line, message, hint, "warning"))

    def extend(self, other: Problems | Iterable[Problem]) -> None:
        self.items.extend(other.items if isinstance(other, Problems) else other)

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.items if p.level == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return sorted(set(p for p in self.items if p.level == "warning"), key=_problem_order)

    def raise_if_any(self) -> None:
        if self.errors:
            raise AtlasError(self.errors)


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """A hint naming the closest known ids, or an empty string.

    >>> did_you_mean("lamp-07", ["lamp-01", "lamp-070", "bowl-07"])
    'did you mean lamp-070 or lamp-01?'
    """
    close = difflib.get_close_matches(word, sorted(set(choices)), n=3, cutoff=0.75)
    if not close:
        return ""
    return "did you mean " + " or ".join(close) + "?"
