"""Next-run advice: which runs would most narrow the 95 % interval of the quantity that matters.

Criterion
---------
For a target quantity g(theta) (a parameter, or log D at a procedure's pH, whose lower end sets
the procedure's lower recovery bound), a batch of new runs with weighted Jacobian rows X adds
X'X to the Fisher information J'J of the fit (both per sigma^2, the fit's error model). The
linearised variance of the target after the batch is

    Var(g) = s^2 c' (J'J + X'X)^-1 c,   c = dg/dtheta at the estimate,

the expected variance of a linear functional: a c-optimal design criterion (Atkinson, Donev &
Tobias, Optimum Experimental Designs, with SAS, Oxford 2007, ch. 10). The predicted 95 %
interval width is 2 t_{0.975}(n + k - p) sqrt(Var(g)); s is the fit's residual sd.
Batches of k runs are chosen greedily: each run is the best given the ones already chosen (a
rank-one update of the inverse), repeats allowed; the batch of 3 is the first three of the
batch of 6. Greedy selection is not guaranteed to find the best batch.

When the fit is too weakly determined for that linearisation (a parameter correlation beyond
|r| = 0.99, an open or search-limit interval end, or a profile interval that disagrees with the
Wald interval by more than half its half-width), the runs are ranked by simulation instead:
each candidate design is simulated from the current fit with its error model, the study
refitted with the simulated runs added, and the median 95 % (Wald) width of the target at the
refit taken over a few draws (common random numbers, fixed seed, so the advice is the same at
every build).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from itertools import chain

import numpy as np

from .fitting import (LOG_D, LOG_E, LOG_Q, FitImpossible, FitResult, Observations, fit_model,
                      t975)
from .models import MODELS
from .procedures import BAND_MARGIN, ProcedurePrediction, recovery_pct_from_log_d
from .results import clean, clean_all
from .study import Study

#: measurement form of a run -> what the fit sees of it
FORM_KIND = {"both": LOG_D, "organic": LOG_E, "aqueous": LOG_Q, "recovery": LOG_E}
#: pH grid of the candidate runs
PH_STEP = 0.25
#: the usable pH range: the measured span widened by this much on each side (the span over
#: which the dossier draws the log D band), inside 0-14 and inside the study's advice.pH_range
PH_MARGIN = BAND_MARGIN
#: organic:aqueous ratios tried for one-phase measurements, besides the study's own (0.1-10)
RATIOS = (0.1, 0.3, 1.0, 3.0, 10.0)
RATIO_LIMITS = (0.1, 10.0)
BATCH_SIZES = (1, 3, 6)
#: single runs listed
TOP_SINGLE = 5
#: beyond this |r| between two parameters the linearisation is not trusted
WEAK_CORRELATION = 0.99
#: a profile end this far (in Wald half-widths) from the Wald end: the fit is visibly nonlinear
WALD_PROFILE_DISAGREEMENT = 0.5
#: simulation-based criterion: draws per candidate design, single candidates simulated, seed
SIM_DRAWS = 8
SIM_SHORTLIST = 10
SIM_SPREAD = 6
SIM_SEED = 20261203

CRITERION_LOCAL = "c-optimal (expected variance of the target, Fisher information at the fit)"
CRITERION_SIM = ("simulation (median 95 % interval width of the target after refitting "
                 "with simulated runs)")


@dataclass(frozen=True)
class AdviceTarget:
    """The quantity whose interval the advice narrows."""

    kind: str                  # "parameter" | "procedure"
    name: str                  # parameter name or procedure id
    quantity: str              # what is narrowed, in words
    chosen_by: str
    index: int | None = None   # parameter index
    procedure: ProcedurePrediction | None = None

    @property
    def width_of(self) -> str:
        """What the interval widths measure."""
        if self.kind == "parameter":
            return self.name
        return f"log D at pH {self.procedure.procedure.pH:g}"

    def gradient(self, fit: FitResult, theta: np.ndarray) -> np.ndarray:
        """c = d target / d theta."""
        if self.kind == "parameter":
            c = np.zeros(fit.p)
            c[self.index] = 1.0
            return c
        return fit.model.jacobian(np.array([self.procedure.procedure.pH]), theta)[0]

    def value(self, fit: FitResult) -> float:
        if self.kind == "parameter":
            return float(fit.theta[self.index])
        return float(fit.log_d(np.array([self.procedure.procedure.pH]))[0])


@dataclass(frozen=True)
class Candidates:
    """The candidate runs: one row each, in the order ties are broken (the study's own form
    and ratio first)."""

    pH: np.ndarray
    ratio: np.ndarray
    form: tuple[str, ...]
    preference: np.ndarray    # rank among equals: own form and ratio, then nearest the runs

    @property
    def size(self) -> int:
        return len(self.form)

    def observations(self, idx, y=None) -> Observations:
        idx = np.asarray(idx, dtype=int)
        kinds = tuple(FORM_KIND[self.form[i]] for i in idx.tolist())
        ids = _next_ids(idx.size)
        return Observations(ids, self.pH[idx], np.log10(self.ratio[idx]), kinds,
                            np.zeros(idx.size) if y is None else np.asarray(y, dtype=float),
                            ids)

    def run(self, i: int) -> dict:
        return {"pH": clean(self.pH[i], 6), "ratio": clean(self.ratio[i], 6),
                "form": self.form[i]}


@lru_cache(maxsize=None)
def _next_ids(n: int) -> tuple[str, ...]:
    """Run ids of n candidate runs, "next-1" to "next-n": one shared tuple per n, since writing
    a hundred or more ids cost more than the rest of the candidates' observations."""
    return tuple(f"next-{j + 1}" for j in range(n))


@dataclass
class NextRuns:
    """The advice for one study: the target, how runs were ranked, the best runs and batches."""

    target: AdviceTarget
    criterion: str
    method: str                       # "linearised" | "simulation"
    weak: list[str]
    pH_range: tuple[float, float]
    pH_range_note: str | None
    candidates: Candidates
    width_before: float | None        # 95 % width now (None: the interval is open now)
    singles: list[tuple[int, float]]  # (candidate index, width after)
    batches: list[tuple[list[int], float]]
    sigma: float
    notes: list[str] = field(default_factory=list)
    value: float = float("nan")
    log_d: np.ndarray | None = None   # fitted log D at each candidate (to draw the advice)

    def _recovery_lower(self, width: float | None) -> float | None:
        """The procedure's lower recovery bound when the log D interval narrows from
        width_before to ``width``: the reported lower end of log D moved towards the estimate
        in that proportion (so "before" is the bound the page reports). None for a parameter
        target."""
        if self.target.kind != "procedure":
            return None
        lo = self.target.procedure.log_d.ci95.lo
        if width is not None and width == self.width_before:
            return clean(self.target.procedure.recovery_pct.ci95.lo)   # the reported bound
        if width is None or not math.isfinite(width):
            return None
        if lo is not None and self.width_before:
            below = (self.value - lo) * width / self.width_before
        else:
            below = width / 2.0    # nothing reported to move: half the predicted width
        p = self.target.procedure.procedure
        return clean(float(recovery_pct_from_log_d(self.value - below, p.aqueous_mL,
                                                   p.organic_mL)), 10)

    def _row(self, width: float, before: tuple[float | None, float | None]) -> dict:
        """Width after and what it gives; ``before`` is the cleaned width now and the recovery
        bound now, the same in every row (to_dict writes them once)."""
        shrink = (100.0 * (1.0 - width / self.width_before)
                  if self.width_before and math.isfinite(width) else None)
        out = {"width_before": before[0], "width_after": clean(width, 6),
               "shrink_pct": clean(shrink, 2)}
        if self.target.kind == "procedure":
            out["recovery_lower_pct_before"] = before[1]
            out["recovery_lower_pct_after"] = self._recovery_lower(width)
        return out

    def _run(self, i: int) -> dict:
        out = self.candidates.run(i)
        if self.log_d is not None:
            out["log_d"] = clean(self.log_d[i], 6)
        return out

    def _groups(self, runs: list[dict]) -> list[dict]:
        """The runs of a batch (its :meth:`_run` rows, in the order chosen) with repeats
        counted."""
        out: list[dict] = []
        for run in runs:
            same = [g for g in out if all(g[k] == run[k] for k in ("pH", "ratio", "form"))]
            if same:
                same[0]["count"] += 1
            else:
                out.append(dict(run, count=1))
        return out

    def to_dict(self) -> dict:
        c = self.candidates
        t = self.target
        # each candidate's row is written once: the singles and the batches name the same few
        # candidates over and over (the batch of 6 holds the batch of 3, and each batch's
        # groups repeat its runs); every place in the output gets its own copy
        written: dict[int, dict] = {}
        before = (clean(self.width_before, 6), self._recovery_lower(self.width_before))

        def run(i: int) -> dict:
            if i not in written:
                written[i] = self._run(i)
            return dict(written[i])

        def batch(idx: list[int], w: float) -> dict:
            runs = [run(k) for k in idx]
            return dict(k=len(idx), runs=runs, groups=self._groups(runs), **self._row(w, before))

        current = (t.procedure.log_d if t.kind == "procedure"
                   else None)
        return {
            "target": {"kind": t.kind, "name": t.name, "quantity": t.quantity,
                       "width_of": t.width_of,
                       "chosen_by": t.chosen_by, "value": clean(self.value, 6),
                       "ci95": None if current is None else current.ci95.to_list()},
            "criterion": self.criterion,
            "method": self.method,
            "linearisation_weak": list(self.weak),
            "method_note": self.method_note,
            "error_model_sigma": clean(self.sigma, 6),
            "candidates": {
                "pH_range": [clean(x, 6) for x in self.pH_range],
                "pH_range_note": self.pH_range_note,
                "pH_step": PH_STEP,
                "ratios": sorted(set(clean_all(c.ratio, 6))),
                "forms": sorted(set(c.form)),
                "count": c.size,
            },
            "single_runs": [dict(rank=i + 1, **run(k), **self._row(w, before))
                            for i, (k, w) in enumerate(self.singles)],
            "batches": [batch(idx, w) for idx, w in self.batches],
            "notes": list(self.notes),
        }

    @property
    def method_note(self) -> str:
        widths = ("log D at the procedure's pH (its lower end sets the lower recovery bound)"
                  if self.target.kind == "procedure" else self.target.name)
        if self.method == "linearised":
            return (f"Runs ranked by the predicted 95 % interval width of {widths} after adding "
                    "them, from the Fisher information of the fit (linearised, with the fit's "
                    f"error model: constant relative error, sigma = {100 * self.sigma:.2g} % of "
                    "each measured amount). Batches chosen greedily, one run at a time."
                    + self._bound_note)
        return (f"The fit is too weakly determined for the linearised criterion "
                f"({'; '.join(self.weak)}). Runs ranked by simulation instead: each candidate "
                f"was simulated {SIM_DRAWS} times from the current fit (constant relative "
                f"error, sigma = {100 * self.sigma:.2g} %), the study refitted with it, and the "
                f"median 95 % interval width of {widths} taken. Batches: the best of the greedy "
                "Fisher batch, the best single runs, repeats of the best run and an even "
                "spread over the usable range, each simulated the same way; a refit that leaves "
                "a parameter at its search limit counts as open. Widths now are the current "
                "Wald widths, on the same footing (open where the reported interval is open)."
                + self._bound_note)

    @property
    def _bound_note(self) -> str:
        if self.target.kind != "procedure":
            return ""
        open_end = self.target.procedure.log_d.ci95.lo is None
        return (" The lower recovery bound after is the reported one with the lower end of log D "
                "moved towards the estimate by the predicted shrinking of its interval"
                + (" (the reported end is open, so the Wald end is moved instead)."
                   if open_end else "."))


# -- the target ---------------------------------------------------------------------------------
def choose_target(fit: FitResult, study: Study,
                  predictions: tuple[ProcedurePrediction, ...]) -> AdviceTarget:
    """The target the study asks for (``advice.target``) or the default: the procedure with the
    lowest lower recovery bound, else the pKa, else log K."""
    params = fit.model.params
    asked = study.advice.target
    note = ""
    if asked is not None:
        if asked in params:
            return _parameter_target(fit, asked, "advice.target in study.yaml")
        if asked == "pKa":
            pkas = [p for p in params if p.startswith("pKa")]
            if pkas:
                # an ampholyte has two: the one the runs know least
                se = {p: fit.parameters[p].se for p in pkas}
                return _parameter_target(fit, max(pkas, key=lambda p: se[p]),
                                         "advice.target in study.yaml")
        for pred in predictions:
            if pred.procedure.id == asked:
                return _procedure_target(pred, "advice.target in study.yaml")
        note = (f"advice.target {asked!r} does not apply to the fitted {fit.model.name} model; "
                "default used: ")
    if predictions:
        def lower(p: ProcedurePrediction) -> float:
            lo = p.recovery_pct.ci95.lo
            return -np.inf if lo is None else lo

        worst = min(predictions, key=lower)
        return _procedure_target(worst, note + "default: the procedure with the lowest lower "
                                               "recovery bound")
    for p in params:
        if p.startswith("pKa"):
            return _parameter_target(fit, p, note + "default: no procedures, so the pKa")
    return _parameter_target(fit, "logK", note + "default: no procedures and no pKa, so log K")


def _parameter_target(fit: FitResult, name: str, chosen_by: str) -> AdviceTarget:
    return AdviceTarget("parameter", name, name, chosen_by, index=fit.model.params.index(name))


def _procedure_target(pred: ProcedurePrediction, chosen_by: str) -> AdviceTarget:
    p = pred.procedure
    return AdviceTarget("procedure", p.id,
                        f"lower recovery bound of {p.id} (log D at pH {p.pH:g})", chosen_by,
                        procedure=pred)


# -- the candidates -----------------------------------------------------------------------------
def usable_pH_range(fit: FitResult, study: Study) -> tuple[tuple[float, float], str | None]:
    """The measured pH span widened by PH_MARGIN, inside 0-14 and inside advice.pH_range."""
    from .solvents import ESTER_HYDROLYSIS_PH, match_solvents

    lo = max(0.0, float(fit.obs.pH.min()) - PH_MARGIN)
    hi = min(14.0, float(fit.obs.pH.max()) + PH_MARGIN)
    declared = study.advice.pH_range
    if declared is None:
        note = (f"measured pH {fit.obs.pH.min():g} to {fit.obs.pH.max():g} widened "
                f"by {PH_MARGIN:g} on each side; no advice.pH_range declared")
        # an ester solvent is hydrolysed by base: never advise a run further into that region
        # than the study has already gone (advice.pH_range overrides)
        esters = [x.name for x in match_solvents(study.system.get("organic")).solvents
                  if x.ester]
        cap = max(ESTER_HYDROLYSIS_PH, float(fit.obs.pH.max()))
        if esters and hi > cap and cap - lo >= PH_STEP:
            hi = cap
            note += (f"; capped at pH {cap:g}: {' and '.join(esters)} is hydrolysed by base "
                     f"from about pH {ESTER_HYDROLYSIS_PH:g} (common practice), so no run is "
                     "advised beyond the measured runs there; set advice.pH_range to choose")
        return (lo, hi), note
    a, b = max(lo, declared[0]), min(hi, declared[1])
    if b - a < PH_STEP:
        return declared, (f"advice.pH_range {declared[0]:g} to {declared[1]:g} lies outside the "
                          f"measured span widened by {PH_MARGIN:g}: the declared range is used, "
                          "and the advice extrapolates the model there")
    return (a, b), (f"measured pH {fit.obs.pH.min():g} to {fit.obs.pH.max():g} widened by "
                    f"{PH_MARGIN:g}, inside advice.pH_range {declared[0]:g} to {declared[1]:g}")


def build_candidates(fit: FitResult, study: Study, pH_range: tuple[float, float]) -> Candidates:
    """pH on the PH_STEP grid x the study's measurement forms x ratios (one-phase forms only:
    with both phases measured, the constant-CV error model makes the ratio irrelevant)."""
    # (measurement, volume ratio) of each run that enters: each property read once per run
    used = [(form, r.volume_ratio) for r in study.runs
            if not r.excluded and (form := r.measurement) in FORM_KIND]
    forms = _by_frequency([form for form, _ in used]) or ["both"]
    # replicates share their volumes: each distinct ratio is written to 4 digits once
    written = {v: float(f"{v:.4g}") for v in dict.fromkeys(v for _, v in used)}
    own = [written[v] for _, v in used]
    own_ratios = _by_frequency([x for x in own if RATIO_LIMITS[0] <= x <= RATIO_LIMITS[1]])
    main = own_ratios[0] if own_ratios else 1.0
    ratios = own_ratios + [x for x in RATIOS if x not in own_ratios]
    lo, hi = pH_range
    grid = np.round(np.arange(np.ceil(lo / PH_STEP - 1e-9) * PH_STEP, hi + 1e-9, PH_STEP),
                    6) + 0.0
    # one block of the pH grid per (form, ratio), in order of preference
    blocks = [(f, r) for f in forms for r in ([main] if FORM_KIND[f] == LOG_D else ratios)]
    pH = np.tile(grid, len(blocks))
    block = np.repeat(np.arange(len(blocks)), grid.size)
    # among equally good runs, the one that extrapolates least from the measured pH
    outside = np.maximum(fit.obs.pH.min() - pH, 0.0) + np.maximum(pH - fit.obs.pH.max(), 0.0)
    preference = np.empty(pH.size, dtype=int)
    preference[np.lexsort((outside, block))] = np.arange(pH.size)
    return Candidates(pH, np.repeat(np.array([r for _, r in blocks], dtype=float), grid.size),
                      tuple(chain.from_iterable([f] * grid.size for f, _ in blocks)), preference)


def _by_frequency(items: list) -> list:
    """Distinct items, most frequent first (first seen breaks ties)."""
    seen: dict = {}
    for x in items:
        seen[x] = seen.get(x, 0) + 1
    return sorted(seen, key=lambda x: -seen[x])


def weighted_rows(fit: FitResult, cands: Candidates, theta: np.ndarray | None = None,
                  idx=None, log_d: np.ndarray | None = None) -> np.ndarray:
    """Weighted Jacobian rows (d y / d theta) / f of candidate runs, as the fit would see them:
    the rows a run adds to J, so that it adds x x' to the information J'J. ``log_d``: log D
    at those runs for ``theta`` when the caller has it already (advise keeps it to draw)."""
    theta = fit.theta if theta is None else theta
    idx = np.arange(cands.size) if idx is None else np.asarray(idx, dtype=int)
    obs = cands.observations(idx)
    g = fit.model.jacobian(obs.pH, theta)
    slope = obs.slope(fit.model.log_d(obs.pH, theta) if log_d is None else log_d)
    return g * (slope / obs.sd_factor)[:, None]


# -- is the linearisation good enough? ---------------------------------------------------------
def weak_reasons(fit: FitResult, target: AdviceTarget) -> list[str]:
    """Why the fit's linearisation is not trusted for design (empty when it is)."""
    out = []
    names = fit.model.params
    c = fit.correlation
    for i in range(len(names)):
        for j in range(i + 1, len(names)):
            if np.isfinite(c[i, j]) and abs(c[i, j]) > WEAK_CORRELATION:
                out.append(f"|r({names[i]}, {names[j]})| = {abs(c[i, j]):.3f} > "
                           f"{WEAK_CORRELATION:g}")
    ests = dict(fit.parameters)
    if target.kind == "procedure":
        ests[target.quantity] = target.procedure.log_d
    for name, e in ests.items():
        if e.at_bound:
            out.append(f"{name} at its search limit")
            continue
        if e.ci95.lo is None or e.ci95.hi is None:
            out.append(f"{name} interval open")
            continue
        half = 0.5 * (e.wald95.hi - e.wald95.lo)
        gap = max(abs(e.ci95.lo - e.wald95.lo), abs(e.ci95.hi - e.wald95.hi))
        if half > 0 and gap > WALD_PROFILE_DISAGREEMENT * half:
            out.append(f"{name}: profile and Wald interval ends differ by {gap / half:.2g} "
                       "Wald half-widths")
    return out


# -- ranking ------------------------------------------------------------------------------------
def _information_inverse(fit: FitResult) -> np.ndarray:
    jtj = fit.jac.T @ fit.jac
    ridge = 1e-12 * max(float(np.trace(jtj)), 1e-300)
    return np.linalg.inv(jtj + ridge * np.eye(fit.p))


def predicted_variance(fit: FitResult, c: np.ndarray, rows: np.ndarray) -> float:
    """s^2 c' (J'J + X'X)^-1 c: the linearised variance of c'theta after adding runs X."""
    m = fit.jac.T @ fit.jac + rows.T @ rows
    return float(fit.residual_sd ** 2 * c @ np.linalg.solve(m, c))


def _greedy(m_inv: np.ndarray, c: np.ndarray, x: np.ndarray, k: int,
            preference: np.ndarray, first: np.ndarray | None = None) -> tuple[list[int], list]:
    """Greedy c-optimal batch: the run that lowers c'M^-1c most, then again given it, k times.
    Returns the chosen indices and c'M^-1c after each choice. ``first`` is
    ``_after_one(m_inv, c, x)`` when the caller has it already (the single-run ranking)."""
    chosen, crit = [], []
    m_inv = m_inv.copy()
    for j in range(k):
        v = first if j == 0 and first is not None else _after_one(m_inv, c, x)
        i = _argmin_stable(v, preference)
        chosen.append(i)
        crit.append(float(v[i]))
        if j == k - 1:
            break       # the inverse after the last choice is never read: not updated
        u = m_inv @ x[i]
        # Sherman-Morrison; u u' written as the product np.outer computes, without its wrapper
        m_inv -= u[:, None] * u[None, :] / (1.0 + float(x[i] @ u))
    return chosen, crit


def _after_one(m_inv: np.ndarray, c: np.ndarray, x: np.ndarray) -> np.ndarray:
    """c'(M + x x')^-1 c for every row x at once (Sherman-Morrison)."""
    a = m_inv @ c
    xa = x @ a
    quad = np.einsum("ij,jk,ik->i", x, m_inv, x)
    return float(c @ a) - xa ** 2 / (1.0 + quad)


#: scores that agree to this relative precision are ties, broken by Candidates.preference
TIE = {"linearised": 1e-6, "simulation": 1e-3}


def _ties(scores: np.ndarray, rel: float) -> np.ndarray:
    """Scores rounded so that near-equal ones compare equal."""
    # the array methods and np.rint (what np.round does with no decimals) rather than the
    # np.min / np.round wrappers: a greedy batch asks for this seven times per study
    scale = max(float(np.abs(scores).min()), 1e-300)
    with np.errstate(invalid="ignore", over="ignore"):
        return np.where(np.isfinite(scores), np.rint(scores / (scale * rel)), np.inf)


def _argmin_stable(v: np.ndarray, preference: np.ndarray) -> int:
    """The best run; among runs equal to round-off, the study's own form and ratio first,
    then the one nearest the measured pH (the first of a lexsort by ties, then preference,
    found without sorting: preference ranks every candidate differently)."""
    ties = _ties(v, TIE["linearised"])
    best = (ties == ties.min()).nonzero()[0]
    return int(best[preference[best].argmin()])


def _ranked_distinct(cands: Candidates, scores: np.ndarray, n: int,
                     rel: float = TIE["linearised"]) -> list[int]:
    """The n best candidates, at most one per (pH, form): the ratios of a one-phase form at one
    pH are near-duplicates to a reader."""
    order = np.lexsort((cands.preference, _ties(scores, rel)))
    out, seen = [], set()
    for i in order:
        key = (cands.pH[i], cands.form[i])
        if key not in seen:
            seen.add(key)
            out.append(int(i))
        if len(out) == n:
            break
    return out


class _Simulator:
    """Median refit width of the target for a candidate design, simulated from the fit."""

    def __init__(self, fit: FitResult, target: AdviceTarget, cands: Candidates):
        self.fit, self.target, self.cands = fit, target, cands
        self.rng = np.random.default_rng(SIM_SEED)
        self.z = self.rng.standard_normal((SIM_DRAWS, max(BATCH_SIZES)))
        self.simple = MODELS.get(fit.model.name.split("+")[0])

    def width(self, idx: list[int]) -> float:
        return self.score(idx)[0]

    def score(self, idx: list[int]) -> tuple[float, int]:
        """(median width, refits whose target is still open): a refit that cannot be made, or
        leaves a parameter at its search limit, counts as an open (infinite) width."""
        fit, obs = self.fit, self.fit.obs
        new = self.cands.observations(idx)
        y_mean = new.predict_y(fit.model.log_d(new.pH, fit.theta))
        widths = []
        # new runs carry the error model's variance alone (no calibration share is known yet)
        extra = (None if obs.extra_var is None
                 else np.concatenate([obs.extra_var, np.zeros(len(idx))]))
        for z in self.z:
            y = y_mean + fit.residual_sd * new.sd_factor * z[:len(idx)]
            both = Observations(obs.run_ids + new.run_ids, np.concatenate([obs.pH, new.pH]),
                                np.concatenate([obs.log_ratio, new.log_ratio]),
                                obs.kind + new.kind, np.concatenate([obs.y, y]),
                                tuple(obs.replicate_key) + new.replicate_key, extra)
            try:
                refit = fit_model(both, fit.model, self.simple, intervals=False)
            except (FitImpossible, np.linalg.LinAlgError, ValueError):
                widths.append(np.inf)
                continue
            if any(e.at_bound for e in refit.parameters.values()):
                widths.append(np.inf)
                continue
            c = self.target.gradient(refit, refit.theta)
            var = float(c @ refit.covariance @ c)
            widths.append(2.0 * refit.t95 * np.sqrt(max(var, 0.0)))
        return float(np.median(widths)), int(np.sum(~np.isfinite(widths)))


def _rounded(score: tuple[float, int]) -> tuple[float, int]:
    """A simulated score with its width rounded to TIE["simulation"] relative: differences
    below that are simulation noise, and the earlier (preferred) design should win them."""
    w, n_open = score
    if not np.isfinite(w) or w <= 0:
        return w, n_open
    step = 10.0 ** np.floor(np.log10(w)) * TIE["simulation"]
    return float(np.round(w / step) * step), n_open


def _ranked_by_score(cands: Candidates, scores: dict[int, tuple[float, int]]) -> list[int]:
    """Simulated candidates best first, at most one per (pH, form); ties (within simulation
    noise) go to the preferred candidate."""
    order = sorted(scores, key=lambda i: (*_rounded(scores[i]), cands.preference[i]))
    out, seen = [], set()
    for i in order:
        key = (cands.pH[i], cands.form[i])
        if key not in seen:
            seen.add(key)
            out.append(i)
    return out


def _open_now(fit: FitResult, target: AdviceTarget) -> bool:
    """Whether the target's reported interval is open (or a parameter sits at its limit):
    then no finite width "now" is honest."""
    if any(e.at_bound for e in fit.parameters.values()):
        return True
    est = (target.procedure.log_d if target.kind == "procedure"
           else fit.parameters[target.name])
    return est.ci95.lo is None or est.ci95.hi is None


def advise(fit: FitResult, study: Study,
           predictions: tuple[ProcedurePrediction, ...] = ()) -> NextRuns:
    """Rank candidate runs for the study and choose batches of BATCH_SIZES runs."""
    target = choose_target(fit, study, predictions)
    pH_range, range_note = usable_pH_range(fit, study)
    cands = build_candidates(fit, study, pH_range)
    c = target.gradient(fit, fit.theta)
    # log D at every candidate: for their information rows and, kept, to draw the advice
    log_d = fit.log_d(cands.pH)
    x = weighted_rows(fit, cands, log_d=log_d)
    m_inv = _information_inverse(fit)
    s2 = fit.residual_sd ** 2
    n, p = fit.n, fit.p

    def width(crit: float, k: int) -> float:
        return 2.0 * t975(n + k - p) * float(np.sqrt(max(s2 * crit, 0.0)))

    before = width(float(c @ m_inv @ c), 0)
    single_crit = _after_one(m_inv, c, x)
    greedy, crit = _greedy(m_inv, c, x, max(BATCH_SIZES), cands.preference, single_crit)
    weak = weak_reasons(fit, target)
    notes = []
    if target.kind == "parameter" and target.name == "logK" and fit.p == 1:
        notes.append("with a neutral model every run at any pH informs log K equally; "
                     "replicates anywhere in the range serve")
    if not weak:
        top = _ranked_distinct(cands, single_crit, TOP_SINGLE)
        singles = [(i, width(float(single_crit[i]), 1)) for i in top]
        batches = [(greedy[:k], width(crit[k - 1], k)) for k in BATCH_SIZES]
        method, criterion = "linearised", CRITERION_LOCAL
    else:
        sim = _Simulator(fit, target, cands)
        main = [i for i in range(cands.size)
                if cands.form[i] == cands.form[0] and cands.ratio[i] == cands.ratio[0]]
        spread = [main[int(round(j))] for j in np.linspace(0, len(main) - 1, SIM_SPREAD)]
        pool = list(dict.fromkeys(_ranked_distinct(cands, single_crit, SIM_SHORTLIST) + spread))
        sim_single = {i: sim.score([i]) for i in pool}
        ranked = _ranked_by_score(cands, sim_single)
        singles = [(i, sim_single[i][0]) for i in ranked[:TOP_SINGLE]]
        batches = [([ranked[0]], sim_single[ranked[0]][0])]
        for k in BATCH_SIZES[1:]:
            designs = [greedy[:k], ranked[:k], [ranked[0]] * k,
                       [main[int(round(j))] for j in np.linspace(0, len(main) - 1, k)]]
            designs = [d for j, d in enumerate(designs) if d not in designs[:j]]
            scored = [(_rounded(sim.score(d)), j, d) for j, d in enumerate(designs)]
            (w, _), _, d = min(scored, key=lambda t: (t[0], t[1]))
            batches.append((d, w))
        method, criterion = "simulation", CRITERION_SIM
        if _open_now(fit, target):
            before = None
    return NextRuns(target, criterion, method, weak, pH_range, range_note, cands, before,
                    singles, batches, fit.residual_sd, notes, target.value(fit), log_d)
