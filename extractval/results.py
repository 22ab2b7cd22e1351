"""Small value records shared by the fit and the predictions: an interval and an estimate.

They serialise to plain dicts (``to_dict``), which is what the JSON output, the CLI summary and
the dossier all render: every number is computed once, in the engine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

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


def round_significant(a: np.ndarray, digits: int) -> np.ndarray | None:
    """Every value of a float array rounded to ``digits`` significant digits, as
    ``float("%.*g" % (digits, x))`` gives it, in a few array operations; None where that is
    not exact here (a value of 10**digits or more, or one needing more than 22 decimals).

    Rounding ``x * 10**d`` to an integer k and dividing by ``10**d`` (exact powers of ten,
    exact integers) gives the double nearest k / 10**d, which is what parsing the printed
    digits gives; both round halves to even. They could differ only where ``x * 10**d``
    lies within one unit in the last place of a half, which its own rounding may move
    (tests/test_design.py compares them over random values of every magnitude).

    >>> round_significant(np.array([0.1234567, -2.5e-5, 12.25, 0.0]), 3).tolist()
    [0.123, -2.5e-05, 12.2, 0.0]
    """
    a = np.asarray(a, dtype=float)
    finite = np.isfinite(a) & (a != 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        decimals = np.where(finite, digits - 1 - np.floor(np.log10(np.abs(a))), 0.0)
    if decimals.size and (decimals.min() < 0 or decimals.max() > 22):
        return None
    scale = 10.0 ** decimals
    with np.errstate(invalid="ignore"):
        return np.rint(a * scale) / scale


def clean_all(values, digits: int = 10) -> list[float | None]:
    """:func:`clean` of every value of a sequence or numpy array, in one pass (a long float
    array by :func:`round_significant`)."""
    if isinstance(values, np.ndarray) and values.dtype.kind == "f" and values.size >= 64:
        rounded = round_significant(values, digits)         # a dozen array operations:
        if rounded is not None:                             # worth it for long arrays
            finite = np.isfinite(values)
            if finite.all():
                return rounded.tolist()
            return [x if ok else None for x, ok in zip(rounded.tolist(), finite.tolist())]
    isfinite = math.isfinite
    fmt = "%%.%dg" % digits      # "%.10g": the format clean() uses, built once, not per value
    return [None if x is None or not isfinite(y := float(x)) else float(fmt % y)
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
