"""Small value records shared by the fit and the predictions: an interval and an estimate.

They serialise to plain dicts (``to_dict``), which is what the JSON output, the CLI summary and
the dossier all render: every number is computed once, in the engine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .formats import fmt_pct  # noqa: F401  (re-exported: the engine's sentences use it)


_SPECS = {d: f".{d}g" for d in range(1, 18)}


def clean(x: float | None, digits: int = 10) -> float | None:
    """A float fit for JSON: None for missing or non-finite, rounded to ``digits`` significant."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    # a report calls this thousands of times: the format specification is built once
    return float(format(x, _SPECS.get(digits) or f".{digits}g"))


@dataclass(frozen=True)
class Interval:
    """A 95 % interval; an end the data cannot close is None (open)."""

    lo: float | None
    hi: float | None
    method: str

    def to_list(self) -> list[float | None]:
        return [clean(self.lo), clean(self.hi)]


@dataclass(frozen=True)
class Estimate:
    """A value with its standard error, its honest 95 % interval and the Wald interval beside it."""

    value: float
    se: float
    ci95: Interval
    wald95: Interval
    at_bound: bool = False

    def to_dict(self) -> dict:
        return {
            "value": clean(self.value),
            "se": clean(self.se),
            "ci95": self.ci95.to_list(),
            "ci95_method": self.ci95.method,
            "wald95": self.wald95.to_list(),
            "at_search_limit": self.at_bound,
        }
