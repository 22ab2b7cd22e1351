"""Multi-step work-ups: the product formula by hand, separation factor, region intervals.

References: the single-equilibration relation q = V_aq / (V_aq + D V_org) and its product over
fresh portions (IUPAC Gold Book D01817, F02503; the worked check of tests/reference/handbook.py),
separation factor beta = D_1 / D_2 (IUPAC Gold Book S05603), and the fit's own profile-likelihood
intervals (checked against lmfit in tests/test_fit_reference.py) as the reference for the
region ranges.
"""

import numpy as np
import pytest

from extractval.analysis import build_observations
from extractval.fitting import fit_model
from extractval.models import MODELS
from extractval.simulate import simulate_runs
from extractval.workup import (Solute, Step, best_pH_pair, check_steps,
                               log_fraction_to_product, log_separation_factor, predict_workup,
                               separation_curve)
from tests.reference import handbook as ref


def _fit(model, theta, pH, seed, sigma=0.04, form="both"):
    runs = simulate_runs(model, theta, pH, sigma=sigma, form=form, rng=seed)
    obs, _ = build_observations(runs)
    return fit_model(obs, MODELS[model])


def _declared(name, model, theta, ratio=None):
    return Solute(name, MODELS[model], np.asarray(theta, dtype=float), None,
                  "declared for the test", ratio)


def test_extraction_alone_is_the_gold_book_worked_check():
    # D = 2, 100 mL water, four 50 mL portions leave 0.0625 in the water (handbook.py)
    steps = [Step("extract", 7.0, (ref.WORKED_V_AQ,), (ref.WORKED_V_ORG,) * 4)]
    got = 10 ** log_fraction_to_product([np.log10(ref.WORKED_D)], steps)
    assert float(got) == pytest.approx(1 - ref.WORKED_REMAINING[3], rel=1e-12)


def test_extract_wash_back_extract_by_hand():
    """Worked by hand from q = V_aq / (V_aq + D V_org) at each equilibration.

    Analyte: D = 10 at the extraction pH, 100 mL feed, one 50 mL portion: 1 - 100/600 = 5/6
    in the solvent. Wash with 25 mL water at D = 10: keeps 500/525 = 20/21. Back-extraction
    with 50 mL water at D = 0.1: 5/55 stays in the solvent, 10/11 goes to the water.
    Product fraction 5/6 * 20/21 * 10/11 = 1000/1386.
    Impurity: D = 1 at every step: 1/3, then 50/75 = 2/3, then 1/2: 1/9.
    Purity at a 1:1 feed: (1000/1386) / (1000/1386 + 1/9).
    """
    steps = [Step("extract", 9.0, (100.0,), (50.0,)), Step("wash", 9.0, (25.0,)),
             Step("back-extract", 2.0, (50.0,))]
    fa = 10 ** log_fraction_to_product(np.log10([10.0, 10.0, 0.1]), steps)
    fi = 10 ** log_fraction_to_product(np.log10([1.0, 1.0, 1.0]), steps)
    assert float(fa) == pytest.approx(1000 / 1386, rel=1e-12)
    assert float(fi) == pytest.approx(1 / 9, rel=1e-12)
    # the same with the module's solutes (declared constants: no intervals)
    a = Solute("A", MODELS["neutral"], np.array([1.0]), None, "test")
    analyte_pred = predict_workup(a, [], [Step("extract", 9.0, (100.0,), (50.0,))])
    assert analyte_pred.recovery_pct.value == pytest.approx(100 * 5 / 6, rel=1e-12)
    # declared impurity at a 1:1 feed, analyte as a declared base with these D values
    base = _declared("amine", "base", (1.0, 5.0))            # D = 10 far above pKa 5
    imp = _declared("impurity", "neutral", (0.0,), ratio=1.0)  # D = 1 everywhere
    steps2 = [Step("extract", 12.0, (100.0,), (50.0,)), Step("wash", 12.0, (25.0,))]
    pred = predict_workup(base, [imp], steps2)
    fa2 = 5 / 6 * 20 / 21
    fi2 = 1 / 3 * 2 / 3
    assert pred.recovery_pct.value == pytest.approx(100 * fa2, rel=1e-6)
    assert pred.carry_over_pct["impurity"].value == pytest.approx(100 * fi2, rel=1e-12)
    assert pred.purity_pct["value"] == pytest.approx(100 * fa2 / (fa2 + fi2), rel=1e-6)
    assert pred.impurity_content_pct.value == pytest.approx(100 * fi2 / (fa2 + fi2), rel=1e-6)
    # separation factor at the extraction pH: 10 / 1
    assert pred.log_beta["impurity"][0].value == pytest.approx(1.0, abs=1e-6)


def test_steps_are_checked():
    assert check_steps([Step("wash", 7.0, (10.0,))]).startswith("the first step")
    assert "last step" in check_steps([Step("extract", 7.0, (10.0,), (5.0,)),
                                       Step("back-extract", 2.0, (5.0,)),
                                       Step("wash", 2.0, (5.0,))])
    assert check_steps([Step("extract", 7.0, (10.0,), (5.0,))]) is None
    with pytest.raises(ValueError):
        Step("rinse", 7.0, (1.0,))


@pytest.mark.parametrize("pH0", [3.0, 4.2, 6.5])
def test_region_range_of_log_d_is_the_profile_interval(pH0):
    """For log D at one pH the range over the region is the profile interval (same threshold)."""
    fit = _fit("acid", (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID),
               [2.5, 3.5, 4.0, 4.5, 5.0, 6.0], seed=3)
    a = Solute.fitted("benzoic acid", fit)
    declared = _declared("marker", "neutral", (0.0,))
    q = log_separation_factor(a, declared, pH0)       # = log D of the analyte (log D = 0)
    ref_ci = fit.log_d_interval(pH0).ci95
    assert q.ci95.lo == pytest.approx(ref_ci.lo, abs=2e-4)
    assert q.ci95.hi == pytest.approx(ref_ci.hi, abs=2e-4)


def test_product_region_is_wider_than_each_alone():
    analyte = Solute.fitted("amine", _fit("base", (ref.LOGP_ANILINE, ref.PKA_ANILINIUM),
                                          [3.0, 4.0, 4.6, 5.2, 6.0, 7.0], seed=5))
    imp = Solute.fitted("acid", _fit("acid", (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID),
                                     [2.5, 3.5, 4.0, 4.5, 5.0, 6.0], seed=6))
    q = log_separation_factor(analyte, imp, 4.5)
    la = analyte.fit.log_d_interval(4.5)
    li = imp.fit.log_d_interval(4.5)
    assert q.value == pytest.approx(la.value - li.value, abs=1e-9)
    # each region at sqrt(0.95) is wider than at 0.95: the difference's range is wider than
    # the difference of the 95 % ends
    assert q.ci95.lo < la.ci95.lo - li.ci95.hi
    assert q.ci95.hi > la.ci95.hi - li.ci95.lo
    assert "Sidak" in q.ci95.method
    curve = separation_curve(analyte, imp, 3.0, 5.0)
    assert len(curve["pH"]) == 9 and curve["log_beta"][6] == pytest.approx(q.value, abs=1e-5)


def test_recovery_interval_covers_the_truth():
    """A simulation check: the region interval of a three-step recovery covers the true value
    in about 95 % of 60 seeded studies (binomial: at least 51 of 60 at the 1 % level)."""
    truth = (ref.LOGP_ANILINE + 1.0, ref.PKA_ANILINIUM)
    steps = [Step("extract", 7.0, (50.0,), (20.0, 20.0)), Step("wash", 6.0, (20.0,)),
             Step("back-extract", 3.0, (30.0,))]
    true_sol = _declared("amine", "base", truth)
    true_rec = predict_workup(true_sol, [], steps).recovery_pct.value
    hits = 0
    for seed in range(60):
        fit = _fit("base", truth, [3.0, 4.0, 5.0, 6.0, 7.0], seed=100 + seed, sigma=0.05)
        ci = predict_workup(Solute.fitted("amine", fit), [], steps).recovery_pct.ci95
        hits += (ci.lo is None or ci.lo <= true_rec) and (ci.hi is None or true_rec <= ci.hi)
    assert hits >= 51


def test_best_pair_puts_an_amine_and_an_acid_apart():
    """An invented aliphatic amine (log K 2.0, pKa 9.3 of its conjugate acid) and benzoic acid
    as the impurity (handbook constants, declared): the amine goes into the solvent at high pH
    and back into acid water; the acid stays ionised in the water at high pH. The chosen pair
    must meet the target at the region's lower end and be the purest pair on the grid among
    those that pass the screen."""
    amine = Solute.fitted("amine", _fit("base", (2.0, 9.3),
                                        [3.0, 5.0, 7.0, 8.0, 9.0, 10.0, 11.0, 12.0], seed=9))
    acid = _declared("acid impurity", "acid", (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID),
                     ratio=0.1)
    steps = [Step("extract", 11.0, (50.0,), (25.0, 25.0)), Step("back-extract", 7.0, (25.0, 25.0))]
    out = best_pH_pair(amine, [acid], steps, 95.0, (3.0, 12.0))
    pair = out["pair"]
    assert pair is not None
    assert pair["extract_pH"] >= 10.0 and pair["last_step_pH"] <= 6.0
    assert pair["prediction"]["recovery_pct"]["ci95"][0] >= 95.0
    grid = out["map"]
    content = np.array(grid["log10_impurity_content"], dtype=float)
    lo = np.array(grid["recovery_lower_pct"], dtype=float)
    i = grid["pH"].index(pair["extract_pH"])
    j = grid["pH"].index(pair["last_step_pH"])
    assert content[i, j] == pytest.approx(np.nanmin(np.where(lo >= 95.0, content, np.nan)),
                                          abs=1e-9)
    # and the purity beats a single extraction at the same pH (no back-extraction)
    single = predict_workup(amine, [acid], [steps[0]])
    assert (pair["prediction"]["impurity_content_pct"]["value"]
            < single.impurity_content_pct.value)
