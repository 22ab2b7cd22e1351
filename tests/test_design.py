"""Procedure design on noise-free simulated studies equals its closed forms.

Closed forms from the IUPAC Gold Book relations (F02503, D01817): after n equal portions of
volume v, q = (V_aq / (V_aq + D v))^n; so n >= ln(1 - T) / ln q1, and the target is met where
D >= D* = ((1 - T)^(-1/n) - 1) V_aq / v_total-per-portion.
"""

import math

import numpy as np
import pytest

from extractval.analysis import fit_study
from extractval.simulate import simulated_study
from extractval.study import Procedure, Targets

LOGK, PKA = 1.88, 4.21          # benzoic acid: CRC Handbook log P, J. Res. NBS 1967 71A 379
PH = [2.5, 3.5, 4.2, 5.0, 6.0]


def _report(procs, target=95.0, model="acid", theta=(LOGK, PKA), pH=PH):
    study = simulated_study("DESIGN", model, theta, pH, procs, sigma=0.0, form="both",
                            targets=Targets(recovery_pct=target))
    return fit_study(study).to_dict()


def _log_d_acid(pH):
    return LOGK - math.log10(1 + 10 ** (pH - PKA))


def test_steps_needed_closed_form():
    proc = Procedure("P1", "x", 4.5, 50.0, (5.0,))
    d = _report((proc,), target=99.0)["procedures"][0]
    q1 = 50.0 / (50.0 + 10 ** _log_d_acid(4.5) * 5.0)
    n = math.ceil(math.log(1 - 0.99) / math.log(q1))
    assert d["steps_needed"] == {"portions": n, "organic_mL_total": 5.0 * n,
                                 "per_portion_mL": 5.0}


def test_steps_needed_unreachable_is_null():
    proc = Procedure("P1", "x", 9.0, 50.0, (1.0,))          # fully ionised: D tiny
    d = _report((proc,), target=99.0)["procedures"][0]
    assert d["steps_needed"] is None
    assert "more than" in d["steps_needed_note"]


def test_worst_case_closed_form_for_an_acid():
    # an acid extracts worse at higher pH, with more water and less solvent
    proc = Procedure("P1", "x", 4.0, 20.0, (10.0, 10.0), pH_tolerance=0.3,
                     volume_tolerance_pct=5.0)
    wc = _report((proc,))["procedures"][0]["worst_case"]
    assert wc["pH"] == pytest.approx(4.3)
    assert wc["aqueous_mL"] == pytest.approx(21.0)
    assert wc["organic_mL"] == pytest.approx([9.5, 9.5])
    D = 10 ** _log_d_acid(4.3)
    expected = 100 * (1 - (21.0 / (21.0 + D * 9.5)) ** 2)
    assert wc["recovery_pct"] == pytest.approx(expected, rel=1e-6)


def test_worst_case_for_a_base_is_on_the_acid_side():
    proc = Procedure("P1", "x", 9.0, 20.0, (10.0,), pH_tolerance=0.2)
    wc = _report((proc,), model="base", theta=(2.6, 8.3),
                 pH=[6.5, 7.5, 8.3, 9.0, 10.0])["procedures"][0]["worst_case"]
    assert wc["pH"] == pytest.approx(8.8)


def test_pH_window_closed_form():
    proc = Procedure("P1", "x", 3.0, 25.0, (10.0, 10.0))
    d = _report((proc,), target=99.0)["procedures"][0]
    d_star = ((1 - 0.99) ** (-1 / 2) - 1) * 25.0 / 10.0
    # acid: D = K / (1 + 10^(pH - pKa)) >= D*  <=>  pH <= pKa + log10(K / D* - 1)
    upper = PKA + math.log10(10 ** LOGK / d_star - 1)
    lo, hi = d["pH_window"]
    assert hi == pytest.approx(upper, abs=2e-3)
    # the window is clipped to the runs (pH 2.5 less the 0.05 slack of extrapolation.py); the
    # part below, down to the traced range's start 2 units below the data, is named
    assert lo == pytest.approx(2.45)
    assert d["pH_window_extrapolated"] == [[0.5, 2.45]]
    assert "beyond the runs" in d["pH_window_note"] and "extrapolated" in d["pH_window_note"]
    assert "edge of the traced range" not in d["pH_window_note"]


def test_best_split_never_beats_the_limit():
    proc = Procedure("P1", "x", 4.5, 25.0, (30.0,))
    d = _report((proc,))["procedures"][0]
    rec = [row["recovery_pct"] for row in d["best_split"]]
    assert all(b > a for a, b in zip(rec, rec[1:]))
    assert rec[-1] < d["split_limit_recovery_pct"]


def test_equal_portions_recovery_is_the_general_formula_to_the_bit():
    # the scalar recovery adds one log1p term n times for n equal portions instead of n equal
    # terms: the same operations in the same order, so exactly the number the general formula
    # (100 (1 - prod q_i) in log form, one log1p per portion, written out here) gives
    from extractval.procedures import recovery_pct_from_log_d

    def general(x, aq, portions):
        try:
            d = 10.0 ** x
        except OverflowError:
            d = math.inf
        if math.isnan(d):
            return math.nan
        log_q = 0.0
        for v in portions:
            log_q += math.log1p(d * v / aq)
        return 100.0 * (1.0 - math.exp(-log_q))

    rng = np.random.default_rng(20261205)
    log_d = np.concatenate([rng.uniform(-8.0, 8.0, 300), [0.0, -400.0, 400.0, np.inf, -np.inf,
                                                           np.nan]])
    for x in log_d.tolist():
        for aq, v, n in ((25.0, 30.0, 1), (10.0, 3.3, 3), (50.0, 1.7, 7), (7.5, 0.2, 10)):
            got = float(recovery_pct_from_log_d(x, aq, [v] * n))
            want = general(x, aq, [v] * n)
            assert got == want or (math.isnan(got) and math.isnan(want))


def test_design_space_map_matches_closed_form():
    proc = Procedure("P1", "x", 3.0, 25.0, (10.0,))
    ds = _report((proc,))["design_space"]
    i = ds["pH"].index(3.5)
    j = 4
    r = ds["volume_ratio"][j]
    D = 10 ** _log_d_acid(3.5)
    for k, n in enumerate(ds["portions"]):
        expected = 100 * (1 - (1 / (1 + D * r)) ** n)
        assert ds["recovery_lo_pct"][k][i][j] == pytest.approx(expected, rel=1e-5)
    assert ds["procedures"][0]["volume_ratio"] == pytest.approx(0.4)
    assert np.shape(ds["recovery_lo_pct"]) == (3, len(ds["pH"]), len(ds["volume_ratio"]))


def test_design_space_names_the_measured_pH_span():
    ds = _report((Procedure("P1", "x", 3.0, 25.0, (10.0,)),))["design_space"]
    assert ds["measured_pH"] == [min(PH), max(PH)]
    # the map reaches beyond the measured span: that part is an extrapolation
    assert ds["pH"][0] < min(PH) and ds["pH"][-1] > max(PH)


def test_design_space_places_each_procedure_or_says_why_not():
    procs = (Procedure("EQ", "x", 3.5, 25.0, (10.0, 10.0)),
             Procedure("MANY", "x", 3.5, 25.0, (5.0,) * 5),
             Procedure("BIG", "x", 3.5, 10.0, (30.0,)),
             Procedure("FAR", "x", 13.5, 25.0, (10.0,)),
             Procedure("UNEQ", "x", 3.5, 100.0, (10.0, 24.2)))
    report = _report(procs)
    ds = report["design_space"]
    by_id = {p["id"]: p for p in ds["procedures"]}
    assert by_id["EQ"] == {"id": "EQ", "pH": 3.5, "volume_ratio": 0.4, "portions": 2,
                           "equal_portions": True, "on_map": True, "map_note": None}
    assert not by_id["MANY"]["on_map"] and "5 portions" in by_id["MANY"]["map_note"]
    assert not by_id["BIG"]["on_map"] and "organic:aqueous 3 per portion" in \
        by_id["BIG"]["map_note"]
    assert not by_id["FAR"]["on_map"] and "pH 13.5" in by_id["FAR"]["map_note"]
    uneq = by_id["UNEQ"]
    assert uneq["on_map"] and not uneq["equal_portions"] and "unequal" in uneq["map_note"]
    # the claim of the note: at its mean portion the map bounds its lower-end recovery above
    j = ds["volume_ratio"].index(uneq["volume_ratio"])
    i = ds["pH"].index(3.5)
    own = next(p for p in report["procedures"] if p["id"] == "UNEQ")["recovery_pct"]["ci95"][0]
    assert ds["recovery_lo_pct"][1][i][j] > own


def test_design_space_map_is_the_cell_by_cell_recovery():
    # the map is computed for all cells at once; each cell must be the procedure formula
    from extractval.procedures import MAP_RATIOS, recovery_pct_from_log_d
    from extractval.results import clean

    proc = Procedure("P1", "x", 3.0, 25.0, (10.0,))
    study = simulated_study("MAP", "acid", (LOGK, PKA), PH, (proc,), sigma=0.04, form="recovery",
                            ratios=(0.05, 0.1, 0.2), targets=Targets(recovery_pct=95.0), rng=3)
    report = fit_study(study)
    ds = report.to_dict()["design_space"]
    for k, n in enumerate(ds["portions"]):
        for i, lo in enumerate(report.band.lo):
            for j, r in enumerate(MAP_RATIOS):
                cell = ds["recovery_lo_pct"][k][i][j]
                if not np.isfinite(lo):
                    assert cell is None
                else:
                    assert cell == clean(float(recovery_pct_from_log_d(lo, 10.0, [r * 10.0] * n)),
                                         6)


@pytest.mark.parametrize("array_rounding", [True, False])
def test_design_space_cells_are_the_general_formula_cleaned(array_rounding, monkeypatch):
    # the map sums one log1p term per portion; each cell must be what the general formula (a
    # sum over the portions) and clean_all give, table by table; also where clean_all's array
    # rounding declines (None) and every value is cleaned on its own
    from extractval import results
    from extractval.procedures import MAP_PORTIONS, MAP_RATIOS, LogDBand, design_space
    from extractval.results import clean_all

    if not array_rounding:
        monkeypatch.setattr(results, "round_significant", lambda a, digits: None)
    rng = np.random.default_rng(11)
    pH = np.arange(0.0, 12.5, 0.5)
    lo = rng.uniform(-4.0, 4.0, pH.size)
    lo[3], lo[7], lo[-1] = np.nan, -20.0, 350.0
    band = LogDBand(pH, lo + 0.5, lo, lo + 1.0, "test")
    ds = design_space(band, (), 95.0)
    with np.errstate(over="ignore"):
        D = np.power(10.0, np.where(np.isfinite(lo), lo, 0.0))
    for k, n in enumerate(MAP_PORTIONS):
        portions = np.repeat(np.array(MAP_RATIOS)[:, None] * 10.0, n, axis=1)
        rec = 100.0 * (1.0 - np.exp(-np.sum(np.log1p(D[:, None, None] * portions / 10.0),
                                            axis=-1)))
        flat = clean_all(rec.ravel(), 6)
        w = len(MAP_RATIOS)
        assert ds["recovery_lo_pct"][k] == [flat[i * w:(i + 1) * w] if np.isfinite(x)
                                            else [None] * w for i, x in enumerate(lo)]


def test_clean_all_is_clean_of_each_value():
    # the one-pass cleaning of a column or an array writes what clean() writes for each value:
    # Python's own format(x, ".<n>g") as reference, None for missing and non-finite values
    from extractval.results import clean, clean_all

    values = [None, 1, 2.5, float("nan"), float("inf"), -0.0, np.float64(1 / 3), 123456.789e-12]
    assert clean_all(values) == [clean(x) for x in values]
    assert clean_all(np.array([1 / 3, 2.0 / 7.0, np.nan]), 6) == [
        float(format(1 / 3, ".6g")), float(format(2.0 / 7.0, ".6g")), None]


def test_rounding_a_long_array_at_once_writes_what_format_writes():
    # clean_all rounds a long float array with array operations (round_significant); the
    # reference is Python's own format(x, ".<n>g") for every value: random values over 24
    # decades, values that are exact halves at the last kept digit (rounded to even by both),
    # exact powers of ten, zeros and non-finite values
    from extractval.results import clean_all, round_significant

    rng = np.random.default_rng(20261204)
    values = np.concatenate([
        rng.uniform(-1.0, 1.0, 60000) * 10.0 ** rng.integers(-14, 10, 60000),
        np.array([0.125, 2.5, 0.5, 1.5, 12.5, 1e-7, 1e5, 100.0, 0.0, -0.0, 99.99995]),
        np.array([np.nan, np.inf, -np.inf])])
    for digits in (2, 3, 6, 10):
        assert clean_all(values, digits) == [
            None if not np.isfinite(x) else float(format(x, f".{digits}g")) for x in values]
    # where array operations could not round exactly, it says so (the caller then formats)
    assert round_significant(np.array([1.5e12]), 6) is None
    assert clean_all(np.full(100, 1.5e12), 6) == [1.5e12] * 100
