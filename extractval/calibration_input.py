"""The calibration table of a study and the amounts read off it for runs that give responses.

Reading rules
-------------
* ``calibration:`` in study.yaml names the table (a file in the study folder, read like the
  runs table), either as a bare file name or as a mapping with ``table``, ``sheet``, ``level``
  (``amount``, the default, or ``concentration``), ``unit`` (text shown beside levels),
  ``model`` (``linear``, the default, or ``quadratic``: only when declared) and ``weighting``
  (``auto``, the default, or ``1``, ``1/x``, ``1/x^2``).
* Columns: ``standard``, ``level``, ``response``; optional ``is_response`` (internal
  standard: the curve is then of the ratio response / is_response), ``sequence`` (one curve per
  sequence) and ``phase`` (``aqueous`` / ``organic`` when the phases are calibrated apart; empty
  means the curve serves both). A level is greater than 0 (blank and zero samples are not
  calibration standards); a response is at least 0; each curve needs at least 2 levels and one
  more standard than it has parameters.
* Runs may give ``response_aqueous`` / ``response_organic`` (and ``is_response_aqueous`` /
  ``is_response_organic`` when the curve has an internal standard) in place of
  ``found_aqueous`` / ``found_organic``, with ``spiked`` as before, and ``sequence`` to say
  which curve applies (needed when the table holds more than one sequence).
* Amounts: ``level: amount`` levels are amounts in the unit of ``spiked``, and the amount read
  off is the phase's found amount. ``level: concentration`` levels are amounts per mL (the unit
  of ``spiked`` per mL), and the found amount is that concentration times the phase's volume in
  the run (aqueous_mL or organic_mL).
* A response whose amount falls below the lowest standard is "below LLOQ", above the highest
  "above range": never extrapolated. The phase then has no found amount; if the other phase was
  quantified the run is fitted from that phase alone, otherwise the run stays in every table,
  not fitted, with the reason.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import yaml

from .calibration import (ACCEPTANCE_RULE, BELOW_LLOQ, CURVE_MODELS, QUANTIFIED,
                          WEIGHTING_RULE, WEIGHTINGS, CalibrationFit, CalibrationImpossible,
                          fit_calibration)
from .errors import Problem, count_errors
from .results import clean
from .tables import Location, Table, read_table

LEVEL_KINDS = ("amount", "concentration")
PHASES = ("aqueous", "organic")
YAML_KEYS = ("table", "sheet", "level", "unit", "model", "weighting")
COLUMNS = {"standard": "standard", "level": "level", "response": "response",
           "is_response": "is_response", "sequence": "sequence", "phase": "phase"}
REQUIRED = ("standard", "level", "response")
#: Calibration sd of a run's y (log10 units) against the fit's sd of y: below this median
#: ratio the calibration's share of the variance is under 1/9 and called negligible.
NEGLIGIBLE_RATIO = 1.0 / 3.0
NEGLIGIBLE_RULE = ("negligible when the median, over the fitted runs, of the calibration sd of "
                   "the run's log10 value divided by the fit's sd of that value is below 1/3 "
                   "(the calibration then adds less than 1/9 to the variance; common practice)")
_ID = re.compile(r"[^A-Za-z0-9._-]+")


@dataclass(frozen=True)
class CalibrationSettings:
    """What ``calibration:`` in study.yaml says."""

    table: Path
    shown: str
    sheet: str | None = None
    level: str = "amount"
    unit: str | None = None
    model: str = "linear"
    weighting: str | None = None        # None: chosen by the rule in calibration.py
    relative: str | None = None         # the table's path inside the study folder


@dataclass(frozen=True)
class Standard:
    """One row of the calibration table."""

    standard: str
    level: float
    response: float
    is_response: float | None
    sequence: str | None
    phase: str | None
    location: Location

    @property
    def y(self) -> float:
        return self.response / self.is_response if self.is_response else self.response


@dataclass(eq=False)
class Curve:
    """The standards of one sequence and phase, and their fitted curve (or why none)."""

    sequence: str | None
    phase: str | None
    standards: tuple[Standard, ...]
    fit: CalibrationFit | None = None
    problem: str | None = None

    @property
    def id(self) -> str:
        """A stable identifier segment: sequence and phase, e.g. ``SEQ-1-aqueous``."""
        parts = [p for p in (self.sequence, self.phase) if p]
        return _ID.sub("_", "-".join(parts)) if parts else "curve"

    @property
    def internal_standard(self) -> bool:
        return any(s.is_response is not None for s in self.standards)

    @property
    def passes(self) -> bool:
        return self.fit is not None and self.fit.acceptance()["status"] == "pass"


@dataclass(frozen=True)
class PhaseQuantity:
    """One phase of one run read off a curve: response in, amount out, with its sd."""

    phase: str
    curve: str                      # Curve.id
    response: float
    is_response: float | None
    y: float                        # what the curve was read at (ratio with an IS)
    status: str                     # QUANTIFIED | BELOW_LLOQ | ABOVE_RANGE
    level_value: float | None       # in level units (amount or concentration)
    amount: float | None            # found amount, unit of spiked
    sd_line: float | None           # of the amount, from the curve's parameters
    sd_total: float | None          # of the amount, curve and one reading

    @property
    def rsd_line(self) -> float | None:
        if self.amount is None or not self.amount or self.sd_line is None:
            return None
        return self.sd_line / self.amount

    def to_dict(self) -> dict:
        return {"phase": self.phase, "curve": self.curve, "response": clean(self.response),
                "is_response": clean(self.is_response), "status": self.status,
                "level_value": clean(self.level_value), "amount": clean(self.amount),
                "sd_line": clean(self.sd_line), "sd_total": clean(self.sd_total),
                "rsd_line_pct": clean(None if self.rsd_line is None else 100 * self.rsd_line,
                                      4)}


@dataclass(frozen=True)
class CalibrationSet:
    """A study's calibration: settings, curves, and what the runs read off them."""

    settings: CalibrationSettings
    curves: tuple[Curve, ...]
    sha256: str | None = None

    def curve(self, curve_id: str) -> Curve | None:
        return next((c for c in self.curves if c.id == curve_id), None)

    def to_dict(self) -> dict:
        s = self.settings
        return {"table": s.table.name if s.relative is None else s.relative,
                "level": s.level, "unit": s.unit, "model": s.model,
                "weighting_requested": s.weighting or "auto",
                "weighting_rule": WEIGHTING_RULE, "acceptance_rule": ACCEPTANCE_RULE,
                "status": "pass" if all(c.passes for c in self.curves) else "fail",
                "curves": [dict({"id": c.id, "sequence": c.sequence, "phase": c.phase,
                                 "internal_standard": c.internal_standard,
                                 "problem": c.problem},
                                **(c.fit.to_dict() if c.fit is not None else {}))
                           for c in self.curves]}


# -- study.yaml -----------------------------------------------------------------------------------

def read_settings(doc, entries, folder: Path, resolve_path) -> CalibrationSettings | None:
    """``calibration:`` as settings; problems go to ``doc`` (study._Yaml) with their line.
    ``resolve_path(text, node, key)`` checks a path inside the study folder (as for runs)."""
    node = entries["calibration"][1]
    if isinstance(node, yaml.ScalarNode):
        text = doc.text(entries, None, "", "calibration",
                        expected="the calibration table's file name, e.g. calibration.csv")
        path = None if text is None else resolve_path(text, node, "calibration")
        return None if path is None else CalibrationSettings(
            path, _shown(path, folder), relative=path.relative_to(folder).as_posix())
    c = doc.mapping(node, "calibration", YAML_KEYS, "calibration")
    if c is None:
        return None
    before = count_errors(doc.problems)
    text = doc.text(c, node, "calibration", "table",
                    expected="the calibration table's file name, e.g. calibration.csv")
    path = None if text is None else resolve_path(text, c["table"][1], "calibration.table")
    sheet = doc.text(c, node, "calibration", "sheet", required=False,
                     expected="the name of the sheet holding the standards")
    level = _choice(doc, c, node, "level", LEVEL_KINDS, "amount")
    unit = doc.text(c, node, "calibration", "unit", required=False,
                    expected="the unit of the levels, e.g. ng/mL")
    model = _choice(doc, c, node, "model", CURVE_MODELS, "linear")
    weighting = _choice(doc, c, node, "weighting", ("auto",) + WEIGHTINGS, "auto")
    if path is None or count_errors(doc.problems) > before:
        return None
    return CalibrationSettings(path, _shown(path, folder), sheet, level, unit, model,
                               None if weighting == "auto" else weighting,
                               path.relative_to(folder).as_posix())


def _choice(doc, c, node, name: str, allowed: tuple[str, ...], default: str) -> str:
    value = doc.text(c, node, "calibration", name, required=False,
                     expected="one of " + ", ".join(allowed))
    if value is None:
        return default
    value = value.strip().replace("²", "^2")
    if value not in allowed:
        doc.report(f"unknown calibration {name}", c[name][1], f"calibration.{name}",
                   found=value, expected="one of " + ", ".join(allowed))
        return default
    return value


def _shown(path: Path, folder: Path) -> str:
    from .study import display_path
    return display_path(path)


# -- the calibration table ------------------------------------------------------------------------

def read_curves(settings: CalibrationSettings,
                problems: list[Problem]) -> tuple[tuple[Curve, ...], str | None]:
    """The table's curves, fitted; problems located. Returns (curves, sha256 of the file)."""
    table, more = read_table(settings.table, display=settings.shown, sheet=settings.sheet)
    problems.extend(_renamed(p) for p in more)
    if table is None:
        return (), None
    before = count_errors(problems)
    where = table.header_location.where()
    present = ", ".join(table.header(c) for c in table.columns)
    for c in REQUIRED:
        if c not in table.headers:
            problems.append(Problem("missing column in the calibration table", **where,
                                    column=c, found=present,
                                    expected="columns standard, level, response (optional "
                                             "is_response, sequence, phase)"))
    for c in table.columns:
        if c not in COLUMNS:
            problems.append(Problem("unknown column in the calibration table, ignored", **where,
                                    column=table.header(c), found=table.header(c),
                                    severity="warning",
                                    expected="known columns: " + ", ".join(COLUMNS)))
    if count_errors(problems) > before:
        return (), table.sha256
    if not table.rows:
        problems.append(Problem("the calibration table has a header but no standards", **where,
                                expected="one row per calibration standard"))
        return (), table.sha256
    standards = [s for row in table.rows if (s := _standard(table, row, problems)) is not None]
    if count_errors(problems) > before:
        return (), table.sha256
    groups: dict[tuple, list[Standard]] = {}
    for s in standards:
        groups.setdefault((s.sequence, s.phase), []).append(s)
    curves = []
    for (seq, phase), rows in groups.items():
        curve = Curve(seq, phase, tuple(rows))
        _check_group(table, curve, problems)
        curves.append(curve)
    if count_errors(problems) > before:
        return tuple(curves), table.sha256
    for curve in curves:
        x = np.array([s.level for s in curve.standards])
        y = np.array([s.y for s in curve.standards])
        try:
            curve.fit = fit_calibration(x, y, model=settings.model, weighting=settings.weighting,
                                        standards=tuple(s.standard for s in curve.standards))
        except CalibrationImpossible as exc:
            problems.append(Problem(f"calibration {curve.id!r} cannot be fitted: {exc}",
                                    **curve.standards[0].location.where(),
                                    expected="at least 2 levels and more standards than the "
                                             "curve has parameters"))
            continue
        if not curve.fit.monotone:
            curve.problem = "the curve does not rise over the range of its standards"
            problems.append(Problem(f"calibration {curve.id!r}: {curve.problem}; no amount is "
                                    "read off it", **curve.standards[0].location.where(),
                                    expected="responses that grow with the level"))
    return tuple(curves), table.sha256


def _renamed(p: Problem) -> Problem:
    return replace(p, message=p.message.replace("runs table", "calibration table"))


def _standard(table: Table, row, problems: list[Problem]) -> Standard | None:
    before = count_errors(problems)
    where = row.location.where()
    sid = row.raw("standard").strip()
    if not sid:
        problems.append(Problem("empty standard id", **where, column="standard", found="",
                                expected="a name for the standard, e.g. CS1"))

    def number(col: str, what: str, required: bool = True) -> float | None:
        if col not in table.headers:
            return None
        v = row.cells.get(col)
        if v is None:
            if required:
                problems.append(Problem("empty cell", **where, run=None, column=col, found="",
                                        expected=what))
            return None
        if isinstance(v, str):
            problems.append(Problem("not a number", **where, column=col, found=row.raw(col),
                                    expected=what))
            return None
        return float(v)

    level = number("level", "the nominal level, greater than 0")
    if level is not None and level <= 0:
        problems.append(Problem("negative level" if level < 0 else "level 0", **where,
                                column="level", found=row.raw("level"),
                                expected="a level greater than 0 (blank and zero samples are "
                                         "not calibration standards)"))
    response = number("response", "the instrument response (e.g. peak area), at least 0")
    if response is not None and response < 0:
        problems.append(Problem("negative response", **where, column="response",
                                found=row.raw("response"), expected="a response of at least 0"))
    is_resp = number("is_response", "the internal standard's response, greater than 0",
                     required=False)
    if is_resp is not None and is_resp <= 0:
        problems.append(Problem("internal-standard response must be greater than 0", **where,
                                column="is_response", found=row.raw("is_response"),
                                expected="the internal standard's response, greater than 0"))
    phase = row.raw("phase").strip().lower() or None
    if phase is not None and phase not in PHASES:
        problems.append(Problem("unknown phase", **where, column="phase", found=row.raw("phase"),
                                expected="aqueous, organic, or empty for both"))
    if count_errors(problems) > before:
        return None
    return Standard(sid, level, response, is_resp, row.raw("sequence").strip() or None, phase,
                    row.location)


def _check_group(table: Table, curve: Curve, problems: list[Problem]) -> None:
    with_is = [s for s in curve.standards if s.is_response is not None]
    if with_is and len(with_is) != len(curve.standards):
        s = next(s for s in curve.standards if s.is_response is None)
        problems.append(Problem(f"calibration {curve.id!r}: some standards have an internal-"
                                "standard response and this one has none", **s.location.where(),
                                column="is_response", found="",
                                expected="is_response on every standard of the curve or none"))
    levels = {s.level for s in curve.standards}
    if len(levels) < 2:
        problems.append(Problem(f"calibration {curve.id!r} has fewer than 2 levels",
                                **curve.standards[0].location.where(), column="level",
                                found=", ".join(f"{v:g}" for v in sorted(levels)),
                                expected="standards at 2 or more levels (ICH M10: at least 6)"))
    seen: dict[str, Location] = {}
    for s in curve.standards:
        if s.standard in seen:
            problems.append(Problem(f"duplicate standard id in calibration {curve.id!r} (first "
                                    f"at {seen[s.standard]})", **s.location.where(),
                                    column="standard", found=s.standard,
                                    expected="a unique standard id per curve"))
        seen[s.standard] = s.location


# -- runs -----------------------------------------------------------------------------------------

def _curve_for(curves: tuple[Curve, ...], sequence: str | None, phase: str) -> Curve | None | str:
    """The curve a run's phase is read off, or the reason there is none."""
    sequences = sorted({c.sequence for c in curves if c.sequence}, key=str)
    if sequence is None:
        if len(sequences) > 1:
            return ("the calibration table holds several sequences (" + ", ".join(sequences)
                    + "): the run must name its sequence")
        sequence = sequences[0] if sequences else None
    elif sequence not in sequences:
        return (f"no calibration for sequence {sequence!r} (the table holds "
                + (", ".join(sequences) if sequences else "no sequence column") + ")")
    for p in (phase, None):
        for c in curves:
            if c.sequence == sequence and c.phase == p:
                return c
    return f"no calibration for the {phase} phase" + (f" in sequence {sequence!r}"
                                                       if sequence else "")


def quantify_runs(runs, curves: tuple[Curve, ...], settings: CalibrationSettings,
                  problems: list[Problem]) -> list:
    """Runs with responses get found amounts read off their curve (records keep both)."""
    out = []
    for run in runs:
        given = {ph: getattr(run, f"response_{ph}") for ph in PHASES}
        if all(v is None for v in given.values()):
            out.append(run)
            continue
        found: dict[str, float | None] = {}
        quantities = []
        censored = []
        failed = False
        for phase, response in given.items():
            if response is None:
                continue
            where = dict(run.location.where(), run=run.run_id, column=f"response_{phase}")
            curve = _curve_for(curves, run.sequence, phase)
            if isinstance(curve, str) or curve is None:
                if not run.excluded:
                    problems.append(Problem(curve or "no calibration", **where,
                                            found=run.sequence or "(no sequence)",
                                            expected="a sequence and phase that the calibration "
                                                     "table holds"))
                failed = True
                continue
            if curve.fit is None or curve.problem:
                failed = True       # the curve's own problem is reported once, at the curve
                continue
            is_resp = getattr(run, f"is_response_{phase}")
            if curve.internal_standard and is_resp is None:
                if not run.excluded:
                    problems.append(Problem(f"calibration {curve.id!r} uses an internal "
                                            "standard: the run needs its internal-standard "
                                            "response", **dict(where,
                                                               column=f"is_response_{phase}"),
                                            found="", expected="the internal standard's response,"
                                                               " greater than 0"))
                failed = True
                continue
            if not curve.internal_standard and is_resp is not None:
                problems.append(Problem(f"calibration {curve.id!r} has no internal standard: "
                                        "the run's internal-standard response cannot be used",
                                        **dict(where, column=f"is_response_{phase}"),
                                        found=str(is_resp),
                                        expected="an empty cell, or is_response in the "
                                                 "calibration table"))
                failed = True
                continue
            y = response / is_resp if is_resp else response
            q = _quantity(curve, phase, response, is_resp, y, run, settings)
            quantities.append(q)
            found[phase] = q.amount
            if q.status != QUANTIFIED:
                censored.append(q)
        if failed:
            out.append(run)
            continue
        reason = None
        if censored:
            by_id = {c.id: c for c in curves}
            words = "; ".join(_censor_words(q, by_id, settings) for q in censored)
            if any(v is not None for v in found.values()):
                kept = next(ph for ph, v in found.items() if v is not None)
                reason = f"{words}: fitted from the {kept} phase alone"
            else:
                reason = f"{words}: no amount to fit"
        new = replace(run, found_aqueous=found.get("aqueous", run.found_aqueous),
                      found_organic=found.get("organic", run.found_organic),
                      quantities=tuple(quantities), censored=reason)
        _plausible(new, problems)
        out.append(new)
    return out


def _quantity(curve: Curve, phase: str, response: float, is_resp: float | None, y: float, run,
              settings: CalibrationSettings) -> PhaseQuantity:
    inv = curve.fit.inverse(y)
    factor = 1.0
    if settings.level == "concentration":
        factor = run.aqueous_mL if phase == "aqueous" else run.organic_mL
    amount, sd_line, sd_total = (None if v is None else v * factor
                                 for v in (inv.value, inv.sd_line, inv.sd_total))
    return PhaseQuantity(phase, curve.id, response, is_resp, y, inv.status, inv.value,
                         amount, sd_line, sd_total)


def _censor_words(q: PhaseQuantity, curves: dict, settings: CalibrationSettings) -> str:
    fit = curves[q.curve].fit
    unit = f" {settings.unit}" if settings.unit else ""
    edge = (f"below the lowest standard ({fit.lowest:g}{unit})" if q.status == BELOW_LLOQ
            else f"above the highest standard ({fit.highest:g}{unit})")
    return f"{q.phase} phase {q.status}: response {q.response:.6g} reads {edge} of " \
           f"calibration {q.curve!r}"


def _plausible(run, problems: list[Problem]) -> None:
    """Amounts read off a curve are checked against the spiked amount, as warnings."""
    if run.excluded or not run.spiked:
        return
    total = sum(v for v in (run.found_aqueous, run.found_organic) if v is not None)
    pct = 100.0 * total / run.spiked
    if pct > 150.0:
        problems.append(Problem("the amounts read off the calibration exceed the spiked amount "
                                "by far", **run.location.where(), run=run.run_id,
                                column="response_aqueous, response_organic",
                                found=f"{pct:.1f} % of spiked", severity="warning",
                                expected="at most 150 % of the spiked amount; check the level "
                                         "unit (amount or concentration) and the spiked unit"))


# -- calibration uncertainty in the fit's weights ---------------------------------------------

def log10_variance(run, kind: str) -> float | None:
    """Variance of a run's fitted log10 value due to the calibration curve(s) alone (delta
    method: var(log10 A) = (rsd(A) / ln 10)^2; log D adds both phases), or None."""
    if not getattr(run, "quantities", None):
        return None
    rsd = {q.phase: q.rsd_line for q in run.quantities if q.status == QUANTIFIED}
    phases = {"log D": ("aqueous", "organic"), "log E": ("organic",),
              "log q": ("aqueous",)}.get(kind, ())
    var = 0.0
    for ph in phases:
        if rsd.get(ph) is not None:
            var += (rsd[ph] / math.log(10.0)) ** 2
    return var


def uncertainty_statement(ratios: list[float], included: bool, sigma_before: float,
                          sigma_after: float | None) -> dict:
    """The negligibility verdict and what was done about it, for the report."""
    median = float(np.median(ratios)) if ratios else None
    negligible = median is not None and median < NEGLIGIBLE_RATIO
    if median is None:
        text = "no fitted run was read off a calibration curve"
    elif negligible:
        text = (f"calibration uncertainty negligible: median ratio {median:.2f} < 1/3 of the "
                "fit's sd; weights unchanged")
    else:
        text = (f"calibration uncertainty not negligible: median ratio {median:.2f} >= 1/3 of "
                "the fit's sd; each run's calibration variance added to its weight")
    return {"rule": NEGLIGIBLE_RULE, "median_ratio": clean(median, 4),
            "negligible": negligible if median is not None else None,
            "included_in_weights": included, "residual_sd_without": clean(sigma_before),
            "residual_sd_with": clean(sigma_after), "statement": text}
