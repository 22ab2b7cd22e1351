"""Study, Run, Procedure and Targets records, and :func:`load_study` that reads and validates them.

Records hold what the files say, nothing derived beyond one-line definitions (e.g. a run's
mass balance). Reading never writes into the study folder.

Reading rules
-------------
* Every problem is reported, located (file, line or sheet row, YAML key, run, column) with what
  was found and what is expected; :func:`check_study` returns them, :func:`load_study` raises
  :class:`~extractval.errors.StudyError` when one of them is an error.
* study.yaml is read with ``yaml.SafeLoader``. Unknown keys are errors (a misspelt key must
  not drop data silently), so are keys given twice. Text values are kept exactly as written:
  ``title: 2026`` is the text "2026".
* Measurement forms, row by row: a row must hold exactly one complete form among
  ``spiked`` + ``found_aqueous`` + ``found_organic`` (both phases), ``spiked`` + one found
  amount (one phase; the other found cell empty), or ``recovery_pct`` (alone, or beside the
  ``spiked`` amount it refers to, a common sheet layout). Cells of a form are filled or empty
  as a whole: a spiked amount without any found amount, or a found amount without the spiked
  one, is an error naming the cells. ``recovery_pct`` beside ``found_organic`` and ``spiked``
  must agree with 100 found_organic / spiked within the rounding of the three cells as
  written (half a unit in each one's last digit, carried through the quotient): otherwise it
  is an error, since the row cannot say which cell is wrong; when they agree the amounts are
  the run's measurement and the recovery is kept for the record. ``recovery_pct`` beside
  ``found_aqueous`` alone is two forms, an error. A table may mix forms between rows.
* A run with a reason in ``excluded`` is kept (and reported) but not fitted. It may record no
  measurement, or an incomplete one (a broken flask, a spike not recorded), but every value it
  gives is checked like any other run's, plausibility included: an exclusion reason does not
  hide a typo. A number in ``excluded`` (other than the flags below) is an error: it is not a
  reason, and in a ``,``-separated file it is the mark of cells shifted by a decimal comma; so
  is a ``replicate`` label that is a decimal number (96.5) in such a file.
* Plausibility, in percent of the spiked amount: found amounts (or recovery_pct) above 150 %
  are errors; a recovery above 100 % (recovery_pct, found_organic alone, or found_organic of
  a both-phase run) or one found amount above 100 % is a warning with its run; with both
  phases measured a mass balance outside 90-110 % is a warning.
* A ``,``-separated CSV row whose cell count differs from the header's is refused by the
  reader (see :mod:`extractval.tables`): a decimal comma there splits ``3,98`` into pH 3 and
  98 mL and shifts every later cell.
* A ``replicate`` label shared by runs at different conditions (pH further apart than
  ``replicate_pH_tolerance``, default 0.1, or other volumes) is a warning naming the runs; the
  precision groups themselves come from :func:`extractval.replicates.precision_groups`.
* ``header_row`` in study.yaml gives the line (CSV) or sheet row of the header when a title
  sits above it; without it, a header found further down is reported with that fix.
* Columns that the contract does not know are warnings (ignored), unless they look like a
  misspelling of a known column, which is an error.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import os
import re
from dataclasses import dataclass, field, replace
from pathlib import Path, PurePosixPath, PureWindowsPath
from typing import TYPE_CHECKING

import yaml

if TYPE_CHECKING:
    from .calibration_input import CalibrationSet
    from .suitability_input import SuitabilitySet
from . import method_input
from .errors import Problem, StudyError, count_errors
from .extrapolation import Span, extrapolation_problems
from .replicates import PH_TOLERANCE, precision_groups
from .tables import (EXTENSIONS, HeaderRules, Location, Table, TableRow, decode_text,
                     parse_number, read_table)

__all__ = ["MODELS", "AdviceRequest", "InputFile", "Location", "Procedure", "Run", "Study",
           "Targets", "check_study", "discover_studies", "display_path", "load_study"]

MODELS = ("neutral", "acid", "base", "ampholyte", "auto")


@dataclass(frozen=True)
class Run:
    """One shake-flask run as recorded in the runs table.

    Measurement forms: ``both`` (spiked, found_aqueous, found_organic), ``organic`` or
    ``aqueous`` (spiked and one found amount), ``recovery`` (recovery_pct in the organic phase);
    ``none`` only for an excluded run that records no found amount.
    """

    run_id: str
    pH: float
    aqueous_mL: float
    organic_mL: float
    location: Location
    spiked: float | None = None
    found_aqueous: float | None = None
    found_organic: float | None = None
    recovery_pct: float | None = None
    replicate: str | None = None
    excluded: str | None = None      # the reason, when the run is excluded from the fit
    note: str | None = None
    # instrument responses in place of found amounts (calibration_input.py); found_* then hold
    # the amounts read off the calibration, ``quantities`` how, ``censored`` why one is missing
    response_aqueous: float | None = None
    response_organic: float | None = None
    is_response_aqueous: float | None = None
    is_response_organic: float | None = None
    sequence: str | None = None
    quantities: tuple = ()
    censored: str | None = None
    #: why the run is left out of the fit: its sequence fails system suitability
    #: (suitability_input.py); None when it passes, or is not recorded
    suitability: str | None = None
    # method-validation cells (method_input.py): a run with a spike_stage is not fitted
    matrix: str | None = None
    spike_stage: str | None = None
    level: str | None = None
    day: str | None = None
    analyst: str | None = None
    instrument: str | None = None

    @property
    def measurement(self) -> str:
        # a recovery_pct beside found amounts agrees with them (checked on reading) and is
        # kept for the record: the amounts are the measurement
        if self.found_aqueous is None and self.found_organic is None:
            return "recovery" if self.recovery_pct is not None else "none"
        if self.found_aqueous is not None and self.found_organic is not None:
            return "both"
        return "organic" if self.found_organic is not None else "aqueous"

    @property
    def fitted_phase(self) -> str | None:
        """What the fit reads of the run: "both" (log D), "organic", "aqueous" or "recovery"
        (a one-phase fraction), or None when no measured amount is above zero (the run then
        sets no finite value on the log scale). Both analysis.build_observations and the
        extrapolation span (extrapolation.enters_fit) decide with it."""
        m = self.measurement
        if m == "recovery":
            return m if self.recovery_pct > 0 else None
        aq, org = self.found_aqueous or 0.0, self.found_organic or 0.0
        if m == "both" and aq > 0 and org > 0:
            return "both"
        if m in ("both", "organic") and org > 0:
            return "organic"
        if m in ("both", "aqueous") and aq > 0:
            return "aqueous"
        return None

    @property
    def volume_ratio(self) -> float:
        """Organic over aqueous volume, r = V_org / V_aq."""
        return self.organic_mL / self.aqueous_mL

    @property
    def mass_balance_pct(self) -> float | None:
        """Found over spiked, in percent, when both phases were measured; else None."""
        if self.measurement != "both" or not self.spiked:
            return None
        return 100.0 * (self.found_aqueous + self.found_organic) / self.spiked


STEP_KINDS = ("extract", "wash", "back-extract")


@dataclass(frozen=True)
class WorkupStep:
    """One step of a multi-step work-up at one pH; volumes in mL.

    ``extract``: ``aqueous_mL`` is the feed (one volume), ``organic_mL`` the fresh portions.
    ``wash`` / ``back-extract``: ``aqueous_mL`` are fresh aqueous portions shaken in turn with
    the pooled organic phase (``organic_mL`` empty); a back-extraction is the last step and
    holds the product.
    """

    kind: str
    pH: float
    aqueous_mL: tuple[float, ...]
    organic_mL: tuple[float, ...] = ()

    def __post_init__(self):
        if self.kind not in STEP_KINDS:
            raise ValueError(f"step kind must be one of {STEP_KINDS}, got {self.kind!r}")


@dataclass(frozen=True)
class Procedure:
    """A proposed extraction: one aqueous volume at one pH, then fresh organic portions in turn.

    With ``steps`` it is a multi-step work-up whose first step (the extraction) gives pH,
    aqueous_mL and organic_mL.
    """

    id: str
    label: str
    pH: float
    aqueous_mL: float
    organic_mL: tuple[float, ...]
    pH_tolerance: float = 0.2
    volume_tolerance_pct: float = 2.0
    line: int | None = None
    steps: tuple[WorkupStep, ...] = ()

    @property
    def total_organic_mL(self) -> float:
        return float(sum(self.organic_mL))


@dataclass(frozen=True)
class Targets:
    """Acceptance criteria from ``targets:``; None where the study names none."""

    recovery_pct: float | None = None
    max_rsd_pct: float | None = None
    mass_balance_pct: tuple[float, float] | None = None
    ratio_agreement_log: float | None = None
    level: str | None = None          # analyte level, e.g. "10 ppm", for AOAC limits
    #: significance level at which the lack-of-fit F test is judged; None: shown, not judged
    lack_of_fit_alpha: float | None = None
    #: purity of a work-up's product (analyte share of analyte plus impurities, %), judged at
    #: the lower 95 % end; None: purity shown, not judged
    purity_pct: float | None = None


@dataclass(frozen=True)
class AdviceRequest:
    """What ``advice:`` asks of the next-run advice; None where the study leaves the default.

    ``target`` is ``pKa`` (``pKa1``/``pKa2`` for an ampholyte), ``logK`` or a procedure id;
    ``pH_range`` the pH span the lab's buffers cover, which bounds the advised runs.
    """

    target: str | None = None
    pH_range: tuple[float, float] | None = None


@dataclass(frozen=True)
class Impurity:
    """An impurity followed through the work-ups: measured in its own runs-table columns
    (``runs``, fitted like the analyte) or with declared constants (``theta`` of ``model``,
    with their ``source``). ``amount_ratio``: its amount in the feed relative to the analyte."""

    name: str
    model: str
    runs: tuple["Run", ...] = ()
    theta: tuple[float, ...] | None = None
    source: str | None = None
    amount_ratio: float | None = None
    line: int | None = None

    @property
    def declared(self) -> bool:
        return self.theta is not None


@dataclass(frozen=True)
class InputFile:
    """An input file with its SHA-256, for provenance."""

    path: str        # display path, relative to the studies root where possible
    sha256: str
    role: str        # "study" or "runs"


@dataclass(frozen=True)
class Study:
    """Everything one study folder says, validated."""

    study_id: str
    folder: Path
    title: str
    analyte_name: str
    model: str
    runs: tuple[Run, ...]
    procedures: tuple[Procedure, ...] = ()
    targets: Targets = field(default_factory=Targets)
    ion_pair: bool = False
    system: dict = field(default_factory=dict)   # aqueous, organic, temperature_C (text/number)
    inputs: tuple[InputFile, ...] = ()
    warnings: tuple[Problem, ...] = ()            # located warnings found while reading
    advice: AdviceRequest = field(default_factory=AdviceRequest)
    impurities: tuple[Impurity, ...] = ()
    calibration: CalibrationSet | None = None   # curves, when runs give responses
    suitability: SuitabilitySet | None = None   # system suitability per sequence, when given
    #: runs with a spike_stage (method_input.py): method recovery, matrix factor, precision
    method_runs: tuple[Run, ...] = ()
    method_targets: dict = field(default_factory=dict)   # the ``method_targets:`` set
    #: pH units within which runs are replicates (replicates.py; ``replicate_pH_tolerance``)
    replicate_pH_tolerance: float = PH_TOLERANCE

    @property
    def used_runs(self) -> tuple[Run, ...]:
        return tuple(r for r in self.runs if not r.excluded)

    @property
    def excluded_runs(self) -> tuple[Run, ...]:
        return tuple(r for r in self.runs if r.excluded)



# ================================================================================================
# Reading a study folder
# ================================================================================================

#: A study id is its folder name: it goes into URLs and number identifiers.
STUDY_ID = re.compile(r"^[A-Za-z0-9_-]+$")
#: A procedure id becomes a segment of number identifiers (``<study-id>/<procedure>/...``).
PROCEDURE_ID = re.compile(r"^[A-Za-z0-9._-]+$")
STUDY_FILE = "study.yaml"

#: Plausibility of found amounts, in percent of the spiked amount (module docstring).
IMPLAUSIBLE_PCT = 150.0
MASS_BALANCE_BAND_PCT = (90.0, 110.0)
#: above it a recovery (one phase found, or recovery_pct) is more than was spiked: a warning
ONE_PHASE_HIGH_PCT = 100.0

_KEYS = {
    "": ("title", "analyte", "system", "runs", "sheet", "header_row", "replicate_pH_tolerance",
         "targets", "procedures", "advice", "impurities", "calibration", "suitability",
         "suitability_limits", "method_targets"),
    "analyte": ("name", "model", "ion_pair", "level"),
    "system": ("aqueous", "organic", "temperature_C"),
    "targets": ("recovery_pct", "max_rsd_pct", "mass_balance_pct", "ratio_agreement_log",
                "level", "lack_of_fit_alpha", "purity_pct"),
    "procedure": ("id", "label", "pH", "aqueous_mL", "organic_mL", "pH_tolerance",
                  "volume_tolerance_pct", "steps"),
    "advice": ("target", "pH_range"),
    "step": ("kind", "pH", "aqueous_mL", "organic_mL"),
    "impurity": ("name", "model", "logK", "pKa", "pKa1", "pKa2", "source", "amount_ratio"),
}

#: Runs-table columns: normalised name -> the spelling used in messages and in this contract.
COLUMNS = {
    "run": "run", "ph": "pH", "aqueous_ml": "aqueous_mL", "organic_ml": "organic_mL",
    "spiked": "spiked", "found_aqueous": "found_aqueous", "found_organic": "found_organic",
    "recovery_pct": "recovery_pct", "replicate": "replicate", "excluded": "excluded",
    "note": "note",
    # instrument responses in place of found amounts, and the sequence whose calibration applies
    "response_aqueous": "response_aqueous", "response_organic": "response_organic",
    "is_response_aqueous": "is_response_aqueous", "is_response_organic": "is_response_organic",
    "sequence": "sequence",
    # method validation (method_input.py)
    "matrix": "matrix", "spike_stage": "spike_stage", "level": "level", "day": "day",
    "analyst": "analyst", "instrument": "instrument",
}
REQUIRED_COLUMNS = ("run", "ph", "aqueous_ml", "organic_ml")
AMOUNT_COLUMNS = ("spiked", "found_aqueous", "found_organic")
#: An ``excluded`` cell holds a reason; these read like a "keep" flag and are refused.
_KEEP_FLAGS = {"no", "n", "false", "0", "-", "keep", "included"}
_BARE_FLAGS = {"yes", "y", "true", "1", "x"}


def display_path(path) -> str:
    """``path`` relative to the working directory when it lies below it, else as given.

    >>> display_path(Path.cwd() / "studies" / "s1" / "runs.csv")
    'studies/s1/runs.csv'
    """
    p = Path(path)
    try:
        return Path(os.path.abspath(p)).relative_to(Path.cwd()).as_posix()
    except ValueError:
        return str(p)


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _suggest(word: str, allowed) -> str:
    close = difflib.get_close_matches(word, list(allowed), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


class _Yaml:
    """Typed access to a composed study.yaml, reporting every problem with its line."""

    def __init__(self, file: str, problems: list[Problem]):
        self.file = file
        self.problems = problems
        self._loader = yaml.SafeLoader("")
        self._key_line: dict[int, int] = {}   # id(value node) -> line of its key

    @staticmethod
    def line(node) -> int:
        return node.start_mark.line + 1

    def report(self, message: str, node, key: str | None, severity: str = "error",
               **kw) -> None:
        self.problems.append(Problem(message, file=self.file, line=self.line(node), key=key or None,
                                     severity=severity, **kw))

    def construct(self, node, key: str):
        try:
            return self._loader.construct_object(node, deep=True)
        except yaml.YAMLError as exc:
            self.report(f"this value cannot be read: {getattr(exc, 'problem', exc)}", node, key,
                        found=getattr(node, "value", None) if isinstance(node, yaml.ScalarNode)
                        else None, expected="a plain YAML value")
            return _BAD

    def mapping(self, node, key: str, allowed: tuple[str, ...],
                what: str) -> dict[str, tuple] | None:
        """{name: (key_node, value_node)}; unknown, duplicate and non-text keys reported."""
        if not isinstance(node, yaml.MappingNode):
            self.report(f"{what} must be a mapping of keys to values", node, key,
                        found=_node_kind(node), expected="keys: " + ", ".join(allowed))
            return None
        entries: dict[str, tuple] = {}
        for k_node, v_node in node.value:
            name = k_node.value if isinstance(k_node, yaml.ScalarNode) else None
            path = f"{key}.{name}" if key else str(name)
            if name is None or k_node.tag != "tag:yaml.org,2002:str":
                self.report(f"a key in {what} is not a name", k_node, key,
                            found=name if name is not None else _node_kind(k_node),
                            expected="one of " + ", ".join(allowed))
                continue
            if name not in allowed:
                self.report(f"unknown key {name!r} in {what}{_suggest(name, allowed)}; a "
                            "misspelt key would silently drop data, so it is refused", k_node,
                            path, found=name, expected="one of " + ", ".join(allowed))
                continue
            if name in entries:
                self.report(f"key {name!r} appears twice in {what} (YAML would keep only the "
                            f"last; the first is on line {self.line(entries[name][0])})", k_node,
                            path, found=name, expected="each key once")
                continue
            entries[name] = (k_node, v_node)
            self._key_line[id(v_node)] = self.line(k_node)
        return entries

    def missing(self, node, key: str, name: str, expected: str) -> None:
        """Reported on the line of the mapping's own key (``analyte:``), else where it starts."""
        line = self._key_line.get(id(node), self.line(node))
        self.problems.append(Problem(f"missing key {name!r}", file=self.file, line=line,
                                     key=f"{key}.{name}" if key else name, expected=expected))

    def value_node(self, entries, node, key: str, name: str, required: bool,
                   expected: str):
        """The value node of ``name``, or None when it is absent or null (then reported as
        missing where ``required``)."""
        if name not in entries or _is_null(entries[name][1]):
            if required:
                self.missing(node if name not in entries else entries[name][1], key, name,
                             expected)
            return None
        return entries[name][1]

    def text(self, entries, node, key: str, name: str, *, required: bool = True,
             expected: str = "text") -> str | None:
        """A text value exactly as written (``title: 2026`` is the text '2026')."""
        path = f"{key}.{name}" if key else name
        v_node = self.value_node(entries, node, key, name, required, expected)
        if v_node is None:
            return None
        if not isinstance(v_node, yaml.ScalarNode):
            self.report(f"{name!r} must be text", v_node, path, found=_node_kind(v_node),
                        expected=expected)
            return None
        if v_node.value.strip() == "":
            if required:
                self.report(f"{name!r} is empty", v_node, path, found="", expected=expected)
            return None
        return v_node.value

    def number(self, entries, node, key: str, name: str, *, required: bool = True,
               check=None, expected: str = "a number") -> float | None:
        """A finite number; ``check(value)`` returns None or the expectation it misses."""
        path = f"{key}.{name}" if key else name
        v_node = self.value_node(entries, node, key, name, required, expected)
        if v_node is None:
            return None
        return self._number_node(v_node, path, name, check, expected)

    def _number_node(self, v_node, path: str, name: str, check, expected: str) -> float | None:
        value = self.construct(v_node, path) if isinstance(v_node, yaml.ScalarNode) else _BAD
        if value is _BAD and not isinstance(v_node, yaml.ScalarNode):
            self.report(f"{name!r} must be a number", v_node, path, found=_node_kind(v_node),
                        expected=expected)
            return None
        if value is _BAD:
            return None
        if isinstance(value, str) and v_node.style is None:
            value = parse_number(value) if parse_number(value) is not None else value
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            quoted = " (without quotes)" if v_node.style in ("'", '"') else ""
            self.report(f"{name!r} must be a number", v_node, path, found=v_node.value,
                        expected=expected + quoted)
            return None
        value = float(value)
        if check is not None:
            miss = check(value)
            if miss:
                self.report(f"{name!r} is out of range", v_node, path, found=v_node.value,
                            expected=miss)
                return None
        return value

    def boolean(self, entries, key: str, name: str, default: bool) -> bool:
        path = f"{key}.{name}" if key else name
        if name not in entries or _is_null(entries[name][1]):
            return default
        v_node = entries[name][1]
        value = self.construct(v_node, path) if isinstance(v_node, yaml.ScalarNode) else _BAD
        if not isinstance(value, bool):
            self.report(f"{name!r} must be true or false", v_node, path,
                        found=v_node.value if isinstance(v_node, yaml.ScalarNode)
                        else _node_kind(v_node), expected="true or false")
            return default
        return value


_BAD = object()


def _is_null(node) -> bool:
    return isinstance(node, yaml.ScalarNode) and node.tag == "tag:yaml.org,2002:null"


def _node_kind(node) -> str:
    if isinstance(node, yaml.MappingNode):
        return "a mapping"
    if isinstance(node, yaml.SequenceNode):
        return "a list"
    return repr(node.value) if isinstance(node, yaml.ScalarNode) else type(node).__name__


def _positive(value: float) -> str | None:
    return None if value > 0 else "a number greater than 0"


def _ph(value: float) -> str | None:
    return None if 0.0 <= value <= 14.0 else "a pH from 0 to 14"


def _percent_target(value: float) -> str | None:
    return None if 0.0 < value <= 100.0 else "a percentage above 0 and at most 100"


def _replicate_tolerance(value: float) -> str | None:
    return None if 0.0 <= value <= 2.0 else "pH units from 0 to 2"


def _row_number(value: float) -> str | None:
    return None if value >= 1 and value == int(value) else "a whole number from 1"


def _non_negative(value: float) -> str | None:
    return None if value >= 0 else "a number of at least 0"


def _volume_tolerance(value: float) -> str | None:
    return None if 0.0 <= value < 100.0 else "a percentage from 0 to below 100"


def _compose(text: str, shown: str, problems: list[Problem]):
    """The YAML node tree, or None with a located problem (the mark's line)."""
    try:
        return yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        what = " ".join(x for x in (exc.context, exc.problem) if x)
        if exc.context_mark is not None and mark is not None and mark.index >= len(text) - 1:
            # an unclosed quote or bracket is noticed only at the end; point at its start
            what += f" (at the end of the file, line {mark.line + 1})"
            mark = exc.context_mark
        line = mark.line + 1 if mark is not None else None
        lines = text.splitlines()
        found = lines[line - 1].strip() if line and line <= len(lines) else None
        problems.append(Problem(f"invalid YAML: {what}", file=shown, line=line, found=found,
                                expected="valid YAML: 'key: value' lines, spaces (not tabs) for "
                                         "indentation, quotes closed"))
    except yaml.YAMLError as exc:   # ReaderError: a character YAML does not allow
        position = getattr(exc, "position", None)
        line = text.count("\n", 0, position) + 1 if position is not None else None
        problems.append(Problem(f"invalid YAML: {exc}", file=shown, line=line,
                                expected="printable text"))
    return None


def _runs_path(doc: _Yaml, entries, root, folder: Path) -> Path | None:
    """The runs table's path inside the study folder, refusing escapes and odd types."""
    text = doc.text(entries, root, "", "runs",
                    expected="the runs table's file name inside the study folder, e.g. runs.csv")
    if text is None:
        return None
    return _table_path(doc, text, entries["runs"][1], "runs", folder)


def _table_path(doc: _Yaml, text: str, node, key: str, folder: Path,
                what: str = "runs") -> Path | None:
    """A table's path inside the study folder (``key`` names the YAML key in messages)."""
    expected = "a relative path inside the study folder, ending in " + ", ".join(EXTENSIONS)
    posix = text.strip().replace("\\", "/")
    if PurePosixPath(posix).is_absolute() or PureWindowsPath(text).drive or posix.startswith("~"):
        doc.report(f"the {what} path must be relative to the study folder", node, key,
                   found=text, expected=expected)
        return None
    if ".." in PurePosixPath(posix).parts:
        doc.report(f"the {what} path must not leave the study folder ('..')", node, key,
                   found=text, expected=expected)
        return None
    if PurePosixPath(posix).suffix.lower() not in EXTENSIONS:
        doc.report(f"unsupported {what} table type", node, key, found=text, expected=expected)
        return None
    path = folder / posix
    inside = folder.resolve()
    try:
        resolved = path.resolve()
    except (OSError, RuntimeError) as exc:   # a symlink loop
        doc.report(f"the {what} path cannot be resolved ({exc})", node, key, found=text,
                   expected=expected)
        return None
    if resolved != inside and inside not in resolved.parents:
        doc.report(f"the {what} path leads outside the study folder (through a symbolic link)",
                   node, key, found=text, expected=expected)
        return None
    if not path.exists():
        doc.report(f"the {what} table does not exist", node, key, found=display_path(path),
                   expected=expected)
        return None
    if not path.is_file():
        doc.report(f"the {what} path is not a file", node, key, found=display_path(path),
                   expected=expected)
        return None
    return path


def _targets(doc: _Yaml, entries) -> tuple[Targets, str | None]:
    if "targets" not in entries or _is_null(entries["targets"][1]):
        return Targets(), None
    node = entries["targets"][1]
    t = doc.mapping(node, "targets", _KEYS["targets"], "targets")
    if t is None:
        return Targets(), None
    band = None
    if "mass_balance_pct" in t and not _is_null(t["mass_balance_pct"][1]):
        band = _band(doc, t["mass_balance_pct"][1])
    level = _level(doc, t, node, "targets")
    targets = Targets(
        recovery_pct=doc.number(t, node, "targets", "recovery_pct", required=False,
                                check=_percent_target, expected="a recovery in %, e.g. 95"),
        max_rsd_pct=doc.number(t, node, "targets", "max_rsd_pct", required=False,
                               check=_positive, expected="a relative standard deviation in %"),
        mass_balance_pct=band,
        ratio_agreement_log=doc.number(t, node, "targets", "ratio_agreement_log",
                                       required=False, check=_positive,
                                       expected="a spread in log units, e.g. 0.3"),
        lack_of_fit_alpha=doc.number(t, node, "targets", "lack_of_fit_alpha", required=False,
                                     check=_alpha,
                                     expected="a significance level between 0 and 0.5, "
                                              "e.g. 0.05"),
        purity_pct=doc.number(t, node, "targets", "purity_pct", required=False,
                              check=_percent_target, expected="a purity in %, e.g. 99.5"),
    )
    return targets, level


def _alpha(value: float) -> str | None:
    # a test judged at alpha above 0.5 would reject a true model more often than not
    return None if 0.0 < value <= 0.5 else "a significance level above 0 and at most 0.5"


def _band(doc: _Yaml, node) -> tuple[float, float] | None:
    return percent_band(doc, node, "targets.mass_balance_pct", _non_negative, "[90, 110]")


def percent_band(doc: _Yaml, node, key: str, check, example: str) -> tuple[float, float] | None:
    """A [low, high] pair of percentages at ``key`` (e.g. "targets.mass_balance_pct"), each
    passing ``check``, low below high; located errors otherwise."""
    name = key.rpartition(".")[2]
    expected = f"two percentages [low, high] with low < high, e.g. {example}"
    if not isinstance(node, yaml.SequenceNode) or len(node.value) != 2:
        doc.report(f"'{name}' must be a pair of percentages", node, key,
                   found=_node_kind(node) if not isinstance(node, yaml.SequenceNode)
                   else f"a list of {len(node.value)}", expected=expected)
        return None
    lo, hi = (doc._number_node(n, key, name, check, expected) for n in node.value)
    if lo is None or hi is None:
        return None
    if not lo < hi:
        doc.report(f"'{name}' must go from low to high", node, key,
                   found=f"[{lo:g}, {hi:g}]", expected=expected)
        return None
    return lo, hi


def _level(doc: _Yaml, entries, node, key: str) -> str | None:
    level = doc.text(entries, node, key, "level", required=False, expected=_LEVEL_EXPECTED)
    if level is not None and not _LEVEL.match(level):
        doc.report("the analyte level does not start with a number", entries["level"][1],
                   f"{key}.level", found=level, expected=_LEVEL_EXPECTED)
        return None
    return level


_LEVEL_EXPECTED = "an analyte level: a number and a unit, e.g. '10 ppm', '0.1 %', '20 ug/kg'"
_LEVEL = re.compile(r"^\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*\S*")


def _analyte(doc: _Yaml, entries, root):
    """(name, model, ion_pair, level) from ``analyte:``; Nones where missing or wrong."""
    if "analyte" not in entries or _is_null(entries["analyte"][1]):
        doc.missing(root, "", "analyte", "a mapping with name and model")
        return None, None, False, None
    node = entries["analyte"][1]
    a = doc.mapping(node, "analyte", _KEYS["analyte"], "analyte")
    if a is None:
        return None, None, False, None
    name = doc.text(a, node, "analyte", "name", expected="the analyte's name or code")
    model = doc.text(a, node, "analyte", "model", expected="one of " + ", ".join(MODELS))
    if model is not None and model not in MODELS:
        doc.report(f"unknown model{_suggest(model, MODELS)}", a["model"][1], "analyte.model",
                   found=model, expected="one of " + ", ".join(MODELS))
        model = None
    ion_pair = doc.boolean(a, "analyte", "ion_pair", False)
    if ion_pair and model is not None and model not in ("acid", "base"):
        doc.report("an ion pair needs a charged form of one sign: model acid or base",
                   a["ion_pair"][1], "analyte.ion_pair", found=f"ion_pair: true with {model}",
                   expected="model acid or base, or ion_pair: false")
    level = _level(doc, a, node, "analyte")
    return name, model, ion_pair, level


def _system(doc: _Yaml, entries, root) -> dict:
    if "system" not in entries or _is_null(entries["system"][1]):
        doc.missing(root, "", "system", "a mapping with aqueous, organic and temperature_C")
        return {}
    node = entries["system"][1]
    s = doc.mapping(node, "system", _KEYS["system"], "system")
    if s is None:
        return {}
    out: dict = {}
    for name, expected in (("aqueous", "the aqueous phase, e.g. '0.1 M phosphate buffer'"),
                           ("organic", "the organic solvent, e.g. 'n-heptane'")):
        value = doc.text(s, node, "system", name, expected=expected)
        if value is not None:
            out[name] = value
    t = doc.number(s, node, "system", "temperature_C", check=_temperature,
                   expected="the temperature in degrees Celsius, e.g. 25")
    if t is not None:
        out["temperature_C"] = t
    return out


def _temperature(value: float) -> str | None:
    return None if -20.0 <= value <= 150.0 else "a temperature from -20 to 150 degrees Celsius"


def _procedures(doc: _Yaml, entries) -> list[Procedure]:
    if "procedures" not in entries or _is_null(entries["procedures"][1]):
        return []
    node = entries["procedures"][1]
    if not isinstance(node, yaml.SequenceNode):
        doc.report("'procedures' must be a list of procedures", node, "procedures",
                   found=_node_kind(node), expected="a list of '- id: ...' entries")
        return []
    out: list[Procedure] = []
    seen: dict[str, int] = {}
    for i, item in enumerate(node.value, start=1):
        key = f"procedures[{i}]"
        p = doc.mapping(item, key, _KEYS["procedure"], f"procedure {i}")
        if p is None:
            continue
        before = len([x for x in doc.problems if x.severity == "error"])
        pid = doc.text(p, item, key, "id", expected="a procedure id: letters, digits, '.', "
                                                   "'-', '_'")
        if pid is not None and not PROCEDURE_ID.match(pid):
            doc.report("a procedure id may hold only letters, digits, '.', '-' and '_' (it "
                       "becomes part of number identifiers)", p["id"][1], f"{key}.id", found=pid,
                       expected="e.g. P1")
        elif pid is not None and pid in seen:
            doc.report(f"duplicate procedure id (also on line {seen[pid]})", p["id"][1],
                       f"{key}.id", found=pid, expected="a unique id per procedure")
        elif pid is not None:
            seen[pid] = doc.line(p["id"][1])
        label = doc.text(p, item, key, "label", expected="a short description")
        steps: tuple[WorkupStep, ...] = ()
        if "steps" in p and not _is_null(p["steps"][1]):
            steps = _steps(doc, p, key)
            pH, aq, org = ((steps[0].pH, steps[0].aqueous_mL[0], steps[0].organic_mL)
                           if steps else (None, None, None))
        else:
            pH = doc.number(p, item, key, "pH", check=_ph, expected="a pH from 0 to 14")
            aq = doc.number(p, item, key, "aqueous_mL", check=_positive,
                            expected="the aqueous volume in mL, greater than 0")
            org = _portions(doc, p, item, key)
        tol_pH = doc.number(p, item, key, "pH_tolerance", required=False, check=_non_negative,
                            expected="pH units, at least 0")
        tol_v = doc.number(p, item, key, "volume_tolerance_pct", required=False,
                           check=_volume_tolerance, expected="a percentage from 0 to below 100")
        after = len([x for x in doc.problems if x.severity == "error"])
        if after == before:
            out.append(Procedure(pid, label, pH, aq, org,
                                 0.2 if tol_pH is None else tol_pH,
                                 2.0 if tol_v is None else tol_v, line=doc.line(item),
                                 steps=steps))
    return out


# -- multi-step work-ups and impurities ------------------------------------------------------------

def workup_problem(steps) -> str | None:
    """Why a sequence of steps is not a work-up the engine can follow, or None if it is."""
    if not steps:
        return "a work-up needs at least one step"
    if steps[0].kind != "extract":
        return f"the first step must be 'extract', found {steps[0].kind!r}"
    if any(s.kind == "extract" for s in steps[1:]):
        return "only the first step can be 'extract' (the organic phase is then carried on)"
    backs = [i for i, s in enumerate(steps) if s.kind == "back-extract"]
    if backs and backs != [len(steps) - 1]:
        return "'back-extract' can only be the last step (the product is then in the water)"
    first = steps[0]
    if len(first.aqueous_mL) != 1 or not first.organic_mL:
        return "'extract' needs one aqueous (feed) volume and at least one organic portion"
    for s in steps[1:]:
        if not s.aqueous_mL or s.organic_mL:
            return f"'{s.kind}' needs fresh aqueous portions and no organic volume of its own"
    if any(v <= 0 for s in steps for v in (*s.aqueous_mL, *s.organic_mL)):
        return "every volume must be positive"
    return None


_STEPS_EXPECTED = ("a list of steps, e.g. [{kind: extract, pH: 11, aqueous_mL: 50, organic_mL: "
                   "[25, 25]}, {kind: back-extract, pH: 2, aqueous_mL: [30]}]")


def _volumes(doc: _Yaml, s, node, key: str, name: str, required: bool) -> tuple[float, ...]:
    """One volume or a list of volumes (mL, each above 0); () when absent or wrong."""
    path = f"{key}.{name}"
    expected = "a volume in mL above 0, or a list of them, e.g. [20, 20]"
    v_node = doc.value_node(s, node, key, name, required, expected)
    if v_node is None:
        return ()
    items = v_node.value if isinstance(v_node, yaml.SequenceNode) else [v_node]
    if isinstance(v_node, yaml.MappingNode) or not items:
        doc.report(f"'{name}' must be a volume or a list of volumes", v_node, path,
                   found=_node_kind(v_node) if items else "[]", expected=expected)
        return ()
    vols = [doc._number_node(n, path, name, _positive, expected) for n in items]
    return () if any(v is None for v in vols) else tuple(vols)


def _steps(doc: _Yaml, p, key: str) -> tuple[WorkupStep, ...]:
    """``steps:`` of a procedure: extract, then washes, then at most one back-extraction."""
    node = p["steps"][1]
    path = f"{key}.steps"
    for name in ("pH", "aqueous_mL", "organic_mL"):
        if name in p:
            doc.report(f"'{name}' is given on a procedure that has steps", p[name][0],
                       f"{key}.{name}", found=name,
                       expected="pH and volumes inside the steps only (the first step, the "
                                "extraction, gives them)")
    if not isinstance(node, yaml.SequenceNode) or not node.value:
        doc.report("'steps' must be a list of steps", node, path, found=_node_kind(node),
                   expected=_STEPS_EXPECTED)
        return ()
    before = count_errors(doc.problems)
    out = []
    for i, item in enumerate(node.value, start=1):
        k = f"{path}[{i}]"
        s = doc.mapping(item, k, _KEYS["step"], f"step {i}")
        if s is None:
            continue
        kind = doc.text(s, item, k, "kind", expected="extract, wash or back-extract")
        if kind is not None and kind not in STEP_KINDS:
            doc.report(f"unknown step kind{_suggest(kind, STEP_KINDS)}", s["kind"][1],
                       f"{k}.kind", found=kind, expected="extract, wash or back-extract")
            kind = None
        pH = doc.number(s, item, k, "pH", check=_ph, expected="a pH from 0 to 14")
        aq = _volumes(doc, s, item, k, "aqueous_mL", True)
        org = _volumes(doc, s, item, k, "organic_mL", kind == "extract")
        if kind is not None and pH is not None and aq:
            out.append(WorkupStep(kind, pH, aq, org))
    if count_errors(doc.problems) > before:
        return ()
    why = workup_problem(out)
    if why:
        doc.report(f"these steps are not a work-up: {why}", node, path,
                   found=", ".join(s.kind for s in out), expected=_STEPS_EXPECTED)
        return ()
    return tuple(out)


#: the measurement columns an impurity may have, suffixed ':<impurity name>' in the runs table
IMPURITY_COLUMNS = ("spiked", "found_aqueous", "found_organic", "recovery_pct")
_IMPURITY_PARAMS = {"neutral": ("logK",), "acid": ("logK", "pKa"), "base": ("logK", "pKa"),
                    "ampholyte": ("logK", "pKa1", "pKa2")}


def _impurities(doc: _Yaml, entries) -> list[tuple[str, str, tuple | None, str | None,
                                                   float | None, int]]:
    """``impurities:`` entries as (name, model, declared theta or None, source, ratio, line)."""
    if "impurities" not in entries or _is_null(entries["impurities"][1]):
        return []
    node = entries["impurities"][1]
    if not isinstance(node, yaml.SequenceNode):
        doc.report("'impurities' must be a list", node, "impurities", found=_node_kind(node),
                   expected="a list of '- name: ...' entries")
        return []
    out, seen = [], set()
    for i, item in enumerate(node.value, start=1):
        key = f"impurities[{i}]"
        m = doc.mapping(item, key, _KEYS["impurity"], f"impurity {i}")
        if m is None:
            continue
        name = doc.text(m, item, key, "name", expected="the impurity's name (letters, digits, "
                                                        "'.', '-', '_'), used in column names")
        if name is not None and not PROCEDURE_ID.match(name):
            doc.report("an impurity name may hold only letters, digits, '.', '-' and '_' (it "
                       "becomes part of column names and number identifiers)", m["name"][1],
                       f"{key}.name", found=name, expected="e.g. acid-impurity")
            name = None
        elif name is not None and name.lower() in seen:
            doc.report("duplicate impurity name", m["name"][1], f"{key}.name", found=name,
                       expected="a unique name per impurity")
            name = None
        model = doc.text(m, item, key, "model", expected="one of " + ", ".join(MODELS))
        if model is not None and model not in MODELS:
            doc.report(f"unknown model{_suggest(model, MODELS)}", m["model"][1],
                       f"{key}.model", found=model, expected="one of " + ", ".join(MODELS))
            model = None
        given = [k for k in ("logK", "pKa", "pKa1", "pKa2") if k in m]
        theta = None
        if given and model is not None:
            need = _IMPURITY_PARAMS.get(model)
            if need is None or set(given) != set(need):
                doc.report("declared constants do not match the model", m[given[0]][0],
                           f"{key}.{given[0]}", found=", ".join(given) + f" for {model}",
                           expected=", ".join(need) if need else
                           "a model other than auto for declared constants")
            else:
                vals = [doc.number(m, item, key, k, expected="a number") for k in need]
                theta = tuple(vals) if all(v is not None for v in vals) else None
        source = doc.text(m, item, key, "source", required=bool(given),
                          expected="where the declared constants come from (handbook, paper)")
        ratio = doc.number(m, item, key, "amount_ratio", required=False, check=_non_negative,
                           expected="the impurity's amount in the feed relative to the "
                                    "analyte's, e.g. 0.05")
        if name is not None and model is not None:
            seen.add(name.lower())
            out.append((name, model, theta, source, ratio, doc.line(item)))
    return out


def _impurity_records(doc: _Yaml, specs, table: Table | None, runs: list[Run],
                      problems: list[Problem]) -> list[Impurity]:
    """Impurity records from their ``impurities:`` entries and their runs-table columns."""
    if not specs:
        return []
    cols = _impurity_columns(table, {x[0].lower() for x in specs}) if table is not None else {}
    out = []
    for name, model, theta, source, ratio, line in specs:
        mine = cols.get(name.lower(), {})
        where = dict(file=doc.file, line=line, key="impurities")
        if theta is not None and mine:
            problems.append(Problem(f"impurity {name!r} has declared constants and measured "
                                    "columns", **where, found=", ".join(
                                        table.header(c) for c in mine.values()),
                                    expected="either declared constants (logK, pKa, source) "
                                             "or measured columns, not both"))
            continue
        if theta is not None:
            out.append(Impurity(name, model, (), theta, source, ratio, line))
            continue
        if not mine:
            problems.append(Problem(f"impurity {name!r} has neither declared constants nor "
                                    "measured columns", **where,
                                    expected=f"logK (and pKa) with a source, or runs-table "
                                             f"columns such as found_organic:{name} or "
                                             f"recovery_pct:{name}"))
            continue
        imp_runs = _impurity_runs(table, runs, mine, problems)
        out.append(Impurity(name, model, imp_runs, None, source, ratio, line))
    return out


def _impurity_columns(table: Table, names) -> dict[str, dict[str, str]]:
    """{impurity (lower case): {base column: suffixed column}} present in the table."""
    out: dict[str, dict[str, str]] = {}
    for c in table.columns:
        base, sep, imp = c.partition(":")
        if sep and base in IMPURITY_COLUMNS and imp.strip() in names:
            out.setdefault(imp.strip(), {})[base] = c
    return out


def _impurity_runs(table: Table, runs: list[Run], cols: dict[str, str],
                   problems: list[Problem]) -> tuple[Run, ...]:
    """The impurity's runs: the analyte runs' pH and volumes with the impurity's own cells,
    read under the same one-complete-form rule and plausibility limits as the analyte's."""
    headers = {base: table.header(col) for base, col in cols.items()}
    view = Table(table.file, tuple(cols), (), table.header_location, headers, table.kind,
                 table.separator, table.decimal_comma, table.sheet, table.sha256)
    reader = _RowReader(view, problems)
    by_location = {r.location: r for r in runs}
    out = []
    for row in table.rows:
        run = by_location.get(row.location)
        if run is None:
            continue
        cells = {base: row.cells.get(col) for base, col in cols.items()}
        text = {base: row.raw(col) for base, col in cols.items()}
        if not any(text.values()):
            continue        # the impurity was not measured in this run
        sub = TableRow(cells, row.location, text)
        amounts = _measurement(reader, sub, run.run_id, run.excluded, True)
        if amounts is not None:
            out.append(Run(run.run_id, run.pH, run.aqueous_mL, run.organic_mL, run.location,
                           **amounts, replicate=run.replicate, excluded=run.excluded,
                           note=run.note))
    return tuple(out)


def _portions(doc: _Yaml, p, item, key: str) -> tuple[float, ...] | None:
    """organic_mL: one volume per successive portion (a single number is one portion)."""
    path = f"{key}.organic_mL"
    expected = "one organic volume in mL per portion, each above 0, e.g. [10, 10, 10]"
    if "organic_mL" not in p or _is_null(p["organic_mL"][1]):
        doc.missing(item, key, "organic_mL", expected)
        return None
    node = p["organic_mL"][1]
    if isinstance(node, yaml.ScalarNode):
        v = doc._number_node(node, path, "organic_mL", _positive, expected)
        return None if v is None else (v,)
    if not isinstance(node, yaml.SequenceNode):
        doc.report("'organic_mL' must be a list of volumes", node, path,
                   found=_node_kind(node), expected=expected)
        return None
    if not node.value:
        doc.report("the procedure has no organic portions", node, path, found="[]",
                   expected=expected)
        return None
    volumes = [doc._number_node(n, path, "organic_mL", _positive, expected) for n in node.value]
    return None if any(v is None for v in volumes) else tuple(volumes)


# -- the runs table -------------------------------------------------------------------------------

class _RowReader:
    """Checks one table row at a time; every problem goes to ``problems`` with its place."""

    def __init__(self, table: Table, problems: list[Problem]):
        self.table = table
        self.problems = problems
        hint = (" with a decimal comma, as elsewhere in this file (e.g. 7,25)"
                if table.decimal_comma else "")
        if table.kind != "csv":
            hint = " (a number cell, or text with a decimal point)"
        self.number_hint = hint

    def report(self, row: TableRow, run: str | None, column: str | None, message: str,
               severity: str = "error", **kw) -> None:
        col = self.table.header(column) if column in self.table.headers else (
            COLUMNS.get(column, column) if column else None)
        self.problems.append(Problem(message, **row.location.where(), run=run, column=col,
                                     severity=severity, **kw))

    def number(self, row: TableRow, run, column: str, *, required: bool,
               what: str) -> float | None | object:
        """The cell's number; None if empty (reported when required); _BAD if wrong."""
        if column not in self.table.headers:
            return None
        value = row.cells.get(column)
        if value is None:
            if required:
                self.report(row, run, column, "empty cell", found="",
                            expected=f"{what}{self.number_hint}")
                return _BAD
            return None
        if isinstance(value, str):
            self.report(row, run, column, "not a number", found=row.raw(column),
                        expected=f"{what}{self.number_hint}")
            return _BAD
        return value


def _check_header(table: Table, problems: list[Problem], known=frozenset()) -> bool:
    """Missing and unknown columns; True when the table has a measurement form. ``known``:
    further columns the study declares (an impurity's measurement columns)."""
    where = table.header_location.where()
    present = ", ".join(table.header(c) for c in table.columns)
    for c in REQUIRED_COLUMNS:
        if c not in table.headers:
            problems.append(Problem("missing column", **where, column=COLUMNS[c],
                                    found=present, expected="columns " + ", ".join(
                                        COLUMNS[x] for x in REQUIRED_COLUMNS) + " and a "
                                    "measurement form"))
    has_amounts = "spiked" in table.headers and any(
        c in table.headers for c in ("found_aqueous", "found_organic", "response_aqueous",
                                     "response_organic"))
    has_recovery = "recovery_pct" in table.headers
    if not (has_amounts or has_recovery):
        missing = [c for c in AMOUNT_COLUMNS if c not in table.headers] or ["recovery_pct"]
        problems.append(Problem("missing column: no complete measurement form", **where,
                                column=", ".join(missing), found=present,
                                expected="spiked with found_aqueous and/or found_organic, or "
                                         "recovery_pct"))
    for c in table.columns:
        if c in COLUMNS or c in known:
            continue
        close = difflib.get_close_matches(c, list(COLUMNS), n=1, cutoff=0.8)
        if close:
            problems.append(Problem(f"unknown column, probably a misspelling of "
                                    f"{COLUMNS[close[0]]!r}; refused so that no data are "
                                    "silently dropped", **where, column=table.header(c),
                                    found=table.header(c), expected=COLUMNS[close[0]]))
        else:
            problems.append(Problem("unknown column, ignored", **where, column=table.header(c),
                                    found=table.header(c), severity="warning",
                                    expected="known columns: " + ", ".join(COLUMNS.values())))
    return has_amounts or has_recovery


def _runs(table: Table, problems: list[Problem], check_forms: bool) -> list[Run]:
    reader = _RowReader(table, problems)
    runs: list[Run] = []
    seen: dict[str, Location] = {}
    for row in table.rows:
        if row.misaligned:     # reported by the reader: its cells sit under wrong columns
            continue
        before = count_errors(problems)
        run = _run(reader, row, seen, check_forms)
        if run is not None and count_errors(problems) == before:
            runs.append(run)
    return runs


def _run(reader: _RowReader, row: TableRow, seen: dict, check_forms: bool) -> Run | None:
    headers = reader.table.headers
    run_id = row.raw("run") if "run" in headers else ""
    run = run_id or None
    if "run" in headers:
        if not run_id:
            reader.report(row, None, "run", "empty run id", found="",
                          expected="a run id, unique in the table")
        elif run_id in seen:
            reader.report(row, run, "run", f"duplicate run id (first at {_short(seen[run_id])})",
                          found=run_id, expected="a unique run id per row")
        else:
            seen[run_id] = row.location

    excluded = _excluded(reader, row, run)
    _decimal_label(reader, row, run)

    pH = reader.number(row, run, "ph", required=True, what="a pH from 0 to 14")
    if isinstance(pH, float) and not 0.0 <= pH <= 14.0:
        reader.report(row, run, "ph", "pH out of range", found=row.raw("ph"),
                      expected="a pH from 0 to 14")
    volumes = {}
    for col in ("aqueous_ml", "organic_ml"):
        v = reader.number(row, run, col, required=True, what="a volume in mL, greater than 0")
        if isinstance(v, float) and v <= 0:
            reader.report(row, run, col, "volume must be greater than 0", found=row.raw(col),
                          expected="a volume in mL, greater than 0")
        volumes[col] = v

    amounts = _measurement(reader, row, run, excluded, check_forms)
    tags = method_input.read_tags(reader, row, run)
    if amounts is None or tags is None or not isinstance(pH, float) or any(
            not isinstance(v, float) for v in volumes.values()) or run is None:
        return None
    return Run(run, pH, volumes["aqueous_ml"], volumes["organic_ml"], row.location,
               **amounts, replicate=row.raw("replicate") or None, excluded=excluded,
               note=row.raw("note") or None, **tags)


def _short(loc: Location) -> str:
    return f"line {loc.line}" if loc.line is not None else f"row {loc.row}"


def _decimal_label(reader: _RowReader, row: TableRow, run) -> None:
    """In a ','-separated file a replicate label that is a decimal number (96.5) is the mark
    of cells shifted by a decimal comma: a label is a name or a whole number (1, 2, 3)."""
    label = row.raw("replicate").strip()
    if reader.table.separator != "," or "." not in label or parse_number(label) is None:
        return
    reader.report(row, run, "replicate", "a decimal number where a replicate label is "
                  "expected: in a ','-separated file a decimal comma earlier in the row "
                  "splits a number and shifts the cells after it", found=label,
                  expected="a label such as A, 1 or pH7-1 (write decimals with a point, or "
                           "separate the cells with ';' when decimals are written with a "
                           "comma); a label that is a decimal number needs another spelling "
                           "(2-1 for 2.1)")


def _excluded(reader: _RowReader, row: TableRow, run) -> str | None:
    reason = row.raw("excluded").strip() if "excluded" in reader.table.headers else ""
    if not reason:
        return None
    if reason.casefold() in _KEEP_FLAGS:
        reader.report(row, run, "excluded", "the excluded column holds the reason for leaving a "
                      "run out; this reads like 'keep the run'", found=reason,
                      expected="empty to keep the run, or the reason to exclude it")
        return None
    if reason.casefold() in _BARE_FLAGS:
        reader.report(row, run, "excluded", "run excluded without a reason", found=reason,
                      expected="the reason, e.g. 'emulsion did not separate'",
                      severity="warning")
    elif parse_number(reason, reader.table.decimal_comma) is not None:
        shifted = (": in a ','-separated file a decimal comma earlier in the row splits a "
                   "number and shifts the cells after it; separate the cells with ';' or quote "
                   "such numbers" if reader.table.separator == "," else "")
        reader.report(row, run, "excluded", "a number where the reason for excluding the run "
                      "is expected" + shifted, found=reason,
                      expected="empty to keep the run, or the reason to exclude it, e.g. "
                               "'emulsion did not separate'")
        return None
    return reason


def _measurement(reader: _RowReader, row: TableRow, run, excluded: str | None,
                 check_forms: bool) -> dict | None:
    """The row's amounts under the one-complete-form rule (module docstring), or None."""
    headers = reader.table.headers
    amount_what = "an amount of at least 0, in the unit of spiked"
    spiked = reader.number(row, run, "spiked", required=False,
                           what="the spiked amount, greater than 0")
    aq = reader.number(row, run, "found_aqueous", required=False, what=amount_what)
    org = reader.number(row, run, "found_organic", required=False, what=amount_what)
    rec = reader.number(row, run, "recovery_pct", required=False,
                        what="the recovery in the organic phase, in %")
    responses = _responses(reader, row, run)
    ok = all(v is not _BAD for v in (spiked, aq, org, rec)) and responses is not None
    if isinstance(spiked, float) and spiked <= 0:
        reader.report(row, run, "spiked", "negative spiked amount" if spiked < 0 else
                      "spiked amount is 0", found=row.raw("spiked"),
                      expected="the spiked amount, greater than 0")
        ok = False
    for col, v in (("found_aqueous", aq), ("found_organic", org)):
        if isinstance(v, float) and v < 0:
            reader.report(row, run, col, "negative amount", found=row.raw(col),
                          expected=amount_what)
            ok = False
    if isinstance(rec, float) and rec < 0:
        reader.report(row, run, "recovery_pct", "negative recovery", found=row.raw("recovery_pct"),
                      expected="a recovery from 0 to 150 %")
        ok = False
    if not check_forms:
        return None

    filled = {c for c in ("spiked", "found_aqueous", "found_organic", "recovery_pct")
              if c in headers and row.raw(c) != ""}
    for phase in ("aqueous", "organic"):
        if responses is not None and responses.get(f"response_{phase}") is not None:
            if f"found_{phase}" in filled:
                reader.report(row, run, f"response_{phase}", f"both a found amount and a "
                              f"response for the {phase} phase", found=f"found_{phase} and "
                              f"response_{phase}", expected="one of the two (the response is "
                              "converted through the calibration)")
                return None
            filled.add(f"found_{phase}")     # a response stands for the found amount
    amount_cols = filled & set(AMOUNT_COLUMNS)
    found_filled = amount_cols - {"spiked"}
    found_cols = [c for c in ("found_aqueous", "found_organic") if c in headers]
    record = {"spiked": spiked, "found_aqueous": aq, "found_organic": org, **(responses or {})}
    if "recovery_pct" in filled and found_filled:
        if "found_organic" not in found_filled or "spiked" not in filled \
                or row.raw("found_organic") == "":
            reader.report(row, run, "recovery_pct", "two measurement forms in one row",
                          found="recovery_pct and " + ", ".join(sorted(amount_cols)),
                          expected="either recovery_pct (with or without spiked), or spiked "
                                   "with found_aqueous and/or found_organic (leave the other "
                                   "cells empty); recovery_pct beside found_organic needs "
                                   "spiked, and the three must agree")
            return None
        if ok and not _recovery_agrees(reader, row, run, rec, org, spiked):
            return None
    if not filled:
        if excluded:     # a run left out before anything was measured (a broken flask)
            return record
        cols = [c for c in ("spiked", *found_cols, "recovery_pct") if c in headers]
        reader.report(row, run, ", ".join(cols), "no measurement in this row", found="",
                      expected="spiked with found_aqueous and/or found_organic, or "
                               "recovery_pct")
        return None
    if found_filled and "spiked" not in filled:
        if excluded:     # an incomplete record may be why the run was left out
            return record if ok else None
        if "spiked" in headers:
            reader.report(row, run, "spiked", "empty cell: found amounts need the spiked amount",
                          found="", expected="the spiked amount, greater than 0")
        else:
            reader.report(row, run, ", ".join(found_cols), "found amounts without a spiked "
                          "column", found=", ".join(sorted(amount_cols)),
                          expected="a spiked column beside found_aqueous/found_organic")
        return None
    if filled == {"spiked"}:
        if excluded:
            return record if ok else None
        reader.report(row, run, ", ".join(found_cols) or "found_organic",
                      "empty cell: a spiked amount needs at least one found amount", found="",
                      expected="found_aqueous and/or found_organic, or recovery_pct")
        return None
    if not ok:
        return None
    # plausibility holds for excluded runs too: an exclusion reason must not hide a typo
    if not found_filled:
        _plausible(reader, row, run, "recovery_pct", rec, one_phase=True,
                   found=row.raw("recovery_pct") + " %")
        return {"recovery_pct": rec, "spiked": spiked}
    if any(v is not None for v in responses.values()):
        # amounts come from the calibration later (calibration_input.quantify_runs)
        return record
    pct = 100.0 * ((aq or 0.0) + (org or 0.0)) / spiked
    both = aq is not None and org is not None
    col = "found_aqueous + found_organic" if both else (
        "found_aqueous" if aq is not None else "found_organic")
    _plausible(reader, row, run, col, pct, one_phase=not both, found=f"{pct:.1f} % of spiked",
               organic_pct=100.0 * org / spiked if both else None)
    return {**record, "recovery_pct": rec}


def _half_unit(text: str) -> float:
    """Half a unit in the last digit a number is written with: the rounding it may carry.

    >>> _half_unit("98.5"), _half_unit("100"), _half_unit("7,25"), _half_unit("1.5e2")
    (0.05, 0.5, 0.005, 5.0)
    """
    mantissa, _, exponent = text.strip().replace(",", ".").lower().partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10.0 ** (int(exponent or 0) - decimals)


#: Smallest disagreement allowed between recovery_pct and 100 found_organic / spiked, in
#: percentage points, on top of the rounding of the cells (float arithmetic only).
RECOVERY_AGREEMENT_FLOOR = 1e-9


def _recovery_agrees(reader: _RowReader, row: TableRow, run, rec: float, org: float,
                     spiked: float) -> bool:
    """recovery_pct against 100 found_organic / spiked, within the rounding of the three
    cells as written (half a unit in each one's last digit, carried through the quotient);
    an error when they disagree beyond it, since the row cannot say which cell is right."""
    computed = 100.0 * org / spiked
    tol = (_half_unit(row.raw("recovery_pct")) + 100.0 * _half_unit(row.raw("found_organic"))
           / spiked + 100.0 * org * _half_unit(row.raw("spiked")) / spiked ** 2
           + RECOVERY_AGREEMENT_FLOOR)
    if abs(rec - computed) <= tol:
        return True
    reader.report(row, run, "recovery_pct", "recovery_pct does not agree with found_organic / "
                  "spiked in the same row, so one of the cells is wrong",
                  found=f"{row.raw('recovery_pct')} % against 100 x {row.raw('found_organic')}"
                        f" / {row.raw('spiked')} = {computed:.6g} %",
                  expected=f"agreement within {tol:.2g} percentage points (the rounding of the "
                           "three cells as written); a recovery corrected after the amounts "
                           "were found (e.g. for a blank) goes alone, without found_organic")
    return False


def _responses(reader: _RowReader, row: TableRow, run) -> dict | None:
    """Instrument responses and the run's sequence (calibration_input.py); None if wrong."""
    out: dict = {}
    ok = True
    for phase in ("aqueous", "organic"):
        for col, what in ((f"response_{phase}", "the analyte's response, at least 0"),
                          (f"is_response_{phase}", "the internal standard's response, "
                                                   "greater than 0")):
            v = reader.number(row, run, col, required=False, what=what)
            if v is _BAD:
                ok = False
                v = None
            elif isinstance(v, float) and (v < 0 or (v == 0 and col.startswith("is_"))):
                reader.report(row, run, col, "negative response" if v < 0 else
                              "internal-standard response is 0", found=row.raw(col),
                              expected=what)
                ok = False
            out[col] = v
        if out[f"is_response_{phase}"] is not None and out[f"response_{phase}"] is None:
            reader.report(row, run, f"response_{phase}", "an internal-standard response "
                          "without the analyte's response", found="",
                          expected=f"response_{phase} beside is_response_{phase}")
            ok = False
    out["sequence"] = row.raw("sequence").strip() or None
    return out if ok else None


def _plausible(reader: _RowReader, row: TableRow, run, column: str, pct: float, *,
               one_phase: bool, found: str, organic_pct: float | None = None) -> None:
    """Error above 150 % of spiked; warning above 100 % in one phase (a recovery above 100 %)
    or outside 90-110 % for both phases together."""
    if pct > IMPLAUSIBLE_PCT:
        reader.report(row, run, column, "more analyte found than plausibly spiked", found=found,
                      expected=f"at most {IMPLAUSIBLE_PCT:g} % of the spiked amount")
        return
    lo, hi = MASS_BALANCE_BAND_PCT
    high = (f"at most {ONE_PHASE_HIGH_PCT:g} % of spiked (above it, check the calibration, "
            f"the spike and the blank; above {IMPLAUSIBLE_PCT:g} % it is an error)")
    if one_phase and pct > ONE_PHASE_HIGH_PCT:
        what = ("recovery above 100 %" if column in ("recovery_pct", "found_organic")
                else "found in one phase exceeds the spiked amount")
        reader.report(row, run, column, what, found=found, expected=high, severity="warning")
    elif not one_phase:
        if not lo <= pct <= hi:
            reader.report(row, run, column, "mass balance outside the usual band", found=found,
                          expected=f"{lo:g} to {hi:g} % of spiked", severity="warning")
        if organic_pct is not None and organic_pct > ONE_PHASE_HIGH_PCT:
            reader.report(row, run, "found_organic", "recovery above 100 %",
                          found=f"{organic_pct:.1f} % of spiked", expected=high,
                          severity="warning")


# -- the study -------------------------------------------------------------------------------------

#: what ``advice.target`` may name besides a procedure id
ADVICE_PARAMETERS = ("pKa", "pKa1", "pKa2", "logK")


def _advice(doc: _Yaml, entries, procedures: list[Procedure]) -> AdviceRequest:
    """``advice:``: the quantity whose interval the next runs should narrow, and the pH the
    lab's buffers cover."""
    if "advice" not in entries or _is_null(entries["advice"][1]):
        return AdviceRequest()
    node = entries["advice"][1]
    a = doc.mapping(node, "advice", _KEYS["advice"], "advice")
    if a is None:
        return AdviceRequest()
    ids = [p.id for p in procedures]
    allowed = list(ADVICE_PARAMETERS) + ids
    expected = "pKa, logK or a procedure id" + (f" ({', '.join(ids)})" if ids else "")
    target = doc.text(a, node, "advice", "target", required=False, expected=expected)
    if target is not None and target not in allowed:
        doc.report(f"unknown advice target{_suggest(target, allowed)}", a["target"][1],
                   "advice.target", found=target, expected=expected)
        target = None
    band = None
    if "pH_range" in a and not _is_null(a["pH_range"][1]):
        band = _ph_range(doc, a["pH_range"][1])
    return AdviceRequest(target, band)


def _ph_range(doc: _Yaml, node) -> tuple[float, float] | None:
    key = "advice.pH_range"
    expected = "two pH values [low, high] from 0 to 14 with low < high, e.g. [2, 10]"
    if not isinstance(node, yaml.SequenceNode) or len(node.value) != 2:
        doc.report("'pH_range' must be a pair of pH values", node, key,
                   found=_node_kind(node) if not isinstance(node, yaml.SequenceNode)
                   else f"a list of {len(node.value)}", expected=expected)
        return None
    lo, hi = (doc._number_node(n, key, "pH_range", _ph, expected) for n in node.value)
    if lo is None or hi is None:
        return None
    if not lo < hi:
        doc.report("'pH_range' must go from low to high", node, key, found=f"[{lo:g}, {hi:g}]",
                   expected=expected)
        return None
    return lo, hi


def check_study(path) -> tuple[Study | None, list[Problem]]:
    """Read and validate a study folder; never raises for bad input.

    Returns the Study (None if there is any error) and every problem found, errors and
    warnings, in file order: study.yaml first, then the runs table.
    """
    folder = Path(path)
    problems: list[Problem] = []
    shown_folder = display_path(folder)
    if not folder.is_dir():
        problems.append(Problem("no such study folder" if not folder.exists() else
                                "not a folder", file=shown_folder,
                                expected="a folder holding study.yaml and the runs table"))
        return None, problems
    study_id = Path(os.path.abspath(folder)).name
    if not STUDY_ID.match(study_id):
        problems.append(Problem("the study folder's name is not a valid study id",
                                file=shown_folder, found=study_id,
                                expected="ASCII letters, digits, '-' and '_' only, e.g. "
                                         "HPA-2026-014"))
    yaml_path = folder / STUDY_FILE
    shown = display_path(yaml_path)
    if not yaml_path.is_file():
        problems.append(Problem("study.yaml is missing", file=shown,
                                expected="a study.yaml file in the study folder"))
        return None, problems
    try:
        data = yaml_path.read_bytes()
    except OSError as exc:
        problems.append(Problem(f"cannot read study.yaml: {exc.strerror or exc}", file=shown))
        return None, problems
    text, more = decode_text(data, shown)
    if text is None:
        problems.extend(Problem(p.message.replace("a text table", "a text file"), file=p.file,
                                line=p.line, expected="study.yaml as UTF-8 text")
                        for p in more)
        return None, problems
    root = _compose(text, shown, problems)
    if root is None:
        if not problems:
            problems.append(Problem("study.yaml is empty", file=shown,
                                    expected="a mapping with " + ", ".join(_KEYS[""])))
        return None, problems
    doc = _Yaml(shown, problems)
    entries = doc.mapping(root, "", _KEYS[""], "study.yaml")
    if entries is None:
        return None, problems

    title = doc.text(entries, root, "", "title", expected="the study's title")
    name, model, ion_pair, level = _analyte(doc, entries, root)
    system = _system(doc, entries, root)
    targets, target_level = _targets(doc, entries)
    if level is not None and target_level is not None and level != target_level:
        doc.report("the analyte level is given twice, differently", entries["targets"][1],
                   "targets.level", found=f"{level!r} and {target_level!r}",
                   expected="one level, under analyte or under targets")
    level = level or target_level
    if level is not None:
        targets = replace(targets, level=level)
    procedures = _procedures(doc, entries)
    advice = _advice(doc, entries, procedures)
    impurity_specs = _impurities(doc, entries)
    sheet = doc.text(entries, root, "", "sheet", required=False,
                     expected="the name of the sheet holding the runs")
    header_row = doc.number(entries, root, "", "header_row", required=False,
                            check=_row_number,
                            expected="the line (CSV) or sheet row of the runs table's header, "
                                     "e.g. 2")
    ph_tolerance = doc.number(entries, root, "", "replicate_pH_tolerance", required=False,
                              check=_replicate_tolerance,
                              expected="pH units within which runs are replicates, e.g. 0.1")
    ph_tolerance = PH_TOLERANCE if ph_tolerance is None else ph_tolerance
    runs_path = _runs_path(doc, entries, root, folder)

    runs: list[Run] = []
    runs_digest = None
    if runs_path is not None:
        rules = HeaderRules(row=None if header_row is None else int(header_row),
                            names=frozenset(COLUMNS), id_column="run")
        table, more = read_table(runs_path, display=display_path(runs_path), sheet=sheet,
                                 rules=rules)
        problems.extend(more)
        if table is not None:
            runs_digest = table.sha256
            if not table.rows:
                problems.append(Problem("the runs table has a header but no runs",
                                        **table.header_location.where(),
                                        expected="one row per run below the header"))
            imp_cols = _impurity_columns(table, {x[0].lower() for x in impurity_specs})
            forms = _check_header(table, problems,
                                  frozenset(c for m in imp_cols.values() for c in m.values()))
            runs = _runs(table, problems, forms)
            fitted = [r for r in runs if r.spike_stage is None]   # method runs: not fitted
            if fitted and not any(not r.excluded for r in fitted) \
                    and not count_errors(problems):
                problems.append(Problem("every run is excluded: nothing is left to fit",
                                        file=table.file, severity="warning",
                                        expected="at least one run without an exclusion"))

    impurities = _impurity_records(doc, impurity_specs, table if runs_path else None,
                                   runs, problems)
    method_runs = [r for r in runs if r.spike_stage is not None]
    runs = [r for r in runs if r.spike_stage is None]
    method_input.check_method_runs(method_runs, problems)
    method_targets = method_input.read_targets(doc, entries, _is_null, _positive,
                                               _non_negative)
    if method_runs and not runs and not count_errors(problems):
        problems.append(Problem("every run is a method-validation run (spike_stage): no "
                                "shake-flask run is left to fit", file=table.file,
                                expected="shake-flask runs without spike_stage beside the "
                                         "method-validation runs"))
    calibration, runs = _calibration(doc, entries, folder, runs, problems,
                                     any(r.response_organic is not None for r in method_runs))
    # method runs sit in sequences too: a failing sequence leaves them out as well
    suitability, both = _suitability(doc, entries, folder, runs + method_runs, problems)
    runs = [r for r in both if r.spike_stage is None]
    method_runs = [r for r in both if r.spike_stage is not None]

    # a replicate label shared by runs at different conditions is named here, once
    problems.extend(precision_groups([r for r in runs if not r.excluded], ph_tolerance).warnings)
    # a procedure outside the runs' pH span or volume ratios is predicted by extrapolation
    problems.extend(extrapolation_problems(procedures, Span.of_runs(runs), shown))
    problems = _in_file_order(problems)
    if count_errors(problems):
        return None, problems
    inputs = (InputFile(f"{study_id}/{STUDY_FILE}", _sha256(data), "study"),
              InputFile(f"{study_id}/{runs_path.relative_to(folder).as_posix()}", runs_digest,
                        "runs"))
    if calibration is not None:
        inputs += (InputFile(f"{study_id}/"
                             f"{calibration.settings.table.relative_to(folder).as_posix()}",
                             calibration.sha256, "calibration"),)
    if suitability is not None:
        inputs += (InputFile(f"{study_id}/{suitability.settings.relative}", suitability.sha256,
                             "suitability"),)
    warnings = tuple(p for p in problems if p.severity == "warning")
    study = Study(study_id, folder, title, name, model, tuple(runs), tuple(procedures),
                  targets, ion_pair, system, inputs, warnings, advice, tuple(impurities),
                  calibration=calibration, replicate_pH_tolerance=ph_tolerance,
                  suitability=suitability, method_runs=tuple(method_runs),
                  method_targets=method_targets)
    return study, problems


def _calibration(doc: _Yaml, entries, folder: Path, runs: list[Run],
                 problems: list[Problem], method_responses: bool = False
                 ) -> tuple[CalibrationSet | None, list[Run]]:
    """The calibration table (calibration_input.py) and the runs' amounts read off it."""
    from . import calibration_input as cal_in   # numpy and the curve fit: only when needed

    uses = [r for r in runs if r.response_aqueous is not None or r.response_organic is not None]
    if "calibration" not in entries or _is_null(entries["calibration"][1]):
        if uses:
            first = uses[0]
            problems.append(Problem(
                f"{len(uses)} run(s) give instrument responses but study.yaml names no "
                "calibration table", **first.location.where(), run=first.run_id,
                column="response_aqueous, response_organic", found="responses",
                expected="'calibration: <file>' in study.yaml, or found amounts"))
        return None, runs
    settings = cal_in.read_settings(
        doc, entries, folder,
        lambda text, node, key: _table_path(doc, text, node, key, folder, "calibration"))
    if settings is None:
        return None, runs
    curves, digest = cal_in.read_curves(settings, problems)
    if not curves or any(c.fit is None for c in curves):
        return None, runs
    if not uses and not method_responses:
        problems.append(Problem("a calibration table is given but no run gives responses: the "
                                "curves are reported, no amount is read off them",
                                file=settings.shown, severity="warning",
                                expected="response_aqueous / response_organic in the runs"))
    runs = cal_in.quantify_runs(runs, curves, settings, problems)
    return cal_in.CalibrationSet(settings, curves, digest), runs


def _suitability(doc: _Yaml, entries, folder: Path, runs: list[Run],
                 problems: list[Problem]) -> tuple[SuitabilitySet | None, list[Run]]:
    """The suitability table (suitability_input.py), judged, and its failing runs marked."""
    if "suitability" not in entries or _is_null(entries["suitability"][1]):
        if "suitability_limits" in entries and not _is_null(entries["suitability_limits"][1]):
            doc.report("suitability limits are given but no suitability table",
                       entries["suitability_limits"][0], "suitability_limits",
                       severity="warning", expected="'suitability: <file>' in study.yaml, or "
                                                    "no suitability_limits")
        return None, runs
    from . import suitability_input as su_in

    settings = su_in.read_settings(
        doc, entries, folder,
        lambda text, node, key: _table_path(doc, text, node, key, folder, "suitability"))
    limits = su_in.read_limits(doc, entries)
    if settings is None:
        return None, runs
    injections, digest = su_in.read_injections(settings, problems)
    if injections is None:
        return None, runs
    return su_in.judge_runs(settings, injections, limits, runs, problems, digest)


def _in_file_order(problems: list[Problem]) -> list[Problem]:
    """Problems grouped by file (first appearance) and sorted by line or row within each."""
    files: dict = {}
    for p in problems:
        files.setdefault(p.file, []).append(p)
    return [p for group in files.values()
            for p in sorted(group, key=lambda p: p.line or p.row or 0)]


def load_study(path) -> Study:
    """Read and validate ``path`` (a study folder); raise StudyError listing every problem.

    Warnings do not raise; they are kept in ``Study.warnings``.
    """
    study, problems = check_study(path)
    if study is None:
        raise StudyError(problems, study=Path(os.path.abspath(path)).name)
    return study


def discover_studies(path) -> list[Path]:
    """The study folders at ``path``: the folder itself if it holds study.yaml, else its
    sub-folders that do, sorted by name. Raises StudyError (located) when there are none.
    """
    p = Path(path)
    shown = display_path(p)
    expected = "a study folder (holding study.yaml) or a folder of study folders"
    if p.is_file() and p.name == STUDY_FILE:
        return [p.parent]
    if not p.exists():
        raise StudyError([Problem("no such folder", file=shown, expected=expected)])
    if not p.is_dir():
        raise StudyError([Problem("not a folder", file=shown, expected=expected)])
    if (p / STUDY_FILE).is_file():
        return [p]
    found = sorted((c for c in p.iterdir()
                    if c.is_dir() and not c.name.startswith(".") and (c / STUDY_FILE).is_file()),
                   key=lambda c: c.name)
    if not found:
        raise StudyError([Problem("no study here: neither study.yaml nor a sub-folder holding "
                                  "one", file=shown, expected=expected)])
    return found
