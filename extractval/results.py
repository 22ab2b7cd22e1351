"""Small value records shared by the fit and the predictions: an interval and an estimate.

They serialise to plain dicts (``to_dict``), which is what the JSON output, the CLI summary and
the dossier all render: every number is computed once, in the engine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .formats import fmt_pct  # noqa: F401  (re-exported: the engine's sentences use it)


def clean(x: float | None, digits: int = 10) -> float | None:
    """A float fit for JSON: None for missing or non-finite, rounded to ``digits`` significant."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    # printf-style "%.*g" writes what format(x, ".<digits>g") writes, with less overhead (a
    # report calls this over a thousand times)
    return float("%.*g" % (digits, x))


def clean_all(values, digits: int = 10) -> list[float | None]:
    """:func:`clean` of every value of a sequence or numpy array, in one pass."""
    isfinite = math.isfinite
    return [None if x is None or not isfinite(y := float(x)) else float("%.*g" % (digits, y))
            for x in (values.tolist() if hasattr(values, "tolist") else values)]


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
