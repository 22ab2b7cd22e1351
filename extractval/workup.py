"""Multi-step work-ups of an analyte and its impurities: recovery, carry-over, purity, selectivity.

A work-up is a sequence of steps, each at one pH:

* ``extract``: the aqueous feed (one volume) is shaken with fresh organic portions in turn and
  the organic portions are pooled;
* ``wash``: the pooled organic phase is shaken with fresh aqueous portions in turn, which are
  discarded;
* ``back-extract``: the pooled organic phase is shaken with fresh aqueous portions in turn,
  which are pooled and hold the product (the last step).

Each equilibration is the textbook one: with distribution ratio D, a phase pair of volumes
V_aq and V_org leaves the fraction V_aq / (V_aq + D V_org) in the water and
D V_org / (V_aq + D V_org) in the solvent (IUPAC Gold Book, "distribution ratio", D01817;
successive fresh portions multiply). The organic volume carried from step to step is the sum
of the extraction portions: the mutual solubility of the phases is neglected, which the
dossier says beside the solvent's cautions.

The separation factor of two solutes is beta = D_analyte / D_impurity at one pH (IUPAC Gold
Book, "separation factor", S05603). Purity is the analyte's share of analyte plus impurities in
the product, from the impurities' amounts relative to the analyte in the feed.

Intervals. A quantity g(theta) computed from a fitted model gets the range of g over the
joint confidence region {theta: S(theta) <= S_crit} with the threshold of the fit's own
profile intervals (S_min (1 + F(1, n - p) / (n - p))): for g = log D at one pH this is exactly
the profile-likelihood interval of the fit (Bates & Watts, Nonlinear Regression Analysis and
its Applications, 1988, ch. 6), which the tests use as the reference. A quantity that needs
k independently fitted solutes (analyte and impurities) is ranged over the product of their
regions, each at confidence 0.95^(1/k) so that the product holds all k true values with
probability at least 0.95 (Sidak's inequality for independent data): conservative. An
impurity whose constants the study declares (from a handbook, with its source) carries no
interval of its own. An end reached only where a parameter sits at its search limit is open
(None), as for the fit's own intervals.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np
from scipy import optimize

from . import chemistry as chem
from .fitting import FitResult
from .models import LogDModel
from .quantiles import f_ppf, t_ppf
from .results import Interval, clean
from .study import WorkupStep, workup_problem

#: pH grid spacing of separation-factor curves and of the pH-pair search, pH units
PH_STEP = 0.25
REGION_METHOD = "range over the joint 95 % confidence region (profile-likelihood threshold)"
PRODUCT_METHOD = ("range over the product of the solutes' confidence regions, each at "
                  "0.95^(1/k) for k fitted solutes (Sidak; at least 95 % jointly, conservative)")


# -- the steps (records and their check live with the study's other records) -----------------
Step = WorkupStep
check_steps = workup_problem


def step_dict(s: Step) -> dict:
    return {"kind": s.kind, "pH": clean(s.pH), "aqueous_mL": [clean(v) for v in s.aqueous_mL],
            "organic_mL": [clean(v) for v in s.organic_mL]}


def _log10_one_minus_pow10(x):
    """log10(1 - 10^x) for x <= 0, stably (-inf at x = 0)."""
    with np.errstate(divide="ignore"):
        return np.log10(-np.expm1(np.minimum(x, 0.0) * chem.LN10))


def log_fraction_to_product(log_d, steps: Sequence[Step]) -> np.ndarray:
    r"""log10 of the fraction of a solute that ends in the product phase.

    ``log_d`` holds log10 D of the solute at each step's pH along its last axis (shape
    (..., n_steps)). The product is the pooled organic phase, or the pooled back-extract
    when the last step is a back-extraction.

    .. math::
        f = \Big(1 - \prod_i \frac{V_{aq}}{V_{aq} + D_1 V_i}\Big)
            \prod_{j} \frac{D_2 V_o}{D_2 V_o + W_j}
            \Big(1 - \prod_k \frac{D_3 V_o}{D_3 V_o + B_k}\Big)

    Worked check (one extraction): D = 2, 100 mL water, 50 mL solvent puts half of it in the
    solvent; a wash with 50 mL of water at D = 1 then keeps half of that:

    >>> s = [Step("extract", 7.0, (100.0,), (50.0,)), Step("wash", 7.0, (50.0,))]
    >>> float(10 ** log_fraction_to_product([np.log10(2.0), 0.0], s))
    0.25
    """
    log_d = np.asarray(log_d, dtype=float)
    first = steps[0]
    v_aq = first.aqueous_mL[0]
    v_org = float(sum(first.organic_mL))
    portions = np.log10(np.asarray(first.organic_mL) / v_aq)
    log_q = -np.sum(chem.log10_one_plus_pow10(log_d[..., :1] + portions), axis=-1)
    out = _log10_one_minus_pow10(log_q)
    for i, s in enumerate(steps[1:], start=1):
        ratios = np.log10(np.asarray(s.aqueous_mL) / v_org)
        # fraction kept in the organic phase over the portions: prod D V_o / (D V_o + W_j)
        log_keep = -np.sum(chem.log10_one_plus_pow10(ratios - log_d[..., i:i + 1]), axis=-1)
        out = out + (log_keep if s.kind == "wash" else _log10_one_minus_pow10(log_keep))
    return out


def product_phase(steps: Sequence[Step]) -> str:
    return "aqueous" if steps[-1].kind == "back-extract" else "organic"


# -- solutes ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Solute:
    """A solute of the work-up: fitted from its own runs (``fit``) or with declared constants.

    ``amount_ratio`` is its amount in the feed relative to the analyte's (impurities, for
    purity); ``source`` cites declared constants.
    """

    name: str
    model: LogDModel
    theta: np.ndarray
    fit: FitResult | None = None
    source: str | None = None
    amount_ratio: float | None = None

    @classmethod
    def fitted(cls, name: str, fit: FitResult, amount_ratio: float | None = None) -> "Solute":
        return cls(name, fit.model, np.asarray(fit.theta, dtype=float), fit, None, amount_ratio)

    def log_d(self, pH, theta=None) -> np.ndarray:
        t = self.theta if theta is None else theta
        return self.model.log_d(np.atleast_1d(np.asarray(pH, dtype=float)), t)


# -- ranges over confidence regions -------------------------------------------------------------
def _s_crit(fit: FitResult, level: float) -> float:
    """Threshold on the weighted SS: the fit's profile threshold at another confidence."""
    if abs(level - 0.95) < 1e-12:
        return fit.s_crit
    return fit.rss * (1.0 + f_ppf(level, 1, fit.dof) / fit.dof)


def _num_grad(g: Callable[[np.ndarray], float], x: np.ndarray) -> np.ndarray:
    h = 1e-6 * np.maximum(1.0, np.abs(x))
    out = np.empty_like(x)
    for k in range(x.size):
        e = np.zeros_like(x)
        e[k] = h[k]
        out[k] = (g(x + e) - g(x - e)) / (2 * h[k])
    return out


@dataclass
class Region:
    """The joint confidence region of one or more independent fits (their parameters stacked)."""

    fits: tuple[FitResult, ...]
    level: float = 0.95
    _slices: list = field(default_factory=list, repr=False)

    def __post_init__(self):
        start = 0
        for f in self.fits:
            self._slices.append(slice(start, start + f.p))
            start += f.p
        self.theta = np.concatenate([f.theta for f in self.fits]) if self.fits else np.zeros(0)
        lo = [f.bounds[0] for f in self.fits]
        hi = [f.bounds[1] for f in self.fits]
        self.lo = np.concatenate(lo) if lo else np.zeros(0)
        self.hi = np.concatenate(hi) if hi else np.zeros(0)
        self.crit = [_s_crit(f, self.level) for f in self.fits]
        cov = [f.covariance for f in self.fits]
        n = self.theta.size
        self.cov = np.zeros((n, n))
        for sl, c in zip(self._slices, cov):
            self.cov[sl, sl] = c

    @property
    def method(self) -> str:
        return REGION_METHOD if len(self.fits) <= 1 else PRODUCT_METHOD

    def split(self, x: np.ndarray) -> list[np.ndarray]:
        return [x[sl] for sl in self._slices]

    def _constraints(self):
        cons = []
        for f, sl, crit in zip(self.fits, self._slices, self.crit):
            def fun(x, f=f, sl=sl, crit=crit):
                r = f.residuals(x[sl])[0]
                return crit - float(r @ r)

            def jac(x, f=f, sl=sl):
                r, j = f.residuals(x[sl])
                out = np.zeros_like(x)
                out[sl] = -2.0 * (j.T @ r)
                return out
            cons.append({"type": "ineq", "fun": fun, "jac": jac})
        return cons

    def range(self, g: Callable[[np.ndarray], float]) -> tuple[float, float | None, float | None]:
        """(g at the estimate, min and max of g over the region); an end is None (open) where
        it is reached only at a parameter's search limit or the search fails."""
        value = float(g(self.theta))
        if not self.fits:
            return value, value, value
        grad = _num_grad(g, self.theta)
        var = float(grad @ self.cov @ grad)
        ends = []
        for sign in (-1.0, 1.0):
            if var <= 0 or not np.isfinite(var):
                ends.append(value)
                continue
            # start at the Wald end in parameter space (the linearised region's extreme point)
            t = t_ppf(0.5 + self.level / 2, min(f.dof for f in self.fits))
            x0 = np.clip(self.theta + sign * t * (self.cov @ grad) / np.sqrt(var),
                         self.lo, self.hi)
            res = optimize.minimize(lambda x: -sign * float(g(x)), x0, method="SLSQP",
                                    bounds=list(zip(self.lo, self.hi)),
                                    constraints=self._constraints(),
                                    options={"maxiter": 200, "ftol": 1e-10})
            feasible = all(c["fun"](res.x) >= -1e-6 * max(1.0, crit)
                           for c, crit in zip(self._constraints(), self.crit))
            at_limit = bool(np.any(np.isclose(res.x, self.lo, atol=1e-5)
                                   | np.isclose(res.x, self.hi, atol=1e-5)))
            if not feasible or at_limit:
                ends.append(None)
                continue
            end = float(g(res.x))
            # the estimate is inside the region: an end never lies on its wrong side
            ends.append(min(end, value) if sign < 0 else max(end, value))
        return value, ends[0], ends[1]


# -- the same ranges from the traced boundary (fast path) ---------------------------------------
#: fractions of the boundary's radius at which a quantity is also evaluated inside the region:
#: an extreme found there (a stationary point inside) sends the quantity to the SLSQP search
INTERIOR_RINGS = (0.0, 0.25, 0.5, 0.75, 0.9)
#: how far inside the boundary's range an interior value may lie before it counts as an
#: interior extreme (relative to the range's width; the boundary's own error is ~1e-5 of it)
INTERIOR_TOL = 1e-6


def region_points(fit: FitResult, level: float) -> np.ndarray | None:
    """Points on the boundary of one fit's joint region at ``level`` (rows of theta), kept on
    the fit; None where they cannot stand in for the region (a model not of the form
    log D = logK + h, more than two parameters, a region the trace does not reproduce, or an
    end open at a search limit). Over these points, with the interior checked
    (:func:`boundary_range`), a quantity's range is the one :meth:`Region.range` searches for.

    One parameter: the two ends of the interval, where S reaches the threshold. Two: the
    boundary traced by :class:`extractval.fitting._Boundary` (the one the fit's log D intervals
    use), at this level's threshold; it is used only where the fit's 95 % trace reproduces the
    parameters' profile intervals.
    """
    from .fitting import _Boundary

    memo = fit.__dict__.setdefault("_workup_points", {})
    key = round(level, 12)
    if key in memo:
        return memo[key]
    out = None
    crit = _s_crit(fit, level)
    if fit.model.h is not None and fit.p == 1:
        out = _interval_ends(fit, crit)
    elif fit.model.h is not None and fit.p == 2 and fit.boundary is not None:
        b = fit.boundary if abs(level - 0.95) < 1e-12 else _Boundary(fit, s_crit=crit)
        out = b.points if b.traced else None
    memo[key] = out
    return out


def _interval_ends(fit: FitResult, crit: float) -> np.ndarray | None:
    """The two values of a one-parameter fit where S = crit (rows of theta), or None."""
    def excess(x: float) -> float:
        r = fit.residuals(np.array([x]))[0]
        return float(r @ r) - crit

    t = float(fit.theta[0])
    ends = []
    for bound in (float(fit.bounds[0][0]), float(fit.bounds[1][0])):
        if not excess(bound) > 0:
            return None                 # open: the threshold is not reached inside the limits
        ends.append(optimize.brentq(excess, t, bound, xtol=1e-12, rtol=1e-12))
    return np.array(ends)[:, None]


def solute_log_d(sol: "Solute", pH: np.ndarray, thetas: np.ndarray) -> np.ndarray:
    """log10 D of a solute at each pH (last axis) for each row of ``thetas`` (first axis)."""
    rest = [thetas[:, k:k + 1] for k in range(1, thetas.shape[1])]
    return thetas[:, :1] + sol.model.h(np.asarray(pH, dtype=float)[None, :], *rest)


def boundary_range(theta: np.ndarray, points: np.ndarray,
                   g: Callable[[np.ndarray], np.ndarray]) -> tuple[np.ndarray, np.ndarray] | None:
    """Least and greatest value of each column of ``g(thetas)`` over the region bounded by
    ``points`` (from :func:`region_points`): the extremes on the boundary, refined by a
    parabola; None (use the search) when a value inside the region lies beyond them."""
    from .fitting import _Boundary

    if points.shape[0] == 2:            # one parameter: the ends of an interval
        inner = points[0] + np.linspace(0.0, 1.0, 9)[1:-1, None] * (points[1] - points[0])
        edge = np.asarray(g(points), dtype=float).reshape(2, -1)
        lo, hi = edge.min(axis=0), edge.max(axis=0)
    else:
        inner = np.concatenate([theta + f * (points - theta) for f in INTERIOR_RINGS])
        lo, hi = _Boundary.range_of(np.asarray(g(points), dtype=float).reshape(
            points.shape[0], -1))
    inside = np.asarray(g(inner), dtype=float).reshape(inner.shape[0], -1)
    slack = INTERIOR_TOL * np.maximum(hi - lo, 1e-300)
    if np.any(inside.min(axis=0) < lo - slack) or np.any(inside.max(axis=0) > hi + slack):
        return None
    return lo, hi


# -- predictions --------------------------------------------------------------------------------
@dataclass(frozen=True)
class Quantity:
    """A derived value with its 95 % interval (ends None where open)."""

    value: float
    ci95: Interval

    def to_dict(self) -> dict:
        return {"value": clean(self.value), "ci95": self.ci95.to_list(),
                "ci95_method": self.ci95.method}


class _Pair:
    """The analyte and one or more solutes; maps stacked parameters to each solute's theta."""

    def __init__(self, solutes: Sequence[Solute], level: float):
        self.solutes = list(solutes)
        self.fitted = [s for s in self.solutes if s.fit is not None]
        self.region = Region(tuple(s.fit for s in self.fitted), level)

    def thetas(self, x: np.ndarray) -> list[np.ndarray]:
        parts = iter(self.region.split(x))
        return [next(parts) if s.fit is not None else s.theta for s in self.solutes]

    def quantity(self, g: Callable[[list[np.ndarray]], float]) -> Quantity:
        value, lo, hi = self.region.range(lambda x: g(self.thetas(x)))
        return Quantity(value, Interval(lo, hi, self.region.method if self.fitted else
                                        "declared constants: no interval from data"))


def _method(solutes: Sequence[Solute]) -> str:
    """How the interval of a quantity of these solutes is made (as :class:`_Pair` says)."""
    k = sum(s.fit is not None for s in solutes)
    if not k:
        return "declared constants: no interval from data"
    return REGION_METHOD if k <= 1 else PRODUCT_METHOD


def _fast_range(sol: Solute, level: float, g: Callable[[np.ndarray], np.ndarray]
                ) -> tuple[np.ndarray, np.ndarray] | None:
    """Range of g (a function of rows of theta, one value or a row of values each) over the
    solute's region at ``level`` from its boundary points; its value alone for declared
    constants; None where the boundary cannot be used (then the search)."""
    if sol.fit is None:
        v = np.asarray(g(sol.theta[None, :]), dtype=float).reshape(1, -1)[0]
        return v, v
    pts = region_points(sol.fit, level)
    return None if pts is None else boundary_range(sol.theta, pts, g)


def _closed(value: float, lo: float, hi: float, method: str) -> Quantity:
    """A quantity whose ends come from the boundary: the estimate is inside the region, so an
    end never lies on its wrong side (as in :meth:`Region.range`)."""
    return Quantity(value, Interval(min(float(lo), value), max(float(hi), value), method))


def _level(solutes: Sequence[Solute]) -> float:
    """Confidence of each fitted solute's region so that their product holds >= 95 %."""
    return 0.95 ** (1.0 / max(1, sum(s.fit is not None for s in solutes)))


def pH_grid(lo: float, hi: float, step: float = PH_STEP) -> np.ndarray:
    """Multiples of ``step`` from ``lo`` to ``hi`` (both inside), e.g. 2.0, 2.25, ..."""
    return np.round(np.arange(np.ceil(lo / step - 1e-9), np.floor(hi / step + 1e-9) + 1)
                    * step, 6)


def log_separation_factor(analyte: Solute, impurity: Solute, pH: float,
                          fast: bool = True) -> Quantity:
    """log10 beta = log10 D_analyte - log10 D_impurity at one pH, with its interval.

    ``fast``: the ends from each solute's boundary (:func:`separation_factors`); False: the
    SLSQP search over the product region (the reference the tests compare with)."""
    if fast:
        got = separation_factors(analyte, impurity, np.array([float(pH)]))
        if got is not None:
            return got[0]
    pair = _Pair([analyte, impurity], _level([analyte, impurity]))

    def g(th):
        return float(analyte.log_d(pH, th[0])[0] - impurity.log_d(pH, th[1])[0])
    return pair.quantity(g)


def separation_factors(analyte: Solute, impurity: Solute,
                       pH: np.ndarray) -> list[Quantity] | None:
    """log10 beta at every pH at once, from each solute's boundary; None where a boundary
    cannot be used. log beta = log D_a - log D_i with independent regions: its least value
    over their product is the least log D_a minus the greatest log D_i (and the reverse)."""
    pair = [analyte, impurity]
    level = _level(pair)
    ranges = [_fast_range(sol, level, lambda th, sol=sol: solute_log_d(sol, pH, th))
              for sol in pair]
    if any(r is None for r in ranges):
        return None
    (a_lo, a_hi), (i_lo, i_hi) = ranges
    value = analyte.log_d(pH) - impurity.log_d(pH)
    method = _method(pair)
    return [_closed(float(v), lo, hi, method)
            for v, lo, hi in zip(value, a_lo - i_hi, a_hi - i_lo)]


def separation_curve(analyte: Solute, impurity: Solute, pH_lo: float, pH_hi: float,
                     step: float = PH_STEP, fast: bool = True) -> dict:
    """log10 beta against pH on a grid, with the interval at each point."""
    grid = pH_grid(pH_lo, pH_hi, step)
    rows = separation_factors(analyte, impurity, grid) if fast and grid.size else None
    if rows is None:
        rows = [log_separation_factor(analyte, impurity, float(x), fast=False) for x in grid]
    return {"pH": [clean(x) for x in grid],
            "log_beta": [clean(q.value, 6) for q in rows],
            "lo": [clean(q.ci95.lo, 6) for q in rows],
            "hi": [clean(q.ci95.hi, 6) for q in rows],
            "method": rows[0].ci95.method if rows else None}


@dataclass(frozen=True)
class WorkupPrediction:
    """Recovery of the analyte, carry-over of each impurity and purity through a work-up."""

    steps: tuple[Step, ...]
    recovery_pct: Quantity
    carry_over_pct: dict[str, Quantity]
    impurity_content_pct: Quantity | None    # impurities' share of the product; purity = 100 - it
    log_beta: dict[str, list[Quantity]]     # impurity -> log10 beta at each step's pH
    notes: tuple[str, ...] = ()

    @property
    def purity_pct(self) -> dict | None:
        """Purity, 100 minus the impurity content (the same interval, ends swapped)."""
        c = self.impurity_content_pct
        if c is None:
            return None
        lo, hi = c.ci95.lo, c.ci95.hi
        return {"value": clean(100.0 - c.value),
                "ci95": [clean(None if hi is None else 100.0 - hi),
                         clean(None if lo is None else 100.0 - lo)],
                "ci95_method": c.ci95.method}

    def to_dict(self) -> dict:
        return {
            "steps": [step_dict(s) for s in self.steps],
            "product_phase": product_phase(self.steps),
            "recovery_pct": self.recovery_pct.to_dict(),
            "carry_over_pct": {k: v.to_dict() for k, v in self.carry_over_pct.items()},
            "impurity_content_pct": (None if self.impurity_content_pct is None
                                     else self.impurity_content_pct.to_dict()),
            "purity_pct": self.purity_pct,
            "log_separation_factor": {k: [dict(step=i + 1, **q.to_dict())
                                          for i, q in enumerate(v)]
                                      for k, v in self.log_beta.items()},
            "notes": list(self.notes),
        }


def _pct(log_f) -> float:
    return float(100.0 * 10.0 ** log_f)


def _log_impurity_content(log_fa: float, log_fi: Sequence[float],
                          ratios: Sequence[float]) -> float:
    """log10 of the impurities' share of the product, sum r_i f_i / (f_a + sum r_i f_i), from
    log fractions (exact where the purity itself would round to 100 %)."""
    imp = [lf + np.log10(r) for lf, r in zip(log_fi, ratios) if r > 0]
    if not imp:
        return -np.inf
    log_imp = np.logaddexp.reduce(np.array(imp) * chem.LN10) / chem.LN10
    return float(log_imp - np.logaddexp(log_fa * chem.LN10, log_imp * chem.LN10) / chem.LN10)


def predict_workup(analyte: Solute, impurities: Sequence[Solute],
                   steps: Sequence[Step], fast: bool = True) -> WorkupPrediction:
    """The work-up's recovery, carry-overs and purity, each with its 95 % interval.

    ``fast``: each range from the solutes' boundary points (:func:`region_points`), the
    purity's by its monotony in each solute's fraction; a quantity whose boundary cannot be
    used, or that has an extreme inside the region, is searched (SLSQP, the reference path
    that ``fast=False`` takes for every quantity)."""
    why = check_steps(steps)
    if why:
        raise ValueError(why)
    steps = tuple(steps)
    pHs = np.array([s.pH for s in steps])

    def frac(sol: Solute, th) -> float:
        return float(log_fraction_to_product(sol.log_d(pHs, th), steps))

    def fracs(sol: Solute):
        return lambda th: log_fraction_to_product(solute_log_d(sol, pHs, th), steps)

    def solo(sol: Solute) -> Quantity:
        value = _pct(frac(sol, sol.theta))
        got = _fast_range(sol, 0.95, fracs(sol)) if fast else None
        if got is None:
            return _Pair([sol], 0.95).quantity(lambda th: _pct(frac(sol, th[0])))
        return _closed(value, _pct(got[0][0]), _pct(got[1][0]), _method([sol]))

    recovery = solo(analyte)
    carry, betas = {}, {}
    for imp in impurities:
        carry[imp.name] = solo(imp)
        betas[imp.name] = [log_separation_factor(analyte, imp, float(p), fast=fast)
                           for p in pHs]
    content, notes = None, []
    with_ratio = [imp for imp in impurities if imp.amount_ratio is not None]
    if impurities and len(with_ratio) == len(impurities):
        all_sol = [analyte, *impurities]
        level = _level(all_sol)
        ratios = [imp.amount_ratio for imp in impurities]

        def g(th):
            fa = frac(analyte, th[0])
            fi = [frac(imp, t) for imp, t in zip(impurities, th[1:])]
            return 100.0 * 10.0 ** _log_impurity_content(fa, fi, ratios)
        # the share rises with each impurity's fraction and falls with the analyte's, and
        # the regions are independent: its ends pair the fractions' opposite ends
        ranges = [_fast_range(sol, level, fracs(sol)) for sol in all_sol] if fast else [None]
        if any(r is None for r in ranges):
            content = _Pair(all_sol, level).quantity(g)
        else:
            (a_lo, a_hi), rest = ranges[0], ranges[1:]
            value = g([sol.theta for sol in all_sol])
            lo = 100.0 * 10.0 ** _log_impurity_content(float(a_hi[0]),
                                                       [float(r[0][0]) for r in rest], ratios)
            hi = 100.0 * 10.0 ** _log_impurity_content(float(a_lo[0]),
                                                       [float(r[1][0]) for r in rest], ratios)
            content = _closed(value, lo, hi, _method(all_sol))
    elif impurities:
        missing = ", ".join(imp.name for imp in impurities if imp.amount_ratio is None)
        notes.append(f"purity not computed: no amount in the feed is given for {missing}")
    return WorkupPrediction(steps, recovery, carry, content, betas, tuple(notes))


# -- the pH pair that maximises purity ----------------------------------------------------------
def best_pH_pair(analyte: Solute, impurities: Sequence[Solute], steps: Sequence[Step],
                 target_recovery_pct: float, pH_span: tuple[float, float],
                 step: float = PH_STEP, fast: bool = True) -> dict:
    """Extraction pH and last-step pH (back-extraction or wash) that maximise the purity of
    the product while the lower 95 % end of the recovery meets the target.

    Screened on a pH grid inside ``pH_span`` (the measured runs: no extrapolation) with the
    delta-method lower end of log10 recovery (fast), then the best candidates are confirmed in
    order with the region interval (:func:`predict_workup`); the first confirmed is returned.
    The map (purity at the estimate, recovery lower end by the delta method) is returned too.
    """
    steps = tuple(steps)
    if len(steps) < 2:
        return {"pair": None, "note": "one step: nothing to pair", "map": None}
    if any(imp.amount_ratio is None for imp in impurities) or not impurities:
        return {"pair": None, "note": "needs impurities with their amounts in the feed",
                "map": None}
    grid = pH_grid(pH_span[0], pH_span[1], step)
    last = len(steps) - 1

    def with_pHs(a: float, c: float) -> tuple[Step, ...]:
        out = list(steps)
        out[0] = Step(steps[0].kind, a, steps[0].aqueous_mL, steps[0].organic_mL)
        out[last] = Step(steps[last].kind, c, steps[last].aqueous_mL, steps[last].organic_mL)
        return tuple(out)

    # every (extraction pH, last-step pH) cell at once: log D of each solute at each step
    pHs = np.broadcast_to(np.array([x.pH for x in steps]), (grid.size, grid.size, len(steps)))
    pHs = pHs.copy()
    pHs[..., 0] = grid[:, None]
    pHs[..., last] = grid[None, :]

    def log_frac(sol: Solute, th=None) -> np.ndarray:
        log_d = sol.log_d(pHs.ravel(), th).reshape(pHs.shape)
        return log_fraction_to_product(log_d, steps)

    fa = log_frac(analyte)
    fi = np.stack([log_frac(imp) + np.log10(imp.amount_ratio) for imp in impurities
                   if imp.amount_ratio > 0] or [np.full_like(fa, -np.inf)])
    log_imp = np.logaddexp.reduce(fi * chem.LN10, axis=0) / chem.LN10
    log_all = np.logaddexp(fa * chem.LN10, log_imp * chem.LN10) / chem.LN10
    log_content = log_imp - log_all           # log10 of the impurities' share of the product
    purity = 100.0 * (1.0 - 10.0 ** log_content)
    fit = analyte.fit
    if fit is not None:
        # delta-method sd of log10 of the fraction recovered, by central differences in theta
        h = 1e-6 * np.maximum(1.0, np.abs(analyte.theta))
        grads = []
        for k in range(analyte.theta.size):
            e = np.zeros_like(analyte.theta)
            e[k] = h[k]
            grads.append((log_frac(analyte, analyte.theta + e)
                          - log_frac(analyte, analyte.theta - e)) / (2 * h[k]))
        g = np.stack(grads, axis=-1)
        se = np.sqrt(np.clip(np.einsum("...i,ij,...j->...", g, fit.covariance, g), 0, None))
        rec_lo = 100.0 * 10.0 ** np.minimum(fa - fit.t95 * se, 0.0)
    else:
        rec_lo = 100.0 * 10.0 ** fa
    order = np.argsort(np.where(rec_lo >= target_recovery_pct, log_content, np.inf), axis=None)
    chosen, note = None, "no pH pair on the grid meets the recovery target at the lower end"
    for flat in order[:10]:
        i, j = np.unravel_index(flat, purity.shape)
        if not rec_lo[i, j] >= target_recovery_pct:
            break
        pred = predict_workup(analyte, impurities, with_pHs(float(grid[i]), float(grid[j])),
                              fast=fast)
        lo = pred.recovery_pct.ci95.lo
        if lo is not None and lo >= target_recovery_pct:
            chosen = {"extract_pH": clean(grid[i]), "last_step_pH": clean(grid[j]),
                      "last_step": steps[last].kind, "prediction": pred.to_dict()}
            note = ("screened by the delta method on the grid, confirmed with the region "
                    "interval")
            break
    return {"pair": chosen, "note": note, "target_recovery_pct": clean(target_recovery_pct),
            "map": {"pH": [clean(x) for x in grid], "last_step": steps[last].kind,
                    "purity_pct": [[clean(v, 6) for v in row] for row in purity],
                    "log10_impurity_content": [[clean(v, 6) for v in row]
                                               for row in log_content],
                    "recovery_lower_pct": [[clean(v, 6) for v in row] for row in rec_lo]}}
