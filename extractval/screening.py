"""Outlier screening: flag suspect runs, never drop them.

Two screens:

* internally studentized residuals of the fit, flagged beyond |t| > 3 (common practice for
  regression diagnostics; with 30 runs about one study in twelve shows a flag by chance);
* Grubbs' test inside replicate groups of at least three runs (ISO 5725-2: between the 5 % and
  1 % critical values a straggler, beyond the 1 % value an outlier).

A flagged run stays in the fit unless the study marks it ``excluded`` with a reason. When any run
is flagged, the study is fitted again without the flagged runs and both results are reported
side by side so a reader sees how much the flags matter.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .acceptance import grubbs_screen
from .fitting import FitImpossible, FitResult, Observations, fit_model
from .results import clean

#: |studentized residual| above which a run is flagged (common practice)
STUDENTIZED_LIMIT = 3.0


@dataclass(frozen=True)
class Flag:
    run: str
    screen: str          # "studentized residual" or "Grubbs (ISO 5725-2)"
    level: str           # "flag", "straggler" or "outlier"
    statistic: float
    detail: str

    def to_dict(self) -> dict:
        return {"run": self.run, "screen": self.screen, "level": self.level,
                "statistic": clean(self.statistic, 6), "detail": self.detail}


def screen(fit: FitResult) -> list[Flag]:
    flags: list[Flag] = []
    t = fit.studentized_residuals.tolist()
    for rid, ti in zip(fit.obs.run_ids, t):
        if math.isfinite(ti) and abs(ti) > STUDENTIZED_LIMIT:
            flags.append(Flag(rid, "studentized residual", "flag", ti,
                              f"|t| = {abs(ti):.2f} > {STUDENTIZED_LIMIT:g}"))
    groups: dict[tuple, list[int]] = {}
    for i, key in enumerate(zip(fit.obs.replicate_key, fit.obs.kind)):
        groups.setdefault(key, []).append(i)
    for (label, kind), idx in groups.items():
        if len(idx) < 3:
            continue
        g = grubbs_screen([fit.obs.y[i] for i in idx], [fit.obs.run_ids[i] for i in idx])
        if g.flagged:
            flags.append(Flag(str(g.suspect_id), "Grubbs (ISO 5725-2)", g.classification,
                              float(g.G), f"replicate group {label!r} ({kind}): {g.detail}"))
    return flags


def _subset(obs: Observations, keep: np.ndarray) -> Observations:
    return Observations(tuple(np.array(obs.run_ids, dtype=object)[keep]), obs.pH[keep],
                        obs.log_ratio[keep], tuple(np.array(obs.kind, dtype=object)[keep]),
                        obs.y[keep], tuple(np.array(obs.replicate_key, dtype=object)[keep]),
                        None if obs.extra_var is None else obs.extra_var[keep])


def refit_without(fit: FitResult, flags: list[Flag], simple_model=None):
    """(fit without the flagged runs or None, the runs left out, why it failed or None)."""
    flagged = sorted({f.run for f in flags})
    keep = np.array([rid not in flagged for rid in fit.obs.run_ids])
    try:
        return fit_model(_subset(fit.obs, keep), fit.model, simple_model), flagged, None
    except FitImpossible as exc:
        return None, flagged, str(exc)
