"""Weighted nonlinear least squares of a D(pH) model to what was measured, with honest intervals.

Error model
-----------
Every measured amount carries the same *relative* standard deviation sigma (a constant CV, the
usual behaviour of a calibrated chromatographic assay well above its LOQ; common practice).
Each run is fitted in the log10 space of the quantity that was measured, where that error is
additive and constant:

* both phases measured: y = log10 D = log10(c_org / c_aq), sd = sqrt(2) sigma / ln 10;
* organic phase or ``recovery_pct``: y = log10 E with E = rD / (1 + rD), sd = sigma / ln 10;
* aqueous phase only: y = log10 q with q = 1 / (1 + rD), sd = sigma / ln 10.

Weights are 1 / (relative sd factor)^2; sigma itself is estimated from the residuals. A recovery
near 100 % (E -> 1) moves log10 E by almost nothing when D changes: the model's slope there
(1 - E) is what the fit sees, so such runs carry little weight on D automatically and an
observed 100 % (or 101 %) recovery leaves the residual finite instead of sending D to infinity.

Intervals
---------
95 % intervals are profile-likelihood intervals with the F(1, n - p) threshold (profile t,
Bates & Watts, Nonlinear Regression Analysis and Its Applications, Wiley 1988, ch. 6): the set
of values theta_j for which the minimised weighted sum of squares with theta_j held fixed stays
below S_min (1 + F_{0.95}(1, n - p) / (n - p)). An end the data cannot close is reported as open
(None) with a warning: the profile stays below the threshold up to the search limit, or it only
reaches the threshold where another parameter is held at its own search limit (the end would be
that limit's), or the fits along the profile do not settle (a direction in the parameters that
the runs do not determine). The symmetric Wald interval from the covariance s^2 (J'WJ)^-1 is
reported beside it.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from functools import cached_property, lru_cache

import numpy as np
from scipy import optimize

from . import chemistry as chem
from .models import LogDModel
from .quantiles import f_ppf, t_ppf
from .results import Estimate, Interval

LOG_D, LOG_E, LOG_Q = "log D", "log E", "log q"
# relative-sd factor of y per unit sigma (sigma = relative sd of one measured amount)
_SD_FACTOR = {LOG_D: np.sqrt(2.0) / chem.LN10, LOG_E: 1.0 / chem.LN10, LOG_Q: 1.0 / chem.LN10}
_KIND_CODE = {LOG_D: 0, LOG_E: 1, LOG_Q: 2}

ERROR_MODEL = ("constant relative error (CV) on each measured amount; each run fitted in log10 "
               "of what was measured: log D when both phases were measured, log E (fraction "
               "extracted) for the organic phase or recovery_pct, log q (fraction remaining) for "
               "the aqueous phase")
WEIGHTING = ("weights 1/f^2 with f = sqrt(2)/ln10 for log D (two amounts) and 1/ln10 for log E "
             "or log q (one amount); sigma estimated from the weighted residuals")
INTERVAL_METHOD = "profile likelihood (F(1, n-p) threshold)"


@lru_cache(maxsize=None)
def t975(dof: int) -> float:
    """The 97.5 % quantile of Student's t with ``dof`` degrees of freedom, memoised: scipy's
    ppf costs a fraction of a millisecond, and a study asks for it a dozen times.

    >>> round(t975(10), 3)
    2.228
    """
    return t_ppf(0.975, dof)


@lru_cache(maxsize=None)
def f95(dof: int) -> float:
    """The 95 % quantile of F(1, ``dof``), memoised; it equals ``t975(dof) ** 2``.

    >>> round(f95(10), 3)
    4.965
    """
    return f_ppf(0.95, 1, dof)


class FitImpossible(ValueError):
    """The usable runs cannot support the requested model (too few, or no information)."""


@dataclass(frozen=True)
class Observations:
    """The fit's view of the usable runs: one row each, in log10 space."""

    run_ids: tuple[str, ...]
    pH: np.ndarray
    log_ratio: np.ndarray      # log10(V_org / V_aq)
    kind: tuple[str, ...]      # LOG_D, LOG_E or LOG_Q
    y: np.ndarray
    replicate_key: tuple[str, ...] = ()   # group label for replicate runs (same pH and ratio)
    #: extra variance of y per run in units of sigma^2 (e.g. a calibration's share, divided by
    #: the current estimate of sigma^2); None leaves the weights exactly as the error model says
    extra_var: np.ndarray | None = None

    @cached_property
    def sd_factor(self) -> np.ndarray:
        f = np.array([_SD_FACTOR[k] for k in self.kind])
        if self.extra_var is None or not np.any(self.extra_var):
            return f
        return np.sqrt(f ** 2 + np.asarray(self.extra_var, dtype=float))

    @cached_property
    def _code(self) -> np.ndarray:
        return np.array([_KIND_CODE[k] for k in self.kind])

    @property
    def n(self) -> int:
        return len(self.run_ids)

    @cached_property
    def _masks(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        code = self._code
        return code == 0, code == 1, code == 2

    @cached_property
    def _one_kind(self) -> str | None:
        """The kind of every run when they are all of one kind (the common case), else None."""
        return self.kind[0] if self.kind and len(set(self.kind)) == 1 else None

    @cached_property
    def _distinct(self) -> tuple[np.ndarray, np.ndarray, Observations, np.ndarray]:
        """The runs' distinct pH values and each row's index into them; the first run of each
        distinct (pH, kind, volume ratio) as Observations of their own, and each run's index
        into those.

        Replicates repeat these, and log D and the predicted y are elementwise functions of
        them: evaluated once per distinct value and indexed out to the runs, they are the very
        numbers an evaluation at every run gives, at a fraction of the cost where many
        parameter sets are evaluated at once (the start grid, the traced boundary).
        """
        rows: dict[tuple, int] = {}
        row_of_run = [rows.setdefault(key, len(rows)) for key in
                      zip(self.pH.tolist(), self.kind, self.log_ratio.tolist())]
        first = [row_of_run.index(i) for i in range(len(rows))]
        sub = Observations(tuple(self.run_ids[i] for i in first), self.pH[first],
                           self.log_ratio[first], tuple(self.kind[i] for i in first),
                           self.y[first])
        ph: dict[float, int] = {}
        ph_of_row = [ph.setdefault(x, len(ph)) for x in sub.pH.tolist()]
        return (np.array(list(ph), dtype=float), np.array(ph_of_row, dtype=np.intp), sub,
                np.array(row_of_run, dtype=np.intp))

    def batch_y(self, log_k: np.ndarray, h) -> np.ndarray:
        """Predicted y at every run for many parameter sets of a model log D = logK + h(pH):
        ``log_k`` a column (m, 1), ``h`` called with the distinct pH values as a row (1, k)
        and returning (m, k); see :attr:`_distinct` for why it is shaped so."""
        ph, ph_of_row, sub, row_of_run = self._distinct
        return sub.predict_y(log_k + h(ph[None, :])[:, ph_of_row])[:, row_of_run]

    def predict(self, log_d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Predicted y and dy/dlogD for log D values (shape (..., n))."""
        return self.predict_y(log_d), self.slope(log_d)

    def slope(self, log_d: np.ndarray) -> np.ndarray:
        """dy/dlogD alone for log D values (shape (..., n)): what information weights need."""
        _, is_e, is_q = self._masks
        log_d = np.asarray(log_d, dtype=float)
        if self._one_kind == LOG_E:
            # what the masked assignment below gives when every run is log E, without it
            return chem.fraction_of_pow10(-(log_d + self.log_ratio))
        slope = np.ones_like(log_d)
        if is_e.any():
            slope[..., is_e] = chem.fraction_of_pow10(-(log_d[..., is_e] + self.log_ratio[is_e]))
        if is_q.any():
            slope[..., is_q] = -chem.fraction_of_pow10(log_d[..., is_q] + self.log_ratio[is_q])
        return slope

    def predict_y(self, log_d: np.ndarray) -> np.ndarray:
        """Predicted y alone for log D values (shape (..., n)): what a sum of squares needs."""
        _, is_e, is_q = self._masks
        if self._one_kind == LOG_D:
            return np.array(log_d, dtype=float)
        if self._one_kind == LOG_E:
            # what the masked assignment below gives when every run is log E, without it
            return -chem.log10_one_plus_pow10(-(np.asarray(log_d, dtype=float) + self.log_ratio))
        log_d = np.asarray(log_d, dtype=float)
        y = log_d.copy()
        if is_e.any():
            z = log_d[..., is_e] + self.log_ratio[is_e]          # log10(r D)
            y[..., is_e] = -chem.log10_one_plus_pow10(-z)
        if is_q.any():
            z = log_d[..., is_q] + self.log_ratio[is_q]
            y[..., is_q] = -chem.log10_one_plus_pow10(z)
        return y

    def implied_log_d(self) -> tuple[np.ndarray, np.ndarray]:
        """A rough log D per run (for start values) and its information weight."""
        if self._one_kind == LOG_D:
            log_d = self.y.copy()      # what the np.where below gives then
        else:
            v = 10.0 ** self.y
            with np.errstate(divide="ignore", invalid="ignore"):
                e = np.clip(v, 1e-6, 1 - 1e-6)
                from_e = np.log10(e / (1 - e)) - self.log_ratio
                if self._one_kind != LOG_E:      # (all log E: from_e is what the where gives)
                    q = np.clip(v, 1e-12, 1 - 1e-6)
                    from_q = np.log10(1 / q - 1) - self.log_ratio
            log_d = (from_e if self._one_kind == LOG_E else
                     np.where(self._code == 0, self.y, np.where(self._code == 1, from_e, from_q)))
        return log_d, (self.slope(log_d) / self.sd_factor) ** 2 + 1e-6


class _Residuals:
    """Weighted residuals of y and their Jacobian, r = (y_model - y) / f, for one model and one
    set of observations.

    A study evaluates this thousands of times (every step of every profile fit), so the arrays
    that do not depend on theta are prepared once, and one evaluation of the model gives both
    the residuals and the Jacobian (a step that is accepted needs the Jacobian anyway).
    """

    def __init__(self, obs: Observations, model: LogDModel):
        self.model = model
        self.pH = obs.pH
        self.y = obs.y
        self.f = obs.sd_factor
        is_d, _, is_q = obs._masks
        self.is_d = is_d
        self.all_log_d = bool(is_d.all())
        self.mixed = bool(is_d.any()) and not self.all_log_d
        # log E = -log10(1 + 10^-(log D + log r)) and log q = -log10(1 + 10^(log D + log r)):
        # one expression with the sign of the exponent, as in Observations.predict
        self.sign = np.where(is_q, 1.0, -1.0)
        self.log_ratio = obs.log_ratio
        # made once, not per evaluation: -sign for the slope, f as a column for the Jacobian
        self.minus_sign = -self.sign
        self.f_col = self.f[:, None]

    def __call__(self, theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        log_d, g = self.model.value_and_jacobian(self.pH, theta)
        if self.all_log_d:
            return (log_d - self.y) / self.f, g / self.f_col
        z = self.sign * (log_d + self.log_ratio)
        y = -chem.log10_one_plus_pow10(z)
        slope = self.minus_sign * chem.fraction_of_pow10(z)
        if self.mixed:
            y = np.where(self.is_d, log_d, y)
            slope = np.where(self.is_d, 1.0, slope)
        return (y - self.y) / self.f, g * (slope / self.f)[:, None]


@dataclass
class FitResult:
    """A fitted D(pH) model with its statistics. Numbers are computed here once."""

    model: LogDModel
    obs: Observations
    theta: np.ndarray
    rss: float                          # weighted residual sum of squares, S_min
    jac: np.ndarray                     # weighted Jacobian of y at theta, (n, p)
    bounds: tuple[np.ndarray, np.ndarray]
    parameters: dict[str, Estimate] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    residuals: _Residuals | None = field(default=None, repr=False)
    _log_d_memo: dict = field(default_factory=dict, repr=False)
    _end_memo: dict = field(default_factory=dict, repr=False)       # (pH, side) -> end, theta
    _wald_memo: dict = field(default_factory=dict, repr=False)      # pH -> value, se
    _profile_memo: dict = field(default_factory=dict, repr=False)   # pH -> _Profile
    _trace: _Boundary | None = field(default=None, repr=False)     # traced, not yet checked

    def __post_init__(self):
        if self.residuals is None:
            self.residuals = _Residuals(self.obs, self.model)

    @property
    def n(self) -> int:
        return self.obs.n

    @property
    def p(self) -> int:
        return self.model.n_params

    @property
    def dof(self) -> int:
        return self.n - self.p

    @property
    def residual_sd(self) -> float:
        """Estimated sigma: the relative sd of one measured amount (e.g. 0.04 = 4 %)."""
        return float(np.sqrt(self.rss / self.dof))

    @cached_property
    def _jtj_pinv(self) -> np.ndarray:
        """(J'J)^+ at the estimate: the covariance and the leverages both need it."""
        return np.linalg.pinv(self.jac.T @ self.jac, rcond=1e-12)

    @cached_property
    def covariance(self) -> np.ndarray:
        return self.residual_sd ** 2 * self._jtj_pinv

    @cached_property
    def correlation(self) -> np.ndarray:
        sd = np.sqrt(np.maximum(np.diag(self.covariance), 0.0))    # = np.clip(x, 0, None)
        with np.errstate(divide="ignore", invalid="ignore"):
            c = self.covariance / np.outer(sd, sd)
        return np.where(np.isfinite(c), c, np.nan)

    @property
    def t95(self) -> float:
        return t975(self.dof)

    @property
    def s_crit(self) -> float:
        """Profile threshold on the weighted sum of squares for a 95 % interval."""
        return self.rss * (1.0 + f95(self.dof) / self.dof)

    @cached_property
    def fitted(self) -> np.ndarray:
        return self.obs.predict_y(self.model.log_d(self.obs.pH, self.theta))

    @cached_property
    def _r_hat(self) -> np.ndarray:
        """Residuals r = (y_model - y) / f at the estimate, where every profile starts."""
        return self.residuals(self.theta)[0]

    @cached_property
    def weighted_residuals(self) -> np.ndarray:
        return (self.obs.y - self.fitted) / self.obs.sd_factor

    @cached_property
    def studentized_residuals(self) -> np.ndarray:
        """Internally studentized residuals e_i / (s sqrt(1 - h_ii))."""
        j = self.jac
        h = np.einsum("ij,jk,ik->i", j, self._jtj_pinv, j)
        return self.weighted_residuals / (self.residual_sd * np.sqrt(np.maximum(1 - h, 1e-12)))

    @property
    def aicc(self) -> float:
        """AICc of the weighted Gaussian likelihood with sigma estimated (k = p + 1)."""
        n, k = self.n, self.p + 1
        aic = n * np.log(self.rss / n) + 2 * k
        return float(aic + (2 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else np.inf))

    # -- predictions of log D at any pH -------------------------------------------------------
    def log_d(self, pH) -> np.ndarray:
        return self.model.log_d(pH, self.theta)

    def log_d_wald(self, pH) -> tuple[np.ndarray, np.ndarray]:
        """log D at pH and its delta-method standard error (correlations included)."""
        pH = np.atleast_1d(np.asarray(pH, dtype=float))
        # log D and its gradient from one evaluation of the model (the very numbers that
        # model.log_d and model.jacobian give, tests/test_models.py)
        value, g = self.model.value_and_jacobian(pH, self.theta)
        # np.maximum is the call np.clip(x, 0, None) makes, without its three wrappers
        se = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", g, self.covariance, g), 0.0))
        return value, se

    def log_d_interval(self, pH0: float, hint: tuple[float, float] | None = None) -> Estimate:
        """log D at one pH with its 95 % interval (profile likelihood where the model allows).

        Memoised per pH: the plots' band, the design-space map and the procedures share it.
        ``hint`` (distances from the value to each end at a neighbouring pH) only speeds up
        the search for the ends; it does not change them. Without it, the search starts from
        the ends already found at the nearest pH, if any.
        """
        key = round(float(pH0), 9)
        if key not in self._log_d_memo:
            value, se = self._log_d_wald_at(key)
            wald = Interval(value - self.t95 * se, value + self.t95 * se, "Wald (delta method)")
            if not self._profiles_log_d:
                est = Estimate(value, se, wald, wald)
            elif self.boundary is not None:
                lo, hi = self.boundary.log_d_ends(self, key)
                est = Estimate(value, se, Interval(lo, hi, INTERVAL_METHOD), wald)
            else:
                est = self.profile_log_d_interval(key, hint)
            self._log_d_memo[key] = est
        return self._log_d_memo[key]

    def log_d_intervals(self, pH) -> list[Estimate]:
        """:meth:`log_d_interval` at each pH of a grid, in order; where the joint region is
        traced, every pH not yet asked for is taken from the boundary in one vectorised pass."""
        memo = self._log_d_memo
        keys = [round(x, 9) for x in np.atleast_1d(np.asarray(pH, dtype=float)).tolist()]
        new = sorted({k for k in keys if k not in memo})
        if new and self._profiles_log_d and self.boundary is not None:
            grid = np.array(new)
            values, ses = self.log_d_wald(grid)
            los, his = self.boundary.log_d_range(self, grid)
            # a band is a few dozen pH: the quantile read once and NaN tested on Python floats
            # (lo != lo), not a property chain and a numpy call per pH
            t95 = self.t95
            for k, value, se, lo, hi in zip(new, values.tolist(), ses.tolist(), los.tolist(),
                                            his.tolist()):
                self._wald_memo.setdefault(k, (value, se))
                wald = Interval(value - t95 * se, value + t95 * se, "Wald (delta method)")
                memo[k] = Estimate(value, se, Interval(None if lo != lo else lo,
                                                       None if hi != hi else hi,
                                                       INTERVAL_METHOD), wald)
        return [memo[k] if k in memo else self.log_d_interval(k) for k in keys]

    def profile_log_d_interval(self, pH0: float,
                               hint: tuple[float, float] | None = None) -> Estimate:
        """log D at pH0 with its interval profiled at that pH alone (two profile fits): what
        :meth:`log_d_interval` does when the joint region cannot be traced, and the reference
        the traced intervals are tested against."""
        key = round(float(pH0), 9)
        value, se = self._log_d_wald_at(key)
        wald = Interval(value - self.t95 * se, value + self.t95 * se, "Wald (delta method)")
        hint = hint or (None, None)
        lo = self._log_d_end(key, -1, hint[0])
        hi = self._log_d_end(key, +1, hint[1])
        return Estimate(value, se, Interval(lo, hi, INTERVAL_METHOD), wald)

    @cached_property
    def boundary(self) -> _Boundary | None:
        """The traced boundary of the joint 95 % region, where it gives the log D intervals
        (two-parameter models of the form logK + h, every parameter interval closed and
        reproduced by the trace); None where each pH is profiled on its own."""
        if (self.p != 2 or self.model.h is None or not self._profiles_log_d
                or any(e.at_bound for e in self.parameters.values())):
            return None
        traced = self._trace if self._trace is not None else _Boundary(self)
        return traced if traced.traced and traced.reproduces(self) else None

    def log_d_lower(self, pH0: float) -> float | None:
        """The lower end of the 95 % interval of log D at pH0 alone (None when open): what a
        recovery target is judged by, at half the cost of the whole interval."""
        key = round(float(pH0), 9)
        if key in self._log_d_memo:
            return self._log_d_memo[key].ci95.lo
        if not self._profiles_log_d:
            value, se = self._log_d_wald_at(key)
            return value - self.t95 * se
        if self.boundary is not None:
            return self.boundary.log_d_lower(self, key)
        return self._log_d_end(key, -1)

    @property
    def _profiles_log_d(self) -> bool:
        return self.model.h is not None and self.rss > _NOISE_FREE_RSS * self.n

    def _log_d_wald_at(self, key: float) -> tuple[float, float]:
        if key not in self._wald_memo:
            value, se = self.log_d_wald(key)
            self._wald_memo[key] = (float(value[0]), float(se[0]))
        return self._wald_memo[key]

    def _log_d_end(self, key: float, sign: int, hint: float | None = None) -> float | None:
        if (key, sign) in self._end_memo:
            return self._end_memo[key, sign][0]
        if key not in self._profile_memo:
            self._profile_memo[key] = _Profile(self, pH0=key)
        prof = self._profile_memo[key]
        d0, start = None, None
        if hint is not None and np.isfinite(hint):
            d0 = float(np.clip(hint, 1e-6, 4.0))
        else:
            # the end at the nearest pH already profiled lies on the same contour S = S_crit,
            # so its log D at this pH is inside this interval and close to its end: start there
            near = [k for (k, s), (_, th) in self._end_memo.items()
                    if s == sign and th is not None and abs(k - key) <= NEIGHBOUR_PH]
            if near:
                theta = self._end_memo[min(near, key=lambda k: abs(k - key)), sign][1]
                d = sign * (float(self.model.log_d(np.array([key]), theta)[0]) - prof.v_hat)
                if d > 1e-6:
                    d0, start = d, theta[1:]
        if d0 is None:
            d0 = prof.wald_step(self._log_d_wald_at(key)[1])
        end, pt = prof.end(sign, LOG_D_LIMITS[(sign + 1) // 2], d0, start)
        self._end_memo[key, sign] = (end, None if end is None or pt is None else pt.theta)
        return end


#: below this weighted SS per run the data are noise-free (simulations): no profile to trace
_NOISE_FREE_RSS = 1e-16
#: Search limits for log D when profiling a prediction.
LOG_D_LIMITS = (-8.0, 14.0)
#: the ends at a pH within this distance (pH units) start the search of another pH's ends
NEIGHBOUR_PH = 1.0


def _least_squares(fun, x0, lo, hi, max_iter: int = 200, s_tol: float = 0.0,
                   max_step: float = np.inf):
    """Levenberg-Marquardt with Marquardt scaling in the box [lo, hi].

    ``fun(x)`` returns ``(r, J, ...)``; whatever follows J is handed back for the final point.
    A parameter at a bound whose gradient pushes it outward is held there and the step is
    solved for the others (an active set): a step projected onto the box after the fact is no
    descent step when parameters are correlated, and the fit then crawls along the bound.
    Stops when the step or the decrease of S becomes negligible, or, with ``s_tol`` > 0, when
    the Gauss-Newton model predicts a further decrease below ``s_tol`` (the precision the
    caller needs), without evaluating that last step. ``max_step`` caps each step (largest
    component) so that the fit walks down the valley it starts in rather than leaping over a
    ridge into another one.

    The problems here have 1-3 parameters and tens of runs; a small dense solver avoids the
    per-call overhead of a general one (scipy's ``least_squares`` gives the same optimum, see
    ``tests/test_fit_reference.py``).

    Returns ``(x, S, the tuple fun gave at x, converged)``.
    """
    x = np.minimum(np.maximum(np.asarray(x0, dtype=float), lo), hi)
    out = fun(x)
    r = out[0]
    s = float(r @ r)
    if x.size == 0:
        return x, s, out, True
    lam = 1e-3
    # Only r @ J and J'J (sums over the runs) are numpy's; the rest works on the 1-3 numbers
    # of x, g and A as Python floats, with the same operations in the same order, where
    # numpy's per-call overhead would be most of the cost. The box likewise (broadcast_to,
    # itself costly, only for a box not yet of x's shape: the callers here give one).
    box = list(zip(*(b.tolist() if np.shape(b) == x.shape else np.broadcast_to(b, x.shape).tolist()
                     for b in (lo, hi))))
    xs = x.tolist()
    for _ in range(max_iter):
        J = out[1]
        g_arr = r @ J
        A_arr = J.T @ J
        free = None           # the parameters the step is solved for when some are held
        if any(not a < xj < b for xj, (a, b) in zip(xs, box)):
            held = [(xj <= a and gj > 0) or (xj >= b and gj < 0)
                    for xj, gj, (a, b) in zip(xs, g_arr.tolist(), box)]
            if all(held):
                break
            if any(held):
                free = [i for i, h in enumerate(held) if not h]
                A_arr, g_arr = A_arr[np.ix_(free, free)], g_arr[free]
        g, A = g_arr.tolist(), A_arr.tolist()
        minus_g = [-v for v in g]
        if s_tol > 0.0:
            # the decrease the Gauss-Newton model predicts for the full step, g'A^-1 g / 2
            # (one parameter: the plain product, which is numpy's dot of one term; more:
            # numpy's dot itself, whose sum Python's may not reproduce to the last bit)
            try:
                gn = _solve_small(A, minus_g)
                if -0.5 * (g[0] * gn[0] if len(g) == 1 else float(g_arr @ np.array(gn))) <= s_tol:
                    break
            except np.linalg.LinAlgError:
                pass
        d = [1e-12 if row[i] <= 0 else row[i] for i, row in enumerate(A)]
        scale = 1.0 + _max_abs(xs)
        improved = False
        while lam < 1e16:
            try:
                step = _solve_small(A, minus_g, [lam * dj for dj in d])
            except np.linalg.LinAlgError:
                lam *= 10.0
                continue
            longest = _max_abs(step)
            if longest > max_step:
                step = [v * (max_step / longest) for v in step]
            if free is None:
                new = [xj + sj for xj, sj in zip(xs, step)]
            else:
                new = list(xs)
                for i, sj in zip(free, step):
                    new[i] += sj
            new = [_clip(v, a, b) for v, (a, b) in zip(new, box)]
            moved = _max_abs([a - b for a, b in zip(new, xs)])
            if moved <= 1e-11 * scale:
                break          # no step left to take: converged (or pinned at a bound)
            x_new = np.array(new)
            out_new = fun(x_new)
            r_new = out_new[0]
            s_new = float(r_new @ r_new)
            if s_new < s:
                improved = True
                break
            lam *= 10.0
        if not improved:
            break              # no step lowers S any more: a minimum to working precision
        small = moved < 1e-10 * scale
        flat = s - s_new <= 1e-15 * max(s, 1e-300)
        x, xs, out, r, s = x_new, new, out_new, r_new, s_new
        lam = max(lam * 0.1, 1e-12)
        if small or flat:
            break
    else:
        return x, s, out, False
    return x, s, out, True


def _max_abs(values: list[float]) -> float:
    """The largest |v| of a few numbers, NaN when one is NaN (numpy's max, without its
    per-call overhead)."""
    largest = max(map(abs, values))
    return largest if all(v == v for v in values) else math.nan


def _clip(v: float, lo: float, hi: float) -> float:
    """np.minimum(np.maximum(v, lo), hi) of one number, as numpy gives it: NaN when any is NaN,
    and on a tie (0.0 against -0.0) the bound."""
    if v != v or lo != lo or hi != hi:
        return math.nan
    v = v if v > lo else lo
    return v if v < hi else hi


def _solve_small(a: list[list[float]], b: list[float],
                 damping: list[float] | None = None) -> list[float]:
    """Solve (a + diag(damping)) x = b for the 1-3 parameters here, as lists of floats; 1 x 1
    and 2 x 2 in closed form, which is several times cheaper than a LAPACK call at this size."""
    if len(b) == 1:
        a00 = a[0][0]
        if damping:
            a00 += damping[0]
        if a00 == 0.0 or not math.isfinite(a00):
            raise np.linalg.LinAlgError("singular")
        return [b[0] / a00]
    if len(b) == 2:
        (a00, a01), (a10, a11) = a
        if damping:
            a00, a11 = a00 + damping[0], a11 + damping[1]
        det = a00 * a11 - a01 * a10
        if det == 0.0 or not math.isfinite(det):
            raise np.linalg.LinAlgError("singular")
        b0, b1 = b
        return [(a11 * b0 - a01 * b1) / det, (a00 * b1 - a10 * b0) / det]
    a = np.array(a)
    return np.linalg.solve(a if damping is None else a + np.diag(damping), np.array(b)).tolist()


def _start_values(obs: Observations, model: LogDModel, n_best: int = 3) -> list[np.ndarray]:
    """Grid over the non-logK parameters, logK from the implied log D per run; the lowest grid
    point of each of the best few valleys of the grid (neighbouring grid points lie in the same
    valley and lead the fit to the same minimum, so one start per valley is enough)."""
    implied, w = obs.implied_log_d()
    rest = model.start_grid(obs.pH)
    if model.ion_pair:
        raise AssertionError("ion-pair start values come from the simple model")
    # h at the distinct pH values (Observations._distinct), indexed out to the runs
    ph, ph_of_row, sub, row_of_run = obs._distinct
    if not rest.shape[1]:
        h_ph = np.zeros((1, ph.size))
    else:
        # every grid row at once: h broadcasts over a column of each parameter
        h_ph = model.h(ph[None, :], *(col[:, None] for col in rest.T))
        if np.shape(h_ph) != (len(rest), ph.size):
            h_ph = np.stack([model.h(ph, *r) for r in rest])
    h_row = h_ph[:, ph_of_row]
    h = h_row[:, row_of_run]
    # np.add.reduce is the call np.sum makes on an ndarray, without its Python wrappers
    logk = np.add.reduce(w * (implied - h), axis=1) / np.add.reduce(w, axis=None)
    y = sub.predict_y(logk[:, None] + h_row)[:, row_of_run]
    s = np.add.reduce(((y - obs.y) / obs.sd_factor) ** 2, axis=1)
    order = _grid_minima(rest, s)[:n_best]
    return [np.concatenate([[logk[i]], rest[i]]) for i in order]


def _grid_minima(points: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Indices of the points of a regular grid (rows of ``points``, any subset of a full grid)
    whose ``s`` is below that of every neighbouring grid point, diagonals included; lowest
    first. Ties are broken by position, so a flat stretch gives one point, not many."""
    order = np.argsort(s, kind="stable")
    m, k = points.shape
    if k == 0 or m == 1:
        return order
    rank = np.empty(m)
    rank[order] = np.arange(m)
    steps = []
    for col in points.T:
        # the gaps between distinct values: those of the sorted column that are not zero
        # (np.unique's, at a fraction of its overhead)
        gaps = np.diff(np.sort(col))
        gaps = gaps[gaps != 0]
        steps.append(gaps.min() if gaps.size else 1.0)
    idx = np.rint((points - points.min(axis=0)) / np.array(steps)).astype(int) + 1
    dense = np.full(idx.max(axis=0) + 2, np.inf)    # padded by one on each side
    dense[tuple(idx.T)] = rank
    # every neighbour of every point at once, (neighbours, m, k)
    around = idx + _neighbour_offsets(k)[:, None, :]
    lowest = (rank < dense[tuple(np.moveaxis(around, -1, 0))]).all(axis=0)
    return order[lowest[order]]      # the ranks in order are the points lowest first


@lru_cache(maxsize=None)
def _neighbour_offsets(k: int) -> np.ndarray:
    """The 3^k - 1 steps to a grid point's neighbours in k dimensions, diagonals included."""
    offsets = np.array([o for o in itertools.product((-1, 0, 1), repeat=k) if any(o)])
    offsets.flags.writeable = False
    return offsets


def fit_model(obs: Observations, model: LogDModel, simple_model: LogDModel | None = None,
              intervals: bool = True) -> FitResult:
    """Fit ``model`` to ``obs``; ion-pair models need the matching ``simple_model`` for starts."""
    if obs.n <= model.n_params:
        raise FitImpossible(
            f"{obs.n} usable run(s) cannot fit the {model.name} model: it has {model.n_params} "
            f"parameter(s) and needs at least {model.n_params + 1} runs (one residual degree of "
            "freedom to estimate the measurement error)")
    lo, hi = model.bounds(obs.pH)
    res = _Residuals(obs, model)
    if model.ion_pair:
        base = fit_model(obs, simple_model, intervals=False)
        starts = [np.concatenate([base.theta, [base.theta[0] + d]]) for d in (-4.0, -2.0, -1.0)]
    else:
        starts = _start_values(obs, model)
    best = None
    for x0 in starts:
        x, s, (r, jac), _ = _least_squares(res, x0, lo, hi)
        if best is None or s < best[1] - 1e-12:
            best = (x, s, r, jac)
    theta, rss, r, jac = best
    if rss <= 0.0:
        rss = 1e-300   # noise-free data: keep the statistics finite
    result = FitResult(model, obs, theta, rss, jac, (lo, hi), residuals=res)
    result._r_hat = r      # the fit's last evaluation: the residuals at the estimate, as cached
    _fill_parameters(result, intervals)
    _correlation_warnings(result)
    if model.ion_pair and intervals and result.parameters["logK_ion"].ci95.lo is None:
        result.warnings.append(
            "the runs cannot tell the ion-pair partition ratio K_I from zero (the lower end of "
            "logK_ion is open): the simple model may serve as well")
    return result


#: |r| above which two parameters are reported as strongly correlated
STRONG_CORRELATION = 0.95


def _correlation_warnings(fit: FitResult) -> None:
    names = fit.model.params
    c = fit.correlation
    for i in range(len(names)):
        for j in range(i + 1, len(names)):
            if np.isfinite(c[i, j]) and abs(c[i, j]) > STRONG_CORRELATION:
                fit.warnings.append(
                    f"{names[i]} and {names[j]} are strongly correlated (r = {c[i, j]:+.3f}): "
                    "the runs mostly determine a combination of the two; runs on both sides "
                    "of the pKa separate them")


def _traced_steps(fit: FitResult, j: int) -> tuple[float, float] | None:
    """First distances to try for parameter j's profile ends: its range over the traced
    boundary of the joint region (two-parameter models). Like ``hint`` of log_d_interval they
    only speed the search up: the ends are still where the profile from the estimate crosses
    the threshold, so the trace is then checked against them (_Boundary.reproduces)."""
    if fit.p != 2 or fit.model.h is None or not fit._profiles_log_d:
        return None
    if fit._trace is None:
        fit._trace = _Boundary(fit)
    if not fit._trace.traced:
        return None
    lo, hi = fit._trace.parameter_ranges
    value = float(fit.theta[j])
    return value - float(lo[j]), float(hi[j]) - value


def _fill_parameters(fit: FitResult, intervals: bool) -> None:
    se_all = np.sqrt(np.maximum(np.diag(fit.covariance), 0.0))    # = np.clip(x, 0, None)
    lo_b, hi_b = fit.bounds
    for j, name in enumerate(fit.model.params):
        value, se = float(fit.theta[j]), float(se_all[j])
        wald = Interval(value - fit.t95 * se, value + fit.t95 * se, "Wald")
        # np.isclose(value, limit, atol=1e-6) in scalars: |value - limit| <= 1e-6 + 1e-5 |limit|
        at_bound = any(abs(value - limit) <= 1e-6 + 1e-5 * abs(limit)
                       for limit in (float(lo_b[j]), float(hi_b[j])))
        reasons: dict[int, str] = {}
        if intervals and fit.rss > _NOISE_FREE_RSS * fit.n:
            prof = _Profile(fit, param=j)
            lo, hi = prof.interval(se, float(lo_b[j]), float(hi_b[j]), _traced_steps(fit, j))
            ci = Interval(lo, hi, INTERVAL_METHOD)
            reasons = prof.open_reason
        else:
            ci = wald
        fit.parameters[name] = Estimate(value, se, ci, wald, at_bound=at_bound)
        if at_bound:
            fit.warnings.append(
                f"{name} = {value:.3g} sits at its search limit ({lo_b[j]:.3g} to {hi_b[j]:.3g}): "
                f"the runs do not determine {name}; its interval is open on that side")
        elif intervals and (ci.lo is None or ci.hi is None):
            side = " and ".join(s for s, e in (("below", ci.lo), ("above", ci.hi)) if e is None)
            fit.warnings.append(
                f"{name} is poorly determined: the runs do not bound it from {side} at 95 % "
                "confidence (e.g. no runs near the pKa, or recoveries all near 100 %)"
                + "".join(_open_reason(reasons.get(sign), where)
                          for sign, where in ((-1, "below"), (+1, "above"))))


def _open_reason(reason: str | None, side: str) -> str:
    """Why an end the search could not close is open, when the search limit is not why."""
    if reason is None or reason == "limit":
        return ""
    if reason == "unsettled":
        return (f"; {side}, the fits with it held fixed do not settle (the runs leave a "
                "direction in the parameters undetermined)")
    other = reason.split(" ", 1)[1]
    return (f"; {side}, the profile only rises where {other} reaches its search limit, so an "
            f"end there would be that limit's, not the data's")


# -- profiling -----------------------------------------------------------------------------------
#: a profile fit stops when the fitted model predicts less than this share of s^2 still to
#: gain: tau is then exact to ~1e-9, and the fit does not chase round-off along a flat valley
PROFILE_S_TOL = 1e-9
#: an end is taken when tau is within this share of its target, plus the Newton correction
#: from there (tau is nearly linear in v): on simulated studies that leaves the end exact to
#: ~1e-7 of its distance from the estimate (taking the point itself, as a plain secant search
#: would, leaves ~3e-3), and most ends then need one or two profile fits
END_TAU_TOL = 3e-3
#: profile evaluations allowed per end before the bracketing fallback
MAX_END_STEPS = 16
#: tau below this is a flat stretch of the profile (S - S_min at round-off): no Newton step
TAU_FLAT = 1e-2
#: iterations allowed to one profile fit
MAX_PROFILE_ITER = 100
#: profile fits that do not settle, each closer to the estimate, before an end is left open
MAX_UNSETTLED = 3
#: largest step of a profile fit, and of its warm start from a neighbouring point, in the
#: parameters' units (log units, pH units)
PROFILE_MAX_STEP = 1.0
#: an end that would move by this much (or more) per unit of another parameter's search limit
#: follows that limit, not the data, and is left open
LIMIT_FOLLOWING = 0.5


class _Point:
    """One evaluation of a profile: the weighted SS minimised with the quantity held at v."""

    __slots__ = ("v", "u", "s", "ds", "theta", "converged", "r", "j_u", "j_v", "_tangent",
                 "_slope")

    def __init__(self, v, u, s, theta, converged, r, j_u, j_v):
        self.v, self.u, self.s, self.theta, self.converged = v, u, s, theta, converged
        self.r, self.j_u, self.j_v = r, j_u, j_v
        self.ds = 2.0 * float(r @ j_v)   # dS/dv along the profile (the gradient in u is 0)
        self._tangent = None
        self._slope = None               # _Profile._tau_slope, once asked for


class _Profile:
    """S(v), the weighted SS minimised over the other parameters u with one quantity held at v,
    and the two values of v where it crosses S_crit: the ends of the 95 % interval.

    The quantity is parameter ``param`` or, with ``pH0``, log D at pH0 (then logK = v - h(pH0;
    u), which needs a model of the form log D = logK + h). Each profile fit starts from the
    nearest one already made, moved along the tangent du/dv, so it needs a step or two; and
    since the gradient in u vanishes at each minimum, dS/dv = 2 r . dr/dv comes with every
    evaluation (envelope theorem), so the ends are found by Newton's method on tau(v), which is
    nearly linear in v.

    An end is left open (None) when tau stays below t_crit up to the search limit, and also
    when the data cannot settle it: when a profile fit does not converge (it is walking down a
    valley the runs do not determine, whose bottom may well be inside), or when the end found
    would follow the search limit of another parameter held at it. ``open_reason`` says which.
    """

    def __init__(self, fit: FitResult, param: int = 0, pH0: float | None = None):
        model = fit.model
        self.fit = fit
        self.res = fit.residuals
        self.p = model.n_params
        self.j = param if pH0 is None else 0
        self.free = [k for k in range(self.p) if k != self.j]
        self.names = [model.params[k] for k in self.free]
        # the index as an array: take and fancy indexing by it are cheaper than by a list
        self._free_cols = np.array(self.free, dtype=int)
        self.ph0 = None if pH0 is None else np.array([float(pH0)])
        self.h, self.dh, self.h_dh = model.h, model.dh, model.h_dh
        self.lo_b = fit.bounds[0][self._free_cols]
        self.hi_b = fit.bounds[1][self._free_cols]
        self.limits = list(zip(self.lo_b.tolist(), self.hi_b.tolist()))
        self.s2 = fit.rss / fit.dof
        self.t_crit = math.sqrt(f95(fit.dof))
        theta = fit.theta
        u_hat = theta[self._free_cols]
        self.v_hat = (float(theta[self.j]) if pH0 is None
                      else float(model.log_d(self.ph0, theta)[0]))
        # (a parameter's profile needs no dh0: _theta_dh0 gives None then)
        dh0 = None if pH0 is None else self._theta_dh0(self.v_hat, u_hat)[1]
        self.points = [_Point(self.v_hat, u_hat, fit.rss, theta, True, fit._r_hat,
                              *self._split(fit.jac, dh0))]
        self.open_reason: dict[int, str] = {}

    # -- the reparametrisation ------------------------------------------------------------------
    def theta(self, v: float, u: np.ndarray) -> np.ndarray:
        return self._theta_dh0(v, u)[0]

    def _theta_dh0(self, v: float, u: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
        """theta at (v, u) and, for log D held at pH0, d h(pH0; u) / du."""
        th = np.empty(self.p)
        if self.ph0 is None:
            th[self.j] = v
            th[self._free_cols] = u
            return th, None
        if not u.size:
            th[0] = v
            return th, None
        h0, dh0 = (self.h_dh(self.ph0, *u) if self.h_dh is not None
                   else (self.h(self.ph0, *u), self.dh(self.ph0, *u)))
        th[0] = v - float(h0[0])
        th[1:] = u
        return th, dh0[0]

    def _split(self, jac: np.ndarray, dh0: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        """The Jacobian of r in (u, v) from the one in theta."""
        j_v = jac[:, self.j]
        if self.ph0 is None:
            return jac.take(self._free_cols, axis=1), j_v
        if dh0 is None:
            return jac[:, 1:], j_v
        return jac[:, 1:] - j_v[:, None] * dh0, j_v

    def _inside(self, pt: _Point) -> bool:
        """Is every one of u strictly inside its search limits (then none is held)? In plain
        Python: u has one or two numbers."""
        return all(lo < x < hi for x, (lo, hi) in zip(pt.u.tolist(), self.limits))

    def _held(self, pt: _Point) -> np.ndarray:
        """Which of u sit at a search limit that the fit pushes against."""
        g = pt.j_u.T @ pt.r
        return ((pt.u <= self.lo_b) & (g > 0)) | ((pt.u >= self.hi_b) & (g < 0))

    def tangent(self, pt: _Point) -> np.ndarray:
        """du/dv along the profile at pt (Gauss-Newton); parameters held at a limit stay."""
        if pt._tangent is None:
            t = np.zeros(pt.u.size)
            # strictly inside their limits none of u is held: _held's numpy calls (and the
            # finiteness check's) are spared on the one or two numbers of u
            free = np.ones(pt.u.size, dtype=bool) if self._inside(pt) else ~self._held(pt)
            if free.any():
                a = pt.j_u[:, free]
                try:
                    t[free] = -np.linalg.solve(a.T @ a, a.T @ pt.j_v)
                except np.linalg.LinAlgError:
                    pass
            pt._tangent = t if all(map(math.isfinite, t.tolist())) else np.zeros(pt.u.size)
        return pt._tangent

    # -- evaluations -----------------------------------------------------------------------------
    def at(self, v: float, u0: np.ndarray) -> _Point:
        """Minimise S over u with the quantity held at v, starting from u0."""
        if not self.free:
            u = np.zeros(0)
            theta = self.theta(v, u)
            r, jac = self.res(theta)
            pt = _Point(float(v), u, float(r @ r), theta, True, r, *self._split(jac, None))
        else:
            def fun(u):
                theta, dh0 = self._theta_dh0(v, u)
                r, jac = self.res(theta)
                return (r, *self._split(jac, dh0), theta)

            u, s, (r, j_u, j_v, theta), ok = _least_squares(
                fun, u0, self.lo_b, self.hi_b, MAX_PROFILE_ITER, PROFILE_S_TOL * self.s2,
                PROFILE_MAX_STEP)
            pt = _Point(float(v), u, s, theta, ok, r, j_u, j_v)
        return pt

    def tau(self, pt: _Point) -> float:
        """Signed-root profile statistic in units of s: compare with the t quantile."""
        return math.sqrt(max(pt.s - self.fit.rss, 0.0) / self.s2)

    def _inner(self, v: float) -> _Point:
        """The evaluated point nearest to v between the estimate and v: the profile is traced
        outward from the estimate, so each fit continues the valley the estimate lies in."""
        side = np.sign(v - self.v_hat)
        return min((q for q in self.points if side * (q.v - self.v_hat) <= side * (v - self.v_hat)),
                   key=lambda q: abs(q.v - v))

    def _start(self, v: float, near: _Point) -> np.ndarray:
        """Where to start the profile fit at v: the inner neighbour ``near`` (:meth:`_inner`)
        moved along its tangent."""
        move = self.tangent(near) * (v - near.v)
        longest = _max_abs(move.tolist()) if move.size else 0.0
        if longest > PROFILE_MAX_STEP:     # near a singular point the tangent runs away
            move *= PROFILE_MAX_STEP / longest
        return near.u + move

    def _tau_slope(self, pt: _Point) -> float:
        """|d tau / d v| at an evaluated point; at the estimate, from the curvature of S.
        Kept on the point: the estimate is the inner neighbour of both ends' first fits."""
        if pt._slope is None:
            pt._slope = self._tau_slope_at(pt)
        return pt._slope

    def _tau_slope_at(self, pt: _Point) -> float:
        tau = self.tau(pt)
        if tau > 0.0:
            return abs(pt.ds) / (2.0 * self.s2 * tau)
        # S - S_min ~ c dv^2 near the estimate, c the Schur complement of J'J for v
        c = float(pt.j_v @ pt.j_v)
        if pt.u.size:
            a = pt.j_u.T @ pt.j_u
            b = pt.j_u.T @ pt.j_v
            try:
                c -= float(b @ np.linalg.solve(a, b))
            except np.linalg.LinAlgError:
                pass
        return math.sqrt(max(c, 0.0) / self.s2)

    def evaluate(self, v: float, start: np.ndarray | None = None) -> _Point:
        """The profile at v, from ``start`` (default: the tangent at the inner neighbour).

        S(v) is continuous, so tau far above what the inner neighbour predicts means the fit
        slid into another valley of S (the warm start jumped across a ridge). Then the fit is
        made again from that neighbour's parameters and from the estimate's, and the lowest S
        kept: S(v) is a minimum, so no start can give an answer lower than the true one.
        """
        near = self._inner(v)
        pt = self.at(v, start if start is not None else self._start(v, near))
        tau = self.tau(pt)
        if (tau >= self.t_crit and self.free
                and tau > 2.0 * (self.tau(near) + self._tau_slope(near) * abs(v - near.v)) + 1.0):
            for u0 in (near.u, self.points[0].u):
                other = self.at(v, u0)
                if other.s < pt.s:
                    pt = other
        # only the lowest S found at each v is kept to start later fits from
        self.points.append(pt)
        return pt

    def _follows_limit(self, pt: _Point) -> str | None:
        """The parameter held at its search limit that this end would follow, if any.

        Moving that limit outward by one unit moves the end by g_k / |dS/dv| (from S(v, limit)
        = S_crit); when that is half a unit or more, the end is the limit's, not the data's.
        """
        if not pt.u.size or pt.ds == 0.0 or self._inside(pt):
            return None
        held = self._held(pt)
        if not held.any():
            return None
        g = 2.0 * (pt.j_u.T @ pt.r)
        moves = np.abs(g) / abs(pt.ds)
        worst = int(np.argmax(np.where(held, moves, -1.0)))
        return self.names[worst] if moves[worst] >= LIMIT_FOLLOWING else None

    # -- the ends ----------------------------------------------------------------------------
    def wald_step(self, se: float) -> float:
        """First distance to try: the Wald half-width."""
        step = self.t_crit * se if math.isfinite(se) and se > 1e-8 else 0.5
        return min(max(step, 1e-6), 2.0)

    def interval(self, se: float, lo_lim: float, hi_lim: float,
                 steps: tuple[float, float] | None = None) -> tuple[float | None, float | None]:
        """Both ends; ``steps`` are the first distances to try below and above (default: the
        Wald half-width)."""
        step = self.wald_step(se)
        d_lo, d_hi = (step, step) if steps is None else (
            d if math.isfinite(d) and d > 1e-6 else step for d in steps)
        return self.end(-1, lo_lim, d_lo)[0], self.end(+1, hi_lim, d_hi)[0]

    def end(self, sign: int, limit: float, d0: float,
            start: np.ndarray | None = None) -> tuple[float | None, _Point | None]:
        """The end on side ``sign`` (-1 lower, +1 upper) and the profile point there (None when
        the end is open, see the class).

        ``d0`` is the first distance from the estimate to try, ``start`` the parameters u to
        start that profile fit from (default: the tangent at the nearest evaluated point).
        """
        t_c, v_hat = self.t_crit, self.v_hat
        d_lim = sign * (limit - v_hat)
        if d_lim <= 0.0:
            self.open_reason[sign] = "limit"
            return None, None
        inside, outside = 0.0, None
        unsettled = 0
        d = min(max(d0, 1e-9), d_lim)
        for _ in range(MAX_END_STEPS):
            v = v_hat + sign * d
            pt = self.evaluate(v, start)
            start = None
            tau = self.tau(pt)
            if not pt.converged and tau >= t_c:
                # a profile fit that does not settle is walking down a valley the runs do not
                # determine; the minimum it has not reached lies lower, so this point may well
                # be inside. Look closer in; if the fits there do not settle either, the data
                # do not close this end.
                unsettled += 1
                if unsettled > MAX_UNSETTLED or d - inside <= 1e-6 * (1.0 + d):
                    self.open_reason[sign] = "unsettled"
                    return None, pt
                d = 0.5 * (inside + d) if outside is None else 0.5 * (inside + min(d, outside))
                continue
            # d tau / d distance, from dS/dv (tau^2 s^2 = S - S_min); on a flat stretch tau is
            # round-off of S and its slope is noise
            slope = sign * pt.ds / (2.0 * self.s2 * tau) if tau > TAU_FLAT else 0.0
            if tau < t_c:
                if d >= d_lim:
                    self.open_reason[sign] = "limit"
                    return None, pt
                if d > inside:
                    inside = d
                    if outside is not None and outside <= inside:
                        outside = None         # not monotone: keep searching outward
            elif outside is None or d < outside:
                outside = d
            newton = (t_c - tau) / slope if slope > 0.0 and math.isfinite(slope) else None
            if newton is not None and abs(tau - t_c) <= END_TAU_TOL * t_c:
                follows = self._follows_limit(pt)
                if follows is not None:
                    self.open_reason[sign] = f"follows {follows}"
                    return None, pt
                hi = d_lim if outside is None else outside
                return v_hat + sign * min(max(d + newton, inside), hi), pt
            if newton is not None:
                d_new = d + newton
            elif tau < t_c:
                d_new = (4.0 if tau <= TAU_FLAT else 2.0) * d
            else:
                d_new = 0.5 * (inside + d)
            # keep the step sane: within a factor of four of the last distance, and inside
            # the bracket once there is one
            d_new = min(max(d_new, 0.25 * d), 4.0 * d)
            if outside is not None and not inside < d_new < outside:
                d_new = 0.5 * (inside + outside)
            d = min(d_new, d_lim)
        if outside is None:
            # the steps ran out before the limit: settle it there
            pt = self.evaluate(v_hat + sign * d_lim)
            tau = self.tau(pt)
            if tau < t_c or not pt.converged:
                self.open_reason[sign] = "limit" if tau < t_c else "unsettled"
                return None, pt
            outside = d_lim
        return self._crossing(v_hat + sign * inside, v_hat + sign * outside, t_c,
                              1e-6 * (outside - inside + 1e-12)), None

    def _crossing(self, inside: float, outside: float, t_c: float, xtol: float) -> float:
        """Where tau crosses t_crit between a point inside and one outside the interval."""
        def f(x):
            return self.tau(self.evaluate(x)) - t_c

        a, b = min(inside, outside), max(inside, outside)
        if np.sign(f(a)) == np.sign(f(b)):
            # the warm-started profile fits disagree at the inside point (flat profile):
            # take the outer point, which is conservative
            return outside
        try:
            return optimize.brentq(f, a, b, xtol=xtol, rtol=1e-9)
        except ValueError:
            # brentq evaluates both points again, and on a flat profile the warm-started
            # profile fits can disagree once more: the same conservative choice
            return outside


# -- the joint region's boundary ---------------------------------------------------------------
#: rays along which the boundary of the two-parameter region is traced (a root of S = S_crit
#: on each), evenly spaced in angle in the coordinates whitened by J'J
BOUNDARY_RAYS = 64
#: points of the boundary used for the ranges: the radius, a smooth periodic function of the
#: angle, is interpolated from the rays by its Fourier series (spectrally accurate); the
#: extremum of a quantity over the points is refined by a parabola through the best point and
#: its two neighbours, which leaves an error of order (2 pi / n)^4 of the half-width
BOUNDARY_POINTS = 512
#: the traced region must give each parameter's profile interval to within this share of its
#: half-width (plus BOUNDARY_ABS_TOL), or the region is not the simple closed curve the trace
#: assumes and every log D interval is profiled pH by pH instead
BOUNDARY_REL_TOL = 1e-4
BOUNDARY_ABS_TOL = 1e-7
#: relative precision of each radius: S at the point is S_crit to ~1e-12 of S_crit - S_min
_RADIUS_TOL = 1e-10
_RADIUS_ITER = 40


@lru_cache(maxsize=None)
def _unit_circle(k: int) -> np.ndarray:
    """k points evenly spaced on the unit circle, (k, 2): the same for every traced boundary."""
    phi = 2.0 * np.pi * np.arange(k) / k
    circle = np.column_stack([np.cos(phi), np.sin(phi)])
    circle.flags.writeable = False
    return circle


def _batch_ss(fit: FitResult, thetas: np.ndarray) -> np.ndarray:
    """The weighted SS at each row of ``thetas`` (m, p) in one vectorised pass; only for
    models of the form log D = logK + h(pH; rest), whose h broadcasts."""
    obs = fit.obs
    rest = [thetas[:, k:k + 1] for k in range(1, thetas.shape[1])]
    y = obs.batch_y(thetas[:, :1], lambda pH: fit.model.h(pH, *rest))
    r = (y - obs.y) / obs.sd_factor
    return np.einsum("ij,ij->i", r, r)


class _Boundary:
    """The boundary S(theta) = S_crit of the joint region of a two-parameter fit, traced once.

    S_crit is the profile threshold S_min (1 + F(1, n - p) / (n - p)) (one degree of freedom,
    not p): the profile interval of any quantity g(theta) is then exactly {g(theta): S(theta)
    <= S_crit}, and for a g without a stationary point inside (log D at any pH: dg/dlogK = 1)
    its ends are g's extremes on the boundary. So one trace of the boundary gives the interval
    of log D at every pH, where profiling needs two fits per pH.

    The boundary is sampled along ``n`` rays from the estimate, evenly spaced in angle in the
    coordinates whitened by J'J (where the region is close to a circle); each radius is the
    root of tau(rho) = sqrt(S - S_min) = sqrt(S_crit - S_min), nearly linear in rho, found for
    all rays at once by a bracketed secant method (three or four vectorised evaluations of S).
    The radius is then interpolated to ``m`` points by its Fourier series. ``traced`` is False
    when a ray leaves the search box or does not settle; :meth:`reproduces` is False when the
    traced ranges of the parameters do not match their profile intervals (a region that is not
    star-shaped around the estimate, or not closed). Either way the caller profiles instead.
    """

    def __init__(self, fit: FitResult, n: int | None = None, m: int | None = None,
                 s_crit: float | None = None):
        n, m = n or BOUNDARY_RAYS, m or BOUNDARY_POINTS
        self.traced = False
        self.points = self.rays = np.zeros((0, fit.p))
        theta, lo_b, hi_b = fit.theta, fit.bounds[0], fit.bounds[1]
        # the 95 % profile threshold, or another level's (work-up ranges over several fits)
        target = float(np.sqrt((fit.s_crit if s_crit is None else s_crit) - fit.rss))
        try:
            chol = np.linalg.cholesky(fit.jac.T @ fit.jac)      # J'J = L L'
            whiten = np.linalg.inv(chol.T)                      # theta - theta_hat = W z
        except np.linalg.LinAlgError:
            return
        dirs = _unit_circle(n) @ whiten.T
        # largest radius along each ray that stays inside the search box
        with np.errstate(divide="ignore", invalid="ignore"):
            to_box = np.where(dirs > 0, (hi_b - theta) / dirs,
                              np.where(dirs < 0, (lo_b - theta) / dirs, np.inf))
        rho_box = to_box.min(axis=1)

        def tau(rho, rows):
            s = _batch_ss(fit, theta + rho[:, None] * dirs[rows])
            return np.sqrt(np.maximum(s - fit.rss, 0.0))

        rho = np.minimum(np.full(n, target), 0.5 * rho_box)   # exact if S were quadratic
        t = tau(rho, slice(None))      # every ray (a slice: a view of dirs, not a copy)
        inside = np.where(t < target, rho, 0.0)
        outside = np.where(t >= target, rho, np.inf)
        prev_rho, prev_t = np.zeros(n), np.zeros(n)
        done = np.abs(t - target) <= _RADIUS_TOL * target
        for _ in range(_RADIUS_ITER):
            if done.all():
                break
            k = np.flatnonzero(~done)
            # the open rays' values, taken out once
            rho_k, t_k, inside_k, outside_k, box_k = rho[k], t[k], inside[k], outside[k], rho_box[k]
            with np.errstate(divide="ignore", invalid="ignore"):
                slope = (t_k - prev_t[k]) / (rho_k - prev_rho[k])
                new = rho_k + (target - t_k) / slope
            # outside the bracket (or no usable slope): double outward, or bisect
            bad = ~np.isfinite(new) | (new <= inside_k) | (new >= outside_k)
            grow = np.minimum(2.0 * rho_k, box_k)
            mid = 0.5 * (inside_k + outside_k)
            new = np.where(bad, np.where(np.isfinite(outside_k), mid, grow), new)
            prev_rho[k], prev_t[k] = rho_k, t_k
            rho[k] = new
            t[k] = t_new = tau(new, k)
            below = t_new < target
            inside[k] = np.where(below, np.maximum(inside_k, new), inside_k)
            outside[k] = np.where(t_new >= target, np.minimum(outside_k, new), outside_k)
            done[k] = np.abs(t_new - target) <= _RADIUS_TOL * target
            # a ray that reaches the box without crossing S_crit: the region is not closed
            if ((new >= box_k) & below).any():      # (the method: np.any's wrappers spared)
                return
        if not done.all() or (rho >= rho_box).any():
            return
        self.rays = theta + rho[:, None] * dirs
        # the radius between the rays: its Fourier series, zero-padded from n to m terms
        spectrum = np.fft.rfft(rho)
        if n % 2 == 0:
            spectrum[-1] *= 0.5      # the Nyquist term is shared by +/- frequency
        radius = np.fft.irfft(spectrum, m) * (m / n)
        self.points = theta + radius[:, None] * (_unit_circle(m) @ whiten.T)
        self.traced = True

    @cached_property
    def parameter_ranges(self) -> tuple[np.ndarray, np.ndarray]:
        """Least and greatest value of each parameter over the boundary (each of shape (p,)):
        the first steps of the parameters' profiles and the check of the trace share them.

        Column by column with :meth:`_end_1d`, the same operations as :meth:`range_of` in
        scalars: for the two or three columns here numpy's per-call overhead is most of the
        cost."""
        cols = self.points.T
        return (np.array([self._end_1d(g, -1.0) for g in cols]),
                np.array([self._end_1d(g, 1.0) for g in cols]))

    def reproduces(self, fit: FitResult) -> bool:
        """Do the traced ranges of the parameters match their profile intervals?"""
        lo, hi = self.parameter_ranges
        for j, name in enumerate(fit.model.params):
            ci = fit.parameters[name].ci95
            if ci.lo is None or ci.hi is None or ci.method != INTERVAL_METHOD:
                return False
            tol = BOUNDARY_REL_TOL * 0.5 * (ci.hi - ci.lo) + BOUNDARY_ABS_TOL
            if abs(lo[j] - ci.lo) > tol or abs(hi[j] - ci.hi) > tol:
                return False
        return True

    @staticmethod
    def _end_1d(g: np.ndarray, sign: float) -> float:
        """:meth:`range_of` for one quantity and one end (sign -1: least, +1: greatest), in
        scalars (the common call, one pH at a time)."""
        # the array's own argmax/argmin, without np.argmax's wrapper: a pH window's root
        # search asks for an end at every step
        i = int(g.argmax()) if sign > 0 else int(g.argmin())
        a, b, c = sign * g.item(i - 1), sign * g.item(i), sign * g.item((i + 1) % g.size)
        curv = a - 2.0 * b + c
        shift = min(max(0.5 * (a - c) / curv, -1.0), 1.0) if curv < 0 else 0.0
        return sign * (b - 0.25 * (a - c) * shift)

    @staticmethod
    def range_of(g: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Least and greatest value of a quantity over the boundary, per column of ``g`` (its
        values at the sampled points, (n, k)), each refined by a parabola through the best
        sample and its two neighbours (the samples go round a closed curve)."""
        def refine(v):
            n = v.shape[0]
            i = np.argmax(v, axis=0)
            cols = np.arange(v.shape[1])
            a, b, c = v[(i - 1) % n, cols], v[i, cols], v[(i + 1) % n, cols]
            curv = a - 2.0 * b + c
            with np.errstate(divide="ignore", invalid="ignore"):
                shift = np.where(curv < 0, 0.5 * (a - c) / curv, 0.0)
            return b - 0.25 * (a - c) * np.clip(shift, -1.0, 1.0)

        return -refine(-g), refine(g)

    def log_d_range(self, fit: FitResult, pH) -> tuple[np.ndarray, np.ndarray]:
        """Ends of the 95 % interval of log D at each pH of a grid (NaN beyond LOG_D_LIMITS:
        open)."""
        pH = np.asarray(pH, dtype=float)
        # computed as (pH, point), each pH's values over the boundary contiguous, and handed
        # to range_of transposed: its searches down each column then read contiguous memory
        # (the same numbers as the (point, pH) layout, element by element)
        log_k, rest = self._columns
        g = log_k[None, :] + fit.model.h(pH[:, None], *[c[None, :] for c in rest])
        lo, hi = self.range_of(g.T)
        lo = np.where(lo <= LOG_D_LIMITS[0], np.nan, lo)
        hi = np.where(hi >= LOG_D_LIMITS[1], np.nan, hi)
        return lo, hi

    def log_d_ends(self, fit: FitResult, pH0: float) -> tuple[float | None, float | None]:
        """The ends of :meth:`log_d_range` at one pH, in scalars, None where open."""
        g = self._log_d_at(fit, pH0)
        lo, hi = self._end_1d(g, -1.0), self._end_1d(g, 1.0)
        return lo if lo > LOG_D_LIMITS[0] else None, hi if hi < LOG_D_LIMITS[1] else None

    def log_d_lower(self, fit: FitResult, pH0: float) -> float | None:
        """The lower end alone of :meth:`log_d_ends`, None where open."""
        lo = self._end_1d(self._log_d_at(fit, pH0), -1.0)
        return lo if lo > LOG_D_LIMITS[0] else None

    @cached_property
    def _columns(self) -> tuple[np.ndarray, tuple[np.ndarray, ...]]:
        """The points' log K and their other parameters, each as its own contiguous array: a
        column of ``points`` is strided, and h over a strided column costs nearly twice as
        much (the same numbers, element by element)."""
        return (np.ascontiguousarray(self.points[:, 0]),
                tuple(np.ascontiguousarray(self.points[:, k])
                      for k in range(1, self.points.shape[1])))

    def _log_d_at(self, fit: FitResult, pH0: float) -> np.ndarray:
        """log D at one pH at each point of the boundary (a pH window's root search calls this
        a few times per procedure)."""
        log_k, rest = self._columns
        return log_k + fit.model.h(float(pH0), *rest)

