"""Recovery predictions for proposed procedures, with intervals propagated from the fit.

Recovery after successive fresh portions is a monotone (increasing) function of D at the
procedure's pH, so the 95 % interval of log D at that pH (profile likelihood, which carries the
parameters' correlation) maps end-for-end onto intervals of recovery and remaining fraction.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from . import chemistry as chem
from .fitting import FitResult
from .results import Estimate, Interval, clean
from .study import Procedure


def _map(f, x: float | None) -> float | None:
    return None if x is None else float(f(x))


def recovery_pct_from_log_d(log_d, aqueous_mL: float, organic_mL) -> np.ndarray:
    """Percent extracted after the portions, 100 (1 - prod q_i)."""
    return 100.0 * (1.0 - chem.remaining_fraction(10.0 ** np.asarray(log_d, dtype=float),
                                                  aqueous_mL, organic_mL))


@dataclass(frozen=True)
class ValueInterval:
    """A derived quantity: value and its 95 % interval (ends None where open)."""

    value: float
    ci95: Interval

    def to_dict(self) -> dict:
        return {"value": clean(self.value), "ci95": self.ci95.to_list(),
                "ci95_method": self.ci95.method}


@dataclass(frozen=True)
class ProcedurePrediction:
    """What a fitted model predicts for one proposed procedure."""

    procedure: Procedure
    log_d: Estimate
    recovery_pct: ValueInterval
    remaining_fraction: ValueInterval
    single_run_recovery_pct: ValueInterval    # spread of one future measured run
    after_portions: tuple[ValueInterval, ...]  # remaining fraction after portion 1, 2, ..., n
    split_limit_remaining: ValueInterval       # same total solvent in ever more portions
    target_recovery_pct: float | None = None

    @property
    def reading(self) -> str:
        p = self.procedure
        n = len(p.organic_mL)
        vols = ", ".join(f"{v:g}" for v in p.organic_mL)
        rec, ci = self.recovery_pct, self.recovery_pct.ci95
        lo = "open" if ci.lo is None else f"{ci.lo:.1f}"
        hi = "open" if ci.hi is None else f"{ci.hi:.1f}"
        text = (f"At pH {p.pH:g}, extracting {p.aqueous_mL:g} mL of aqueous phase with "
                f"{n} portion{'s' if n != 1 else ''} of solvent ({vols} mL) is predicted to "
                f"recover {rec.value:.1f} % of the analyte (95 % interval {lo} to {hi} %); "
                f"{100 * self.remaining_fraction.value:.2g} % would stay in the water.")
        if self.target_recovery_pct is not None:
            t = self.target_recovery_pct
            if ci.lo is not None and ci.lo >= t:
                text += f" Even the lower end of the interval meets the {t:g} % target."
            elif rec.value >= t:
                text += (f" The predicted value meets the {t:g} % target but the lower end of "
                         "the interval does not: the margin is not demonstrated.")
            else:
                text += f" The prediction falls short of the {t:g} % target."
        return text

    def to_dict(self) -> dict:
        p = self.procedure
        return {
            "id": p.id,
            "label": p.label,
            "pH": clean(p.pH),
            "aqueous_mL": clean(p.aqueous_mL),
            "organic_mL": [clean(v) for v in p.organic_mL],
            "total_organic_mL": clean(p.total_organic_mL),
            "pH_tolerance": clean(p.pH_tolerance),
            "volume_tolerance_pct": clean(p.volume_tolerance_pct),
            "log_d": self.log_d.to_dict(),
            "recovery_pct": self.recovery_pct.to_dict(),
            "remaining_fraction": self.remaining_fraction.to_dict(),
            "single_run_recovery_pct": self.single_run_recovery_pct.to_dict(),
            "after_portions": [dict(portions=i + 1, **vi.to_dict())
                               for i, vi in enumerate(self.after_portions)],
            "split_limit_remaining_fraction": self.split_limit_remaining.to_dict(),
            "reading": self.reading,
        }


def predict_procedure(fit: FitResult, procedure: Procedure,
                      target_recovery_pct: float | None = None) -> ProcedurePrediction:
    """Predicted recovery and remaining fraction of ``procedure`` with 95 % intervals."""
    p = procedure
    est = fit.log_d_interval(p.pH)
    method = f"{est.ci95.method}, mapped from log D at pH {p.pH:g}"
    lo, hi = est.ci95.lo, est.ci95.hi

    def rec(x):
        return recovery_pct_from_log_d(x, p.aqueous_mL, p.organic_mL)

    def rem(x):
        return chem.remaining_fraction(10.0 ** x, p.aqueous_mL, p.organic_mL)

    recovery = ValueInterval(float(rec(est.value)), Interval(_map(rec, lo), _map(rec, hi), method))
    remaining = ValueInterval(float(rem(est.value)),
                              Interval(_map(rem, hi), _map(rem, lo), method))
    after = []
    for n in range(1, len(p.organic_mL) + 1):
        def rem_n(x, n=n):
            return chem.remaining_fraction(10.0 ** x, p.aqueous_mL, p.organic_mL[:n])
        after.append(ValueInterval(float(rem_n(est.value)),
                                   Interval(_map(rem_n, hi), _map(rem_n, lo), method)))

    def split(x):
        return chem.split_limit_remaining(10.0 ** x, p.aqueous_mL, p.total_organic_mL)

    split_limit = ValueInterval(float(split(est.value)),
                                Interval(_map(split, hi), _map(split, lo), method))
    return ProcedurePrediction(p, est, recovery, remaining, _single_run(fit, est, rec),
                               tuple(after), split_limit, target_recovery_pct)


def _single_run(fit: FitResult, est: Estimate, rec) -> ValueInterval:
    """95 % range of one future run's measured recovery: model uncertainty plus assay error.

    In log10 E space the assay adds sd sigma / ln 10 (the fit's error model); the model part is
    the delta-method sd of log E from log D. The two are combined in quadrature, with the t
    quantile of the fit's degrees of freedom (common practice for prediction intervals).
    """
    e = float(rec(est.value)) / 100.0
    slope = 1.0 - e                        # d log10 E / d log10 D
    sd = np.hypot(slope * est.se, fit.residual_sd / chem.LN10)
    t = float(stats.t.ppf(0.975, fit.dof))
    log_e = np.log10(max(e, 1e-300))
    lo, hi = 100.0 * 10 ** (log_e - t * sd), 100.0 * 10 ** (log_e + t * sd)
    return ValueInterval(100.0 * e, Interval(lo, hi, "prediction interval of one run (t, "
                                                       "model and assay variance combined)"))
