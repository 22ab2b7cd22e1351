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
below S_min (1 + F_{0.95}(1, n - p) / (n - p)). An end the data cannot close (the profile stays
below the threshold up to the search limit) is reported as open (None) with a warning. The
symmetric Wald interval from the covariance s^2 (J'WJ)^-1 is reported beside it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property, lru_cache

import numpy as np
from scipy import optimize, stats

from . import chemistry as chem
from .models import LogDModel
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
    return float(stats.t.ppf(0.975, dof))


@lru_cache(maxsize=None)
def f95(dof: int) -> float:
    """The 95 % quantile of F(1, ``dof``), memoised; it equals ``t975(dof) ** 2``.

    >>> round(f95(10), 3)
    4.965
    """
    return float(stats.f.ppf(0.95, 1, dof))


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

    @cached_property
    def sd_factor(self) -> np.ndarray:
        return np.array([_SD_FACTOR[k] for k in self.kind])

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

    def predict(self, log_d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Predicted y and dy/dlogD for log D values (shape (..., n))."""
        is_d, is_e, is_q = self._masks
        log_d = np.asarray(log_d, dtype=float)
        y = log_d.copy()
        slope = np.ones_like(log_d)
        if is_e.any():
            z = log_d[..., is_e] + self.log_ratio[is_e]          # log10(r D)
            y[..., is_e] = -chem.log10_one_plus_pow10(-z)
            slope[..., is_e] = chem.fraction_of_pow10(-z)
        if is_q.any():
            z = log_d[..., is_q] + self.log_ratio[is_q]
            y[..., is_q] = -chem.log10_one_plus_pow10(z)
            slope[..., is_q] = -chem.fraction_of_pow10(z)
        return y, slope

    def implied_log_d(self) -> tuple[np.ndarray, np.ndarray]:
        """A rough log D per run (for start values) and its information weight."""
        code = self._code
        v = 10.0 ** self.y
        with np.errstate(divide="ignore", invalid="ignore"):
            e = np.clip(v, 1e-6, 1 - 1e-6)
            from_e = np.log10(e / (1 - e)) - self.log_ratio
            q = np.clip(v, 1e-12, 1 - 1e-6)
            from_q = np.log10(1 / q - 1) - self.log_ratio
        log_d = np.where(code == 0, self.y, np.where(code == 1, from_e, from_q))
        _, slope = self.predict(log_d)
        return log_d, (slope / self.sd_factor) ** 2 + 1e-6


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
    _log_d_memo: dict = field(default_factory=dict, repr=False)

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
    def covariance(self) -> np.ndarray:
        jtj = self.jac.T @ self.jac
        return self.residual_sd ** 2 * np.linalg.pinv(jtj, rcond=1e-12)

    @cached_property
    def correlation(self) -> np.ndarray:
        sd = np.sqrt(np.clip(np.diag(self.covariance), 0, None))
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
        return self.obs.predict(self.model.log_d(self.obs.pH, self.theta))[0]

    @cached_property
    def weighted_residuals(self) -> np.ndarray:
        return (self.obs.y - self.fitted) / self.obs.sd_factor

    @cached_property
    def studentized_residuals(self) -> np.ndarray:
        """Internally studentized residuals e_i / (s sqrt(1 - h_ii))."""
        j = self.jac
        h = np.einsum("ij,jk,ik->i", j, np.linalg.pinv(j.T @ j, rcond=1e-12), j)
        return self.weighted_residuals / (self.residual_sd * np.sqrt(np.clip(1 - h, 1e-12, None)))

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
        g = self.model.jacobian(pH, self.theta)
        se = np.sqrt(np.clip(np.einsum("ij,jk,ik->i", g, self.covariance, g), 0, None))
        return self.model.log_d(pH, self.theta), se

    def log_d_interval(self, pH0: float, hint: tuple[float, float] | None = None) -> Estimate:
        """log D at one pH with its 95 % interval (profile likelihood where the model allows).

        Memoised per pH: the plots' band, the design-space map and the procedures share it.
        ``hint`` (distances from the value to each end at a neighbouring pH) only speeds up
        the search for the ends; it does not change them.
        """
        key = round(float(pH0), 9)
        if key not in self._log_d_memo:
            self._log_d_memo[key] = self._log_d_interval(key, hint)
        return self._log_d_memo[key]

    def _log_d_interval(self, pH0: float, hint=None) -> Estimate:
        value, se = (float(a[0]) for a in self.log_d_wald(pH0))
        wald = Interval(value - self.t95 * se, value + self.t95 * se, "Wald (delta method)")
        if self.model.h is None or self.rss <= _NOISE_FREE_RSS * self.n:
            return Estimate(value, se, wald, wald)
        lo_lim = LOG_D_LIMITS[0]
        hi_lim = LOG_D_LIMITS[1]
        prof = _Profiler(self, _logd_reparam(self.model, pH0))
        lo, hi = prof.interval(value, se, lo_lim, hi_lim, hint)
        return Estimate(value, se, Interval(lo, hi, INTERVAL_METHOD), wald)


#: below this weighted SS per run the data are noise-free (simulations): no profile to trace
_NOISE_FREE_RSS = 1e-16
#: Search limits for log D when profiling a prediction.
LOG_D_LIMITS = (-8.0, 14.0)


def _weighted(obs: Observations, model: LogDModel):
    """Residual and Jacobian functions of the full parameter vector.

    The Jacobian is always asked for at the point whose residuals were computed last, so the
    model evaluation is shared between the two.
    """
    last: dict = {}

    def evaluate(theta):
        key = theta.tobytes()
        if last.get("key") != key:
            y, slope = obs.predict(model.log_d(obs.pH, theta))
            last.update(key=key, r=(y - obs.y) / obs.sd_factor, slope=slope)
        return last

    def resid(theta):
        return evaluate(theta)["r"]

    def jac(theta):
        slope = evaluate(theta)["slope"]
        return model.jacobian(obs.pH, theta) * (slope / obs.sd_factor)[:, None]

    return resid, jac


def _least_squares(resid, jac, x0, lo, hi, max_iter: int = 200):
    """Levenberg-Marquardt with Marquardt scaling, steps projected onto the box [lo, hi].

    The problems here have 1-3 parameters and tens of runs; a small dense solver avoids the
    per-call overhead of a general one (scipy's ``least_squares`` gives the same optimum, see
    ``tests/test_fit_reference.py``).
    """
    x = np.clip(np.asarray(x0, dtype=float), lo, hi)
    r = resid(x)
    s = float(r @ r)
    if x.size == 0:
        return x, s
    lam = 1e-3
    for _ in range(max_iter):
        J = jac(x)
        g = J.T @ r
        A = J.T @ J
        d = np.diag(A).copy()
        d[d <= 0] = 1e-12
        improved = False
        while lam < 1e16:
            try:
                step = np.linalg.solve(A + lam * np.diag(d), -g)
            except np.linalg.LinAlgError:
                lam *= 10.0
                continue
            x_new = np.clip(x + step, lo, hi)
            if np.max(np.abs(x_new - x)) <= 1e-11 * (1.0 + np.max(np.abs(x))):
                break          # no step left to take: converged (or pinned at a bound)
            r_new = resid(x_new)
            s_new = float(r_new @ r_new)
            if s_new < s:
                improved = True
                break
            lam *= 10.0
        if not improved:
            break
        small = np.max(np.abs(x_new - x)) < 1e-10 * (1.0 + np.max(np.abs(x)))
        flat = s - s_new <= 1e-15 * max(s, 1e-300)
        x, r, s = x_new, r_new, s_new
        lam = max(lam * 0.1, 1e-12)
        if small or flat:
            break
    return x, s


def _start_values(obs: Observations, model: LogDModel, n_best: int = 3) -> list[np.ndarray]:
    """Grid over the non-logK parameters, logK from the implied log D per run; best few."""
    implied, w = obs.implied_log_d()
    rest = model.start_grid(obs.pH)
    if model.ion_pair:
        raise AssertionError("ion-pair start values come from the simple model")
    h = np.stack([model.h(obs.pH, *r) for r in rest]) if rest.shape[1] else np.zeros((1, obs.n))
    logk = np.sum(w * (implied - h), axis=1) / np.sum(w)
    log_d = logk[:, None] + h
    y, _ = obs.predict(log_d)
    s = np.sum(((y - obs.y) / obs.sd_factor) ** 2, axis=1)
    order = np.argsort(s)[:n_best]
    return [np.concatenate([[logk[i]], rest[i]]) for i in order]


def fit_model(obs: Observations, model: LogDModel, simple_model: LogDModel | None = None,
              intervals: bool = True) -> FitResult:
    """Fit ``model`` to ``obs``; ion-pair models need the matching ``simple_model`` for starts."""
    if obs.n <= model.n_params:
        raise FitImpossible(
            f"{obs.n} usable run(s) cannot fit the {model.name} model: it has {model.n_params} "
            f"parameter(s) and needs at least {model.n_params + 1} runs (one residual degree of "
            "freedom to estimate the measurement error)")
    lo, hi = model.bounds(obs.pH)
    resid, jac = _weighted(obs, model)
    if model.ion_pair:
        base = fit_model(obs, simple_model, intervals=False)
        starts = [np.concatenate([base.theta, [base.theta[0] + d]]) for d in (-4.0, -2.0, -1.0)]
    else:
        starts = _start_values(obs, model)
    best = None
    for x0 in starts:
        x, s = _least_squares(resid, jac, x0, lo, hi)
        if best is None or s < best[1] - 1e-12:
            best = (x, s)
    theta, rss = best
    if rss <= 0.0:
        rss = 1e-300   # noise-free data: keep the statistics finite
    result = FitResult(model, obs, theta, rss, jac(theta), (lo, hi))
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


def _fill_parameters(fit: FitResult, intervals: bool) -> None:
    se_all = np.sqrt(np.clip(np.diag(fit.covariance), 0, None))
    lo_b, hi_b = fit.bounds
    for j, name in enumerate(fit.model.params):
        value, se = float(fit.theta[j]), float(se_all[j])
        wald = Interval(value - fit.t95 * se, value + fit.t95 * se, "Wald")
        at_bound = bool(np.isclose(value, lo_b[j], atol=1e-6)
                        or np.isclose(value, hi_b[j], atol=1e-6))
        if intervals and fit.rss > _NOISE_FREE_RSS * fit.n:
            prof = _Profiler(fit, _fix_param(fit.model, j))
            lo, hi = prof.interval(value, se, float(lo_b[j]), float(hi_b[j]))
            ci = Interval(lo, hi, INTERVAL_METHOD)
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
                "confidence (e.g. no runs near the pKa, or recoveries all near 100 %)")


# -- profiling -----------------------------------------------------------------------------------
def _fix_param(model: LogDModel, j: int):
    """(to_theta, free indices, d theta / d u) for profiling parameter j."""
    free = [k for k in range(model.n_params) if k != j]
    dtheta = np.eye(model.n_params)[:, free]

    def to_theta(v, u):
        theta = np.empty(model.n_params)
        theta[j] = v
        theta[free] = u
        return theta

    return to_theta, free, lambda v, u: dtheta


def _logd_reparam(model: LogDModel, pH0: float):
    """The same for log D at pH0 held fixed: logK = logD0 - h(pH0; rest)."""
    ph0 = np.array([pH0])
    free = list(range(1, model.n_params))

    def to_theta(v, u):
        h0 = float(model.h(ph0, *u)[0]) if u.size else 0.0
        return np.concatenate([[v - h0], u])

    def dtheta(v, u):
        return np.vstack([-model.dh(ph0, *u)[0], np.eye(len(free))])

    return to_theta, free, dtheta


class _Profiler:
    """Minimised weighted SS with one quantity held fixed; finds where it crosses S_crit."""

    def __init__(self, fit: FitResult, reparam):
        self.fit = fit
        self.to_theta, self.free, self.dtheta = reparam
        self.lo_b = fit.bounds[0][self.free]
        self.hi_b = fit.bounds[1][self.free]
        self.resid, self.jac = _weighted(fit.obs, fit.model)
        self.u_hat = fit.theta[self.free]
        self.u = self.u_hat.copy()

    def __call__(self, v: float) -> float:
        if not self.free:
            return float(np.sum(self.resid(self.to_theta(v, np.empty(0))) ** 2))

        def r(u):
            return self.resid(self.to_theta(v, u))

        def j(u):
            return self.jac(self.to_theta(v, u)) @ self.dtheta(v, u)

        u, s = _least_squares(r, j, self.u, self.lo_b, self.hi_b)
        self.u = u
        return s

    def tau(self, v: float) -> float:
        """Signed-root profile statistic in units of s: compare with the t quantile."""
        return float(np.sqrt(max(self(v) - self.fit.rss, 0.0) / (self.fit.rss / self.fit.dof)))

    def interval(self, v_hat, se, lo_lim, hi_lim, hint=None) -> tuple[float | None, float | None]:
        t_crit = float(np.sqrt(f95(self.fit.dof)))
        step0 = se * t_crit if np.isfinite(se) and se > 1e-8 else 0.5
        step0 = float(np.clip(step0, 1e-6, 2.0))
        steps = [step0, step0]
        if hint is not None:
            steps = [float(np.clip(h, 1e-6, 4.0)) if h is not None and np.isfinite(h) else step0
                     for h in hint]
        lo = self._end(v_hat, -1, lo_lim, steps[0], t_crit)
        hi = self._end(v_hat, +1, hi_lim, steps[1], t_crit)
        # tau(v_hat) = 0, so an end on the wrong side of the estimate is round-off in a
        # degenerate (flat) profile: the estimate itself bounds it
        return (None if lo is None else min(lo, v_hat), None if hi is None else max(hi, v_hat))

    def _end(self, v_hat, sign, limit, step0, t_crit) -> float | None:
        """One end: secant iteration on tau(v) = t_crit from the Wald end (tau is nearly
        linear in v, so two or three profile fits usually suffice); bracketing as fallback."""
        self.u = self.u_hat.copy()
        v_prev, tau_prev = v_hat, 0.0
        v = v_hat + sign * step0
        inside, outside = v_hat, None
        for _ in range(12):
            if sign * (v - limit) >= 0:
                v = limit
            tau = self.tau(v)
            if abs(tau - t_crit) <= 1e-3 * t_crit:
                return v
            if tau < t_crit:
                inside = v
                if v == limit:
                    return None            # the data do not close this end
            else:
                outside = v
            dist = abs(v - v_hat)
            if tau > tau_prev + 1e-12:
                v_new = v + (t_crit - tau) * (v - v_prev) / (tau - tau_prev)
            else:
                v_new = v_hat + sign * 2.0 * dist
            # keep the step sane: stay on our side, within a factor of four of the last distance
            d_new = float(np.clip(sign * (v_new - v_hat), 0.25 * dist, 4.0 * dist))
            v_prev, tau_prev, v = v, tau, v_hat + sign * d_new
            if outside is not None and sign * (v - outside) > 0:
                v = 0.5 * (inside + outside)
        if outside is None:
            return None
        return self._crossing(inside, outside, t_crit, 1e-3 * step0)

    def _crossing(self, inside: float, outside: float, t_crit: float, xtol: float) -> float:
        """Where tau crosses t_crit between a point inside and one outside the interval."""
        f = lambda x: self.tau(x) - t_crit  # noqa: E731
        a, b = min(inside, outside), max(inside, outside)
        if np.sign(f(a)) == np.sign(f(b)):
            # the warm-started inner fits disagree at the inside point (flat profile):
            # take the outer point, which is conservative
            return outside
        try:
            return optimize.brentq(f, a, b, xtol=xtol, rtol=1e-9)
        except ValueError:
            # brentq evaluates both points again, and on a flat profile the warm-started
            # inner fits can disagree once more: the same conservative choice
            return outside
