"""Error types of kinetrace.

Every error kinetrace raises on purpose derives from :class:`KinetraceError`,
itself a :class:`ValueError`, so callers can catch the whole family at once.
Messages name the file, line, key path or tag, the bad value, and what is
allowed. Where one file or config holds several problems they are collected
and reported together (see :class:`ProblemList`).
"""

from __future__ import annotations

from dataclasses import dataclass, field


class KinetraceError(ValueError):
    """Base class of every error kinetrace raises on purpose."""


@dataclass(frozen=True)
class Problem:
    """One problem found while validating an input.

    Attributes
    ----------
    where : str
        Location: a key path (``units[0].tags[2].unit``), ``file:line`` or a tag name.
    message : str
        What is wrong and what is allowed.
    """

    where: str
    message: str

    def __str__(self) -> str:
        return f"{self.where}: {self.message}"


@dataclass
class ProblemList:
    """Collects problems so that they can be reported together."""

    problems: list[Problem] = field(default_factory=list)

    def add(self, where: str, message: str) -> None:
        self.problems.append(Problem(where, message))

    def __bool__(self) -> bool:
        return bool(self.problems)

    def __len__(self) -> int:
        return len(self.problems)


class _CollectedError(KinetraceError):
    """An error that carries a list of :class:`Problem` about one source."""

    kind = "input"

    def __init__(self, source: str, problems: list[Problem] | ProblemList):
        if isinstance(problems, ProblemList):
            problems = problems.problems
        self.source = str(source)
        self.problems: list[Problem] = list(problems)
        n = len(self.problems)
        lines = [f"{self.source}: {n} {self.kind} problem{'s' if n != 1 else ''}:"]
        lines += [f"  - {p}" for p in self.problems]
        super().__init__("\n".join(lines))


class ConfigError(_CollectedError):
    """The plant configuration is invalid; ``problems`` lists every problem with its key path."""

    kind = "configuration"


class ChemistryError(KinetraceError):
    """A reaction equation or formula cannot be parsed, or a reaction does not balance."""


class IngestError(_CollectedError):
    """Historian data cannot be read; ``problems`` names file and line or tag for each."""

    kind = "ingest"


class DataQualityError(KinetraceError):
    """The data that survived screening is not enough for a safe result."""
