"""Method recovery, matrix factor, consistency across levels and ISO 5725-3 variance
components, against USP <1010>'s worked example and statsmodels MixedLM."""

from __future__ import annotations

import numpy as np
import pytest

from extractval import method as me
from extractval.tables import Location
from tests.reference import acceptance_refs as aref
from tests.reference import method_refs as ref

LOC = Location("runs.csv", line=2)


def _groups(runs):
    return {f"run {i + 1}": list(v) for i, v in enumerate(runs)}


def test_usp1010_anova_table():
    # USP <1010> precision example (tests/reference/method_refs.py), at its printed precision
    a = me.one_way_anova(_groups(aref.USP1010_RUNS))
    assert round(a["ss_between"], 3) == ref.USP1010_SS_BETWEEN
    assert a["df_between"] == ref.USP1010_DF_BETWEEN
    assert round(a["ms_between"], 3) == ref.USP1010_MS_BETWEEN
    assert round(a["ss_within"], 3) == ref.USP1010_SS_WITHIN
    assert round(a["ms_within"], 3) == ref.USP1010_MS_WITHIN
    # USP prints F from its rounded mean squares (3.550 / 0.102); ours is from the exact ones
    assert round(round(a["ms_between"], 3) / round(a["ms_within"], 3), 2) == ref.USP1010_F
    assert a["F"] == pytest.approx(ref.USP1010_F, rel=5e-3)
    assert round(a["ss_between"] + a["ss_within"], 3) == ref.USP1010_SS_TOTAL
    assert round(a["grand_mean"], 2) == ref.USP1010_MEAN


def test_usp1010_variance_components():
    # s_I^2 = between-run + within-run variance = USP's variance of one run of one replicate
    vc = me.variance_components(_groups(aref.USP1010_RUNS))
    assert round(vc["s_I"] ** 2, 3) == ref.USP1010_VAR_1RUN_1REP
    assert round(vc["s_L"] ** 2 + vc["s_r"] ** 2 / 3, 3) == ref.USP1010_VAR_1RUN_3REP
    # USP prints half of its rounded 1.251 (0.6255) as 0.625: one unit in the last digit
    assert (vc["s_L"] ** 2 + vc["s_r"] ** 2) / 2 == pytest.approx(ref.USP1010_VAR_2RUN_1REP,
                                                                abs=1e-3)
    assert round(vc["s_r"] ** 2, 3) == ref.USP1010_MS_WITHIN
    assert vc["n0"] == 3


def _mixedlm(groups):
    import pandas as pd
    import statsmodels.formula.api as smf

    df = pd.DataFrame([(g, v) for g, vs in groups.items() for v in vs], columns=["g", "y"])
    fit = smf.mixedlm("y ~ 1", df, groups=df["g"]).fit(reml=True)
    return float(fit.cov_re.iloc[0, 0]), float(fit.scale)


@pytest.mark.parametrize("seed,n", [(7, 3), (11, 2), (5, 4)])
def test_components_match_statsmodels_mixedlm(seed, n):
    # reference library: statsmodels MixedLM (REML). For balanced data REML equals the ANOVA
    # estimates when s_L^2 > 0 (for unbalanced data the two estimators differ by design).
    rng = np.random.default_rng(seed)
    groups = {f"day{i}": list(100 + rng.normal(0, 1.5) + rng.normal(0, 0.8, n))
              for i in range(6)}
    vc = me.variance_components(groups)
    assert not vc["between_negative"]
    s_l2, s_r2 = _mixedlm(groups)
    assert vc["s_r"] ** 2 == pytest.approx(s_r2, rel=1e-4)
    assert vc["s_L"] ** 2 == pytest.approx(s_l2, rel=1e-4)


def test_unequal_group_sizes_use_iso5725_n0():
    # ISO 5725-2 (from memory): n0 = (N - sum n_i^2 / N) / (p - 1); sizes 2, 4, 3 give 2.8889
    vc = me.variance_components({"a": [1.0, 1.2], "b": [2.0, 2.1, 1.9, 2.2], "c": [1.5, 1.4,
                                                                                1.6]})
    assert round(vc["n0"], 4) == 2.8889
    a = vc["anova"]
    assert vc["s_L"] ** 2 == pytest.approx((a["ms_between"] - a["ms_within"]) / vc["n0"])


def test_negative_between_component_is_zero():
    vc = me.variance_components({"a": [1.0, 3.0], "b": [1.5, 2.5], "c": [2.0, 2.0]})
    assert vc["s_L"] == 0.0 and vc["between_negative"]
    assert vc["s_I"] == vc["s_r"]


def _run(i, stage, value, lot=None, level="mid", **factors):
    tags = me.MethodTags(sequence="S1", matrix=lot, spike_stage=stage, level=level, **factors)
    return me.MethodRun(f"R{i}", LOC, tags, value, "percent of spiked")


def test_recovery_and_matrix_factor():
    runs, i = [], 0
    mf_true = [0.92, 0.95, 0.97, 0.90, 1.02, 0.94]
    for k, mf in enumerate(mf_true):
        lot = f"L{k + 1}"
        for _ in range(2):
            runs.append(_run(i, "post", 100 * mf, lot))
            runs.append(_run(i + 1, "pre", 80 * mf, lot))
            i += 2
    runs += [_run(100 + j, "neat", 100.0) for j in range(3)]
    rep = me.method_report(runs, me.MethodTargets())
    rec = rep.recovery["mid"]
    assert rec["value"] == pytest.approx(80.0)                 # pre / post, every lot 80 %
    assert set(rec["lots"]) == {f"L{k}" for k in range(1, 7)}
    mf = rep.matrix_factor["mid"]
    assert mf["n_lots"] == 6
    assert mf["mean"] == pytest.approx(np.mean(mf_true))
    assert mf["cv_pct"] == pytest.approx(100 * np.std(mf_true, ddof=1) / np.mean(mf_true))
    (v,) = [v for v in rep.verdicts if v.criterion == "matrix_factor_cv_pct[mid]"]
    assert v.status == "pass" and v.limit == ref.MF_CV_MAX_PCT
    # five lots are fewer than the six asked for (EMA 2011): fails whatever the CV
    five = [r for r in runs if r.tags.matrix != "L6"]
    (v,) = [v for v in me.method_report(five, me.MethodTargets()).verdicts
            if v.criterion == "matrix_factor_cv_pct[mid]"]
    assert v.status == "fail" and "fewer lots" in v.detail


def test_matrix_factor_cv_limit_fails_a_spread_of_lots():
    runs = [_run(k, "post", 100 * mf, f"L{k}") for k, mf in
            enumerate((0.70, 1.00, 0.85, 1.10, 0.75, 0.95))]
    runs += [_run(50, "neat", 100.0), _run(51, "neat", 100.0)]
    rep = me.method_report(runs, me.MethodTargets())
    (v,) = rep.verdicts
    assert v.status == "fail" and v.value > ref.MF_CV_MAX_PCT


def test_recovery_interval_delta_method():
    pre, post = [78.0, 81.0, 80.0, 79.5], [99.0, 101.0, 100.5]
    r = me.ratio_of_means(pre, post)
    m1, m2 = np.mean(pre), np.mean(post)
    se = (100 * m1 / m2) * np.sqrt(np.var(pre, ddof=1) / (4 * m1 ** 2)
                                   + np.var(post, ddof=1) / (3 * m2 ** 2))
    assert r["se"] == pytest.approx(se)
    from scipy import stats
    assert r["ci95"][1] - r["value"] == pytest.approx(stats.t.ppf(0.975, 5) * se)


def test_consistency_across_levels_and_targets():
    runs, i = [], 0
    for level, rec in (("low", 70.0), ("mid", 80.0), ("high", 80.5)):
        for d in (-1.0, 0.0, 1.0):
            runs.append(_run(i, "pre", rec + d, level=level))
            runs.append(_run(i + 1, "post", 100.0 + d / 2, level=level))
            i += 2
    t = me.MethodTargets(recovery_pct=(75.0, 110.0), recovery_rsd_max_pct=5.0,
                         from_study=("recovery_pct", "recovery_rsd_max_pct"))
    rep = me.method_report(runs, t)
    assert rep.consistency["consistent"] is False and rep.consistency["p_value"] < 0.05
    by = [(v.criterion, v.status) for v in rep.verdicts]
    assert ("method_recovery_pct[low]", "fail") in by            # low level at 70 %
    assert ("method_recovery_pct[mid]", "pass") in by
    assert ("method_recovery_pct[high]", "pass") in by
    # the F test is statsmodels' OLS F; scipy's one-way ANOVA agrees
    from scipy import stats
    per = [[x["recovery_pct"] for x in rep.recovery[lv]["runs"]]
           for lv in ("low", "mid", "high")]
    assert rep.consistency["F"] == pytest.approx(stats.f_oneway(*per).statistic)


def test_precision_by_day_and_analyst_with_limits():
    rng = np.random.default_rng(3)
    runs, i = [], 0
    for day in ("1", "2", "3"):
        for analyst in ("A", "B"):
            shift = rng.normal(0, 1.0)
            for _ in range(2):
                runs.append(_run(i, "pre", 80 + shift + rng.normal(0, 0.5), day=day,
                                 analyst=analyst))
                i += 1
    t = me.MethodTargets(repeatability_rsd_max_pct=2.0, intermediate_rsd_max_pct=0.5,
                         from_study=("repeatability_rsd_max_pct", "intermediate_rsd_max_pct"))
    rep = me.method_report(runs, t)
    (p,) = rep.precision
    assert p["factors"] == ["day", "analyst"] and p["n_groups"] == 6 and p["n_runs"] == 12
    # no post runs: the values in % of their mean (method._precision), then MixedLM on those
    assert p["unit"] == "% of the level's mean value"
    mean = np.mean([r.value for r in runs])
    groups = {}
    for r in runs:
        groups.setdefault((r.tags.day, r.tags.analyst), []).append(100 * r.value / mean)
    s_l2, s_r2 = _mixedlm({f"{a}{b}": v for (a, b), v in groups.items()})
    assert p["s_r"] ** 2 == pytest.approx(s_r2, rel=1e-4)
    status = {v.criterion: v.status for v in rep.verdicts}
    assert status == {"repeatability_rsd_pct[mid]": "pass",
                      "intermediate_rsd_pct[mid]": "fail"}


def test_left_out_runs_are_listed_not_used():
    runs = [_run(1, "pre", 80.0), _run(2, "post", 100.0),
            me.MethodRun("R3", LOC, me.MethodTags(spike_stage="pre", level="mid"), None, None,
                         "system suitability of sequence S2 failed")]
    d = me.method_report(runs, me.MethodTargets()).to_dict()
    assert d["runs"]["used"] == 2
    assert d["left_out"][0]["run"] == "R3" and "suitability" in d["left_out"][0]["reason"]
