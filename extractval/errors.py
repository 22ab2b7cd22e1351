"""Located problems in a study's input, and the exception that carries them.

Every check in the readers appends a :class:`Problem` instead of raising at the first one,
so a user sees all that is wrong with a study in one go. A problem says *where* (file, line
or sheet row, run id, column), *what was found* and *what was expected*.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field


@dataclass(frozen=True)
class Problem:
    """One located finding about a study's input.

    ``severity`` is ``"error"`` (the study cannot be fitted) or ``"warning"`` (it can, but a
    person should look). ``line`` is a 1-based text line (CSV, YAML) and ``row`` a 1-based
    sheet row (XLSX/ODS); at most one of them is set. ``key`` is the dotted path of a
    study.yaml key (``targets.recovery_pct``, ``procedures[2].pH``) when the problem is about one.
    """

    message: str
    file: str | None = None
    line: int | None = None
    row: int | None = None
    sheet: str | None = None
    run: str | None = None
    column: str | None = None
    found: str | None = None
    expected: str | None = None
    severity: str = "error"
    key: str | None = None

    def where(self) -> str:
        """The place, e.g. ``studies/s1/runs.csv, line 5, run R3, column pH``."""
        parts: list[str] = []
        if self.file:
            parts.append(self.file)
        if self.sheet:
            parts.append(f"sheet {self.sheet!r}")
        if self.line is not None:
            parts.append(f"line {self.line}")
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.key is not None:
            parts.append(f"key {self.key!r}")
        if self.run is not None:
            parts.append(f"run {self.run!r}")
        if self.column is not None:
            parts.append(f"column {self.column!r}")
        return ", ".join(parts)

    def __str__(self) -> str:
        text = f"{self.severity}: "
        where = self.where()
        if where:
            text += f"{where}: "
        text += self.message
        if self.found is not None:
            text += f"; found {self.found!r}"
        if self.expected is not None:
            text += f"; expected {self.expected}"
        return text

    def to_dict(self) -> dict:
        return {k: v for k, v in asdict(self).items() if v is not None}


@dataclass
class ProblemList:
    """An ordered collection of problems, filled by the readers as they go."""

    items: list[Problem] = field(default_factory=list)

    def error(self, message: str, **where) -> None:
        self.items.append(Problem(message, severity="error", **where))

    def warning(self, message: str, **where) -> None:
        self.items.append(Problem(message, severity="warning", **where))

    def extend(self, other: "ProblemList | list[Problem]") -> None:
        self.items.extend(other.items if isinstance(other, ProblemList) else other)

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.items if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.items if p.severity == "warning"]

    def __bool__(self) -> bool:
        return bool(self.items)

    def __iter__(self):
        return iter(self.items)

    def __len__(self) -> int:
        return len(self.items)


class StudyError(Exception):
    """A study could not be read; ``problems`` lists every located error (and warning)."""

    def __init__(self, problems: list[Problem], study: str | None = None):
        self.problems = list(problems)
        self.study = study
        n = sum(p.severity == "error" for p in self.problems)
        head = f"study {study!r}: " if study else ""
        super().__init__(f"{head}{n} error(s)\n" + "\n".join(str(p) for p in self.problems))
