"""Behaviour of the fit on simulated studies with known truth."""

import dataclasses
import json

import numpy as np
import pytest

from extractval.analysis import build_observations, fit_study
from extractval.fitting import INTERVAL_METHOD, FitImpossible, fit_model
from extractval.models import MODELS
from extractval.procedures import predict_procedure
from extractval.simulate import simulate_runs, simulated_study
from extractval.study import Location, Procedure, Run, Targets
from tests.reference import handbook as ref

CASES = [
    ("neutral", (ref.LOGP_PHENOL,), [6.0, 7.0]),
    ("acid", (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID), [2.5, 3.5, 4.2, 5.0, 6.0]),
    ("base", (ref.LOGP_ANILINE, ref.PKA_ANILINIUM), [3.0, 4.0, 4.6, 5.5, 7.0]),
    ("ampholyte", (2.0, 3.5, 9.5), [1.5, 2.5, 3.5, 5.0, 6.5, 8.0, 9.5, 10.5, 11.5]),
]


@pytest.mark.parametrize("model, theta, pH", CASES)
@pytest.mark.parametrize("form", ["both", "organic", "aqueous", "recovery"])
def test_noise_free_data_reproduce_parameters(model, theta, pH, form):
    runs = simulate_runs(model, theta, pH, sigma=0.0, form=form, rng=0)
    obs, _ = build_observations(runs)
    fit = fit_model(obs, MODELS[model], intervals=False)
    assert fit.theta == pytest.approx(np.array(theta), abs=1e-4)


def test_ion_pair_noise_free():
    theta = (2.6, 8.3, -0.5)
    runs = simulate_runs("base", theta, [5, 6, 7, 8, 9, 10, 11], sigma=0.0, form="both",
                         ion_pair=True, rng=0)
    obs, _ = build_observations(runs)
    fit = fit_model(obs, MODELS["base+ion_pair"], MODELS["base"], intervals=False)
    assert fit.theta == pytest.approx(np.array(theta), abs=1e-4)


def test_complete_recoveries_neither_crash_nor_dominate():
    # a strongly extracted acid: most recoveries read 100 % or above (assay noise)
    runs = simulate_runs("acid", (3.5, 4.2), [2.0, 3.0, 4.0, 5.0, 6.0, 7.0], sigma=0.03,
                         form="recovery", rng=4)
    runs = tuple(dataclasses.replace(r, recovery_pct=100.0) if r.pH <= 3.0 else r for r in runs)
    assert sum(r.recovery_pct >= 100.0 for r in runs) >= 12
    obs, _ = build_observations(runs)
    fit = fit_model(obs, MODELS["acid"])
    # the informative runs above the pKa still fix log K + pKa (log D ~ log K + pKa - pH there)
    assert np.isfinite(fit.theta).all()
    assert fit.theta[1] + fit.theta[0] == pytest.approx(4.2 + 3.5, abs=0.1)


def test_all_recoveries_complete_give_open_interval_not_a_number():
    runs = simulate_runs("neutral", (4.0,), [7.0], sigma=0.0, form="recovery", replicates=4)
    found = (99.6, 100.3, 100.9, 99.9) * 3           # complete extraction read with assay noise
    runs = tuple(dataclasses.replace(r, recovery_pct=v) for r, v in zip(runs, found))
    obs, _ = build_observations(runs)
    fit = fit_model(obs, MODELS["neutral"])
    est = fit.parameters["logK"]
    assert est.ci95.hi is None
    assert any("logK" in w for w in fit.warnings)


def test_runs_all_on_one_side_of_pKa_say_so():
    # a base measured only far below its pKa: log D = log K - (pKa - pH); only the difference
    # is determined
    runs = simulate_runs("base", (2.6, 8.3), [3.0, 4.0, 5.0], sigma=0.03, form="both", rng=2)
    study = simulated_study("SIDE", "base", (2.6, 8.3), [3.0, 4.0, 5.0], sigma=0.03, rng=2)
    report = fit_study(study)
    d = report.to_dict()
    assert len(runs) == d["runs"]["used"]
    open_ends = [e for p in d["parameters"].values() for e in p["ci95"] if e is None]
    assert open_ends, d["parameters"]
    assert any("pKa" in w for w in d["warnings"])
    # only log K - pKa is determined and pKa runs into its upper search limit, so log K is not
    # bounded above either: an upper end there would be pKa's limit, not the data's
    assert d["parameters"]["logK"]["ci95"][1] is None
    assert any(w.startswith("logK is poorly determined") and "pKa reaches its search limit" in w
               for w in d["warnings"])


def test_ampholyte_at_two_pH_values_completes_with_open_ends_and_warnings():
    # three parameters, two pH values: a curve of parameter sets fits the runs equally well, so
    # the profile fits walk along a flat valley; they used to run into their iteration cap
    # (tens of seconds per study). Every parameter must come out with an open end and a warning.
    proc = Procedure("P1", "two portions at pH 7", 7.0, 25.0, (10.0, 10.0))
    study = simulated_study("AMP2", "ampholyte", (2.0, 3.5, 9.5), [4.0, 9.0], (proc,),
                            sigma=0.04, form="both", rng=0, targets=Targets(recovery_pct=95))
    report = fit_study(study)
    d = json.loads(json.dumps(report.to_dict(), allow_nan=False))
    assert d["problems"] == [] and d["model"] == "ampholyte"
    for name, est in d["parameters"].items():
        lo, hi = est["ci95"]
        assert lo is None or hi is None, (name, est)
        assert lo is None or lo <= est["value"] <= (np.inf if hi is None else hi), (name, est)
        assert any(w.startswith(name) and ("poorly determined" in w or "search limit" in w)
                   for w in d["warnings"]), (name, d["warnings"])
    # log D is pinned down at the two measured pH values; elsewhere the band can only widen as
    # far as the model lets log D move, at most one unit per pH unit (|d log D / d pH| <= 1)
    band = d["curve"]
    at = {ph: i for i, ph in enumerate(band["pH"])}
    for ph in (4.0, 9.0):
        assert band["hi"][at[ph]] - band["lo"][at[ph]] < 0.1
    tol = 2e-5        # the curve keeps 6 significant digits
    for ph, lo, hi in zip(band["pH"], band["lo"], band["hi"]):
        assert lo is not None and hi is not None, ph
        assert lo >= max(band["lo"][at[m]] - abs(ph - m) for m in (4.0, 9.0)) - tol, ph
        assert hi <= min(band["hi"][at[m]] + abs(ph - m) for m in (4.0, 9.0)) + tol, ph


def test_excluded_and_unusable_runs_stay_visible():
    study = simulated_study("VIS", "acid", (1.88, 4.21), [3.0, 4.0, 5.0], sigma=0.03,
                            form="recovery", rng=1)
    runs = list(study.runs)
    runs[0] = dataclasses.replace(runs[0], excluded="phase separation incomplete (emulsion)")
    runs[1] = dataclasses.replace(runs[1], recovery_pct=0.0)
    report = fit_study(dataclasses.replace(study, runs=tuple(runs)))
    d = report.to_dict()
    assert d["runs"] == {"used": 16, "excluded": 1, "not_usable": 1, "total": 18}
    rows = {r["run"]: r for r in d["run_table"]}
    assert rows[runs[0].run_id]["status"] == "excluded"
    assert "emulsion" in rows[runs[0].run_id]["reason"]
    assert rows[runs[1].run_id]["status"] == "not usable"
    assert any(runs[1].run_id in w for w in d["warnings"])


def test_too_few_runs_is_a_clear_message():
    runs = simulate_runs("acid", (1.88, 4.21), [4.0], ratios=(1.0,), replicates=2, sigma=0.02)
    obs, _ = build_observations(runs)
    with pytest.raises(FitImpossible, match="needs at least 3 runs"):
        fit_model(obs, MODELS["acid"])


def test_procedure_prediction_matches_closed_form_on_noise_free_fit():
    proc = Procedure("P1", "three portions", 3.0, 25.0, (10.0, 10.0, 10.0))
    study = simulated_study("NF", "acid", (1.88, 4.21), [2.5, 3.5, 4.2, 5.0, 6.0], (proc,),
                            sigma=0.0, form="both")
    d = fit_study(study).to_dict()
    logd = 1.88 - np.log10(1 + 10 ** (3.0 - 4.21))
    q = (25.0 / (25.0 + 10 ** logd * 10.0)) ** 3          # IUPAC Gold Book F02503
    pr = d["procedures"][0]
    assert pr["remaining_fraction"]["value"] == pytest.approx(q, rel=1e-6)
    assert pr["recovery_pct"]["value"] == pytest.approx(100 * (1 - q), rel=1e-8)
    assert [a["value"] for a in pr["after_portions"]] == pytest.approx(
        [(25.0 / (25.0 + 10 ** logd * 10.0)) ** n for n in (1, 2, 3)], rel=1e-6)


def test_prediction_interval_contains_value_and_orders_ends():
    proc = Procedure("P1", "one portion", 4.5, 20.0, (10.0,))
    study = simulated_study("PI", "acid", (1.88, 4.21), [2.5, 3.5, 4.2, 5.0, 6.0], (proc,),
                            sigma=0.05, form="recovery", rng=8)
    pr = fit_study(study).to_dict()["procedures"][0]
    lo, hi = pr["recovery_pct"]["ci95"]
    assert lo < pr["recovery_pct"]["value"] < hi
    qlo, qhi = pr["remaining_fraction"]["ci95"]
    # the dict keeps 10 significant digits, so 1 - hi / 100 is known to 5e-11 (hi ~ 95 %)
    assert qlo == pytest.approx(1 - hi / 100, abs=1e-10)
    assert qhi == pytest.approx(1 - lo / 100, abs=1e-10)


def test_ion_pair_warns_when_k_ion_cannot_be_told_from_zero():
    # simple acid data (no ion-pair partitioning) fitted with the ion-pair model
    study = simulated_study("IP", "acid", (1.88, 4.21), [2.5, 3.5, 4.2, 5.0, 6.0], sigma=0.03,
                            rng=3, form="both")
    study = dataclasses.replace(study, ion_pair=True)
    d = fit_study(study).to_dict()
    assert d["model"] == "acid+ion_pair"
    assert d["parameters"]["logK_ion"]["ci95"][0] is None
    assert any("K_I from zero" in w for w in d["warnings"])


def test_auto_with_too_few_runs_for_aicc_takes_the_simplest_model():
    # found by tests/test_properties.py: with two runs AICc is infinite (n <= k + 1) for every
    # model that can be fitted, and choosing among them raised instead of answering
    study = simulated_study("TWO", "acid", (1.88, 4.21), [3.0, 5.0], ratios=(1.0,),
                            replicates=1, sigma=0.03, form="both", rng=1, fit_model="auto")
    d = fit_study(study).to_dict()
    assert d["model"] == "neutral" and d["problems"] == []
    assert np.isfinite(d["parameters"]["logK"]["value"])
    assert [c["model"] for c in d["model_selection"]["candidates"]] == ["neutral", "acid", "base"]


def test_flat_profile_gives_the_conservative_end_not_an_error():
    # found by tests/test_properties.py: an ampholyte measured noise-free at pH 0, 0.01 and 9
    # only. Its log D profiles are flat, and the warm-started inner fits disagree between two
    # evaluations at the same point, which made the root finder fail while tracing the band
    # (at pH 6.5, warm-started from the ends found at pH 6.0).
    found = {0.0: (99.93092886378255, 0.06907113621744639),
             0.01: (99.92933388381661, 0.07066611618339544),
             9.0: (99.89750897927226, 0.10249102072774807)}
    runs = tuple(Run(f"R{i}", pH, 10.0, 0.1, Location("simulated", line=i + 2), spiked=100.0,
                     found_aqueous=found[pH][0], found_organic=found[pH][1])
                 for i, pH in enumerate((0.0, 0.0, 9.0, 9.0, 0.01, 0.01)))
    study = dataclasses.replace(simulated_study("FLAT", "ampholyte", (1.0, 2.0, 9.0), [7.0]),
                                runs=runs)
    fit = fit_study(study).fit
    est = fit.log_d_interval(6.5, hint=(0.20508553306423277, 1.443789456286197))
    assert est.ci95.lo is None or est.ci95.lo <= est.value
    assert est.ci95.hi is None or est.value <= est.ci95.hi
    assert est.ci95.method == INTERVAL_METHOD


def test_interval_end_beyond_the_float_range_of_D_is_complete_extraction(monkeypatch):
    # found by tests/test_properties.py: a Wald end of a barely bounded fit can exceed
    # log D = 308, where 10.0 ** x overflows a Python float
    proc = Procedure("P1", "two portions", 3.0, 25.0, (10.0, 10.0))
    study = simulated_study("WIDE", "acid", (1.88, 4.21), [2.5, 3.5, 4.2, 5.0, 6.0], (proc,),
                            sigma=0.05, form="both", rng=2)
    fit = fit_study(study).fit
    est = fit.log_d_interval(3.0)
    wide = dataclasses.replace(est, ci95=dataclasses.replace(est.ci95, hi=400.0))
    monkeypatch.setattr(fit, "log_d_interval", lambda pH, hint=None: wide)
    pred = predict_procedure(fit, proc)
    assert pred.recovery_pct.ci95.hi == 100.0
    assert pred.remaining_fraction.ci95.lo == 0.0
    assert [a.ci95.lo for a in pred.after_portions] == [0.0, 0.0]
    assert pred.split_limit_remaining.ci95.lo == 0.0
    assert pred.recovery_pct.ci95.lo == pytest.approx(fit_study(study).predictions[0]
                                                      .recovery_pct.ci95.lo, rel=1e-12)
