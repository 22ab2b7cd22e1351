"""Quantiles and tail areas of Student's t, F and chi-square, from ``scipy.special``.

These are the special functions ``scipy.stats`` evaluates underneath (incomplete beta and gamma
functions and their inverses); calling them directly spares every fit the import of
``scipy.stats`` (about a quarter of a second, paid again by each worker process of a build).
``tests/test_quantiles.py`` checks them against ``scipy.stats`` over a grid of levels and
degrees of freedom.

>>> round(t_ppf(0.975, 10), 4), round(f_ppf(0.95, 1, 10), 4), round(chi2_ppf(0.975, 5), 4)
(2.2281, 4.9646, 12.8325)
"""

from __future__ import annotations

from scipy import special


def t_ppf(q: float, df: float) -> float:
    """Quantile of Student's t: P(T <= x) = q."""
    return float(special.stdtrit(df, q))


def t_isf(a: float, df: float) -> float:
    """Upper quantile of Student's t: P(T > x) = a."""
    return float(-special.stdtrit(df, a))


def f_ppf(q: float, dfn: float, dfd: float) -> float:
    """Quantile of F(dfn, dfd): P(F <= x) = q."""
    return float(special.fdtri(dfn, dfd, q))


def f_sf(x: float, dfn: float, dfd: float) -> float:
    """Upper tail area of F(dfn, dfd): P(F > x)."""
    return float(special.fdtrc(dfn, dfd, x))


def chi2_ppf(q: float, df: float) -> float:
    """Quantile of chi-square with ``df`` degrees of freedom: P(X <= x) = q."""
    return float(2.0 * special.gammaincinv(df / 2.0, q))
