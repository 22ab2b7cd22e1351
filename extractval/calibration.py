"""Calibration lines of a chromatographic sequence: weighted fit, acceptance, inverse prediction.

Pure: arrays in, result objects out (no files, no study records).

Model and weighting
-------------------
The response y (or the response ratio y / y_IS with an internal standard) is fitted against the
nominal level x by weighted least squares (statsmodels ``WLS``): a straight line
y = a + b x, or y = a + b x + c x^2 only when the study declares ``model: quadratic``.
Unless the study names a weighting, the lines with weights 1, 1/x and 1/x^2 are all fitted and
the one with the smallest sum of absolute relative errors of the back-calculated standards,
sum |100 (x_back - x) / x|, is taken; on a tie the simpler weighting (1, then 1/x) wins.
Relative errors are what the acceptance judges, and a weighting that leaves them small over
the whole range is the one that makes the relative residuals homoscedastic (Almeida,
Castel-Branco & Falcao, J. Chromatogr. B 774 (2002) 215-222, the sum-of-%RE criterion; from
memory).

Acceptance (ICH M10, Bioanalytical method validation, 2022, calibration curve; from memory)
-----------------------------------------------------------------------------------
A back-calculated standard passes within +/-15 % of its nominal level, +/-20 % at the lowest
level (LLOQ). The curve passes when at least 75 % of the standards pass and at least six levels
pass; a level passes when at least half of its standards do.

Inverse prediction
------------------
x0 solves f(x0) = y0 on the fitted curve. Its standard deviation by the delta method has two
parts: the curve's own uncertainty, var_line = J C J' / f'(x0)^2 with J = (1, x0[, x0^2]) and C
the parameters' covariance, and the spread of one reading, s^2 / (m w(x0) f'(x0)^2), with s^2
the weighted residual variance and w(x0) the weight at x0. Unweighted and straight, their sum is
the textbook s_x0 = (s / b) sqrt(1/m + 1/n + (y0 - ybar)^2 / (b^2 Sxx)). An x0 below the lowest
level is "below LLOQ", above the highest "above range": such a value is never extrapolated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .results import clean

#: Weightings tried, simplest first; the name is what the reports print.
WEIGHTINGS = ("1", "1/x", "1/x^2")
CURVE_MODELS = ("linear", "quadratic")
#: ICH M10 acceptance of calibration standards (module docstring).
LIMIT_PCT = 15.0
LLOQ_LIMIT_PCT = 20.0
MIN_FRACTION_PASSING = 0.75
MIN_LEVELS_PASSING = 6
#: A level passes when at least this fraction of its standards pass (ICH M10, replicates).
LEVEL_FRACTION_PASSING = 0.5
#: Statuses of a quantified response.
QUANTIFIED, BELOW_LLOQ, ABOVE_RANGE = "quantified", "below LLOQ", "above range"
#: Relative tolerance on the level range before a value counts as outside it (round-off only).
_RANGE_RTOL = 1e-9

WEIGHTING_RULE = ("weights 1, 1/x and 1/x^2 fitted; the one with the smallest sum of absolute "
                  "relative errors of the back-calculated standards is taken, the simpler on a "
                  "tie (Almeida et al., J. Chromatogr. B 774 (2002) 215)")
ACCEPTANCE_RULE = ("ICH M10: back-calculated standards within +/-15 % of nominal (+/-20 % at the "
                   "LLOQ); at least 75 % of standards and at least 6 levels passing")


class CalibrationImpossible(ValueError):
    """The standards cannot support the requested curve (too few levels, bad weights)."""


def weights_for(x: np.ndarray, weighting: str) -> np.ndarray:
    """Regression weights at levels ``x`` for a weighting named in :data:`WEIGHTINGS`.

    >>> weights_for(np.array([1.0, 2.0, 4.0]), "1/x^2").tolist()
    [1.0, 0.25, 0.0625]
    """
    x = np.asarray(x, dtype=float)
    if weighting == "1":
        return np.ones_like(x)
    if weighting == "1/x":
        return 1.0 / x
    if weighting == "1/x^2":
        return 1.0 / x ** 2
    raise ValueError(f"unknown weighting {weighting!r}; expected one of {WEIGHTINGS}")


@dataclass(frozen=True)
class InversePrediction:
    """An amount read off the curve from one response, with its calibration uncertainty."""

    response: float
    value: float | None          # None when censored (below LLOQ / above range)
    status: str                  # QUANTIFIED | BELOW_LLOQ | ABOVE_RANGE
    sd_line: float | None        # from the curve's parameters only
    sd_total: float | None       # curve and one reading (the textbook s_x0)
    x_estimate: float | None = None   # where the curve puts it, also when censored (not used)

    @property
    def rsd_line(self) -> float | None:
        """Relative sd of the value due to the curve alone."""
        if self.value is None or self.sd_line is None or self.value <= 0:
            return None
        return self.sd_line / self.value

    def to_dict(self) -> dict:
        return {"response": clean(self.response), "value": clean(self.value),
                "status": self.status, "sd_line": clean(self.sd_line),
                "sd_total": clean(self.sd_total)}


@dataclass(eq=False)
class CalibrationFit:
    """One fitted calibration curve, with everything a reviewer checks. Computed once."""

    level: np.ndarray
    response: np.ndarray
    model: str
    weighting: str
    params: np.ndarray            # a, b[, c]
    cov: np.ndarray
    ci95: np.ndarray              # (p, 2)
    scale: float                  # weighted residual variance s^2
    dof: int
    standards: tuple[str, ...] = ()
    weighting_chosen_by: str = "declared"
    candidates: list[dict] = field(default_factory=list)
    rss_weighted: float = float("nan")
    r_squared_weighted: float = float("nan")

    @property
    def n(self) -> int:
        return len(self.level)

    @property
    def p(self) -> int:
        return len(self.params)

    @property
    def se(self) -> np.ndarray:
        return np.sqrt(np.clip(np.diag(self.cov), 0.0, None))

    @property
    def lowest(self) -> float:
        return float(self.level.min())

    @property
    def highest(self) -> float:
        return float(self.level.max())

    def predict(self, x) -> np.ndarray:
        """The response the curve gives at levels ``x``."""
        x = np.asarray(x, dtype=float)
        return sum(c * x ** k for k, c in enumerate(self.params))

    def slope_at(self, x) -> np.ndarray:
        """dy/dx of the curve at ``x``."""
        x = np.asarray(x, dtype=float)
        return sum(k * c * x ** (k - 1) for k, c in enumerate(self.params) if k)

    def solve(self, y0: float) -> float | None:
        """The level at which the curve reaches ``y0`` (None when it never does)."""
        a, b = self.params[0], self.params[1]
        if self.p == 2:
            return float((y0 - a) / b) if b != 0 else None
        c = self.params[2]
        if c == 0:
            return float((y0 - a) / b) if b != 0 else None
        disc = b * b - 4.0 * c * (a - y0)
        if disc < 0:
            return None
        roots = [(-b + s * math.sqrt(disc)) / (2.0 * c) for s in (1.0, -1.0)]
        # the root on the rising branch that holds the standards (f' > 0 there)
        rising = [r for r in roots if b + 2.0 * c * r > 0]
        if not rising:
            return None
        mid = 0.5 * (self.lowest + self.highest)
        return float(min(rising, key=lambda r: abs(r - mid)))

    @property
    def back_calculated(self) -> np.ndarray:
        return np.array([np.nan if (v := self.solve(y)) is None else v for y in self.response])

    @property
    def relative_error_pct(self) -> np.ndarray:
        return 100.0 * (self.back_calculated - self.level) / self.level

    @property
    def residuals(self) -> np.ndarray:
        """Response residuals y - f(x), for the residual plot."""
        return self.response - self.predict(self.level)

    @property
    def monotone(self) -> bool:
        """True when the curve rises over the whole range of the standards."""
        grid = np.linspace(self.lowest, self.highest, 51)
        return bool(np.all(self.slope_at(grid) > 0))

    def inverse(self, y0: float, m: int = 1) -> InversePrediction:
        """x0 for a response ``y0`` (mean of ``m`` readings), with its delta-method sd; a value
        outside the levels is censored (module docstring)."""
        x0 = self.solve(y0)
        if x0 is None or not math.isfinite(x0):
            # the curve never reaches y0: below its lowest point or above its top
            status = BELOW_LLOQ if y0 < float(self.predict(self.lowest)) else ABOVE_RANGE
            return InversePrediction(float(y0), None, status, None, None, None)
        if x0 < self.lowest * (1.0 - _RANGE_RTOL):
            return InversePrediction(float(y0), None, BELOW_LLOQ, None, None, x0)
        if x0 > self.highest * (1.0 + _RANGE_RTOL):
            return InversePrediction(float(y0), None, ABOVE_RANGE, None, None, x0)
        g = float(self.slope_at(x0))
        j = np.array([x0 ** k for k in range(self.p)])
        var_line = float(j @ self.cov @ j) / g ** 2
        w0 = float(weights_for(np.array([x0]), self.weighting)[0])
        var_read = self.scale / (m * w0 * g ** 2)
        return InversePrediction(float(y0), float(x0), QUANTIFIED, math.sqrt(max(var_line, 0.0)),
                                 math.sqrt(max(var_line + var_read, 0.0)), x0)

    # -- acceptance and linearity ---------------------------------------------------------------

    def standard_limits_pct(self) -> np.ndarray:
        lowest = np.isclose(self.level, self.lowest, rtol=1e-12, atol=0.0)
        return np.where(lowest, LLOQ_LIMIT_PCT, LIMIT_PCT)

    def standard_passes(self) -> np.ndarray:
        re = self.relative_error_pct
        return np.isfinite(re) & (np.abs(re) <= self.standard_limits_pct())

    def acceptance(self) -> dict:
        """ICH M10 verdicts: standards and levels passing; a curve that does not rise fails."""
        ok = self.standard_passes()
        levels = np.unique(self.level)
        level_ok = [float(np.mean(ok[self.level == v])) >= LEVEL_FRACTION_PASSING for v in levels]
        frac = float(np.mean(ok))
        n_levels_ok = int(sum(level_ok))
        verdicts = [
            {"criterion": "standards within limits", "value": clean(100.0 * frac, 4),
             "limit": f">= {100 * MIN_FRACTION_PASSING:g} %", "unit": "%",
             "verdict": "pass" if frac >= MIN_FRACTION_PASSING else "fail",
             "source": "ICH M10"},
            {"criterion": "levels passing", "value": n_levels_ok,
             "limit": f">= {MIN_LEVELS_PASSING}", "unit": "levels",
             "verdict": "pass" if n_levels_ok >= MIN_LEVELS_PASSING else "fail",
             "source": "ICH M10"},
            {"criterion": "curve rises over the range", "value": self.monotone,
             "limit": "slope > 0 from the lowest to the highest level", "unit": None,
             "verdict": "pass" if self.monotone else "fail", "source": "common practice"},
        ]
        status = "pass" if all(v["verdict"] == "pass" for v in verdicts) else "fail"
        return {"status": status, "verdicts": verdicts, "levels": len(levels),
                "levels_passing": n_levels_ok, "standards": self.n,
                "standards_passing": int(ok.sum())}

    def linearity(self) -> dict:
        """ICH Q2(R2) linearity: correlation coefficient, y-intercept, slope, residual sum of
        squares (with the residuals for the plot in the back-calculated table)."""
        r = float(np.corrcoef(self.level, self.response)[0, 1]) if self.n > 2 else None
        return {"correlation_coefficient": clean(r, 6),
                "r_squared_weighted": clean(self.r_squared_weighted, 6),
                "y_intercept": clean(self.params[0]), "slope": clean(self.params[1]),
                "rss": clean(float(np.sum(self.residuals ** 2))),
                "rss_weighted": clean(self.rss_weighted),
                "residual_sd": clean(math.sqrt(self.scale))}

    def to_dict(self) -> dict:
        names = ("intercept", "slope", "quadratic")[: self.p]
        params = {k: {"value": clean(v), "se": clean(s), "ci95": [clean(lo), clean(hi)]}
                  for k, v, s, (lo, hi) in zip(names, self.params, self.se, self.ci95)}
        back = self.back_calculated
        re = self.relative_error_pct
        ok = self.standard_passes()
        lim = self.standard_limits_pct()
        table = [{"standard": sid, "level": clean(x), "response": clean(y),
                  "fitted_response": clean(f), "residual": clean(y - f),
                  "back_calculated": clean(b), "relative_error_pct": clean(e, 6),
                  "limit_pct": clean(li), "verdict": "pass" if o else "fail"}
                 for sid, x, y, f, b, e, li, o in zip(
                     self.standards or tuple(str(i + 1) for i in range(self.n)), self.level,
                     self.response, self.predict(self.level), back, re, lim, ok)]
        return {"model": self.model, "weighting": self.weighting,
                "curve": self.curve_points(),
                "weighting_chosen_by": self.weighting_chosen_by,
                "weighting_candidates": self.candidates,
                "parameters": params, "n_standards": self.n, "dof": self.dof,
                "range": [clean(self.lowest), clean(self.highest)],
                "lloq": clean(self.lowest),
                "linearity": self.linearity(), "acceptance": self.acceptance(),
                "standards": table}


    #: highest / lowest level above which plots use logarithmic axes
    LOG_SPAN = 50.0

    def curve_points(self, n: int = 60) -> dict:
        """The fitted curve on a grid over the standards, for the plot (log-spaced when the
        levels span more than LOG_SPAN)."""
        log = self.highest / self.lowest > self.LOG_SPAN if self.lowest > 0 else False
        grid = (np.geomspace(self.lowest, self.highest, n) if log
                else np.linspace(self.lowest, self.highest, n))
        return {"level": [clean(x, 6) for x in grid],
                "response": [clean(y, 6) for y in self.predict(grid)], "log_axes": bool(log)}


def _wls(x: np.ndarray, y: np.ndarray, model: str, weighting: str) -> CalibrationFit:
    import statsmodels.api as sm   # imported on first use: it costs ~1 s of start-up

    p = 3 if model == "quadratic" else 2
    design = np.column_stack([x ** k for k in range(p)])
    res = sm.WLS(y, design, weights=weights_for(x, weighting)).fit()
    return CalibrationFit(
        level=x, response=y, model=model, weighting=weighting,
        params=np.asarray(res.params, dtype=float),
        cov=np.asarray(res.cov_params(), dtype=float),
        ci95=np.asarray(res.conf_int(0.05), dtype=float),
        scale=float(res.scale), dof=int(res.df_resid),
        rss_weighted=float(res.ssr), r_squared_weighted=float(res.rsquared))


def fit_calibration(level, response, *, model: str = "linear", weighting: str | None = None,
                    standards: tuple[str, ...] = ()) -> CalibrationFit:
    """Fit a calibration curve; ``weighting=None`` chooses it by the rule in the module
    docstring. Raises :class:`CalibrationImpossible` when the standards cannot support it."""
    x = np.asarray(level, dtype=float)
    y = np.asarray(response, dtype=float)
    if model not in CURVE_MODELS:
        raise ValueError(f"unknown calibration model {model!r}; expected one of {CURVE_MODELS}")
    p = 3 if model == "quadratic" else 2
    n_levels = len(np.unique(x))
    if n_levels < p:
        raise CalibrationImpossible(
            f"{n_levels} level(s) cannot define a {model} curve: it needs at least {p}")
    if len(x) <= p:
        raise CalibrationImpossible(
            f"{len(x)} standards leave no residual degree of freedom for a {model} curve "
            f"({p} parameters): at least {p + 1} are needed")
    if weighting is not None:
        if weighting != "1" and np.any(x <= 0):
            raise CalibrationImpossible(f"weighting {weighting} needs every level above 0")
        fit = _wls(x, y, model, weighting)
        fit.standards = tuple(standards)
        return fit
    tried = WEIGHTINGS if np.all(x > 0) else ("1",)
    fits = [_wls(x, y, model, w) for w in tried]
    scores = [float(np.nansum(np.abs(f.relative_error_pct))) if np.all(x > 0) else float("nan")
              for f in fits]
    best = 0
    for i, s in enumerate(scores):
        if math.isfinite(s) and s < scores[best] * (1.0 - 1e-9):
            best = i
    chosen = fits[best]
    chosen.standards = tuple(standards)
    chosen.weighting_chosen_by = ("smallest sum of |relative error| of the back-calculated "
                                  "standards" if len(tried) > 1 else
                                  "only weighting possible with a level of 0")
    chosen.candidates = [{"weighting": w, "sum_abs_relative_error_pct": clean(s, 6),
                          "chosen": i == best} for i, (w, s) in enumerate(zip(tried, scores))]
    return chosen
