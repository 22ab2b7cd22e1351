"""The suitability table of a study, its limits from study.yaml, and the runs it judges.

Reading rules
-------------
* ``suitability:`` in study.yaml names the table (a file in the study folder, read like the
  runs table: CSV, XLSX or ODS), as a bare file name or as a mapping with ``table`` and
  ``sheet``. Every quantity judged is a ratio of times, so times and widths may be in any
  unit, the same in every column.
* One row per injection of the suitability standard. Columns (names are case-insensitive):
  ``sequence`` (required: the sequence the injection belongs to, the same names as the runs'
  ``sequence`` column), ``injection`` (optional label), ``rt_analyte``, ``rt_neighbour``
  (nearest neighbouring peak), ``rt_unretained`` (unretained marker, dead time),
  ``w_half_analyte`` / ``w_half_neighbour`` (peak widths at half height), ``w_base_analyte`` /
  ``w_base_neighbour`` (widths at the base, tangent method), ``w_5pct`` (peak width at 5 % of
  the height, W0.05) with ``f_5pct`` (its front part f, from the peak start to the apex's
  perpendicular), ``response`` (peak area or height of the replicate standard injection).
  Every column but ``sequence`` is optional; a row must give at least one quantity.
* Times and widths are greater than 0; the unretained marker elutes before the analyte (and
  the neighbour); f lies inside W0.05 (0 < f < W0.05); a response is at least 0; a width
  given for the neighbour needs the neighbour's retention time.
* ``suitability_limits:`` in study.yaml (optional) replaces the common-practice defaults
  (``resolution_min`` 2.0, ``tailing_max`` 2.0, ``injection_rsd_max_pct`` 2.0 with
  ``injections_min`` 5) and may add ``plates_min`` and ``retention_factor_min`` (no default).
  ``null`` switches a default criterion off. Limits are judged on each sequence's worst
  injection (suitability.py).

Runs and sequences
------------------
A run belongs to the sequence its ``sequence`` cell names; a run that names none belongs to
the table's only sequence when the table holds one (else its suitability is unknown, with a
warning). Runs of a sequence whose suitability fails are left out of the fit and stay in the
runs table, "not usable", with the failing criteria as the reason (analysis.py); a run whose
sequence has no row in the table is fitted, with a warning that its suitability is not
recorded.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import yaml

from .errors import Problem, count_errors
from .suitability import Injection, SuitabilityLimits, SuitabilityReport, judge_suitability
from .tables import Table, read_table

YAML_KEYS = ("table", "sheet")
LIMIT_KEYS = ("resolution_min", "tailing_max", "injection_rsd_max_pct", "injections_min",
              "plates_min", "retention_factor_min")
#: column -> Injection field
FIELDS = {"rt_analyte": "tR", "rt_neighbour": "tR_neighbour", "rt_unretained": "tM",
          "w_half_analyte": "width_half", "w_half_neighbour": "width_half_neighbour",
          "w_base_analyte": "width_base", "w_base_neighbour": "width_base_neighbour",
          "w_5pct": "width_5pct", "f_5pct": "front_5pct", "response": "response"}
COLUMNS = ("sequence", "injection") + tuple(FIELDS)
_WHAT = {
    "rt_analyte": "the analyte's retention time, greater than 0",
    "rt_neighbour": "the nearest neighbouring peak's retention time, greater than 0",
    "rt_unretained": "the unretained marker's retention time (dead time), greater than 0",
    "w_half_analyte": "the analyte's peak width at half height, greater than 0",
    "w_half_neighbour": "the neighbour's peak width at half height, greater than 0",
    "w_base_analyte": "the analyte's peak width at the base, greater than 0",
    "w_base_neighbour": "the neighbour's peak width at the base, greater than 0",
    "w_5pct": "the analyte's peak width at 5 % of its height (W0.05), greater than 0",
    "f_5pct": "the front part f of W0.05, greater than 0 and less than W0.05",
    "response": "the response (peak area or height) of the standard injection, at least 0",
}
_LIMIT_WHAT = {
    "resolution_min": "the smallest resolution allowed, e.g. 2.0",
    "tailing_max": "the largest tailing factor allowed, e.g. 2.0",
    "injection_rsd_max_pct": "the largest RSD of replicate injections in %, e.g. 2.0",
    "injections_min": "the least number of replicate injections, a whole number >= 2, e.g. 5",
    "plates_min": "the smallest plate number allowed, e.g. 2000",
    "retention_factor_min": "the smallest retention factor allowed, e.g. 2.0",
}
NO_SEQUENCE_RULE = ("a run that names no sequence belongs to the table's only sequence when "
                    "the table holds one")
HANDLING = ("runs quantified in a sequence whose suitability fails are not used: left out of "
            "the fit (kept in the runs table as not usable) and of the method-validation "
            "statistics, with the failing criteria as the reason")


@dataclass(frozen=True)
class SuitabilitySettings:
    """What ``suitability:`` in study.yaml says."""

    table: Path
    shown: str
    relative: str
    sheet: str | None = None


@dataclass(frozen=True)
class SuitabilitySet:
    """A study's suitability: settings, the judged sequences, and the runs in each."""

    settings: SuitabilitySettings
    report: SuitabilityReport
    runs: dict            # sequence -> run ids (table order), runs naming a sequence of the table
    left_out: dict        # failing sequence -> ids of its runs left out of the fit (not excluded)
    unrecorded: dict      # sequence not in the table -> run ids
    unassigned: tuple     # run ids naming no sequence when the table holds several
    sha256: str | None = None

    def to_dict(self) -> dict:
        d = self.report.to_dict()
        d["table"] = self.settings.relative
        d["handling"] = HANDLING
        d["no_sequence_rule"] = NO_SEQUENCE_RULE
        failed = self.report.failed()
        for s in d["sequences"]:
            s["runs"] = list(self.runs.get(s["sequence"], ()))
            s["runs_left_out"] = list(self.left_out.get(s["sequence"], ()))
            s["reason"] = failed.get(s["sequence"])
        d["runs_flagged"] = sum(len(v) for v in self.left_out.values())
        d["sequences_not_in_table"] = {k: list(v) for k, v in self.unrecorded.items()}
        d["runs_without_sequence"] = list(self.unassigned)
        return d


# -- study.yaml -----------------------------------------------------------------------------------

def read_settings(doc, entries, folder: Path, resolve_path) -> SuitabilitySettings | None:
    """``suitability:`` as settings; problems go to ``doc`` (study._Yaml) with their line.
    ``resolve_path(text, node, key)`` checks a path inside the study folder (as for runs)."""
    node = entries["suitability"][1]
    expected = "the suitability table's file name, e.g. suitability.csv"
    if isinstance(node, yaml.ScalarNode):
        text = doc.text(entries, None, "", "suitability", expected=expected)
        path = None if text is None else resolve_path(text, node, "suitability")
        return None if path is None else _settings(path, folder)
    s = doc.mapping(node, "suitability", YAML_KEYS, "suitability")
    if s is None:
        return None
    before = count_errors(doc.problems)
    text = doc.text(s, node, "suitability", "table", expected=expected)
    path = None if text is None else resolve_path(text, s["table"][1], "suitability.table")
    sheet = doc.text(s, node, "suitability", "sheet", required=False,
                     expected="the name of the sheet holding the suitability injections")
    if path is None or count_errors(doc.problems) > before:
        return None
    return _settings(path, folder, sheet)


def _settings(path: Path, folder: Path, sheet=None) -> SuitabilitySettings:
    from .study import display_path
    return SuitabilitySettings(path, display_path(path), path.relative_to(folder).as_posix(),
                               sheet)


def read_limits(doc, entries) -> SuitabilityLimits:
    """``suitability_limits:`` over the defaults (a key set to null switches a default off)."""
    if "suitability_limits" not in entries:
        return SuitabilityLimits()
    node = entries["suitability_limits"][1]
    from .study import _is_null
    if _is_null(node):
        return SuitabilityLimits()
    m = doc.mapping(node, "suitability_limits", LIMIT_KEYS, "suitability_limits")
    if m is None:
        return SuitabilityLimits()
    values: dict = {}
    for name in LIMIT_KEYS:
        if name not in m:
            continue
        if _is_null(m[name][1]):
            if name == "injections_min":
                doc.report("'injections_min' cannot be switched off", m[name][1],
                           f"suitability_limits.{name}", found="null",
                           expected=_LIMIT_WHAT[name] + " (switch the RSD criterion off with "
                                                        "injection_rsd_max_pct: null)")
                continue
            values[name] = None
            continue
        check = _whole_at_least_2 if name == "injections_min" else _positive
        v = doc.number(m, node, "suitability_limits", name, check=check,
                       expected=_LIMIT_WHAT[name])
        if v is not None:
            values[name] = int(v) if name == "injections_min" else float(v)
    return SuitabilityLimits(**values, from_study=tuple(values))


def _positive(value: float) -> str | None:
    return None if value > 0 else "a number greater than 0"


def _whole_at_least_2(value: float) -> str | None:
    return None if value >= 2 and float(value).is_integer() else "a whole number of at least 2"


# -- the suitability table -------------------------------------------------------------------------

def read_injections(settings: SuitabilitySettings,
                    problems: list[Problem]) -> tuple[list[Injection] | None, str | None]:
    """The table's injections (None when it has errors); problems located."""
    table, more = read_table(settings.table, display=settings.shown, sheet=settings.sheet)
    problems.extend(replace(p, message=p.message.replace("runs table", "suitability table"))
                    for p in more)
    if table is None:
        return None, None
    before = count_errors(problems)
    where = table.header_location.where()
    present = ", ".join(table.header(c) for c in table.columns)
    if "sequence" not in table.headers:
        problems.append(Problem("missing column in the suitability table", **where,
                                column="sequence", found=present,
                                expected="a sequence column naming each injection's sequence"))
    for c in table.columns:
        if c not in COLUMNS:
            from .study import _suggest
            problems.append(Problem("unknown column in the suitability table, ignored"
                                    + _suggest(c, COLUMNS), **where, column=table.header(c),
                                    found=table.header(c), severity="warning",
                                    expected="known columns: " + ", ".join(COLUMNS)))
    if not any(c in table.headers for c in FIELDS):
        problems.append(Problem("the suitability table has no column of times, widths or "
                                "responses", **where, found=present,
                                expected="some of " + ", ".join(FIELDS)))
    if count_errors(problems) > before:
        return None, table.sha256
    if not table.rows:
        problems.append(Problem("the suitability table has a header but no injections", **where,
                                expected="one row per injection of the suitability standard"))
        return None, table.sha256
    injections = [inj for row in table.rows if not row.misaligned
                  and (inj := _injection(table, row, problems)) is not None]
    seen: dict = {}
    for inj in injections:
        if inj.injection is None:
            continue
        key = (inj.sequence, inj.injection)
        if key in seen:
            problems.append(Problem(f"duplicate injection label in sequence {inj.sequence!r} "
                                    f"(first at {seen[key]})", **inj.location.where(),
                                    column=table.header("injection"), found=inj.injection,
                                    expected="a unique injection label per sequence"))
        seen[key] = inj.location
    if count_errors(problems) > before:
        return None, table.sha256
    return injections, table.sha256


def _injection(table: Table, row, problems: list[Problem]) -> Injection | None:
    before = count_errors(problems)
    where = row.location.where()

    def report(column: str, message: str, expected: str, found: str | None = None) -> None:
        problems.append(Problem(message, **where, column=table.header(column),
                                found=row.raw(column) if found is None else found,
                                expected=expected))

    seq = row.raw("sequence").strip()
    if not seq:
        report("sequence", "empty sequence", "the name of the injection's sequence, e.g. SEQ-1")
    values: dict[str, float] = {}
    for col in FIELDS:
        if col not in table.headers:
            continue
        v = row.cells.get(col)
        if v is None:
            continue
        if isinstance(v, str):
            report(col, "not a number", _WHAT[col])
            continue
        v = float(v)
        if col == "response":
            if v < 0:
                report(col, "negative response", _WHAT[col])
                continue
        elif v <= 0:
            report(col, ("negative " if v < 0 else "zero ")
                   + ("time" if col.startswith("rt_") else "width"), _WHAT[col])
            continue
        values[col] = v
    if count_errors(problems) > before:
        return None
    if not values:
        report("sequence", "the row gives no time, width or response", "some of "
               + ", ".join(c for c in FIELDS if c in table.headers), found=seq)
        return None
    t0 = values.get("rt_unretained")
    for col in ("rt_analyte", "rt_neighbour"):
        if t0 is not None and col in values and values[col] <= t0:
            report(col, "the peak elutes no later than the unretained marker",
                   f"a retention time later than rt_unretained ({row.raw('rt_unretained')})")
    for col, needs in (("w_half_neighbour", "rt_neighbour"), ("w_base_neighbour", "rt_neighbour"),
                       ("f_5pct", "w_5pct"), ("w_5pct", "f_5pct")):
        if col in values and needs not in values:
            report(needs if needs in table.headers else col,
                   f"{col} is given without {needs}", f"{needs} beside {col}", found="")
    if "f_5pct" in values and "w_5pct" in values and values["f_5pct"] >= values["w_5pct"]:
        report("f_5pct", "f is not inside W0.05",
               f"f less than W0.05 ({row.raw('w_5pct')}); f = W0.05 / 2 for a symmetric peak")
    if count_errors(problems) > before:
        return None
    label = row.raw("injection").strip() or None
    return Injection(seq, row.location, label, **{FIELDS[c]: v for c, v in values.items()})


# -- runs -----------------------------------------------------------------------------------------

def judge_runs(settings: SuitabilitySettings, injections: list[Injection],
               limits: SuitabilityLimits, runs, problems: list[Problem],
               sha256: str | None) -> tuple[SuitabilitySet, list]:
    """Judge each sequence, mark the runs of failing ones (``Run.suitability``), warn about
    runs whose suitability is not recorded. Returns the set and the runs."""
    report = judge_suitability(injections, limits, settings.relative)
    sequences = [s.sequence for s in report.sequences]
    only = sequences[0] if len(sequences) == 1 else None
    failed = report.failed()
    members: dict[str, list[str]] = {}
    left_out: dict[str, list[str]] = {}
    unrecorded: dict[str, list[str]] = {}
    unassigned: list[str] = []
    out = []
    for run in runs:
        seq = run.sequence or only
        if seq is None:
            unassigned.append(run.run_id)
        elif seq not in sequences:
            unrecorded.setdefault(seq, []).append(run.run_id)
        else:
            members.setdefault(seq, []).append(run.run_id)
            if seq in failed:
                run = replace(run, suitability=f"sequence {seq} fails system suitability "
                                               f"({failed[seq]})")
                if not run.excluded:
                    left_out.setdefault(seq, []).append(run.run_id)
        out.append(run)
    if unassigned:
        problems.append(Problem(f"{len(unassigned)} run(s) name no sequence and the suitability "
                                "table holds several: their system suitability is not known; "
                                "they are fitted", file=settings.shown, severity="warning",
                                run=", ".join(unassigned), column="sequence", found="",
                                expected="a sequence of the suitability table ("
                                         + ", ".join(sequences) + ")"))
    for seq, ids in unrecorded.items():
        problems.append(Problem(f"sequence {seq!r} has no row in the suitability table: the "
                                f"system suitability of its {len(ids)} run(s) is not recorded; "
                                "they are fitted", file=settings.shown, severity="warning",
                                run=", ".join(ids), column="sequence", found=seq,
                                expected="a sequence of the suitability table ("
                                         + ", ".join(sequences) + ")"))
    return SuitabilitySet(settings, report, {k: tuple(v) for k, v in members.items()},
                          {k: tuple(v) for k, v in left_out.items()},
                          {k: tuple(v) for k, v in unrecorded.items()}, tuple(unassigned),
                          sha256), out
