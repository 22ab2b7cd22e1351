"""Located problems in a study's input, and the exception that carries them.

Every check in the readers appends a :class:`Problem` instead of raising at the first one,
so a user sees all that is wrong with a study in one go. A problem says *where* (file, line
or sheet row, run id, column), *what was found* and *what was expected*.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field


def place_text(file=None, sheet=None, line=None, row=None, key=None, run=None,
               column=None) -> str:
    """The one wording of a place: file, sheet, line, row, key, run and column joined by
    commas, each part left out when empty (Problem.where and tables.Location use it)."""
    parts: list[str] = [file] if file else []
    if sheet:
        parts.append(f"sheet {sheet!r}")
    if line is not None:
        parts.append(f"line {line}")
    if row is not None:
        parts.append(f"row {row}")
    if key is not None:
        parts.append(f"key {key!r}")
    if run is not None:
        parts.append(f"run {run!r}")
    if column is not None:
        parts.append(f"column {column!r}")
    return ", ".join(parts)


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
        return place_text(self.file, self.sheet, self.line, self.row,
                          self.key, self.run, self.column)

    def __str__(self) -> str:
        return f"{self.severity}: {self.text()}"

    def text(self) -> str:
        """The located message without its severity (where a list already says which)."""
        where = self.where()
        text = f"{where}: " if where else ""
        text += self.message
        if self.found is not None:
            text += f"; found {self.found!r}"
        if self.expected is not None:
            text += f"; expected {self.expected}"
        return text

    def to_dict(self) -> dict:
        return {k: v for k, v in asdict(self).items() if v is not None}


def grouped_lines(problems) -> list[str]:
    """The problems as lines, one per problem, except that warnings saying the same thing
    about several runs of one file and column become one line listing every run (with its
    line or row and what was found there), at the place of the first.

    Errors stay one per line: each must be fixed where it is.

    >>> w = [Problem("recovery above 100 %", file="r.csv", line=n, run=r, column="found",
    ...              found=f, expected="at most 100 %", severity="warning")
    ...      for n, r, f in ((3, "R2", "102 %"), (5, "R4", "104 %"))]
    >>> print(grouped_lines(w)[0])  # doctest: +NORMALIZE_WHITESPACE
    warning: r.csv, column 'found': recovery above 100 % in 2 runs: R2 (line 3, found '102 %'),
    R4 (line 5, found '104 %'); expected at most 100 %
    """
    def key(p: Problem):
        if p.severity != "warning" or p.run is None:
            return None
        return (p.file, p.sheet, p.column, p.key, p.message, p.expected)

    groups: dict = {}
    for p in problems:
        k = key(p)
        if k is not None:
            groups.setdefault(k, []).append(p)
    out: list[str] = []
    for p in problems:
        k = key(p)
        same = groups.get(k) if k is not None else None
        if not same or len(same) == 1:
            out.append(str(p))
            continue
        if same[0] is not p:
            continue
        head = Problem(p.message, file=p.file, sheet=p.sheet, column=p.column, key=p.key,
                       severity=p.severity)
        runs = []
        for q in same:
            at = ", ".join(x for x in (f"line {q.line}" if q.line is not None else "",
                                       f"row {q.row}" if q.row is not None else "",
                                       f"found {q.found!r}" if q.found is not None else "") if x)
            runs.append(f"{q.run}" + (f" ({at})" if at else ""))
        text = f"{head.severity}: {head.where()}: {p.message} in {len(same)} runs: " \
            + ", ".join(runs)
        if p.expected is not None:
            text += f"; expected {p.expected}"
        out.append(text)
    return out


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


def count_errors(problems) -> int:
    """How many of ``problems`` are errors (the rest are warnings)."""
    return sum(p.severity == "error" for p in problems)


class StudyError(Exception):
    """A study could not be read; ``problems`` lists every located error (and warning)."""

    def __init__(self, problems: list[Problem], study: str | None = None):
        self.problems = list(problems)
        self.study = study
        n = count_errors(self.problems)
        head = f"study {study!r}: " if study else ""
        super().__init__(f"{head}{n} error(s)\n" + "\n".join(str(p) for p in self.problems))
