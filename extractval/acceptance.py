"""Acceptance statistics for a validation dossier: Grubbs, lack of fit, AOAC ranges, Horwitz.

Pure numpy/scipy, no I/O. Each function names the published relation or table it implements;
criterion-like functions return a :class:`Verdict` (pass / fail / note / not judged with the
number and the limit behind it). Nothing here ever drops a run: screening only flags.

References
----------
.. [1] ISO 5725-2:1994, Accuracy (trueness and precision) of measurement methods and results,
       Part 2: basic method for the determination of repeatability and reproducibility,
       clause 7.3 (Grubbs' test; stragglers and outliers) and Table 5 (critical values);
       cited from memory: the standard was not read for this work, its critical values were
       checked against D. Harvey, Analytical Chemistry 2.1, Appendix 7 (tests/reference).
.. [2] F. E. Grubbs, "Procedures for detecting outlying observations in samples",
       Technometrics 11 (1969) 1-21 (the statistic and its t-distribution critical value).
.. [3] D. C. Montgomery, G. C. Runger, Applied Statistics and Probability for Engineers,
       Wiley, supplemental section S11 (lack-of-fit test with pure error), Example S11-1.
.. [4] NIST/SEMATECH e-Handbook of Statistical Methods, section 4 (process modelling),
       lack-of-fit test.
.. [5] AOAC Official Methods of Analysis (2012), Appendix F: Guidelines for Standard Method
       Performance Requirements, Table A5 (expected recovery as a function of analyte
       concentration) and Annex D (definitions and calculations of HorRat values from
       intralaboratory data).
.. [6] OECD Test Guideline 107, Partition Coefficient (n-octanol/water): Shake Flask Method
       (1995): the six log Pow values should fall within a range of +/- 0.3 units.
"""

from __future__ import annotations

import math
import re
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation

import numpy as np

from extractval.formats import OUTCOME_WORDS  # noqa: F401  (named here too)
from extractval.quantiles import f_sf, t_isf
from extractval.results import clean, fmt_pct

#: a verdict's machine-readable outcome: met, not met, judged but to be looked into (a HorRat
#: below its range), or not judged (no data, no limit, or the prediction is an extrapolation)
STATUSES = ("pass", "fail", "note", "not judged")
# (the same outcomes in words, OUTCOME_WORDS, live in formats.py, imported above, so that
# pages name them without loading the statistics)
#: earlier spelling of "not judged", still accepted when a verdict is built
_STATUS_ALIASES = {"not assessed": "not judged"}
#: where a criterion's limit comes from: the study's ``targets:`` (or ``level:``), a default
#: of a guideline or of common practice applied when the study sets none, or nobody (the row
#: is shown for completeness and never judged)
BASES = ("target", "default", "none")

# Limits are inclusive; this slack keeps a value that equals its limit up to float rounding
# (0.1 + 0.2 style) on the inclusive side.
_EDGE = 1e-9


def _at_most(value: float, limit: float) -> bool:
    return value <= limit + _EDGE * max(1.0, abs(limit))


def _at_least(value: float, limit: float) -> bool:
    return value >= limit - _EDGE * max(1.0, abs(limit))


# --------------------------------------------------------------------------------------------
# Verdict record
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Verdict:
    """One acceptance criterion's outcome with the number and the limit behind it.

    ``limit`` is a single number (a maximum or minimum, as ``detail`` says) or a ``(lo, hi)``
    pair; ``value`` is None when the criterion could not be judged. ``basis`` says who set the
    limit (:data:`BASES`).
    """

    criterion: str
    status: str
    value: float | None
    limit: float | tuple[float, float] | None
    detail: str = ""
    basis: str = "target"

    def __post_init__(self) -> None:
        if self.status in _STATUS_ALIASES:
            object.__setattr__(self, "status", _STATUS_ALIASES[self.status])
        if self.status not in STATUSES:
            raise ValueError(
                f"verdict {self.criterion!r}: status {self.status!r} is not one of {STATUSES}"
            )
        if self.basis not in BASES:
            raise ValueError(
                f"verdict {self.criterion!r}: basis {self.basis!r} is not one of {BASES}"
            )

    @property
    def outcome(self) -> str:
        """The outcome in words (sentence case): Met, Not met, To investigate, Not judged."""
        return OUTCOME_WORDS[self.status]

    def to_dict(self) -> dict:
        if isinstance(self.limit, tuple):
            limit: float | list | None = [clean(x) for x in self.limit]
        else:
            limit = clean(self.limit)
        value = None if self.value is None else clean(self.value)
        return {
            "criterion": self.criterion,
            "status": self.status,
            "value": value,
            "limit": limit,
            "detail": self.detail,
            "outcome": self.outcome,
            "basis": self.basis,
        }


def verdict(
    status: str,
    criterion: str,
    value: float | None,
    limit: float | tuple[float, float] | None,
    detail: str = "",
    basis: str = "target",
) -> Verdict:
    """Build a :class:`Verdict`, checking ``status`` (:data:`STATUSES`) and ``basis``.

    Examples
    --------
    >>> v = verdict("pass", "max_rsd_pct", 1.84, 5.0, "pooled RSD 1.84 % <= 5 %")
    >>> v.to_dict()["status"], v.to_dict()["limit"]
    ('pass', 5.0)
    """
    return Verdict(criterion, status, None if value is None else float(value), limit, detail,
                   basis)


# --------------------------------------------------------------------------------------------
# Grubbs' test (ISO 5725-2)
# --------------------------------------------------------------------------------------------


def grubbs_critical(n: int, alpha: float) -> float:
    r"""Two-sided critical value of Grubbs' single-outlier statistic [1]_ [2]_.

    .. math::

        G_{crit} = \frac{n-1}{\sqrt{n}}\sqrt{\frac{t^2}{n-2+t^2}},
        \qquad t = t_{\alpha/(2n),\,n-2}

    where :math:`t_{p,\nu}` is the upper :math:`p` quantile of Student's t with :math:`\nu`
    degrees of freedom. ISO 5725-2 Table 5 tabulates these at :math:`\alpha` = 5 % and 1 %.

    Parameters
    ----------
    n : int
        Number of values in the group, [-]; at least 3.
    alpha : float
        Significance level, [-] (0.05 for the straggler limit, 0.01 for the outlier limit).

    Returns
    -------
    float
        Critical value of :math:`G`, [-].

    Examples
    --------
    n = 10 (Harvey, Analytical Chemistry 2.1, Appendix 7; ISO 5725-2 Table 5, from memory):

    >>> round(grubbs_critical(10, 0.05), 3), round(grubbs_critical(10, 0.01), 3)
    (2.290, 2.482)
    """
    if isinstance(n, bool) or int(n) != n or n < 3:
        raise ValueError(f"Grubbs critical value: n = {n!r}; expected an integer of at least 3")
    if not 0.0 < alpha < 1.0:
        raise ValueError(f"Grubbs critical value: alpha = {alpha!r}; expected 0 < alpha < 1")
    n = int(n)
    t = t_isf(alpha / (2.0 * n), n - 2)
    return float((n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t)))


@dataclass(frozen=True)
class GrubbsResult:
    """Grubbs' test on one replicate group: the most extreme value and its classification.

    ``classification`` is "ok" (G <= 5 % critical value), "straggler" (5 % < G <= 1 %) or
    "outlier" (G > 1 % critical value), following ISO 5725-2 clause 7.3.
    """

    n: int
    mean: float
    sd: float
    suspect_id: Hashable
    suspect_value: float
    side: str
    G: float
    critical_5: float
    critical_1: float
    classification: str
    detail: str

    @property
    def flagged(self) -> bool:
        return self.classification != "ok"

    def to_dict(self) -> dict:
        return {
            "n": self.n,
            "mean": clean(self.mean),
            "sd": clean(self.sd),
            "suspect_id": self.suspect_id,
            "suspect_value": clean(self.suspect_value),
            "side": self.side,
            "G": clean(self.G),
            "critical_5": clean(self.critical_5),
            "critical_1": clean(self.critical_1),
            "classification": self.classification,
            "detail": self.detail,
        }


def grubbs_screen(values: Sequence[float], ids: Sequence[Hashable] | None = None) -> GrubbsResult:
    r"""Grubbs' single-outlier test on one group of replicates (same conditions) [1]_ [2]_.

    .. math:: G = \frac{\max_i |x_i - \bar{x}|}{s}, \qquad
              s = \sqrt{\frac{\sum (x_i - \bar{x})^2}{n-1}}

    compared with :func:`grubbs_critical` at 5 % and 1 %. The value is only classified, never
    removed: the caller keeps it in every calculation unless the user excludes it.

    Parameters
    ----------
    values : sequence of float
        Replicate results in any one unit (recovery [%], D [-], ...), at least 3 of them.
    ids : sequence, optional
        Run identifiers aligned with ``values``; defaults to the positions 0..n-1.

    Returns
    -------
    GrubbsResult

    Examples
    --------
    The ten results of the USP <1010> outlier example (mean 99.54, s 1.369):

    >>> r = grubbs_screen([100.3, 100.2, 100.1, 100.0, 100.0, 100.0, 99.9, 99.7, 99.5, 95.7])
    >>> round(r.G, 3), r.suspect_value, r.classification
    (2.805, 95.7, 'outlier')
    """
    x = np.asarray(values, dtype=float)
    if x.ndim != 1 or x.size < 3:
        raise ValueError(
            f"Grubbs' test: found {x.size} value(s); expected a flat group of at least 3"
        )
    if ids is None:
        ids = list(range(x.size))
    ids = list(ids)
    if len(ids) != x.size:
        raise ValueError(f"Grubbs' test: {x.size} values but {len(ids)} ids; expected one id each")
    bad = [ids[i] for i in np.flatnonzero(~np.isfinite(x))]
    if bad:
        raise ValueError(f"Grubbs' test: runs {bad} are not finite numbers")
    n = int(x.size)
    mean = float(np.mean(x))
    sd = float(np.std(x, ddof=1))
    dev = np.abs(x - mean)
    i = int(np.argmax(dev))
    c5 = grubbs_critical(n, 0.05)
    c1 = grubbs_critical(n, 0.01)
    side = "high" if x[i] >= mean else "low"
    if sd == 0.0:
        return GrubbsResult(n, mean, sd, ids[i], float(x[i]), side, 0.0, c5, c1, "ok",
                            "all values identical; nothing stands out")
    g = float(dev[i] / sd)
    if g > c1:
        cls, where = "outlier", f"G = {g:.3f} > 1 % critical value {c1:.3f}"
    elif g > c5:
        cls, where = "straggler", f"{c5:.3f} < G = {g:.3f} <= {c1:.3f} (5 % and 1 % values)"
    else:
        cls, where = "ok", f"G = {g:.3f} <= 5 % critical value {c5:.3f}"
    detail = f"run {ids[i]!r} ({side}, {x[i]:g}) of {n}: {where} (ISO 5725-2 Grubbs' test)"
    return GrubbsResult(n, mean, sd, ids[i], float(x[i]), side, g, c5, c1, cls, detail)


# --------------------------------------------------------------------------------------------
# Lack-of-fit F test with pure error
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LackOfFit:
    """Lack-of-fit F test: pure-error and lack-of-fit sums of squares, F and its p-value.

    When the test cannot be made, ``F`` and ``p_value`` are None and ``reason`` says why.
    """

    ss_pe: float | None
    ss_lof: float | None
    df_pe: int
    df_lof: int
    F: float | None
    p_value: float | None
    reason: str | None = None

    @property
    def testable(self) -> bool:
        return self.reason is None

    def to_dict(self) -> dict:
        return {
            "ss_pe": clean(self.ss_pe),
            "ss_lof": clean(self.ss_lof),
            "df_pe": self.df_pe,
            "df_lof": self.df_lof,
            "F": clean(self.F),
            "p_value": clean(self.p_value),
            "reason": self.reason,
        }

    def verdict(self, alpha: float = 0.05) -> Verdict:
        """Pass when the lack of fit is not significant at ``alpha`` (p >= alpha)."""
        if not self.testable:
            return verdict("not judged", "lack_of_fit", None, alpha, self.reason or "")
        ok = self.p_value >= alpha
        detail = (
            f"F = {self.F:.3g} on {self.df_lof} and {self.df_pe} df, p = {self.p_value:.3g}: "
            + ("no significant lack of fit" if ok else "the model misses systematic variation")
            + f" at alpha = {alpha:g}"
        )
        return verdict("pass" if ok else "fail", "lack_of_fit", self.p_value, alpha, detail)


def lack_of_fit_from_ss(ss_pe: float, ss_lof: float, df_pe: int, df_lof: int) -> LackOfFit:
    r"""Lack-of-fit F statistic and p-value from the two sums of squares [3]_ [4]_.

    .. math:: F_0 = \frac{SS_{LOF}/(m-p)}{SS_{PE}/(n-m)} \sim F_{m-p,\,n-m}

    Parameters
    ----------
    ss_pe, ss_lof : float
        Pure-error and lack-of-fit sums of squares, [response unit squared].
    df_pe, df_lof : int
        Their degrees of freedom, n - m and m - p, [-].

    Examples
    --------
    Montgomery & Runger, Example S11-1, f0 = 1.42 on 7 and 7 df (the book's P = 0.3276 is that
    of the rounded f0 = 1.42; the unrounded F = 1.416 gives 0.329):

    >>> r = lack_of_fit_from_ss(3.0366, 4.3005, 7, 7)
    >>> round(r.F, 2), round(r.p_value, 3)
    (1.42, 0.329)
    """
    df_pe, df_lof = int(df_pe), int(df_lof)
    if df_pe <= 0:
        return LackOfFit(ss_pe, ss_lof, df_pe, df_lof, None, None,
                         "no replicated conditions: pure error has no degrees of freedom")
    if df_lof <= 0:
        return LackOfFit(ss_pe, ss_lof, df_pe, df_lof, None, None,
                         f"df_LOF = {df_lof}: no more distinct conditions than parameters")
    if not ss_pe > 0.0:
        return LackOfFit(ss_pe, ss_lof, df_pe, df_lof, None, None,
                         "pure error is zero: replicates agree exactly, F is undefined")
    f_stat = (ss_lof / df_lof) / (ss_pe / df_pe)
    p = f_sf(f_stat, df_lof, df_pe)
    return LackOfFit(float(ss_pe), float(ss_lof), df_pe, df_lof, float(f_stat), p)


def lack_of_fit_test(
    residuals: Sequence[float], groups: Sequence[Hashable], n_params: int
) -> LackOfFit:
    r"""Lack-of-fit F test from a fit's residuals and the replicate groups [3]_ [4]_.

    Runs in one group were made at identical conditions, so they share a fitted value and the
    spread of their residuals about the group mean is pure error:

    .. math::

        SS_{PE} = \sum_{i=1}^{m}\sum_{u=1}^{n_i}(e_{iu} - \bar{e}_i)^2, \qquad
        SS_{LOF} = SS_{res} - SS_{PE} = \sum_{i=1}^{m} n_i \bar{e}_i^2

    with :math:`n - m` and :math:`m - p` degrees of freedom (n runs, m groups, p parameters),
    then :func:`lack_of_fit_from_ss`. For a weighted fit pass the weighted residuals
    :math:`\sqrt{w}\,e`; the split is then exact when the weights are equal within each group.

    Parameters
    ----------
    residuals : sequence of float
        Observed minus fitted response, one per run, [response unit].
    groups : sequence of hashable
        Label of the run's set of conditions (e.g. its pH and volume ratio), one per run.
    n_params : int
        Number of fitted parameters p, [-].

    Examples
    --------
    Three pH levels, two runs each, a one-parameter model:

    >>> r = lack_of_fit_test([0.1, -0.1, 0.3, 0.1, -0.2, -0.2], ["a", "a", "b", "b", "c", "c"], 1)
    >>> r.df_pe, r.df_lof, round(r.ss_pe, 3), round(r.ss_lof, 3)
    (3, 2, 0.04, 0.16)
    """
    e = np.asarray(residuals, dtype=float)
    labels = list(groups)
    if e.ndim != 1 or len(labels) != e.size:
        raise ValueError(
            f"lack-of-fit test: {e.size} residuals but {len(labels)} group labels; expected one "
            "label per residual"
        )
    if not np.all(np.isfinite(e)):
        raise ValueError("lack-of-fit test: residuals must be finite numbers")
    index: dict[Hashable, list[int]] = {}
    for k, label in enumerate(labels):
        index.setdefault(label, []).append(k)
    sizes = [len(members) for members in index.values()]
    el = e.tolist()
    means, ss = group_moments([el[k] for members in index.values() for k in members], sizes)
    ss_pe = 0.0
    ss_lof = 0.0
    for n, mean, ss_group in zip(sizes, means, ss):
        ss_pe += ss_group
        ss_lof += n * mean * mean
    m = len(index)
    return lack_of_fit_from_ss(ss_pe, ss_lof, e.size - m, m - int(n_params))


# --------------------------------------------------------------------------------------------
# AOAC Appendix F, Table A5: expected recovery by analyte level
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class RecoveryRow:
    """One row of AOAC Appendix F Table A5: a decade level and its mean-recovery range."""

    level_fraction: float
    label: str
    lo_pct: float
    hi_pct: float


# AOAC Official Methods of Analysis (2012), Appendix F, Table A5 "Expected recovery as a
# function of analyte concentration" (itself excerpted from the AOAC Peer-Verified Methods
# Program manual, 1998). Mean recovery ranges in %.
AOAC_TABLE_A5: tuple[RecoveryRow, ...] = (
    RecoveryRow(1.0, "100 %", 98.0, 102.0),
    RecoveryRow(1e-1, "10 %", 98.0, 102.0),
    RecoveryRow(1e-2, "1 %", 97.0, 103.0),
    RecoveryRow(1e-3, "0.1 %", 95.0, 105.0),
    RecoveryRow(1e-4, "100 ppm", 90.0, 107.0),
    RecoveryRow(1e-5, "10 ppm", 80.0, 110.0),
    RecoveryRow(1e-6, "1 ppm", 80.0, 110.0),
    RecoveryRow(1e-7, "100 ppb", 80.0, 110.0),
    RecoveryRow(1e-8, "10 ppb", 60.0, 115.0),
    RecoveryRow(1e-9, "1 ppb", 40.0, 120.0),
)

# Divisors that turn "<number> <unit>" into a mass fraction (mass of analyte over mass of
# sample, same unit top and bottom, as AOAC Appendix F Annex D asks for HorRat).
_LEVEL_UNITS: dict[str, int] = {
    "": 1,
    "%": 100,
    "ppm": 10**6,
    "ppb": 10**9,
    "g/g": 1,
    "mg/g": 10**3,
    "ug/g": 10**6,
    "ng/g": 10**9,
    "pg/g": 10**12,
    "g/kg": 10**3,
    "mg/kg": 10**6,
    "ug/kg": 10**9,
    "ng/kg": 10**12,
}
_EXPECTED_LEVEL = (
    "expected a mass fraction: a number with one of %, ppm, ppb, mg/kg, ug/kg, ng/kg, g/kg, "
    "mg/g, ug/g, ng/g (e.g. '10 ppm', '0.1 %', '5 mg/kg', '20 ug/kg') or a bare fraction "
    "such as '1e-5'"
)
_NUMBER_UNIT = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")


def parse_level(text: str | float) -> float:
    r"""Analyte level as a mass fraction, [-] (1 ppm -> 1e-6), from text such as "10 ppm".

    Accepts %, ppm, ppb, mass-per-mass units (mg/kg, ug/kg or µg/kg, ng/g, ...) and a bare
    number, which is taken as the mass fraction itself. "ppt" is refused because it means a
    thousandth in some fields and a trillionth in others; mass-per-volume units (mg/L) are
    refused because they are not a mass fraction.

    Parameters
    ----------
    text : str or float
        The level as written in the study (``level: 10 ppm``), or a mass fraction.

    Returns
    -------
    float
        Mass fraction C, [-], with 0 < C <= 1.

    Examples
    --------
    >>> parse_level("10 ppm"), parse_level("0.1 %"), parse_level("20 ug/kg")
    (1e-05, 0.001, 2e-08)
    """
    if isinstance(text, bool):
        raise ValueError(f"level {text!r}: found a boolean; {_EXPECTED_LEVEL}")
    if isinstance(text, (int, float, np.floating, np.integer)):
        number, divisor, shown = Decimal(repr(float(text))), 1, repr(text)
    elif isinstance(text, str):
        shown = repr(text)
        match = _NUMBER_UNIT.match(text)
        if not match:
            raise ValueError(f"level {shown}: found no leading number; {_EXPECTED_LEVEL}")
        raw_number, raw_unit = match.groups()
        unit = raw_unit.lower().replace(" ", "").replace("\u00b5", "u").replace("\u03bc", "u")
        unit = unit.replace("mcg", "ug")
        for qualifier in ("(w/w)", "w/w", "(m/m)", "m/m"):
            if unit.startswith("%") and unit.endswith(qualifier):
                unit = unit[: -len(qualifier)]
        if unit == "ppt":
            raise ValueError(
                f"level {shown}: 'ppt' is ambiguous (parts per thousand or per trillion); "
                f"{_EXPECTED_LEVEL}"
            )
        if unit.endswith("/l") or unit.endswith("/ml"):
            raise ValueError(
                f"level {shown}: {raw_unit!r} is a mass concentration, not a mass fraction; "
                "if the sample's density is 1 kg/L write it per kg (mg/L -> mg/kg); "
                f"{_EXPECTED_LEVEL}"
            )
        if unit not in _LEVEL_UNITS:
            raise ValueError(f"level {shown}: found unit {raw_unit!r}; {_EXPECTED_LEVEL}")
        try:
            number = Decimal(raw_number)
        except InvalidOperation:  # pragma: no cover - the pattern admits only numbers
            raise ValueError(f"level {shown}: {raw_number!r} is not a number") from None
        divisor = _LEVEL_UNITS[unit]
    else:
        raise ValueError(f"level {text!r}: found {type(text).__name__}; {_EXPECTED_LEVEL}")
    if not number.is_finite() or number <= 0:
        raise ValueError(f"level {shown}: found a level that is not positive; {_EXPECTED_LEVEL}")
    fraction = float(number / Decimal(divisor))
    if fraction > 1.0:
        raise ValueError(
            f"level {shown}: mass fraction {fraction:g} exceeds 1 (100 %); {_EXPECTED_LEVEL}"
        )
    return fraction


def aoac_recovery_row(level: str | float) -> RecoveryRow:
    r"""The AOAC Appendix F Table A5 row for an analyte level [5]_.

    The table gives ranges at decade levels only and does not say how to read between rows.
    This project's own convention (not AOAC's): the row whose level is nearest in log scale,
    i.e. the row within half a decade (a factor of :math:`\sqrt{10}`) of the level,

    .. math:: k = \lfloor \log_{10} C + 1/2 \rfloor, \qquad \text{row level} = 10^{k}

    so 3 ppm reads the 1 ppm row and 4 ppm the 10 ppm row. A level exactly half-way takes the
    higher-concentration row, whose range is the narrower (stricter) one. Levels more than half
    a decade below the last row (1 ppb) are outside the table and raise ValueError.

    Parameters
    ----------
    level : str or float
        Text for :func:`parse_level` or a mass fraction C, [-].

    Examples
    --------
    >>> aoac_recovery_row("4 mg/kg").label
    '10 ppm'
    """
    c = parse_level(level)
    k = math.floor(math.log10(c) + 0.5)
    if k < -9:
        raise ValueError(
            f"level {level!r} (mass fraction {c:g}) is below the lowest row of AOAC Appendix F "
            "Table A5 (1 ppb); the table gives no recovery range there"
        )
    return AOAC_TABLE_A5[-k]


def aoac_recovery_range(level: str | float) -> tuple[float, float, str]:
    """Expected mean-recovery range (lo, hi) in % and the matched row's label [5]_.

    The row is chosen by :func:`aoac_recovery_row` (nearest tabulated level in log scale).

    Parameters
    ----------
    level : str or float
        Text for :func:`parse_level` or a mass fraction C, [-].

    Returns
    -------
    tuple
        ``(lo_pct, hi_pct, row_label)``: range of acceptable mean recovery, [%].

    Examples
    --------
    AOAC Appendix F Table A5:

    >>> aoac_recovery_range("10 ppm")
    (80.0, 110.0, '10 ppm')
    >>> aoac_recovery_range(1e-4)
    (90.0, 107.0, '100 ppm')
    """
    row = aoac_recovery_row(level)
    return row.lo_pct, row.hi_pct, row.label


def aoac_recovery_verdict(
    recovery_pct: float | None, level: str | float, criterion: str = "aoac_recovery_pct"
) -> Verdict:
    """Pass when a mean recovery [%] lies inside the AOAC Table A5 range for ``level`` [5]_.

    Table A5 gives the range of *measured* mean recoveries expected at an analyte level: pass
    the mean of measured recoveries, never a model's prediction (a predicted 99.99 % says
    nothing about the method's trueness at that level).

    Examples
    --------
    >>> aoac_recovery_verdict(95.2, "10 ppm").status
    'pass'
    >>> aoac_recovery_verdict(95.2, "1 %").status
    'fail'
    """
    try:
        lo, hi, label = aoac_recovery_range(level)
    except ValueError as exc:
        return verdict("not judged", criterion, recovery_pct, None, str(exc))
    if recovery_pct is None or not math.isfinite(recovery_pct):
        return verdict("not judged", criterion, None, (lo, hi), "no mean recovery available")
    ok = _at_least(recovery_pct, lo) and _at_most(recovery_pct, hi)
    detail = (
        f"mean recovery {fmt_pct(recovery_pct)} % {'inside' if ok else 'outside'} {lo:g}-{hi:g} % "
        f"(AOAC Appendix F Table A5, row {label})"
    )
    return verdict("pass" if ok else "fail", criterion, recovery_pct, (lo, hi), detail)


# --------------------------------------------------------------------------------------------
# Horwitz equation and HorRat (AOAC Appendix F, Annex D)
# --------------------------------------------------------------------------------------------

# AOAC Appendix F Annex D 1.7 writes PRSD(R) = 2 C^-0.15. The exact exponent of Horwitz's
# original 2^(1 - 0.5 log10 C) is log10(2)/2 = 0.1505; pass it as ``exponent`` if wanted.
HORWITZ_EXPONENT = 0.15
HORWITZ_EXACT_EXPONENT = math.log10(2.0) / 2.0

# Annex D 2.1 (interlaboratory) and 2.2.2 (single-laboratory) acceptable HorRat ranges.
HORRAT_LIMITS: dict[str, tuple[float, float]] = {"R": (0.5, 2.0), "r": (0.3, 1.3)}


def _mass_fraction(c: float) -> float:
    c = float(c)
    if not (math.isfinite(c) and 0.0 < c <= 1.0):
        raise ValueError(f"Horwitz: C = {c!r}; expected a mass fraction with 0 < C <= 1")
    return c


def horwitz_prsd_r(c: float, exponent: float = HORWITZ_EXPONENT) -> float:
    r"""Horwitz predicted reproducibility RSD, PRSD(R) in %, at mass fraction C [5]_.

    (The name follows the project's API; the value is the *reproducibility* PRSD(R). The
    repeatability expectation is :func:`horwitz_prsd_repeatability`.)

    .. math:: \mathrm{PRSD}_R = 2\,C^{-0.15}

    Parameters
    ----------
    c : float
        Analyte level as a mass fraction, [-] (1 ppm = 1e-6; see :func:`parse_level`).
    exponent : float
        0.15 as written in AOAC Appendix F Annex D; :data:`HORWITZ_EXACT_EXPONENT` (0.1505)
        reproduces Horwitz's original :math:`2^{1 - 0.5\log_{10} C}` exactly.

    Returns
    -------
    float
        PRSD(R), [%].

    Examples
    --------
    AOAC Appendix F Annex D Table D1: 2 % at C = 1, 16 % at 1 ppm.

    >>> round(horwitz_prsd_r(1.0)), round(horwitz_prsd_r(1e-6))
    (2, 16)
    """
    return 2.0 * _mass_fraction(c) ** (-exponent)


def horwitz_prsd_repeatability(c: float, exponent: float = HORWITZ_EXPONENT) -> float:
    r"""Within-laboratory target repeatability RSD in %: half of PRSD(R) [5]_.

    AOAC Appendix F Annex D 2.2.1 gives the acceptable predicted repeatability targets (Table
    D2) at 1/2 of PRSD(R), "which represents the best case":

    .. math:: \mathrm{PRSD}_r = \tfrac{1}{2}\,\mathrm{PRSD}_R

    Examples
    --------
    >>> round(horwitz_prsd_repeatability(1e-6))
    8
    """
    return 0.5 * horwitz_prsd_r(c, exponent)


def horrat(rsd_pct: float, c: float, kind: str = "r", exponent: float = HORWITZ_EXPONENT) -> float:
    r"""HorRat: an observed RSD over the Horwitz PRSD(R) [5]_.

    .. math:: \mathrm{HorRat}(r) = \frac{\mathrm{RSD}_r}{\mathrm{PRSD}_R}, \qquad
              \mathrm{HorRat}(R) = \frac{\mathrm{RSD}_R}{\mathrm{PRSD}_R}

    AOAC Appendix F Annex D 1.8: the denominator is *always* PRSD(R), also for repeatability
    data; the lower acceptable range of HorRat(r), 0.3-1.3, already allows for within-
    laboratory RSDs being smaller. ``kind`` ("r" or "R") only says which RSD is given; it
    selects the limits in :func:`horrat_verdict`, not the formula.

    Parameters
    ----------
    rsd_pct : float
        Observed RSD, [%].
    c : float
        Analyte level as a mass fraction, [-].
    kind : {"r", "R"}
        Repeatability (single laboratory) or reproducibility RSD.

    Examples
    --------
    >>> horrat(8.0, 1e-6)
    0.50
    """
    if kind not in HORRAT_LIMITS:
        raise ValueError(f"HorRat: kind {kind!r}; expected 'r' (repeatability) or 'R'")
    return float(rsd_pct) / horwitz_prsd_r(c, exponent)


def horrat_verdict(
    rsd_pct: float | None, level: str | float, kind: str = "r",
    exponent: float = HORWITZ_EXPONENT,
) -> Verdict:
    """HorRat against the AOAC acceptable range: r 0.3-1.3, R 0.5-2.0 [5]_.

    Inside the range: pass. Above it: fail (precision worse than the Horwitz expectation).
    Below it: a note, never a fail. Annex D 2.2.2 asks that values at the extremes be
    interpreted with caution and, for a series of low values, that the laboratory check for
    unreported averaging or prior knowledge of the analyte content: a precision better than
    expected is a reason to look, not a defect of the method.

    Examples
    --------
    >>> [horrat_verdict(x, "1 ppm").status for x in (8.0, 24.0, 2.0)]
    ['pass', 'fail', 'note']
    """
    criterion = f"horrat_{kind}"
    if kind not in HORRAT_LIMITS:
        raise ValueError(f"HorRat: kind {kind!r}; expected 'r' (repeatability) or 'R'")
    lo, hi = HORRAT_LIMITS[kind]
    if rsd_pct is None or not math.isfinite(rsd_pct):
        return verdict("not judged", criterion, None, (lo, hi), "no RSD available")
    try:
        c = parse_level(level)
    except ValueError as exc:
        return verdict("not judged", criterion, None, (lo, hi), str(exc))
    value = horrat(rsd_pct, c, kind, exponent)
    low, high = not _at_least(value, lo), not _at_most(value, hi)
    where = "below" if low else "above" if high else "inside"
    detail = (
        f"HorRat({kind}) = RSD {rsd_pct:.3g} % / PRSD(R) {horwitz_prsd_r(c, exponent):.3g} % = "
        f"{value:.2f}, {where} {lo:g}-{hi:g} (AOAC Appendix F Annex D 2.2)"
    )
    if low:
        detail += ("; precision better than the Horwitz expectation: to investigate, not a "
                   "fail (check for unreported averaging or prior knowledge of the content)")
        return verdict("note", criterion, value, (lo, hi), detail)
    if high:
        detail += ("; precision worse than the Horwitz expectation: look for uncontrolled "
                   "steps (times, temperatures, volumes)")
    return verdict("fail" if high else "pass", criterion, value, (lo, hi), detail)


# --------------------------------------------------------------------------------------------
# Pooled repeatability RSD
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PooledRSD:
    """Pooled relative standard deviation of replicate groups and its degrees of freedom.

    ``group_rsd_pct`` keeps each group's own RSD in input order (None for a single value).
    """

    rsd_pct: float | None
    df: int
    n_groups: int
    n_values: int
    group_rsd_pct: tuple[float | None, ...]
    reason: str | None = None

    def to_dict(self) -> dict:
        return {
            "rsd_pct": clean(self.rsd_pct),
            "df": self.df,
            "n_groups": self.n_groups,
            "n_values": self.n_values,
            "group_rsd_pct": [clean(x) for x in self.group_rsd_pct],
            "reason": self.reason,
        }

    def verdict(self, max_rsd_pct: float, criterion: str = "max_rsd_pct") -> Verdict:
        """Pass when the pooled RSD is at most ``max_rsd_pct`` [%]."""
        if self.rsd_pct is None:
            return verdict("not judged", criterion, None, max_rsd_pct, self.reason or "")
        ok = _at_most(self.rsd_pct, max_rsd_pct)
        detail = (
            f"pooled RSD {self.rsd_pct:.3g} % on {self.df} df from {self.n_groups} replicate "
            f"group(s) {'<=' if ok else '>'} {max_rsd_pct:g} %"
        )
        return verdict("pass" if ok else "fail", criterion, self.rsd_pct, max_rsd_pct, detail)


def pooled_rsd(
    groups_of_values: Iterable[Sequence[float]] | Mapping[Hashable, Sequence[float]],
) -> PooledRSD:
    r"""Pooled repeatability RSD of replicate groups, in %, with its degrees of freedom.

    Each group's values are divided by their own mean and the variances of these relative
    values are pooled with weights :math:`n_i - 1`:

    .. math::

        \mathrm{RSD}_{pooled} = 100\sqrt{\frac{\sum_i (n_i - 1)\,(s_i/\bar{x}_i)^2}
                                               {\sum_i (n_i - 1)}},
        \qquad \nu = \sum_i (n_i - 1)

    the usual pooling of variances (e.g. ISO 5725-2's repeatability variance), applied to
    values made relative to their group so that groups at different levels (D = 3 and
    D = 300) can be pooled. For small RSDs this equals the pooled SD of :math:`\ln x`. Give
    D or recovery, never log D (a relative SD of a logarithm means nothing). Groups of one
    value add nothing and are skipped.

    Parameters
    ----------
    groups_of_values : iterable of sequences, or mapping label -> sequence
        Replicate results (same pH and ratio), positive, in any one unit per group.

    Examples
    --------
    >>> r = pooled_rsd([[99.0, 101.0], [49.0, 51.0, 50.0]])
    >>> round(r.rsd_pct, 3), r.df
    (1.826, 3)
    """
    items = groups_of_values.values() if isinstance(groups_of_values, Mapping) else groups_of_values
    groups = [np.asarray(values, dtype=float).ravel() for values in items]
    if groups and not np.all(np.isfinite(np.concatenate(groups))):
        k = next(k for k, x in enumerate(groups) if not np.all(np.isfinite(x)))
        raise ValueError(f"pooled RSD: group {k} has values that are not finite numbers")
    pooled = [k for k, x in enumerate(groups) if x.size >= 2]
    if not pooled:
        return PooledRSD(None, 0, 0, 0, (None,) * len(groups), "no group with two or more values")
    sizes = [groups[k].size for k in pooled]
    means, ss = group_mean_ss(np.concatenate([groups[k] for k in pooled]), sizes)
    found = pooled_rsd_from_moments(sizes, means, ss, pooled)
    per_group: list[float | None] = [None] * len(groups)
    for k, rsd in zip(pooled, found.group_rsd_pct):
        per_group[k] = rsd
    return PooledRSD(found.rsd_pct, found.df, found.n_groups, found.n_values, tuple(per_group))


def pooled_rsd_from_moments(sizes: Sequence[int], means: np.ndarray, ss: np.ndarray,
                            names: Sequence[Hashable] | None = None) -> PooledRSD:
    """:func:`pooled_rsd` of groups of two or more values given by their sizes, means and sums
    of squared deviations (:func:`group_mean_ss`), for a caller that has these already;
    ``names`` label the groups in errors (default: their positions).

    >>> means, ss = group_mean_ss(np.array([99.0, 101.0, 49.0, 51.0, 50.0]), [2, 3])
    >>> round(pooled_rsd_from_moments([2, 3], means, ss).rsd_pct, 3)
    1.826
    """
    names = range(len(sizes)) if names is None else names
    num = 0.0
    df = 0
    per_group = []
    # Python floats to loop over (a caller may hand lists already)
    means = means.tolist() if isinstance(means, np.ndarray) else [float(m) for m in means]
    ss = ss.tolist() if isinstance(ss, np.ndarray) else [float(q) for q in ss]
    for k, n, mean, ss_group in zip(names, sizes, means, ss):
        if not (math.isfinite(mean) and math.isfinite(ss_group)):
            raise ValueError(f"pooled RSD: group {k} has values that are not finite numbers")
        if not mean > 0.0:
            raise ValueError(
                f"pooled RSD: group {k} has mean {mean:g}; a relative SD needs positive values "
                "(give D or recovery, not log D)"
            )
        rel = math.sqrt(ss_group / (n - 1)) / mean
        per_group.append(100.0 * rel)
        num += (n - 1) * rel * rel
        df += n - 1
    return PooledRSD(100.0 * math.sqrt(num / df), df, len(per_group), int(sum(sizes)),
                     tuple(per_group))


def group_mean_ss(values: np.ndarray, sizes: Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    r"""Mean and sum of squared deviations from it of consecutive groups of ``values``.

    ``values`` holds the groups one after the other, ``sizes`` their lengths (each at least
    1). When no group has 8 values or more (a study's replicate groups: a dozen groups of two
    or three runs), each group gets to the last bit what ``np.mean(g)`` and
    ``np.sum((g - np.mean(g)) ** 2)`` give it alone: numpy adds fewer than 8 values one after
    the other, starting from 0.0, and so do the plain Python loops used then (numpy's
    per-call overhead would dominate such small groups). Wider groups go through one numpy
    pass, each group a row of a zero-padded matrix; numpy sums 8 values or more pairwise, so
    those rows may differ from ``np.mean(g)`` in the last bit.
    ``np.std(g, ddof=1)`` is ``sqrt(ss / (n - 1))``. :func:`group_moments` gives the same
    numbers as lists.

    >>> means, ss = group_mean_ss(np.array([99.0, 101.0, 49.0, 51.0, 50.0]), [2, 3])
    >>> means.tolist(), ss.tolist()
    ([100.0, 50.0], [2.0, 2.0])
    """
    if max(sizes) < 8:
        means, ss = group_moments(values, sizes)
        return np.array(means), np.array(ss)
    x = np.asarray(values, dtype=float)
    n = np.asarray(sizes, dtype=int)
    row = np.repeat(np.arange(n.size), n)
    col = np.arange(x.size) - np.repeat(np.cumsum(n) - n, n)
    table = np.zeros((n.size, int(n.max())))
    table[row, col] = x
    means = table.sum(axis=1) / n
    dev = np.zeros_like(table)
    dev[row, col] = x - means[row]
    return means, (dev * dev).sum(axis=1)


def group_moments(values, sizes: Sequence[int]) -> tuple[list[float], list[float]]:
    """:func:`group_mean_ss` as two lists of Python floats, for callers that loop over them
    (no arrays built only to be turned back into lists).

    >>> group_moments([99.0, 101.0, 49.0, 51.0, 50.0], [2, 3])
    ([100.0, 50.0], [2.0, 2.0])
    """
    if max(sizes) >= 8:
        means_a, ss_a = group_mean_ss(values, sizes)
        return means_a.tolist(), ss_a.tolist()
    xs = values.tolist() if isinstance(values, np.ndarray) else [float(x) for x in values]
    means, sss = [], []
    a = 0
    for n in sizes:
        group = xs[a:a + n]
        a += n
        mean = numpy_mean(group)
        ss = 0.0
        for x in group:
            d = x - mean
            ss += d * d
        means.append(mean)
        sss.append(ss)
    return means, sss


def numpy_mean(values: Sequence[float]) -> float:
    """``float(np.mean(values))`` of a list of floats, to the last bit, without building an
    array when it is short: numpy adds fewer than 8 values one after the other, starting from
    0.0 (see :func:`group_mean_ss`), and so does the loop here; 8 values or more (summed
    pairwise) and an empty list go to numpy itself.

    >>> numpy_mean([1e16, 1.0, 1.0]) == float(np.mean([1e16, 1.0, 1.0]))
    True
    """
    n = len(values)
    if n == 0 or n >= 8:
        return float(np.mean(values))
    total = 0.0
    for x in values:
        total += x
    return float(total / n)


# --------------------------------------------------------------------------------------------
# Agreement of log D across volume ratios (OECD TG 107)
# --------------------------------------------------------------------------------------------

OECD_107_LOG_LIMIT = 0.3  # OECD TG 107 (1995): the six log Pow values within +/- 0.3 units

_RATIO_WARNING = (
    "log D depends on the volume ratio, the classic sign of an emulsion or micro-droplets "
    "carried over between phases, or of self-association of the analyte"
)


@dataclass(frozen=True)
class RatioAgreement:
    """Spread of log D across volume ratios at one pH against a +/- limit about the mean.

    ``within`` is None when fewer than two ratios were run (not assessable).
    """

    n_ratios: int
    n_values: int
    mean: float | None
    lo: float | None
    hi: float | None
    range: float | None
    max_deviation: float | None
    worst_ratio: Hashable | None
    limit: float
    within: bool | None

    def to_dict(self) -> dict:
        return {
            "n_ratios": self.n_ratios,
            "n_values": self.n_values,
            "mean": clean(self.mean),
            "lo": clean(self.lo),
            "hi": clean(self.hi),
            "range": clean(self.range),
            "max_deviation": clean(self.max_deviation),
            "worst_ratio": self.worst_ratio,
            "limit": clean(self.limit),
            "within": self.within,
        }

    def verdict(self, criterion: str = "ratio_agreement_log") -> Verdict:
        if self.within is None:
            return verdict("not judged", criterion, None, self.limit,
                           f"{self.n_ratios} volume ratio(s): agreement needs at least two")
        detail = (
            f"log D from {self.n_values} runs at {self.n_ratios} volume ratios spans "
            f"{self.lo:.3f} to {self.hi:.3f}; largest deviation from the mean "
            f"{self.max_deviation:.3f} (ratio {self.worst_ratio!r}) "
            f"{'<=' if self.within else '>'} +/-{self.limit:g} (OECD TG 107)"
        )
        if not self.within:
            detail += f"; {_RATIO_WARNING}"
        return verdict("pass" if self.within else "fail", criterion, self.max_deviation,
                       self.limit, detail)


def ratio_agreement(
    log_d_values_by_ratio: Mapping[Hashable, float | Sequence[float]],
    limit: float = OECD_107_LOG_LIMIT,
) -> RatioAgreement:
    r"""Do the log D values at one pH agree across volume ratios within +/- ``limit``? [6]_

    All individual values (OECD TG 107: three ratios in duplicate, six values) must lie within
    :math:`\pm` limit of their common mean:

    .. math:: \max_i |\log D_i - \overline{\log D}| \le 0.3

    The range (max - min) is reported beside it; it can reach twice the limit and still pass.

    Parameters
    ----------
    log_d_values_by_ratio : mapping
        Volume ratio (label or organic:aqueous number) -> log D value(s) at that ratio, [-].
    limit : float
        Half-width about the mean, [log10 units]; 0.3 per OECD TG 107.

    Examples
    --------
    >>> r = ratio_agreement({0.5: [1.46, 1.50], 1.0: [1.48, 1.52], 2.0: [1.41, 1.47]})
    >>> r.within, round(r.range, 2)
    (True, 0.11)
    """
    if not limit > 0:
        raise ValueError(
            f"ratio agreement: limit {limit!r}; expected a positive number of log units"
        )
    values: list[float] = []
    owner: list[Hashable] = []
    for ratio, v in log_d_values_by_ratio.items():
        # a list of finite Python floats (what verdicts.ratio_agreement passes) is taken as it
        # is, checked in one pass; anything else is flattened and converted first
        if type(v) is list and all(type(x) is float and math.isfinite(x) for x in v):
            given = v
        else:
            given = [float(x) for x in np.ravel(v).tolist()]
        if given is not v and not all(math.isfinite(x) for x in given):
            raise ValueError(
                f"ratio agreement: ratio {ratio!r} has log D values that are not finite numbers"
            )
        values.extend(given)
        owner.extend([ratio] * len(given))
    ratios = set(owner)
    if len(ratios) < 2:
        return RatioAgreement(len(ratios), len(values), None, None, None, None, None, None,
                              float(limit), None)
    # a handful of values: plain Python, but the mean as numpy sums (pairwise from 8 values)
    mean = numpy_mean(values)
    dev = [abs(x - mean) for x in values]
    i = dev.index(max(dev))         # the first of equal deviations, as np.argmax
    lo, hi = min(values), max(values)
    return RatioAgreement(
        len(ratios), len(values), mean, lo, hi, hi - lo, dev[i], owner[i], float(limit),
        _at_most(dev[i], limit),
    )
