"""Small value records shared by the fit and the predictions: an interval and an estimate.

They serialise to plain dicts (``to_dict``), which is what the JSON output, the CLI summary and
the dossier all render: every number is computed once, in the engine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass


def clean(x: float | None, digits: int = 10) -> float | None:
    """A float fit for JSON: None for missing or non-finite, rounded to ``digits`` significant."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}")


def fmt_pct(x: float | None) -> str:
    """A percentage with enough decimals to show what is left near 100 (99.99975, not 100.0).

    >>> fmt_pct(98.76), fmt_pct(99.95), fmt_pct(99.99997542), fmt_pct(100.0), fmt_pct(None)
    ('98.8', '99.950', '99.999975', '100.0', 'open')
    """
    if x is None:
        return "open"
    if 99.9 <= x < 100.0:
        decimals = min(8, max(2, 1 - math.floor(math.log10(100.0 - x))))
        text = f"{x:.{decimals}f}"
        return "100.0" if float(text) >= 100.0 else text
    return f"{x:.1f}"


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
