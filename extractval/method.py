"""Method recovery, matrix effect, recovery at levels and intermediate precision (pure).

Runs that carry a ``spike_stage`` are method-validation runs (see the README): ``pre`` spiked
into the matrix before the extraction, ``post`` spiked into the blank matrix extract after it,
``neat`` a standard in solvent. Each run gives one measured value in the final extract: the
percentage of the spiked amount found there (``found_organic / spiked`` or ``recovery_pct``),
or, when the runs give instrument responses, the response per unit spiked (divided by the
internal standard's response when one is given). Only ratios of these values are reported,
so the calibration's slope cancels.

* Absolute recovery (per level, and per matrix lot where pre and post share a lot):
  R = mean(pre) / mean(post), in %. Its 95 % interval is first-order (delta method) on the
  ratio of two independent means, with a t quantile on n_pre + n_post - 2 degrees of freedom.
  The RSD of the pre runs is the repeatability of recovery at that level.
* Matrix factor per lot: MF = mean(post in the lot) / mean(neat) at the same level
  (IS-normalised when the values are response ratios to an internal standard). Over the lots:
  mean, SD, CV and a t interval of the mean. Default criterion: CV of the (IS-normalised)
  matrix factor at most 15 % over at least 6 lots (EMA Guideline on bioanalytical method
  validation, 2011, after the Crystal City III recommendations; quoted so in a public
  discussion of ICH M10 read during this work). ICH M10 (2022, section 3.2.5, quoted there)
  words the matrix effect instead as accuracy within +/-15 % and CV <= 15 % of low and high
  QCs in each of at least 6 lots; that needs calibration standards taken through the whole
  method, which this tool cannot know, so it is not judged here.
* Per-run recovery: each pre run over the mean of the post runs at its level in its own lot
  when that lot has post runs (the lot's matrix effect cancels), else over all post runs at
  the level. The RSD of a level and the precision components are of these values.
* Consistency of recovery across levels: one-way ANOVA F test of the per-run recoveries
  between levels, at the 5 % level.
* Intermediate precision (ISO 5725-3:1994, one-way random-effects model): pre runs that name a
  ``day``, ``analyst`` and/or ``instrument`` are grouped by the combination of the factors they
  give; the one-way ANOVA mean squares (statsmodels OLS on the group dummies) give
  s_r^2 = MS_within, s_L^2 = max(0, (MS_between - MS_within) / n0) with
  n0 = (N - sum n_i^2 / N) / (p - 1) (ISO 5725-2, eq. for unequal group sizes), and
  s_I^2 = s_r^2 + s_L^2. Relative values are in % of the grand mean. The interval of s_r is
  the chi-square one; that of s_I the modified large-sample (Graybill-Wang) interval of a sum
  of mean squares (:func:`intermediate_interval`).

Acceptance limits come from ``method_targets:`` in study.yaml; the matrix-factor CV and the
number of lots have the defaults above, every other limit is judged only when set.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .acceptance import Verdict, _at_least, _at_most, verdict
from .quantiles import chi2_ppf, t_ppf
from .results import clean
from .tables import Location

STAGES = ("pre", "post", "neat")
FACTORS = ("day", "analyst", "instrument")
#: matrix effect: CV of the matrix factor <= 15 % over >= 6 lots (EMA 2011; module docstring)
MF_CV_MAX_PCT = 15.0
MF_MIN_LOTS = 6
#: level of the F test of consistency of recovery across levels
ALPHA = 0.05
NO_LEVEL = "(no level)"
PRECISION_MODEL = ("ISO 5725-3 one-way random-effects ANOVA of the pre runs' recoveries at each "
                   "level, grouped by the combination of the day / analyst / instrument cells "
                   "they give: s_r (repeatability, within groups), s_L (between groups), "
                   "s_I = sqrt(s_r^2 + s_L^2) (intermediate precision)")


@dataclass(frozen=True)
class MethodTags:
    """The method-validation cells of one run (None where the cell is empty)."""

    sequence: str | None = None
    matrix: str | None = None
    spike_stage: str | None = None
    level: str | None = None
    day: str | None = None
    analyst: str | None = None
    instrument: str | None = None

    def factors(self) -> dict[str, str]:
        return {f: getattr(self, f) for f in FACTORS if getattr(self, f) is not None}


@dataclass(frozen=True)
class MethodTargets:
    """Limits from ``method_targets:``; ``from_study`` names those study.yaml set."""

    matrix_factor_cv_max_pct: float | None = MF_CV_MAX_PCT
    matrix_lots_min: int = MF_MIN_LOTS
    recovery_pct: tuple[float, float] | None = None
    recovery_rsd_max_pct: float | None = None
    repeatability_rsd_max_pct: float | None = None
    intermediate_rsd_max_pct: float | None = None
    from_study: tuple[str, ...] = ()

    def source(self, name: str) -> str:
        return "study.yaml" if name in self.from_study else (
            "default: EMA 2011 bioanalytical guideline, common practice for the matrix factor")

    def to_dict(self) -> dict:
        out = {}
        for name in ("matrix_factor_cv_max_pct", "matrix_lots_min", "recovery_pct",
                     "recovery_rsd_max_pct", "repeatability_rsd_max_pct",
                     "intermediate_rsd_max_pct"):
            value = getattr(self, name)
            if value is not None:
                out[name] = {"value": list(value) if isinstance(value, tuple) else value,
                             "source": self.source(name)}
        return out


@dataclass(frozen=True)
class MethodRun:
    """One method-validation run as the statistics see it."""

    run_id: str
    location: Location
    tags: MethodTags
    value: float | None          # measured value on ``basis``; None when left out
    basis: str | None
    left_out: str | None = None  # why the run is not used (excluded, suitability, no value)

    @property
    def level(self) -> str:
        return self.tags.level or NO_LEVEL


# -- small statistics -----------------------------------------------------------------------------
def _mean_sd(values) -> tuple[float, float | None, int]:
    v = np.asarray(values, dtype=float)
    return float(v.mean()), (float(v.std(ddof=1)) if v.size >= 2 else None), int(v.size)


def ratio_of_means(num, den) -> dict:
    """100 mean(num) / mean(den) with a first-order (delta method) 95 % interval.

    SE(R)/R = sqrt(s_n^2 / (n_n m_n^2) + s_d^2 / (n_d m_d^2)); t on n_n + n_d - 2 df.
    An interval end is None when either side has a single value.

    >>> r = ratio_of_means([90.0, 92.0, 88.0], [100.0, 101.0, 99.0])
    >>> round(r["value"], 3), [round(x, 2) for x in r["ci95"]]
    (90.0, [86.48, 93.52])
    """
    mn, sn, nn = _mean_sd(num)
    md, sd, nd = _mean_sd(den)
    value = 100.0 * mn / md
    out = {"value": clean(value), "n_num": nn, "n_den": nd, "se": None, "ci95": [None, None]}
    if sn is None or sd is None:
        return out
    se = abs(value) * math.sqrt(sn ** 2 / (nn * mn ** 2) + sd ** 2 / (nd * md ** 2))
    t = t_ppf(0.975, nn + nd - 2)
    out.update(se=clean(se), ci95=[clean(value - t * se), clean(value + t * se)])
    return out


def mean_interval(values) -> dict:
    """Mean, SD, CV (%) and the t-based 95 % interval of the mean.

    >>> d = mean_interval([0.95, 1.02, 0.98, 1.01, 0.97, 1.00])
    >>> round(d["mean"], 4), round(d["cv_pct"], 2)
    (0.9883, 2.7)
    """
    m, s, n = _mean_sd(values)
    out = {"mean": clean(m), "sd": clean(s), "cv_pct": None, "n": n, "ci95": [None, None]}
    if s is not None:
        half = t_ppf(0.975, n - 1) * s / math.sqrt(n)
        out.update(cv_pct=clean(100.0 * s / m) if m else None,
                   ci95=[clean(m - half), clean(m + half)])
    return out


def one_way_anova(groups: dict[str, list[float]]) -> dict | None:
    """One-way ANOVA between the groups: mean squares, F and p from a statsmodels OLS fit on
    the group dummies (needs two groups and one degree of freedom within)."""
    labels = [g for g, v in groups.items() if v]
    y = np.concatenate([np.asarray(groups[g], dtype=float) for g in labels]) if labels else []
    n, p = len(y), len(labels)
    if p < 2 or n - p < 1:
        return None
    import statsmodels.api as sm     # lazy: about a second of import, only when needed

    x = np.zeros((n, p))
    x[:, 0] = 1.0
    row = 0
    for j, g in enumerate(labels):
        k = len(groups[g])
        if j:
            x[row:row + k, j] = 1.0
        row += k
    res = sm.OLS(y, x).fit()
    ms_b, ms_w = float(res.mse_model), float(res.mse_resid)
    if ms_w <= 0:
        f, pval = (math.inf if ms_b > 0 else None), (0.0 if ms_b > 0 else None)
    else:
        f, pval = float(res.fvalue), float(res.f_pvalue)
    sizes = [len(groups[g]) for g in labels]
    return {"groups": labels, "sizes": sizes, "ss_between": float(res.ess),
            "ss_within": float(res.ssr), "df_between": int(round(res.df_model)),
            "df_within": int(round(res.df_resid)), "ms_between": ms_b, "ms_within": ms_w,
            "F": f, "p_value": pval, "grand_mean": float(y.mean()), "n": n}


#: how the interval of s_I is made (intermediate_interval)
SI_INTERVAL = "modified large-sample (Graybill-Wang) interval of MSB/n0 + (1 - 1/n0) MSW"


def intermediate_interval(ms_b: float, ms_w: float, df_b: int, df_w: int, n0: float,
                          alpha: float = 0.05) -> tuple[float, float]:
    r"""95 % interval of :math:`s_I = \sqrt{s_r^2 + s_L^2}` from the one-way mean squares.

    :math:`s_I^2 = c_1 MS_B + c_2 MS_W` with :math:`c_1 = 1/n_0`, :math:`c_2 = 1 - 1/n_0`
    (both positive). Modified large-sample interval (Graybill and Wang, JASA 75 (1980) 869;
    as given by Burdick and Graybill, Confidence Intervals on Variance Components, 1992;
    from memory), with :math:`G_i = 1 - \nu_i/\chi^2_{1-\alpha/2,\nu_i}` and
    :math:`H_i = \nu_i/\chi^2_{\alpha/2,\nu_i} - 1`:

    .. math:: L = \hat\theta - \sqrt{\textstyle\sum G_i^2 c_i^2 MS_i^2},\quad
              U = \hat\theta + \sqrt{\textstyle\sum H_i^2 c_i^2 MS_i^2}

    exact when either mean square is alone (it is then the chi-square interval). Its coverage
    is checked by simulation in tests/test_method_reference.py (the Satterthwaite interval
    used before covered about 91 % with six groups).

    >>> lo, hi = intermediate_interval(0.0, 2.0, 5, 6, 2.0)
    >>> [round(x * x / (1.0 - 1.0 / 2.0), 4) for x in (lo, hi)]   # = chi-square ends of MSW
    [0.8305, 9.6983]
    """
    c1, c2 = 1.0 / n0, 1.0 - 1.0 / n0
    theta = c1 * ms_b + c2 * ms_w
    g = [1.0 - df / chi2_ppf(1.0 - alpha / 2.0, df) for df in (df_b, df_w)]
    h = [df / chi2_ppf(alpha / 2.0, df) - 1.0 for df in (df_b, df_w)]
    terms = (c1 * ms_b, c2 * ms_w)
    lo = theta - math.sqrt(sum((gi * t) ** 2 for gi, t in zip(g, terms)))
    hi = theta + math.sqrt(sum((hi_ * t) ** 2 for hi_, t in zip(h, terms)))
    return math.sqrt(max(lo, 0.0)), math.sqrt(hi)


def variance_components(groups: dict[str, list[float]]) -> dict | None:
    """ISO 5725-3 one-way random-effects components from :func:`one_way_anova`.

    >>> vc = variance_components({"d1": [1.0, 2.0], "d2": [3.0, 4.0]})
    >>> vc["s_r"] ** 2, vc["s_L"] ** 2, vc["s_I"] ** 2
    (0.5, 1.75, 2.25)
    """
    a = one_way_anova(groups)
    if a is None:
        return None
    n_i = np.asarray(a["sizes"], dtype=float)
    big_n, p = n_i.sum(), len(n_i)
    n0 = float((big_n - (n_i ** 2).sum() / big_n) / (p - 1))
    msb, msw = a["ms_between"], a["ms_within"]
    s_r2 = msw
    s_l2 = max(0.0, (msb - msw) / n0)
    s_i2 = s_r2 + s_l2
    df_w, df_b = a["df_within"], a["df_between"]
    sr_ci = [math.sqrt(df_w * s_r2 / chi2_ppf(0.975, df_w)),
             math.sqrt(df_w * s_r2 / chi2_ppf(0.025, df_w))]
    si_ci = list(intermediate_interval(msb, msw, df_b, df_w, n0))
    m = a["grand_mean"]

    def rel(s: float) -> float | None:
        return clean(100.0 * s / abs(m)) if m else None

    return {
        "anova": {k: (clean(v) if isinstance(v, float) else v) for k, v in a.items()},
        "n0": clean(n0), "grand_mean": clean(m),
        "s_r": clean(math.sqrt(s_r2)), "s_L": clean(math.sqrt(s_l2)),
        "s_I": clean(math.sqrt(s_i2)),
        "s_r_ci95": [clean(x) for x in sr_ci], "s_I_ci95": [clean(x) for x in si_ci],
        "s_I_ci95_method": SI_INTERVAL,
        "rsd_r_pct": rel(math.sqrt(s_r2)), "rsd_L_pct": rel(math.sqrt(s_l2)),
        "rsd_I_pct": rel(math.sqrt(s_i2)),
        "between_negative": bool(msb < msw),
    }


# -- the study's method validation ---------------------------------------------------------------
@dataclass
class MethodReport:
    """Recovery, matrix factor and precision of a study's method-validation runs."""

    runs: tuple[MethodRun, ...]
    targets: MethodTargets
    recovery: dict = field(default_factory=dict)
    matrix_factor: dict = field(default_factory=dict)
    consistency: dict | None = None
    precision: list = field(default_factory=list)
    verdicts: list[Verdict] = field(default_factory=list)
    recovery_overall: dict | None = None
    matrix_factor_lots: dict | None = None

    def to_dict(self) -> dict:
        """The ``method_recovery`` entry of a study dict (precision: :meth:`precision_dict`)."""
        used = [r for r in self.runs if r.left_out is None]
        bases = sorted({r.basis for r in used if r.basis})
        per_run = {x["run"]: x["recovery_pct"] for rec in self.recovery.values()
                   for x in rec.get("runs", ())}
        return {
            "basis": bases[0] if len(bases) == 1 else bases,
            "is_normalised": bool(bases) and all("internal-standard" in b for b in bases),
            "targets": self.targets.to_dict(),
            "runs": {"total": len(self.runs), "used": len(used),
                     "by_stage": {s: sum(r.tags.spike_stage == s for r in used)
                                  for s in STAGES}},
            "left_out": [{"run": r.run_id, "location": str(r.location), "reason": r.left_out}
                         for r in self.runs if r.left_out],
            "recovery": self.recovery,
            "recovery_overall": self.recovery_overall,
            "recovery_consistency": self.consistency,
            "matrix_factor": self.matrix_factor,
            "matrix_factor_lots": self.matrix_factor_lots,
            "verdicts": [v.to_dict() for v in self.verdicts],
            "run_table": [{"run": r.run_id, "stage": r.tags.spike_stage,
                           "matrix": r.tags.matrix, "level": r.tags.level,
                           "day": r.tags.day, "analyst": r.tags.analyst,
                           "instrument": r.tags.instrument, "sequence": r.tags.sequence,
                           "value": clean(r.value), "recovery_pct": per_run.get(r.run_id),
                           "left_out": r.left_out} for r in self.runs],
        }

    def precision_dict(self) -> dict:
        """The ``precision`` entry of a study dict: ISO 5725-3 components per level."""
        return {"model": PRECISION_MODEL, "runs": "pre", "levels": self.precision}


def _by(runs, key) -> dict:
    out: dict = {}
    for r in runs:
        out.setdefault(key(r), []).append(r)
    return out


def _levels(runs) -> list[str]:
    return list(dict.fromkeys(r.level for r in runs))


def method_report(runs, targets: MethodTargets) -> MethodReport:
    """Everything of :mod:`extractval.method` for the given method runs."""
    runs = tuple(runs)
    used = [r for r in runs if r.left_out is None and r.value is not None]
    pre = [r for r in used if r.tags.spike_stage == "pre"]
    post = [r for r in used if r.tags.spike_stage == "post"]
    neat = [r for r in used if r.tags.spike_stage == "neat"]
    rep = MethodReport(runs, targets)
    per_run: dict[str, list[float]] = {}
    for level in _levels(pre + post):
        lp = [r for r in pre if r.level == level]
        lq = [r for r in post if r.level == level]
        if not lp or not lq:
            rep.recovery[level] = {"note": "recovery needs pre and post runs at this level: "
                                           f"{len(lp)} pre, {len(lq)} post"}
            continue
        entry = ratio_of_means([r.value for r in lp], [r.value for r in lq])
        m_post = float(np.mean([r.value for r in lq]))
        # each pre run over the post runs of its own lot when that lot has some (the lot's
        # matrix effect then cancels), else over all post runs at the level
        lot_post = {lot: float(np.mean([r.value for r in v]))
                    for lot, v in _by(lq, lambda r: r.tags.matrix).items() if lot is not None}
        recs = [100.0 * r.value / lot_post.get(r.tags.matrix, m_post) for r in lp]
        per_run[level] = recs
        entry["rsd_pct"] = mean_interval(recs)["cv_pct"]
        entry["runs"] = [{"run": r.run_id, "recovery_pct": clean(x)} for r, x in zip(lp, recs)]
        lots = {}
        for lot, lr in _by(lp, lambda r: r.tags.matrix).items():
            lpost = [r for r in lq if r.tags.matrix == lot]
            if lot is not None and lpost:
                lots[lot] = ratio_of_means([r.value for r in lr], [r.value for r in lpost])
        entry["lots"] = lots
        rep.recovery[level] = entry
    if len([v for v in per_run.values() if len(v) >= 2]) >= 2:
        a = one_way_anova(per_run)
        if a is not None:
            ok = a["p_value"] is None or a["p_value"] >= ALPHA
            rep.consistency = {"test": "one-way ANOVA F test between levels", "alpha": ALPHA,
                               "F": clean(a["F"]), "p_value": clean(a["p_value"]),
                               "df": [a["df_between"], a["df_within"]],
                               "consistent": bool(ok)}
    for level in _levels(post + neat):
        lq = [r for r in post if r.level == level and r.tags.matrix is not None]
        ln = [r for r in neat if r.level == level]
        if not lq or not ln:
            if lq or ln:
                rep.matrix_factor[level] = {"note": "the matrix factor needs post runs in a "
                                                    "named lot and neat runs at this level: "
                                                    f"{len(lq)} post, {len(ln)} neat"}
            continue
        m_neat = float(np.mean([r.value for r in ln]))
        lots = {lot: clean(float(np.mean([r.value for r in lr])) / m_neat)
                for lot, lr in _by(lq, lambda r: r.tags.matrix).items()}
        entry = mean_interval(list(lots.values()))
        entry.update(lots=lots, n_lots=len(lots), n_neat=len(ln))
        rep.matrix_factor[level] = entry
    all_recs = [x for v in per_run.values() for x in v]
    if all_recs:
        rep.recovery_overall = dict(mean_interval(all_recs), levels=len(per_run))
    lot_mfs: dict[str, list[float]] = {}
    for mf in rep.matrix_factor.values():
        for lot, v in mf.get("lots", {}).items():
            lot_mfs.setdefault(lot, []).append(v)
    if lot_mfs:
        means = {lot: clean(float(np.mean(v))) for lot, v in lot_mfs.items()}
        rep.matrix_factor_lots = dict(mean_interval(list(means.values())), lots=means,
                                      n_lots=len(means),
                                      levels=len([m for m in rep.matrix_factor.values()
                                                  if "lots" in m]))
    rec_of = {x["run"]: x["recovery_pct"] for e in rep.recovery.values()
              for x in e.get("runs", ())}
    rep.precision = _precision(pre, rec_of)
    rep.verdicts = _verdicts(rep)
    return rep


def _precision(pre, rec_of: dict) -> list[dict]:
    """Components per level, of the runs' recoveries (%) where the level has post runs, else
    of their measured values in % of the level's mean (the relative components are the same:
    one divisor per level)."""
    out = []
    with_factors = [r for r in pre if r.tags.factors()]
    for level in _levels(with_factors):
        lr = [r for r in with_factors if r.level == level]
        names = [f for f in FACTORS if any(getattr(r.tags, f) for r in lr)]
        as_rec = all(rec_of.get(r.run_id) is not None for r in lr)
        # without post runs the values are put in % of the level's mean (the SDs are then
        # the RSDs; the relative components are unchanged by the one divisor)
        scale = 1.0 if as_rec else 100.0 / float(np.mean([r.value for r in lr]))
        groups: dict[str, list[float]] = {}
        for r in lr:
            label = " / ".join(f"{f} {getattr(r.tags, f) or '-'}" for f in names)
            groups.setdefault(label, []).append(rec_of[r.run_id] if as_rec
                                                else scale * r.value)
        vc = variance_components(groups)
        entry = {"level": level, "factors": names, "n_runs": len(lr), "n_groups": len(groups),
                 "grouping": " x ".join(names) + " (one-way, each combination a group)",
                 "unit": "recovery, %" if as_rec else "% of the level's mean value",
                 "groups": {g: len(v) for g, v in groups.items()}}
        if vc is None:
            entry["note"] = ("variance components need two groups and a replicate within one "
                             f"of them: {len(groups)} group(s), {len(lr)} run(s)")
        else:
            entry.update(vc)
        out.append(entry)
    return out


def _verdicts(rep: MethodReport) -> list[Verdict]:
    t = rep.targets
    out: list[Verdict] = []
    for level, mf in rep.matrix_factor.items():
        if t.matrix_factor_cv_max_pct is None or "n_lots" not in mf:
            continue
        lim, lots = t.matrix_factor_cv_max_pct, mf["n_lots"]
        src = t.source("matrix_factor_cv_max_pct")
        basis = "target" if "matrix_factor_cv_max_pct" in t.from_study else "default"
        cv = mf["cv_pct"]
        if cv is None:
            out.append(verdict("not assessed", f"matrix_factor_cv_pct[{level}]", None, lim,
                               f"level {level}: one lot only, no CV", basis=basis))
            continue
        ok_cv, ok_n = _at_most(cv, lim), lots >= t.matrix_lots_min
        why = (f"level {level}: CV of the matrix factor {cv:.1f} % over {lots} lots "
               f"{'<=' if ok_cv else '>'} {lim:g} % ({src})")
        if not ok_n:
            why += (f"; fewer lots than the {t.matrix_lots_min} required "
                    f"({t.source('matrix_lots_min')})")
        out.append(verdict("pass" if ok_cv and ok_n else "fail",
                           f"matrix_factor_cv_pct[{level}]", cv, lim, why, basis=basis))
    for level, rec in rep.recovery.items():
        if "value" not in rec:
            continue
        if t.recovery_pct is not None:
            lo, hi = t.recovery_pct
            v = rec["value"]
            ok = _at_least(v, lo) and _at_most(v, hi)
            out.append(verdict("pass" if ok else "fail", f"method_recovery_pct[{level}]", v,
                               (lo, hi),
                               f"level {level}: mean absolute recovery {v:.1f} % "
                               f"{'within' if ok else 'outside'} {lo:g}-{hi:g} % (study.yaml)"))
        if t.recovery_rsd_max_pct is not None:
            lim, v = t.recovery_rsd_max_pct, rec.get("rsd_pct")
            if v is None:
                out.append(verdict("not assessed", f"method_recovery_rsd_pct[{level}]", None,
                                   lim,
                                   f"level {level}: a single pre run"))
            else:
                ok = _at_most(v, lim)
                out.append(verdict("pass" if ok else "fail",
                                   f"method_recovery_rsd_pct[{level}]", v, lim,
                                   f"level {level}: RSD of recovery {v:.2f} % "
                                   f"{'<=' if ok else '>'} {lim:g} % (study.yaml)"))
    for p in rep.precision:
        for key, stat, label in (("repeatability_rsd_max_pct", "rsd_r_pct", "repeatability"),
                                 ("intermediate_rsd_max_pct", "rsd_I_pct",
                                  "intermediate precision")):
            lim = getattr(t, key)
            if lim is None:
                continue
            crit = f"{key.replace('_max', '')}[{p['level']}]"
            v = p.get(stat)
            if v is None:
                out.append(verdict("not assessed", crit, None, lim,
                                   f"level {p['level']}: {p.get('note', 'no estimate')}"))
                continue
            ok = _at_most(v, lim)
            out.append(verdict("pass" if ok else "fail", crit, v, lim,
                               f"level {p['level']}: {label} RSD {v:.2f} % "
                               f"{'<=' if ok else '>'} {lim:g} % (study.yaml; ISO 5725-3 "
                               "one-way components)"))
    return out
