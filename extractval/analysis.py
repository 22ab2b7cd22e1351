"""From a Study to a StudyReport: observations, the fit, model choice, procedure predictions.

:class:`StudyReport` is the single source of every number: the CLI summary, ``fit --json`` and
the dossier all render :meth:`StudyReport.to_dict`.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field, replace
from functools import cached_property, lru_cache
from pathlib import Path

import numpy as np

from . import __version__
from .advice import NextRuns, advise
from .formats import ONE_PHASE_PLOT_RANGE  # noqa: F401  (also named here)
from .extrapolation import Extrapolation, Span, extrapolation, extrapolation_problems
from .fitting import (ERROR_MODEL, INTERVAL_METHOD, LOG_D, LOG_E, LOG_Q, WEIGHTING,
                      FitImpossible, FitResult, Observations, fit_model)
from .models import MODELS, get_model
from .procedures import (LogDBand, ProcedureDesign, ProcedurePrediction, design_procedure,
                         design_space, log_d_band, predict_procedure)
from .replicates import PH_TOLERANCE, precision_groups
from .reading import procedure_reading, workup_reading
from .results import clean, clean_all
from .solvents import solvent_report
from .screening import STUDENTIZED_LIMIT, refit_without, screen
from .study import STUDY_FILE, Run, Study, display_path
from .verdicts import procedure_verdicts, status_summary, study_verdicts

#: AICc difference within which the simpler model is preferred by ``model: auto``
PARSIMONY_DELTA = 2.0
#: pH spacing of the fitted log D line in ``curve["fine"]`` (the band is traced every 0.5)
CURVE_STEP = 0.05
#: pH span (units) below which ``model: auto`` does not try the ampholyte (two pKa need room).
AMPHOLYTE_MIN_SPAN = 4.0


@dataclass(frozen=True)
class RunOutcome:
    """How one run entered the fit: used, excluded (by the user) or not usable (and why)."""

    run: Run
    status: str                      # "used" | "excluded" | "not usable"
    reason: str | None = None
    kind: str | None = None          # LOG_D / LOG_E / LOG_Q when used
    y: float | None = None
    index: int | None = None         # row in the Observations when used


def _observation(run: Run) -> tuple[str, float] | str:
    """(kind, y) for a run, or the reason it cannot enter a log-scale fit."""
    phase = run.fitted_phase
    if phase == "recovery":
        return LOG_E, float(np.log10(run.recovery_pct / 100.0))
    if phase == "both":
        return LOG_D, float(np.log10(run.found_organic / run.found_aqueous)
                            - np.log10(run.volume_ratio))
    if phase == "organic":
        return LOG_E, float(np.log10(run.found_organic / run.spiked))
    if phase == "aqueous":
        return LOG_Q, float(np.log10(run.found_aqueous / run.spiked))
    if run.measurement == "recovery":
        return ("recovery_pct is 0: nothing measured in the organic phase, so the run sets "
                "no finite value on the log scale")
    return ("no analyte found in the measured phase(s): the run sets no finite value on the "
            "log scale")


def observed_log_d(run: Run, fitted_log_d: float | None = None) -> float | None:
    """log D read off one run (excluded runs too), for plots: directly when both phases were
    measured, from the fraction extracted when one phase was and it lies between 2 and 98 %.

    Given the fitted log D at the run's pH, the fraction the fit expects must lie in that range
    too: near complete (or no) extraction a few per cent of scatter in the one measured phase
    moves the log D read off it by a whole unit, which would draw an ordinary run far from the
    curve.
    """
    got = _observation(run)
    if isinstance(got, str):
        return None
    return _log_d_read(run, *got, fitted_log_d)


def _log_d_read(run: Run, kind: str, y: float, fitted_log_d: float | None) -> float | None:
    """:func:`observed_log_d` from the run's (kind, y) (:func:`_observation`)."""
    if kind == LOG_D:
        return y
    lo, hi = ONE_PHASE_PLOT_RANGE
    e = 10.0 ** y if kind == LOG_E else 1.0 - 10.0 ** y
    if not lo < e < hi:
        return None
    if fitted_log_d is not None:
        dr = 10.0 ** fitted_log_d * run.volume_ratio
        if not lo < dr / (1.0 + dr) < hi:
            return None
    return float(np.log10(e / (1.0 - e) / run.volume_ratio))


def build_observations(runs, ph_tolerance: float = PH_TOLERANCE,
                       ) -> tuple[Observations, tuple[RunOutcome, ...]]:
    """The fitted runs' observations, each with its precision group (replicates.py), and how
    every run entered the fit."""
    outcomes, ids, pH, ratios, kinds, ys, fitted = [], [], [], [], [], [], []
    for run in runs:
        if run.excluded:
            outcomes.append(RunOutcome(run, "excluded", run.excluded))
            continue
        if run.suitability:
            # never silently used: visible in run_table, "not usable", with the reason
            outcomes.append(RunOutcome(run, "not usable", f"{run.suitability}: left out of "
                                                          "the fit"))
            continue
        got = _observation(run)
        if isinstance(got, str):
            # a run whose responses fell outside the calibration says so, not "nothing found"
            censored = run.censored if run.censored and run.measurement == "none" else None
            outcomes.append(RunOutcome(run, "not usable", censored or got))
            continue
        kind, y = got
        note = run.censored     # one phase outside the calibration: fitted from the other
        if run.measurement == "both" and kind != LOG_D:
            phase = "aqueous" if kind == LOG_E else "organic"
            note = (f"nothing found in the {phase} phase: fitted as a one-phase measurement "
                    f"({kind})")
        outcomes.append(RunOutcome(run, "used", note, kind, y, len(ids)))
        ids.append(run.run_id)
        pH.append(run.pH)
        ratios.append(run.volume_ratio)
        kinds.append(kind)
        ys.append(y)
        fitted.append(run)
    key = precision_groups(fitted, ph_tolerance).key_of()
    groups = [key[rid] for rid in ids]
    obs = Observations(tuple(ids), np.array(pH, dtype=float),
                       np.log10(np.array(ratios, dtype=float)), tuple(kinds),
                       np.array(ys, dtype=float), tuple(groups))
    return obs, tuple(outcomes)


@dataclass(frozen=True)
class Candidate:
    """One model tried by ``model: auto``."""

    model: str
    aicc: float | None
    weight: float | None
    rss: float | None
    note: str | None = None


def _candidates(study: Study, obs: Observations) -> list[str]:
    names = ["neutral", "acid", "base"]
    if obs.n and np.ptp(obs.pH) >= AMPHOLYTE_MIN_SPAN and obs.n >= 8:
        names.append("ampholyte")
    return names


def choose_model(study: Study, obs: Observations) -> tuple[FitResult, list[Candidate]]:
    """Fit every candidate model and choose by AICc (Akaike weights given), preferring the
    simplest model within PARSIMONY_DELTA of the lowest."""
    fits, notes = {}, {}
    for name in _candidates(study, obs):
        try:
            fits[name] = fit_model(obs, MODELS[name], intervals=False)
        except FitImpossible as exc:
            notes[name] = str(exc)
    if not fits:
        raise FitImpossible("; ".join(notes.values()))
    aicc = {k: f.aicc for k, f in fits.items()}
    best = min(aicc, key=aicc.get)
    # parsimony: models within 2 AICc units of the best have substantial support (Burnham &
    # Anderson, Model Selection and Multimodel Inference, 2nd ed. 2002, sec. 2.6); take the one
    # with the fewest parameters among them, the best AICc breaking ties
    close = [k for k in aicc if aicc[k] - aicc[best] < PARSIMONY_DELTA]
    if not np.isfinite(aicc[best]):
        # too few runs for AICc (n <= k + 1) in every model that could be fitted: nothing to
        # compare, so the simplest of them
        close = list(aicc)
    best = min(close, key=lambda k: (fits[k].p, aicc[k]))
    finite = {k: v for k, v in aicc.items() if np.isfinite(v)}
    rel = {k: np.exp(-0.5 * (v - aicc[best])) for k, v in finite.items()}
    total = sum(rel.values())
    cands = [Candidate(k, clean(aicc.get(k)), clean(rel[k] / total) if k in rel else None,
                       clean(fits[k].rss) if k in fits else None, notes.get(k))
             for k in _candidates(study, obs)]
    chosen = fit_model(obs, get_model(best, study.ion_pair), MODELS[best])
    return chosen, cands


@lru_cache(maxsize=256)
def _fine_grid(start: float, stop: float) -> tuple[np.ndarray, tuple[float | None, ...]]:
    """The curve's fine pH grid from ``start`` to ``stop`` (read-only) and its values as
    written out: a function of the band's ends alone, which lie on the band's 0.5 grid, so
    that studies spanning the same pH range share it instead of rebuilding and rounding it."""
    fine = np.round(np.arange(start, stop + CURVE_STEP / 2, CURVE_STEP), 6)
    fine.setflags(write=False)
    return fine, tuple(clean_all(fine, 6))


@dataclass
class StudyReport:
    """Everything computed for one study; :meth:`to_dict` is what every renderer uses."""

    study: Study
    fit: FitResult | None
    outcomes: tuple[RunOutcome, ...]
    predictions: tuple[ProcedurePrediction, ...] = ()
    candidates: tuple[Candidate, ...] = ()
    problems: tuple[str, ...] = ()          # why there is no fit, when fit is None
    warnings: list[str] = field(default_factory=list)
    calibration_uncertainty: dict | None = None   # negligible or in the weights (fit_study)

    @cached_property
    def band(self) -> LogDBand | None:
        """log D(pH) and its 95 % band on a grid: plots, pH windows and the design map use it."""
        return None if self.fit is None else log_d_band(self.fit)

    @cached_property
    def span(self) -> Span | None:
        """The runs' measured pH span and volume ratios (the runs that enter the fit)."""
        return Span.of_runs(self.study.runs)

    @cached_property
    def extrapolations(self) -> tuple[Extrapolation | None, ...]:
        """Per procedure, what of it lies outside the runs (None when all is inside)."""
        return tuple(extrapolation(p.procedure, self.span) for p in self.predictions)

    @cached_property
    def designs(self) -> tuple[ProcedureDesign, ...]:
        if self.fit is None:
            return ()
        target = self.study.targets.recovery_pct
        return tuple(design_procedure(self.fit, self.band, p.procedure, target, self.span)
                     for p in self.predictions)

    @cached_property
    def assessment(self) -> dict:
        """Verdicts against the study's targets, per procedure and for the study."""
        if self.fit is None:
            return {"study": [], "procedures": [], "details": {}, "status": "not judged",
                    "summary": {"status": "not judged", "text": "not fitted", "counts": {}}}
        targets = self.study.targets
        study_v, details = study_verdicts(self.fit, self.outcomes, targets)
        study_v = study_v + calibration_verdicts(self.study) + suitability_verdicts(self.study)
        if self.method is not None:
            study_v = study_v + list(self.method.verdicts)
        proc_v = [procedure_verdicts(p, d, targets, self.outcomes, self.workup_of(p), x)
                  for p, d, x in zip(self.predictions, self.designs, self.extrapolations)]
        summary = status_summary(study_v + [v for vs in proc_v for v in vs])
        return {"study": study_v, "procedures": proc_v, "details": details,
                "status": summary["status"], "summary": summary}

    @cached_property
    def method(self):
        """Method recovery, matrix factor and precision of the method-validation runs
        (method.py), or None when the study has none."""
        if not self.study.method_runs:
            return None
        from .method import method_report
        from .method_input import method_runs, method_targets

        return method_report(method_runs(self.study), method_targets(self.study))

    @cached_property
    def outlier_screen(self) -> dict | None:
        """Flagged runs and, when any, the fit without them beside the fit with them."""
        if self.fit is None:
            return None
        flags = screen(self.fit)
        out = {"studentized_limit": STUDENTIZED_LIMIT, "flags": [f.to_dict() for f in flags],
               "without_flagged": None}
        if flags:
            other, left_out, problem = refit_without(self.fit, flags,
                                                     MODELS.get(self.fit.model.name.split("+")[0]))
            side = {"runs_left_out": left_out, "problem": problem, "parameters": {},
                    "procedures": []}
            if other is not None:
                side["parameters"] = {k: e.to_dict() for k, e in other.parameters.items()}
                side["residual_sd"] = clean(other.residual_sd)
                side["procedures"] = [
                    {"id": p.procedure.id,
                     "recovery_pct": predict_procedure(other, p.procedure).recovery_pct.to_dict()}
                    for p in self.predictions]
            out["without_flagged"] = side
        return out

    @cached_property
    def next_runs(self) -> NextRuns | None:
        """Next-run advice: the runs that would most narrow the target's interval (advice.py)."""
        return None if self.fit is None else advise(self.fit, self.study, self.predictions)

    @cached_property
    def impurity_fits(self) -> tuple[dict, ...]:
        """Each impurity: its fit (measured ones) or declared constants, as a work-up solute."""
        return tuple(_impurity_fit(imp, self.study.replicate_pH_tolerance)
                     for imp in self.study.impurities) if self.fit else ()

    @cached_property
    def selectivity(self) -> dict | None:
        """Impurities, separation factors against pH and each procedure's work-up prediction."""
        return self.selectivity_section()

    def selectivity_section(self, fast: bool = True) -> dict | None:
        """:attr:`selectivity`, computed; ``fast=False`` ranges every quantity by the SLSQP
        search over the confidence regions (the reference path, for tests and benchmarks)."""
        if self.fit is None or not (self.study.impurities
                                    or any(p.steps for p in self.study.procedures)):
            return None
        from . import workup
        analyte = workup.Solute.fitted(self.study.analyte_name or "analyte", self.fit)
        solutes = [f["solute"] for f in self.impurity_fits if f["solute"] is not None]
        lo, hi = float(self.fit.obs.pH.min()), float(self.fit.obs.pH.max())
        curves = {}
        for sol in solutes:
            a, b = lo, hi
            if sol.fit is not None:
                a, b = max(a, float(sol.fit.obs.pH.min())), min(b, float(sol.fit.obs.pH.max()))
            curves[sol.name] = (workup.separation_curve(analyte, sol, a, b, fast=fast)
                                if a <= b else
                                {"pH": [], "note": "the analyte's and the impurity's measured "
                                                   "pH ranges do not overlap"})
        target = self.study.targets.recovery_pct
        procs = []
        for p in self.study.procedures:
            steps = p.steps or (workup.Step("extract", p.pH, (p.aqueous_mL,), p.organic_mL),)
            pred = workup.predict_workup(analyte, solutes, steps, fast=fast)
            entry = {"id": p.id, **pred.to_dict()}
            spans = [(lo, hi)] + [(float(s.fit.obs.pH.min()), float(s.fit.obs.pH.max()))
                                  for s in solutes if s.fit is not None]
            # the same rule as the procedures' verdicts (extrapolation.py, with its slack)
            outside = sorted({s.pH for s in steps for a, b in spans
                              if not Span((a, b), (0.0, 0.0)).has_pH(s.pH)})
            if outside:
                entry["notes"].append(
                    "extrapolated: step pH " + ", ".join(f"{x:g}" for x in outside)
                    + " lies outside the measured runs")
            if len(steps) > 1 and target is not None:
                entry["best_pH_pair"] = workup.best_pH_pair(analyte, solutes, steps, target,
                                                            (lo, hi), fast=fast)
            procs.append(entry)
        return {
            "impurities": [{k: v for k, v in f.items() if k != "solute"}
                           for f in self.impurity_fits],
            "separation": curves,
            "procedures": procs,
            "method": workup.REGION_METHOD,
        }

    def workup_of(self, prediction) -> dict | None:
        """The procedure's entry under ``selectivity.procedures`` (its work-up), if any."""
        sel = self.selectivity
        if sel is None:
            return None
        return next((w for w in sel["procedures"] if w["id"] == prediction.procedure.id), None)

    @property
    def curve(self) -> dict | None:
        """The fitted log D(pH) with its 95 % band, as plain lists for the plots."""
        b = self.band
        if b is None:
            return None
        # the estimate alone on a grid ten times finer, so that the plotted line shows no
        # corners; the band keeps its profile points (each costs a profile search)
        fine, fine_pH = _fine_grid(float(b.pH[0]), float(b.pH[-1]))
        return {"pH": clean_all(b.pH, 6), "log_d": clean_all(b.value, 6),
                "lo": clean_all(b.lo, 6), "hi": clean_all(b.hi, 6),
                "method": b.method,
                "fine": {"pH": list(fine_pH), "log_d": clean_all(self.fit.log_d(fine), 6)}}

    def run_rows(self) -> list[dict]:
        runs = [o.run for o in self.outcomes]
        # every run's nine numeric cells cleaned in one clean_all pass, not one call per cell
        # (nor one per column), and unpacked again run by run below
        cells = clean_all([v for r in runs for v in (
            r.pH, r.aqueous_mL, r.organic_mL, r.volume_ratio, r.mass_balance_pct, r.spiked,
            r.found_aqueous, r.found_organic, r.recovery_pct)])
        ys = clean_all([o.y for o in self.outcomes])
        if self.fit is not None:
            # the model at every run's pH in one call, not one call per run
            fitted_log_ds = self.fit.log_d([r.pH for r in runs]).tolist()
            fitted_log_d_col = clean_all(fitted_log_ds)
            fitted = clean_all(self.fit.fitted)
            residual = clean_all(self.fit.weighted_residuals)
            studentized = clean_all(self.fit.studentized_residuals)
        rows = []
        for k, (o, r) in enumerate(zip(self.outcomes, runs)):
            (pH, aqueous_mL, organic_mL, volume_ratio, mass_balance_pct, spiked, found_aqueous,
             found_organic, recovery_pct) = cells[9 * k:9 * k + 9]
            row = {
                "run": r.run_id, "pH": pH, "aqueous_mL": aqueous_mL, "organic_mL": organic_mL,
                "volume_ratio": volume_ratio, "measurement": r.measurement,
                "replicate": r.replicate, "status": o.status, "reason": o.reason, "note": r.note,
                "mass_balance_pct": mass_balance_pct, "spiked": spiked,
                "found_aqueous": found_aqueous, "found_organic": found_organic,
                "recovery_pct": recovery_pct, "fitted_as": o.kind, "y": ys[k],
                "location": str(r.location),
            }
            if self.fit is not None:
                # a used run's (kind, y) is in its outcome already (build_observations)
                got = (o.kind, o.y) if o.kind is not None else _observation(r)
                row["log_d_observed"] = (None if isinstance(got, str) else
                                         clean(_log_d_read(r, *got, fitted_log_ds[k])))
                if o.index is not None:
                    i = o.index
                    row["fitted"] = fitted[i]
                    row["residual"] = residual[i]
                    row["studentized_residual"] = studentized[i]
                row["fitted_log_d"] = fitted_log_d_col[k]
            if self.study.calibration is not None:
                row.update(calibration_run_fields(r))
            if self.study.suitability is not None:
                row.update(suitability_run_fields(r, self.study.suitability))
            rows.append(row)
        return rows

    def to_dict(self) -> dict:
        s, fit = self.study, self.fit
        counts = Counter(o.status for o in self.outcomes)     # one pass, not one per status
        out = {
            "study": s.study_id,
            "title": s.title,
            "analyte": s.analyte_name,
            "model": fit.model.name if fit else s.model,
            "model_requested": s.model,
            "model_description": fit.model.description if fit else None,
            "system": dict(s.system),
            "inputs": [{"path": f.path, "sha256": f.sha256, "role": f.role} for f in s.inputs],
            "targets": {k: (list(v) if isinstance(v, tuple) else v)
                        for k, v in vars(s.targets).items() if v is not None},
            "runs": {"used": counts["used"], "excluded": counts["excluded"],
                     "not_usable": counts["not usable"], "total": len(self.outcomes)},
            "parameters": {},
            "procedures": [dict(p.to_dict(), **d.to_dict(),
                                extrapolation=None if x is None else x.to_dict(),
                                verdicts=[v.to_dict() for v in vs])
                           for p, d, x, vs in zip(self.predictions, self.designs,
                                                  self.extrapolations,
                                                  self.assessment["procedures"])],
            "status": self.assessment["status"],
            "status_text": self.assessment["summary"]["text"],
            "status_counts": self.assessment["summary"]["counts"],
            "verdicts": [v.to_dict() for v in self.assessment["study"]],
            "warnings": list(self.warnings),
            "problems": list(self.problems),
            "software": {"name": "extractval", "version": __version__},
        }
        if fit is not None:
            out["parameters"] = {k: e.to_dict() for k, e in fit.parameters.items()}
            out["correlation"] = {"parameters": list(fit.model.params),
                                  "matrix": [clean_all(row, 6) for row in fit.correlation]}
            out["statistics"] = {
                "residual_sd": clean(fit.residual_sd),
                "residual_sd_meaning": "relative sd of one measured amount (sigma)",
                "dof": fit.dof,
                "n_fitted": fit.n,
                "weighted_rss": clean(fit.rss),
                "aicc": clean(fit.aicc),
                "error_model": ERROR_MODEL,
                "weighting": WEIGHTING,
                "interval_method": INTERVAL_METHOD,
            }
            out["curve"] = self.curve
            out["design_space"] = design_space(
                self.band, s.procedures, s.targets.recovery_pct,
                measured_pH=(float(fit.obs.pH.min()), float(fit.obs.pH.max())))
            out.update(self.assessment["details"])
            out["outlier_screen"] = self.outlier_screen
            if self.selectivity is not None:
                out["selectivity"] = self.selectivity
        if self.candidates:
            out["model_selection"] = {
                "criterion": "AICc",
                "chosen": fit.model.name if fit else None,
                "candidates": [vars(c) for c in self.candidates],
            }
        out["next_runs"] = None if self.next_runs is None else self.next_runs.to_dict()
        if s.calibration is not None:
            out["calibration"] = self.calibration_dict()
        if s.suitability is not None:
            out["suitability"] = s.suitability.to_dict()
        if self.method is not None:
            out["method_recovery"] = self.method.to_dict()
            out["precision"] = self.method.precision_dict()
        out["solvent"] = solvent_report(s.system.get("organic"), s.procedures,
                                        s.system.get("aqueous"))
        out["run_table"] = self.run_rows()
        workups = {w["id"]: w for w in (out.get("selectivity") or {}).get("procedures") or []}
        for pr in out["procedures"]:        # written last: it reads the verdicts it explains
            w = workups.get(pr["id"])
            pr["reading"] = (workup_reading(pr, w, s.targets.recovery_pct)
                             if w is not None and len(w["steps"]) > 1
                             else procedure_reading(pr, s.targets.recovery_pct))
        return out

    def calibration_dict(self) -> dict:
        """The study's curves, their verdicts, the runs read off them and whether their
        uncertainty matters to the fit."""
        d = self.study.calibration.to_dict()
        counts: dict[str, int] = {}
        for r in self.study.runs:
            for q in r.quantities:
                counts[q.status] = counts.get(q.status, 0) + 1
        d["readings"] = {"quantified": counts.get("quantified", 0),
                         "below_lloq": counts.get("below LLOQ", 0),
                         "above_range": counts.get("above range", 0)}
        d["uncertainty"] = self.calibration_uncertainty
        return d


def _impurity_fit(imp, ph_tolerance: float = PH_TOLERANCE) -> dict:
    """An impurity as a work-up solute: declared constants, or fitted from its own runs with
    the same error model, weights and intervals as the analyte."""
    from . import workup
    out = {"name": imp.name, "model": imp.model, "amount_ratio": clean(imp.amount_ratio),
           "source": imp.source, "declared": imp.declared, "parameters": {}, "runs": None,
           "problem": None, "solute": None}
    if imp.declared:
        model = MODELS[imp.model]
        out["parameters"] = {k: {"value": clean(v)} for k, v in zip(model.params, imp.theta)}
        out["solute"] = workup.Solute(imp.name, model, np.asarray(imp.theta, dtype=float),
                                      None, imp.source, imp.amount_ratio)
        return out
    obs, outcomes = build_observations(imp.runs, ph_tolerance)
    out["runs"] = {k.replace(" ", "_"): sum(o.status == k for o in outcomes)
                   for k in ("used", "excluded", "not usable")}
    try:
        if imp.model == "auto":
            fit, _ = choose_model(None, obs)
        else:
            fit = fit_model(obs, MODELS[imp.model], MODELS.get(imp.model))
    except FitImpossible as exc:
        out["problem"] = str(exc)
        return out
    out["model"] = fit.model.name
    out["parameters"] = {k: e.to_dict() for k, e in fit.parameters.items()}
    out["residual_sd"] = clean(fit.residual_sd)
    out["warnings"] = list(fit.warnings)
    out["solute"] = workup.Solute.fitted(imp.name, fit, imp.amount_ratio)
    return out


def fit_study(study: Study) -> StudyReport:
    """Fit the study's model and predict its procedures. Never raises for data problems."""
    obs, outcomes = build_observations(study.runs, study.replicate_pH_tolerance)
    # located input warnings without their 'warning:' (the list says what they are)
    warnings = [p.text() for p in study.warnings]
    if study.suitability is not None:
        # one warning per failing sequence, naming its runs (not one per run)
        for seq, reason in study.suitability.report.failed().items():
            ids = study.suitability.left_out.get(seq, ())
            warnings.append(f"{study.suitability.settings.shown}: sequence {seq!r} fails system "
                            f"suitability ({reason}); "
                            + (f"its {len(ids)} run(s) ({', '.join(ids)}) are not used"
                               if ids else "no run that would be used was quantified in it"))
    for o in outcomes:
        if o.status == "not usable" and o.run.suitability:
            continue
        if o.status == "not usable":
            warnings.append(f"{o.run.location}: run {o.run.run_id!r} not used in the fit: "
                            f"{o.reason}")
        elif o.status == "excluded":
            warnings.append(f"{o.run.location}: run {o.run.run_id!r} excluded from the fit by "
                            f"the study: {o.reason}")
        elif o.reason:
            warnings.append(f"{o.run.location}: run {o.run.run_id!r}: {o.reason}")
    warnings.extend(f"{r.location}: method-validation run {r.run_id!r} excluded by the study: "
                    f"{r.excluded}" for r in study.method_runs if r.excluded)
    candidates: list[Candidate] = []
    try:
        if study.model == "auto":
            fit, candidates = choose_model(study, obs)
            warnings.append(f"model chosen by AICc among {', '.join(c.model for c in candidates)}:"
                            f" {fit.model.name}")
        else:
            model = get_model(study.model, study.ion_pair)
            fit = fit_model(obs, model, MODELS.get(study.model))
    except FitImpossible as exc:
        return StudyReport(study, None, outcomes, problems=(str(exc),), warnings=warnings)
    uncertainty = None
    if study.calibration is not None:
        fit, uncertainty = calibration_weighted_fit(fit, outcomes)
        warnings.extend(f"calibration {c.id!r} fails ICH M10 acceptance: amounts read off it are "
                        "used but the curve does not meet the criteria"
                        for c in study.calibration.curves if not c.passes)
    warnings.extend(fit.warnings)
    # procedures beyond the runs: check_study warns already (same rule, same words); a Study
    # made in code gets the warning here
    span = Span.of_fitted([o.run for o in outcomes if o.status == "used"])
    if any(extrapolation(p, span) is not None for p in study.procedures):
        # (the study file's shown path asks the file system: only when a warning needs it)
        known = set(study.warnings)
        warnings.extend(p.text() for p in extrapolation_problems(
            study.procedures, span, display_path(Path(study.folder) / STUDY_FILE))
            if p not in known)
    target = study.targets.recovery_pct
    preds = tuple(predict_procedure(fit, p, target) for p in study.procedures)
    return StudyReport(study, fit, outcomes, preds, tuple(candidates), warnings=warnings,
                       calibration_uncertainty=uncertainty)


# -- calibration (calibration.py, calibration_input.py) ----------------------------------------

#: the refit with calibration variance stops when sigma moves less than this, relatively
_SIGMA_RTOL = 1e-4


def calibration_weighted_fit(fit: FitResult, outcomes) -> tuple[FitResult, dict]:
    """The fit with each run's calibration variance in its weight when that variance is not
    negligible (calibration_input.NEGLIGIBLE_RULE), and the statement saying which.

    The calibration variance v_i of a run's log10 value is known; sigma (the rest of the
    scatter) is estimated: weights 1 / (f_i^2 + v_i / s^2), refitted until s settles. Runs are
    treated as independent (the shared curve's correlation between runs is not modelled).
    """
    from .calibration_input import log10_variance, uncertainty_statement

    var = np.zeros(fit.n)
    for o in outcomes:
        if o.index is not None:
            var[o.index] = log10_variance(o.run, o.kind) or 0.0
    s0 = fit.residual_sd
    read = var > 0
    ratios = list(np.sqrt(var[read]) / (fit.obs.sd_factor[read] * s0))
    statement = uncertainty_statement(ratios, False, s0, None)
    if not ratios or statement["negligible"]:
        return fit, statement
    simple = MODELS.get(fit.model.name.split("+")[0])
    s = s0
    for _ in range(50):
        trial = fit_model(replace(fit.obs, extra_var=var / s ** 2), fit.model, simple,
                          intervals=False)
        s_new = max(trial.residual_sd, 0.05 * s0)   # the curve cannot explain all the scatter
        if abs(s_new - s) <= _SIGMA_RTOL * s:
            s = s_new
            break
        s = s_new
    final = fit_model(replace(fit.obs, extra_var=var / s ** 2), fit.model, simple)
    return final, uncertainty_statement(ratios, True, s0, final.residual_sd)


def calibration_verdicts(study: Study) -> list:
    """One ICH M10 verdict per calibration curve (none without a calibration)."""
    if study.calibration is None:
        return []
    from .acceptance import Verdict

    out = []
    for c in study.calibration.curves:
        acc = c.fit.acceptance()
        detail = (f"{acc['standards_passing']} of {acc['standards']} standards within +/-15 % "
                  f"(+/-20 % at the LLOQ), {acc['levels_passing']} of {acc['levels']} levels "
                  "passing (at least 75 % and 6 levels needed, ICH M10)")
        out.append(Verdict(f"calibration {c.id} (ICH M10)", acc["status"],
                           100.0 * acc["standards_passing"] / acc["standards"], 75.0, detail))
    return out


def suitability_verdicts(study: Study) -> list:
    """One verdict per sequence of the suitability table: failing when any of its criteria
    fails (the criteria themselves are under to_dict()["suitability"])."""
    if study.suitability is None:
        return []
    from .acceptance import verdict

    out = []
    for seq in study.suitability.report.sequences:
        judged = [v for v in seq.verdicts if v.status != "not judged"]
        basis = "target" if any(v.basis == "target" for v in seq.verdicts) else "default"
        if seq.status == "fail":
            detail = "; ".join(seq.failures)
        elif judged:
            detail = (f"{sum(v.status == 'pass' for v in judged)} of {len(seq.verdicts)} "
                      "criteria met" + (f", {len(seq.verdicts) - len(judged)} not judged"
                                        if len(judged) < len(seq.verdicts) else ""))
        else:
            detail = "no criterion could be judged from the table"
        n = len(study.suitability.runs.get(seq.sequence, ()))
        out_n = len(study.suitability.left_out.get(seq.sequence, ()))
        detail += (f"; {n} run{'s' if n != 1 else ''} in the sequence"
                   + (f", {out_n} not used" if out_n else ""))
        out.append(verdict(seq.status, f"system suitability {seq.sequence}", None, None,
                           detail, basis))
    return out


def suitability_run_fields(run: Run, suit) -> dict:
    """A run's sequence and its system-suitability outcome, for run_table."""
    seqs = suit.report.by_sequence()
    seq = run.sequence or (next(iter(seqs)) if len(seqs) == 1 else None)
    status = seqs[seq].status if seq in seqs else "not recorded"
    return {"sequence": run.sequence, "suitability_sequence": seq,
            "suitability": status, "suitability_reason": run.suitability}


def calibration_run_fields(run: Run) -> dict:
    """A run's responses, the amounts read off the calibration and their sd, for run_table."""
    return {"sequence": run.sequence,
            "response_aqueous": clean(run.response_aqueous),
            "response_organic": clean(run.response_organic),
            "is_response_aqueous": clean(run.is_response_aqueous),
            "is_response_organic": clean(run.is_response_organic),
            "quantitation": [q.to_dict() for q in run.quantities],
            "censored": run.censored}
