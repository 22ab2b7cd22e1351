"""Acceptance statistics against published values (tests/reference/acceptance_refs.py).

Each criterion has a case that passes and one that fails; the source of every published number
is named beside its assertion.
"""

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy.optimize import brentq
from statsmodels.stats.anova import anova_lm

from extractval import acceptance as acc
from tests.reference import acceptance_refs as ref

# ------------------------------------------------------------------------------ Grubbs


@pytest.mark.parametrize("alpha", [0.05, 0.01])
def test_grubbs_critical_n10(alpha):
    # Harvey, Analytical Chemistry 2.1, Appendix 7, n = 10: 2.290 (5 %), 2.482 (1 %)
    # (ISO 5725-2 Table 5 gives the same, from memory)
    assert round(acc.grubbs_critical(10, alpha), 3) == ref.GRUBBS_N10[alpha]


@pytest.mark.parametrize("n", sorted(ref.GRUBBS_ROWS))
def test_grubbs_critical_other_rows(n):
    # Harvey, Analytical Chemistry 2.1, Appendix 7, further rows
    c5, c1 = ref.GRUBBS_ROWS[n]
    assert round(acc.grubbs_critical(n, 0.05), 3) == c5
    assert round(acc.grubbs_critical(n, 0.01), 3) == c1


@pytest.mark.parametrize("n", sorted(ref.GRUBBS_ROWS_FROM_MEMORY))
def test_grubbs_critical_rows_from_memory(n):
    # from memory (the stored copy of the table misprints this row)
    c5, c1 = ref.GRUBBS_ROWS_FROM_MEMORY[n]
    assert round(acc.grubbs_critical(n, 0.05), 3) == c5
    assert round(acc.grubbs_critical(n, 0.01), 3) == c1


def test_grubbs_critical_bounded_by_largest_possible_g():
    # closed form: no sample of n values can have G above (n - 1)/sqrt(n), so every critical
    # value lies below it; at n = 3 it approaches it as alpha -> 0
    for n in (3, 4, 10, 50):
        bound = (n - 1) / math.sqrt(n)
        assert acc.grubbs_critical(n, 0.05) < acc.grubbs_critical(n, 0.01) < bound
    assert acc.grubbs_critical(3, 1e-6) == pytest.approx(2 / math.sqrt(3), rel=1e-9)


@pytest.mark.parametrize("n, alpha", [(2, 0.05), (10.5, 0.05), (True, 0.05), (10, 0.0),
                                      (10, 1.0)])
def test_grubbs_critical_rejects_bad_arguments(n, alpha):
    with pytest.raises(ValueError, match="expected"):
        acc.grubbs_critical(n, alpha)


def test_grubbs_screen_usp1010_outlier():
    # USP <1010> outlier example: mean 99.54, SD 1.369, normalized deviation of 95.7 = -2.805
    ids = [f"R{i}" for i in range(1, 11)]
    r = acc.grubbs_screen(ref.USP1010_OUTLIER_DATA, ids)
    assert round(r.mean, 2) == ref.USP1010_OUTLIER_MEAN
    assert round(r.sd, 3) == ref.USP1010_OUTLIER_SD
    assert round(r.G, 3) == abs(ref.USP1010_OUTLIER_NORMALIZED)
    assert (r.suspect_id, r.suspect_value, r.side) == ("R10", 95.7, "low")
    # 2.805 > 2.482 (the 1 % critical value at n = 10, GRUBBS_N10): an outlier
    assert r.classification == "outlier" and r.flagged
    assert r.critical_1 == pytest.approx(acc.grubbs_critical(10, 0.01), rel=1e-12)


def test_grubbs_screen_usp1010_nine_remaining_pass():
    # USP <1010>: with 95.7 set aside the most extreme normalized value is -1.905 (99.5)
    nine = ref.USP1010_OUTLIER_DATA[:-1]
    r = acc.grubbs_screen(nine)
    assert round(r.G, 3) == abs(ref.USP1010_NINE_NORMALIZED_MIN)
    assert r.suspect_value == 99.5
    assert r.classification == "ok" and not r.flagged


def test_grubbs_screen_straggler_between_the_two_critical_values():
    base = [-1.0, -0.5, 0.0, 0.5, 1.0, -1.0, -0.5, 0.0, 0.5]
    c5, c1 = acc.grubbs_critical(10, 0.05), acc.grubbs_critical(10, 0.01)
    target = 0.5 * (c5 + c1)

    def g_minus_target(x):
        v = np.array(base + [x])
        return abs(x - v.mean()) / v.std(ddof=1) - target

    x = brentq(g_minus_target, 1.0, 20.0)
    r = acc.grubbs_screen(base + [x])
    assert c5 < r.G <= c1
    assert r.classification == "straggler"
    assert r.suspect_id == 9 and r.side == "high"


def test_grubbs_screen_flags_but_keeps_every_value():
    values = list(ref.USP1010_OUTLIER_DATA)
    r = acc.grubbs_screen(values)
    assert values == list(ref.USP1010_OUTLIER_DATA)
    assert r.n == len(values)
    d = r.to_dict()
    assert d["classification"] == "outlier" and d["G"] == pytest.approx(2.805, abs=5e-4)


def test_grubbs_screen_identical_values_are_ok():
    r = acc.grubbs_screen([50.0, 50.0, 50.0])
    assert (r.G, r.classification) == (0.0, "ok")


@pytest.mark.parametrize("values, ids, match", [
    ([1.0, 2.0], None, "at least 3"),
    ([1.0, 2.0, 3.0], ["a", "b"], "one id each"),
    ([1.0, float("nan"), 3.0], ["a", "b", "c"], r"\['b'\] are not finite"),
])
def test_grubbs_screen_rejects_bad_groups(values, ids, match):
    with pytest.raises(ValueError, match=match):
        acc.grubbs_screen(values, ids)


# ------------------------------------------------------------------------------ lack of fit


def _mr_s11_1():
    x = np.array([k for k, ys in ref.MR_S11_1_DATA.items() for _ in ys])
    y = np.array([v for ys in ref.MR_S11_1_DATA.values() for v in ys])
    return x, y


def test_lack_of_fit_from_ss_montgomery_runger_s11_1():
    # Montgomery & Runger Example S11-1: f0 = 1.42 on 7 and 7 df
    r = acc.lack_of_fit_from_ss(ref.MR_S11_1_SS_PE, ref.MR_S11_1_SS_LOF,
                                ref.MR_S11_1_DF_PE, ref.MR_S11_1_DF_LOF)
    assert round(r.F, 2) == ref.MR_S11_1_F
    # the book's P = 0.3276 is that of f0 rounded to 1.42; unrounded F = 1.416 gives 0.3288
    assert r.p_value == pytest.approx(ref.MR_S11_1_P, abs=1.5e-3)


def test_lack_of_fit_test_montgomery_runger_s11_1_from_data():
    # Montgomery & Runger Example S11-1 from its data: first the fitted line and SS_E ...
    x, y = _mr_s11_1()
    slope, intercept = np.polyfit(x, y, 1)
    assert round(intercept, 3) == ref.MR_S11_1_INTERCEPT
    assert round(slope, 3) == ref.MR_S11_1_SLOPE
    e = y - (intercept + slope * x)
    assert round(float(np.sum(e**2)), 4) == ref.MR_S11_1_SS_RESIDUAL
    # ... then the split into pure error and lack of fit
    r = acc.lack_of_fit_test(e, x, n_params=2)
    assert (r.df_pe, r.df_lof) == (ref.MR_S11_1_DF_PE, ref.MR_S11_1_DF_LOF)
    # book SS_PE is the sum of per-level terms rounded to 4 decimals (exact sum 3.03667)
    assert r.ss_pe == pytest.approx(ref.MR_S11_1_SS_PE, abs=1e-4)
    assert round(r.ss_lof, 4) == ref.MR_S11_1_SS_LOF
    assert round(r.F, 2) == ref.MR_S11_1_F
    assert r.p_value == pytest.approx(ref.MR_S11_1_P, abs=1.5e-3)
    assert r.verdict().status == "pass"  # the book: cannot reject model adequacy


def _statsmodels_lof(x, y):
    df = pd.DataFrame({"x": x, "y": y})
    reduced = smf.ols("y ~ x", data=df).fit()
    full = smf.ols("y ~ C(x)", data=df).fit()
    table = anova_lm(reduced, full)
    return reduced.resid.to_numpy(), table


@pytest.mark.parametrize("curved", [False, True])
def test_lack_of_fit_test_matches_statsmodels_anova(curved):
    # reference: statsmodels anova_lm of the straight line (reduced) against the group-means
    # model C(x) (full); its F and Pr(>F) are the lack-of-fit test
    if curved:
        rng = np.random.default_rng(7)
        x = np.repeat([1.0, 2.0, 3.0, 4.0, 5.0], 3)
        y = 0.4 * (x - 3.0) ** 2 + rng.normal(0.0, 0.1, x.size)
    else:
        x, y = _mr_s11_1()
    resid, table = _statsmodels_lof(x, y)
    r = acc.lack_of_fit_test(resid, x, n_params=2)
    assert r.F == pytest.approx(table["F"].iloc[1], rel=1e-9)
    assert r.p_value == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-7, abs=1e-300)
    assert r.ss_pe == pytest.approx(table["ssr"].iloc[1], rel=1e-9)
    assert r.df_lof == int(table["df_diff"].iloc[1])
    assert r.df_pe == int(table["df_resid"].iloc[1])
    assert r.verdict().status == ("fail" if curved else "pass")


def test_lack_of_fit_not_testable_cases():
    no_reps = acc.lack_of_fit_test([0.1, -0.2, 0.1], ["a", "b", "c"], 2)
    assert not no_reps.testable and "no replicated" in no_reps.reason
    assert no_reps.F is None and no_reps.verdict().status == "not judged"
    saturated = acc.lack_of_fit_test([0.1, -0.1, 0.2, -0.2], ["a", "a", "b", "b"], 2)
    assert saturated.df_lof == 0 and "df_LOF = 0" in saturated.reason
    exact = acc.lack_of_fit_test([0.1, 0.1, -0.1, -0.1, 0.0], ["a", "a", "b", "b", "c"], 1)
    assert exact.ss_pe == 0.0 and "pure error is zero" in exact.reason
    assert exact.to_dict()["F"] is None


def test_lack_of_fit_rejects_misaligned_groups():
    with pytest.raises(ValueError, match="one label per residual"):
        acc.lack_of_fit_test([0.1, 0.2, 0.3], ["a", "a"], 1)


# ------------------------------------------------------------------------------ AOAC Table A5


def test_aoac_table_a5_pinned():
    # AOAC Appendix F Table A5: shape and every row
    assert len(acc.AOAC_TABLE_A5) == len(ref.AOAC_A5) == 10
    for row, (level, label, lo, hi) in zip(acc.AOAC_TABLE_A5, ref.AOAC_A5):
        assert (row.level_fraction, row.label, row.lo_pct, row.hi_pct) == (level, label, lo, hi)


@pytest.mark.parametrize("level, label, lo, hi", ref.AOAC_A5)
def test_aoac_recovery_range_at_each_tabulated_level(level, label, lo, hi):
    # AOAC Appendix F Table A5, by mass fraction and by its own label
    assert acc.aoac_recovery_range(level) == (lo, hi, label)
    assert acc.aoac_recovery_range(label) == (lo, hi, label)


@pytest.mark.parametrize("text, label", [
    ("3 ppm", "1 ppm"),        # log10 3e-6 = -5.52: nearest decade 1e-6
    ("4 mg/kg", "10 ppm"),     # -5.40: nearest 1e-5
    ("0.03 %", "100 ppm"),     # -3.52: nearest 1e-4
    ("0.5 ppb", "1 ppb"),      # -9.30: last row
    ("60 %", "100 %"),
])
def test_aoac_row_between_decades_nearest_in_log(text, label):
    # the project's own convention, not AOAC's: Table A5 gives decade levels only and says
    # nothing about levels between its rows; the nearest row in log scale is used
    assert acc.aoac_recovery_row(text).label == label


def test_aoac_half_way_takes_the_stricter_row():
    # the project's own convention (as above): exactly half-way, the stricter (higher) row
    c = 10 ** -3.5  # exactly half-way between 0.1 % and 100 ppm in log scale
    assert acc.aoac_recovery_row(c).label == "0.1 %"


def test_aoac_below_table_raises():
    with pytest.raises(ValueError, match="below the lowest row"):
        acc.aoac_recovery_range("0.2 ppb")


def test_aoac_recovery_verdict_pass_fail_and_not_assessed():
    # AOAC Table A5: 10 ppm 80-110 %, 1 % 97-103 %
    ok = acc.aoac_recovery_verdict(95.2, "10 ppm")
    assert ok.status == "pass" and ok.limit == (80.0, 110.0) and "row 10 ppm" in ok.detail
    bad = acc.aoac_recovery_verdict(95.2, "1 %")
    assert bad.status == "fail" and bad.to_dict()["limit"] == [97.0, 103.0]
    edge = acc.aoac_recovery_verdict(80.0, "1 ppm")
    assert edge.status == "pass"  # limits are inclusive
    assert acc.aoac_recovery_verdict(None, "1 ppm").status == "not judged"
    assert acc.aoac_recovery_verdict(95.0, "0.01 ppb").status == "not judged"


# ------------------------------------------------------------------------------ parse_level


@pytest.mark.parametrize("text, fraction", [
    ("10 ppm", 1e-5), ("100 ppb", 1e-7), ("0.1 %", 1e-3), ("1 %", 1e-2), ("1%", 1e-2),
    ("5 mg/kg", 5e-6), ("20 ug/kg", 2e-8), ("20 \u00b5g/kg", 2e-8), ("20 \u03bcg/kg", 2e-8),
    ("20 mcg/kg", 2e-8), ("1e-5", 1e-5), ("2.5 % w/w", 0.025), ("3 ng/g", 3e-9),
    ("1 mg/g", 1e-3), ("10 PPM", 1e-5), ("100 %", 1.0), (1e-6, 1e-6),
])
def test_parse_level(text, fraction):
    assert acc.parse_level(text) == pytest.approx(fraction, rel=1e-15)


@pytest.mark.parametrize("text, match", [
    ("10 ppx", "found unit 'ppx'"),
    ("ppm", "no leading number"),
    ("10 mg/L", "mass concentration, not a mass fraction"),
    ("5 ppt", "ambiguous"),
    ("150 %", "exceeds 1"),
    ("0 ppm", "not positive"),
    ("-1 ppm", "not positive"),
    (2.0, "exceeds 1"),
    (None, "found NoneType"),
])
def test_parse_level_errors_say_what_was_found_and_expected(text, match):
    with pytest.raises(ValueError, match=match) as info:
        acc.parse_level(text)
    assert "expected" in str(info.value) or "mass fraction" in str(info.value)


# ------------------------------------------------------------------------------ Horwitz


@pytest.mark.parametrize("c", sorted(ref.AOAC_D1_PRSD_R))
def test_horwitz_prsd_r_aoac_table_d1(c):
    # AOAC Appendix F Annex D Table D1 (whole per cent), both exponent conventions
    assert round(acc.horwitz_prsd_r(c)) == ref.AOAC_D1_PRSD_R[c]
    assert round(acc.horwitz_prsd_r(c, acc.HORWITZ_EXACT_EXPONENT)) == ref.AOAC_D1_PRSD_R[c]


def test_horwitz_check_values_and_exact_form():
    # AOAC Appendix F Annex D Table D1 (tests/reference): PRSD(R) = 2 % at C = 1, 16 % at 1 ppm
    assert acc.horwitz_prsd_r(1.0) == 2.0
    assert round(acc.horwitz_prsd_r(1e-6)) == 16
    # Horwitz's original 2^(1 - 0.5 log10 C) (from memory) is the exact-exponent form
    for c in (1e-2, 1e-6, 1e-9):
        original = 2.0 ** (1.0 - 0.5 * math.log10(c))
        assert acc.horwitz_prsd_r(c, acc.HORWITZ_EXACT_EXPONENT) == pytest.approx(original)


def test_horwitz_repeatability_is_half_of_reproducibility():
    # AOAC Appendix F Annex D 2.2.1: repeatability targets at 1/2 of PRSD(R)
    for c in (1.0, 1e-6):
        assert acc.horwitz_prsd_repeatability(c) == pytest.approx(
            ref.AOAC_REPEATABILITY_FRACTION_OF_PRSD_R * acc.horwitz_prsd_r(c))


def test_horrat_denominator_is_prsd_R_for_both_kinds():
    # AOAC Appendix F Annex D 1.8: HorRat(r) = RSD(r) / PRSD(R)
    prsd = acc.horwitz_prsd_r(1e-6)
    assert acc.horrat(8.0, 1e-6, "r") == pytest.approx(8.0 / prsd)
    assert acc.horrat(8.0, 1e-6, "R") == acc.horrat(8.0, 1e-6, "r")
    with pytest.raises(ValueError, match="expected 'r'"):
        acc.horrat(8.0, 1e-6, "x")
    with pytest.raises(ValueError, match="0 < C <= 1"):
        acc.horrat(8.0, 0.0)


def test_horrat_verdict_limits_pass_and_fail():
    # AOAC Appendix F Annex D 2.2.2: acceptable HorRat(r) 0.3-1.3; 2.1: HorRat(R) 0.5-2.0
    assert acc.HORRAT_LIMITS["r"] == ref.AOAC_HORRAT_r_LIMITS
    assert acc.HORRAT_LIMITS["R"] == ref.AOAC_HORRAT_R_LIMITS
    prsd = acc.horwitz_prsd_r(1e-6)
    good = acc.horrat_verdict(0.8 * prsd, "1 ppm")
    assert good.status == "pass" and good.value == pytest.approx(0.8)
    high = acc.horrat_verdict(1.5 * prsd, "1 ppm")
    assert high.status == "fail" and high.limit == (0.3, 1.3)
    low = acc.horrat_verdict(0.2 * prsd, 1e-6)
    assert low.status != "fail" and "unreported averaging" in low.detail
    # 1.5 fails as repeatability but passes as reproducibility (0.5-2.0)
    assert acc.horrat_verdict(1.5 * prsd, "1 ppm", kind="R").status == "pass"
    assert acc.horrat_verdict(None, "1 ppm").status == "not judged"
    assert acc.horrat_verdict(5.0, "10 mg/L").status == "not judged"


# ------------------------------------------------------------------------------ pooled RSD


def test_pooled_rsd_usp1010_runs():
    # USP <1010> precision example: each run's RSD (%, 3 decimals) and within-runs df = 10
    r = acc.pooled_rsd(ref.USP1010_RUNS)
    assert tuple(round(x, 3) for x in r.group_rsd_pct) == ref.USP1010_RUN_RSD_PCT
    assert r.df == ref.USP1010_WITHIN_DF
    assert (r.n_groups, r.n_values) == (5, 15)
    # USP <1010> within-runs SS 1.018: the pooled absolute variance behind the relative one
    ss_within = sum(float(np.sum((np.array(g) - np.mean(g)) ** 2)) for g in ref.USP1010_RUNS)
    assert round(ss_within, 3) == ref.USP1010_WITHIN_SS
    # closed form for equal group sizes: the root mean square of the group RSDs
    assert r.rsd_pct == pytest.approx(math.sqrt(np.mean(np.square(r.group_rsd_pct))))


def test_pooled_rsd_weights_by_degrees_of_freedom_and_skips_singletons():
    r = acc.pooled_rsd({"pH 3": [99.0, 101.0], "pH 5": [49.0, 51.0, 50.0], "pH 7": [80.0]})
    expected = 100 * math.sqrt((1 * (math.sqrt(2) / 100) ** 2 + 2 * (1 / 50) ** 2) / 3)
    assert r.rsd_pct == pytest.approx(expected, rel=1e-12)
    assert r.df == 3 and r.group_rsd_pct[2] is None


def test_pooled_rsd_verdict_pass_fail_not_assessed():
    r = acc.pooled_rsd(ref.USP1010_RUNS)
    assert r.verdict(2.0).status == "pass"
    assert r.verdict(0.2).status == "fail"
    none = acc.pooled_rsd([[1.0], [2.0]])
    assert none.rsd_pct is None and none.verdict(5.0).status == "not judged"


def test_pooled_rsd_refuses_non_positive_mean():
    with pytest.raises(ValueError, match="not log D"):
        acc.pooled_rsd([[-0.1, 0.1]])


def test_group_mean_ss_is_numpy_per_group():
    # reference: numpy's mean and sample sd of each group alone; to the last bit when no
    # group has 8 values or more (replicate groups of a study), within rounding otherwise
    rng = np.random.default_rng(7)
    for sizes, exact in (([1, 2, 3, 2, 7, 5, 2], True), ([2, 3, 12, 1], False)):
        groups = [rng.uniform(40.0, 110.0, n) for n in sizes]
        means, ss = acc.group_mean_ss(np.concatenate(groups), sizes)
        for g, mean, s in zip(groups, means, ss):
            assert mean == (np.mean(g) if exact else pytest.approx(np.mean(g), rel=1e-14))
            if g.size > 1:
                sd = math.sqrt(s / (g.size - 1))
                assert sd == (np.std(g, ddof=1) if exact
                              else pytest.approx(np.std(g, ddof=1), rel=1e-12))


def test_group_moments_are_group_mean_ss_as_lists():
    # the list form gives group_mean_ss's numbers, on both of its paths (under 8 values a
    # group, and a wider group summed by numpy)
    rng = np.random.default_rng(11)
    for sizes in ([2, 3, 1, 7, 2], [2, 9, 3]):
        values = rng.uniform(-5.0, 110.0, sum(sizes))
        means, ss = acc.group_mean_ss(values, sizes)
        assert acc.group_moments(values, sizes) == (means.tolist(), ss.tolist())
        assert acc.group_moments(values.tolist(), sizes) == (means.tolist(), ss.tolist())


def test_numpy_mean_is_np_mean_to_the_bit():
    rng = np.random.default_rng(12)
    for n in (1, 2, 5, 7, 8, 13):
        values = (rng.uniform(-1.0, 1.0, n) * 10.0 ** rng.integers(-6, 7, n)).tolist()
        assert acc.numpy_mean(values) == float(np.mean(values))
    assert str(acc.numpy_mean([-0.0])) == str(float(np.mean([-0.0])))


def test_pooled_rsd_from_moments_is_pooled_rsd_usp1010():
    # the same USP <1010> runs, given as sizes, means and squared deviations
    runs = [np.asarray(g, dtype=float) for g in ref.USP1010_RUNS]
    sizes = [g.size for g in runs]
    means, ss = acc.group_mean_ss(np.concatenate(runs), sizes)
    assert acc.pooled_rsd_from_moments(sizes, means, ss) == acc.pooled_rsd(ref.USP1010_RUNS)
    with pytest.raises(ValueError, match="group b has values that are not finite"):
        acc.pooled_rsd_from_moments([2, 2], [1.0, np.inf], [0.1, 0.1], ["a", "b"])


# ------------------------------------------------------------------------------ ratio agreement


def test_ratio_agreement_oecd107_limit_default():
    # OECD TG 107: the six log Pow values within +/- 0.3 units
    assert acc.OECD_107_LOG_LIMIT == ref.OECD_107_HALF_WIDTH_LOG


def test_ratio_agreement_pass():
    r = acc.ratio_agreement({0.5: [1.46, 1.50], 1.0: [1.48, 1.52], 2.0: [1.41, 1.47]})
    assert r.within is True and (r.n_ratios, r.n_values) == (3, 6)
    assert r.range == pytest.approx(0.11)
    assert r.verdict().status == "pass"


def test_ratio_agreement_fail_names_the_ratio_and_the_likely_cause():
    r = acc.ratio_agreement({"1:2": [1.40, 1.42], "1:1": [1.50, 1.48], "2:1": [2.05, 2.10]})
    v = r.verdict()
    assert v.status == "fail" and r.worst_ratio == "2:1"
    assert v.value == pytest.approx(r.max_deviation) and v.value > ref.OECD_107_HALF_WIDTH_LOG
    assert "emulsion" in v.detail and "self-association" in v.detail


def test_ratio_agreement_edge_is_inclusive_and_range_can_reach_twice_the_limit():
    r = acc.ratio_agreement({1: 1.0, 2: 1.6})  # mean 1.3: both exactly 0.3 away
    assert r.within is True and r.range == pytest.approx(0.6)


def test_ratio_agreement_single_ratio_not_assessed():
    r = acc.ratio_agreement({1.0: [1.4, 1.5]})
    assert r.within is None and r.verdict().status == "not judged"
    assert r.to_dict()["mean"] is None


# ------------------------------------------------------------------------------ Verdict


def test_verdict_to_dict_keys_and_values():
    v = acc.verdict("fail", "mass_balance_pct", 87.123456789012, (90, 110), "run 4 outside")
    d = v.to_dict()
    assert list(d) == ["criterion", "status", "value", "limit", "detail", "outcome", "basis"]
    assert d == {"criterion": "mass_balance_pct", "status": "fail", "value": 87.12345679,
                 "limit": [90.0, 110.0], "detail": "run 4 outside", "outcome": "Not met",
                 "basis": "target"}
    assert acc.verdict("not judged", "x", None, None).to_dict()["value"] is None


def test_verdict_rejects_unknown_status():
    with pytest.raises(ValueError, match="status 'ok' is not one of"):
        acc.verdict("ok", "max_rsd_pct", 1.0, 5.0)


def test_horrat_below_range_is_a_note_to_investigate_never_a_fail():
    # AOAC Official Methods of Analysis (2012) Appendix F, Annex D 2.2.2: acceptable HorRat(r)
    # 0.3-1.3; values at the extremes are to be interpreted with caution, and a series of low
    # values checked for unreported averaging or prior knowledge of the analyte content. A
    # precision better than expected is a reason to look, not a failed criterion.
    prsd = acc.horwitz_prsd_r(1e-6)
    lo, hi = ref.AOAC_HORRAT_r_LIMITS
    for factor in (0.05, 0.2, 0.29):
        v = acc.horrat_verdict(factor * prsd, "1 ppm")
        assert v.value < lo
        assert v.status == "note" and v.outcome == "To investigate"
        assert "not a fail" in v.detail
    at_lo = acc.horrat_verdict(lo * prsd, "1 ppm")
    assert at_lo.status == "pass"                      # the range is inclusive
    assert acc.horrat_verdict(1.31 * prsd, "1 ppm").status == "fail"


def test_verdict_outcome_words_and_old_status_spelling():
    v = acc.verdict("not assessed", "x", None, None)
    assert v.status == "not judged" and v.to_dict()["outcome"] == "Not judged"
    assert [acc.verdict(s, "x", 1.0, 1.0).outcome for s in ("pass", "fail")] == ["Met", "Not met"]
    with pytest.raises(ValueError, match="basis"):
        acc.verdict("pass", "x", 1.0, 1.0, basis="somebody")
