"""Next-run advice: the Fisher-information prediction, the choice of target, the reading of
``advice:`` and, by seeded simulation, that following the advice narrows a weak pKa interval."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import statsmodels.api as sm

from extractval.advice import (BATCH_SIZES, advise, build_candidates, choose_target,
                               predicted_variance, usable_pH_range, weighted_rows)
from extractval.analysis import build_observations, fit_study
from extractval.fitting import Observations, fit_model
from extractval.models import MODELS
from extractval.simulate import simulate_runs, simulated_study
from extractval.study import AdviceRequest, check_study
from tests.study_factory import STUDY_YAML, write_study

PROC = dict(id="P1", label="two portions at pH 3", pH=3.0, aqueous_mL=50.0, organic_mL=(10, 10))
PROC2 = dict(id="P2", label="one portion at pH 6", pH=6.0, aqueous_mL=50.0, organic_mL=(5,))


def _study(pH, theta=(2.0, 5.0), model="acid", rng=1, advice=None, procedures=(), **kw):
    st = simulated_study("ADV", model, theta, pH, procedures, rng=rng, **kw)
    return st if advice is None else dataclasses.replace(st, advice=advice)


def _with_runs(study, runs):
    return dataclasses.replace(study, runs=study.runs + tuple(runs))


def _new_runs(theta, design, rng, sigma=0.04, model="acid"):
    """Simulated runs at the (pH, ratio, form) of a design, from the true model."""
    out = []
    for j, (pH, ratio, form) in enumerate(design):
        run, = simulate_runs(model, theta, [pH], ratios=(ratio,), replicates=1, sigma=sigma,
                             form=form, rng=rng)
        out.append(dataclasses.replace(run, run_id=f"NEW{j + 1}"))
    return out


def _pka_width(study) -> float:
    ci = fit_study(study).fit.parameters["pKa"].ci95
    return np.inf if ci.lo is None or ci.hi is None else ci.hi - ci.lo


# -- the criterion against references ---------------------------------------------------------
def test_weighted_rows_match_numeric_derivatives_of_what_the_fit_sees():
    """A candidate run adds the row d y / d theta / f to J: central differences of
    Observations.predict (log E, log q and log D at several ratios) agree."""
    study = _study([2, 3, 4, 5, 6, 7], form="organic", ratios=(0.5, 2.0))
    fit = fit_study(study).fit
    cands = build_candidates(fit, study, (2.0, 8.0))
    cands = dataclasses.replace(cands, form=tuple(["organic", "aqueous", "both"][i % 3]
                                                  for i in range(cands.size)))
    rows = weighted_rows(fit, cands)
    obs = cands.observations(np.arange(cands.size))
    num = np.empty_like(rows)
    for j in range(fit.p):
        d = np.zeros(fit.p)
        d[j] = 1e-6
        up = obs.predict(fit.model.log_d(obs.pH, fit.theta + d))[0]
        dn = obs.predict(fit.model.log_d(obs.pH, fit.theta - d))[0]
        num[:, j] = (up - dn) / 2e-6 / obs.sd_factor
    np.testing.assert_allclose(rows, num, rtol=1e-6, atol=1e-9)


def test_predicted_variance_is_the_refit_covariance_for_runs_on_the_curve():
    """Runs that land exactly on the fitted curve leave the estimate where it is, so the refit's
    Gauss-Newton covariance (its J'J, scaled by the same s^2) is what the criterion predicts."""
    study = _study([2, 3, 4, 5, 6, 7, 8], ratios=(1.0,))
    fit = fit_study(study).fit
    advice = advise(fit, study)
    idx = advice.batches[1][0]                     # the batch of 3
    new = advice.candidates.observations(idx)
    y_new, _ = new.predict(fit.model.log_d(new.pH, fit.theta))
    obs = fit.obs
    both = Observations(obs.run_ids + new.run_ids, np.concatenate([obs.pH, new.pH]),
                        np.concatenate([obs.log_ratio, new.log_ratio]), obs.kind + new.kind,
                        np.concatenate([obs.y, y_new]))
    refit = fit_model(both, fit.model, intervals=False)
    np.testing.assert_allclose(refit.theta, fit.theta, atol=1e-6)
    unscaled = np.linalg.inv(refit.jac.T @ refit.jac)
    rows = weighted_rows(fit, advice.candidates, idx=idx)
    for j in range(fit.p):
        c = np.eye(fit.p)[j]
        pred = predicted_variance(fit, c, rows)
        assert pred == pytest.approx(fit.residual_sd ** 2 * unscaled[j, j], rel=1e-5)


def test_predicted_variance_matches_statsmodels_wls_for_the_linear_model():
    """For the neutral model (log D = log K, linear) the variance after adding k runs is
    s^2 (X'WX)^-1 of the augmented weighted regression: statsmodels WLS normalized_cov_params."""
    study = _study([3, 5, 7], model="neutral", theta=(1.2,), form="both", ratios=(1.0, 2.0))
    fit = fit_study(study).fit
    advice = advise(fit, study)
    for idx, width in advice.batches:
        rows = weighted_rows(fit, advice.candidates, idx=idx)
        pred = predicted_variance(fit, np.array([1.0]), rows)
        f = np.concatenate([fit.obs.sd_factor, advice.candidates.observations(idx).sd_factor])
        y = np.concatenate([fit.obs.y, np.full(len(idx), fit.theta[0])])
        res = sm.WLS(y, np.ones((y.size, 1)), weights=1.0 / f ** 2).fit()
        assert pred == pytest.approx(fit.residual_sd ** 2 * res.normalized_cov_params[0, 0],
                                     rel=1e-9)
    assert advice.method == "linearised"
    assert any("neutral model" in n for n in advice.notes)


def test_predicted_sd_matches_the_spread_of_refits_in_simulation():
    """Well-determined acid (runs on both sides of the pKa): the predicted sd of pKa after the
    advised 3 runs matches the sd of pKa over 300 simulated studies with those runs added
    (sigma known, so the prediction is rescaled from s to sigma). Monte Carlo sd of an sd from
    300 draws is ~4 %; 15 % allowed."""
    theta, sigma = np.array([2.0, 5.0]), 0.04
    study = _study([2, 3, 4, 5, 6, 7], ratios=(1.0,), replicates=1, sigma=sigma,
                   advice=AdviceRequest("pKa"))
    fit = fit_study(study).fit
    advice = advise(fit, study)
    assert advice.method == "linearised"
    idx = advice.batches[1][0]
    design = [(advice.candidates.pH[i], advice.candidates.ratio[i], advice.candidates.form[i])
              for i in idx]
    # the prediction at the true parameters, with the true sigma
    rows_true = weighted_rows(fit, advice.candidates, theta=theta, idx=idx)
    j_true = weighted_rows(fit, dataclasses.replace(
        advice.candidates, pH=fit.obs.pH, ratio=10 ** fit.obs.log_ratio,
        form=("both",) * fit.n, preference=np.arange(fit.n)), theta=theta)
    m = j_true.T @ j_true + rows_true.T @ rows_true
    sd_pred = sigma * np.sqrt(np.linalg.inv(m)[1, 1])
    rng = np.random.default_rng(7)
    est = []
    for _ in range(300):
        runs = simulate_runs("acid", theta, [2, 3, 4, 5, 6, 7], ratios=(1.0,), replicates=1,
                             sigma=sigma, rng=rng)
        new = _new_runs(theta, design, rng, sigma)
        st = dataclasses.replace(study, runs=tuple(runs) + tuple(new))
        obs, _ = build_observations(st.runs)
        est.append(fit_model(obs, MODELS["acid"], intervals=False).theta[1])
    assert np.std(est, ddof=1) == pytest.approx(sd_pred, rel=0.15)


# -- the target ---------------------------------------------------------------------------------
def test_default_target_is_the_procedure_with_the_lowest_lower_recovery_bound():
    study = _study([2, 3, 4, 5, 6, 7], procedures=[PROC, PROC2])
    rep = fit_study(study)
    lows = {p.procedure.id: p.recovery_pct.ci95.lo for p in rep.predictions}
    t = choose_target(rep.fit, study, rep.predictions)
    assert t.kind == "procedure" and t.name == min(lows, key=lows.get) == "P2"
    assert "default" in t.chosen_by


@pytest.mark.parametrize("asked, kind, name", [("pKa", "parameter", "pKa"),
                                               ("logK", "parameter", "logK"),
                                               ("P1", "procedure", "P1")])
def test_target_from_study_yaml(asked, kind, name):
    study = _study([2, 3, 4, 5, 6, 7], procedures=[PROC, PROC2], advice=AdviceRequest(asked))
    rep = fit_study(study)
    t = choose_target(rep.fit, study, rep.predictions)
    assert (t.kind, t.name, t.chosen_by) == (kind, name, "advice.target in study.yaml")
    d = advise(rep.fit, study, rep.predictions).to_dict()
    assert d["target"]["name"] == name
    if kind == "procedure":
        assert d["single_runs"][0]["recovery_lower_pct_after"] \
            >= d["single_runs"][0]["recovery_lower_pct_before"]


def test_pka_target_without_a_pka_falls_back_and_says_so():
    study = _study([3, 5, 7], model="neutral", theta=(1.0,), advice=AdviceRequest("pKa"))
    rep = fit_study(study)
    t = choose_target(rep.fit, study, rep.predictions)
    assert t.name == "logK" and "does not apply" in t.chosen_by


def test_pka_target_of_an_ampholyte_is_the_less_known_pka():
    study = _study(np.arange(1.0, 12.5, 1.0), model="ampholyte", theta=(2.0, 3.0, 9.0),
                   advice=AdviceRequest("pKa"), ratios=(1.0,), sigma=0.03)
    fit = fit_study(study).fit
    t = choose_target(fit, study, ())
    se = {k: fit.parameters[k].se for k in ("pKa1", "pKa2")}
    assert t.name == max(se, key=se.get)


def test_usable_pH_range_is_the_span_widened_and_clipped_by_the_declared_buffers():
    study = _study([6, 6.5, 7, 7.5, 8], ratios=(1.0,))
    fit = fit_study(study).fit
    assert usable_pH_range(fit, study)[0] == (4.0, 10.0)
    limited = dataclasses.replace(study, advice=AdviceRequest(pH_range=(5.0, 9.0)))
    assert usable_pH_range(fit, limited)[0] == (5.0, 9.0)
    advice = advise(fit, limited)
    assert advice.candidates.pH.min() == 5.0 and advice.candidates.pH.max() == 9.0
    outside = dataclasses.replace(study, advice=AdviceRequest(pH_range=(11.0, 13.0)))
    rng, note = usable_pH_range(fit, outside)
    assert rng == (11.0, 13.0) and "extrapolates" in note


def test_usable_pH_range_stops_where_an_ester_solvent_is_hydrolysed():
    # ethyl acetate is saponified by base (common practice; the caution in solvents.py): the
    # advice goes no further into pH above 10 than the measured runs already went
    study = _study([6, 6.5, 7, 7.5, 8, 9], ratios=(1.0,))
    fit = fit_study(study).fit
    assert usable_pH_range(fit, study)[0] == (4.0, 11.0)
    ester = dataclasses.replace(study, system={**study.system,
                                               "organic": "ethyl acetate, pre-saturated"})
    rng, note = usable_pH_range(fit, ester)
    assert rng == (4.0, 10.0) and "ethyl acetate is hydrolysed" in note
    assert advise(fit, ester).candidates.pH.max() == 10.0
    declared = dataclasses.replace(ester, advice=AdviceRequest(pH_range=(4.0, 12.0)))
    assert usable_pH_range(fit, declared)[0] == (4.0, 11.0)    # the study's choice wins


# -- the weak case, by simulation ---------------------------------------------------------------
WEAK_PH = [6.0, 6.5, 7.0, 7.5, 8.0]
WEAK_THETA = (2.0, 5.0)


def test_weak_fit_is_recognised_and_ranked_by_simulation():
    study = _study(WEAK_PH, WEAK_THETA, ratios=(1.0,), advice=AdviceRequest("pKa"))
    fit = fit_study(study).fit
    assert abs(fit.correlation[0, 1]) > 0.99
    advice = advise(fit, study)
    d = advice.to_dict()
    assert d["method"] == "simulation" and d["linearisation_weak"]
    assert "too weakly determined" in d["method_note"]
    assert [b["k"] for b in d["batches"]] == list(BATCH_SIZES)
    assert d == advise(fit, study).to_dict()        # seeded: the same advice every time


def test_following_the_advice_beats_an_even_spread_in_90_percent_of_50_simulations():
    """Issue 11: all runs above the pKa (pH 6-8, pKa 5; |r(logK, pKa)| > 0.99). Three runs as
    advised narrow the pKa profile interval more than three runs at the low end, middle and
    high end of the measured span, in at least 45 of 50 seeded simulations."""
    wins, weak = 0, 0
    for seed in range(50):
        study = _study(WEAK_PH, WEAK_THETA, rng=seed, ratios=(1.0,), replicates=2,
                       advice=AdviceRequest("pKa"))
        fit = fit_study(study).fit
        weak += abs(fit.correlation[0, 1]) > 0.99
        advice = advise(fit, study)
        c = advice.candidates
        advised = [(c.pH[i], c.ratio[i], c.form[i]) for i in advice.batches[1][0]]
        even = [(pH, 1.0, "both") for pH in np.linspace(min(WEAK_PH), max(WEAK_PH), 3)]
        rng = np.random.default_rng(1000 + seed)
        w_adv = _pka_width(_with_runs(study, _new_runs(WEAK_THETA, advised, rng)))
        w_even = _pka_width(_with_runs(study, _new_runs(WEAK_THETA, even, rng)))
        wins += w_adv < w_even
    print(f"advised runs won {wins} of 50; {weak} of 50 fits had |r| > 0.99")
    assert weak >= 45            # the scenario is the weak one the issue describes
    assert wins >= 45


# -- reading advice: from study.yaml ------------------------------------------------------------
def test_advice_is_read_from_study_yaml(tmp_path):
    text = STUDY_YAML.format(runs="runs.csv") + "advice:\n  target: P1\n  pH_range: [6, 12]\n"
    study, problems = check_study(write_study(tmp_path, yaml_text=text))
    assert study is not None, problems
    assert study.advice == AdviceRequest("P1", (6.0, 12.0))


@pytest.mark.parametrize("block, message", [
    ("advice:\n  target: pka\n", "unknown advice target (did you mean 'pKa'?)"),
    ("advice:\n  target: P9\n", "unknown advice target"),
    ("advice:\n  pH_range: [9, 3]\n", "'pH_range' must go from low to high"),
    ("advice:\n  pH_range: [2, 15]\n", "'pH_range' is out of range"),
    ("advice:\n  goal: pKa\n", "unknown key 'goal' in advice"),
])
def test_bad_advice_block_is_a_located_error(tmp_path, block, message):
    text = STUDY_YAML.format(runs="runs.csv") + block
    line = len(text.splitlines())          # the block's second line, where the fault is
    study, problems = check_study(write_study(tmp_path, yaml_text=text))
    assert study is None
    errors = [p for p in problems if p.severity == "error"]
    assert len(errors) == 1
    assert message in errors[0].message
    assert errors[0].file.endswith("study.yaml") and errors[0].line == line


# -- the command line and fit --json ------------------------------------------------------------
def _weak_folder(root):
    from extractval.simulate import write_study_folder
    study = _study(WEAK_PH, WEAK_THETA, ratios=(1.0,), procedures=[PROC])
    return write_study_folder(study, root / "ADV-1")


def test_advise_prints_the_next_run_table(tmp_path, capsys):
    from extractval.cli import main
    folder = _weak_folder(tmp_path)
    assert main(["advise", str(folder), "--jobs", "1"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("== ADV-1: next runs")
    assert "lower recovery bound of P1" in out and "too weakly determined" in out
    rows = [ln.split() for ln in out.splitlines() if ln.strip()[:2] in ("1 ", "3 ", "6 ")]
    assert [r[0] for r in rows] == ["1", "3", "6"]
    assert "SDS" in out


def test_advise_json_and_fit_json_carry_the_same_next_runs(tmp_path, capsys):
    import json

    from extractval.cli import main
    folder = _weak_folder(tmp_path)
    assert main(["advise", str(folder), "--json", "--jobs", "1"]) == 0
    advised = json.loads(capsys.readouterr().out)
    assert main(["fit", str(folder), "--json", "--jobs", "1"]) == 0
    fitted = json.loads(capsys.readouterr().out)
    assert advised["next_runs"] == fitted["next_runs"]
    batches = fitted["next_runs"]["batches"]
    assert [len(b["runs"]) for b in batches] == list(BATCH_SIZES)
    for b in batches:
        assert b["width_after"] < b["width_before"]
        assert b["recovery_lower_pct_after"] >= b["recovery_lower_pct_before"]


def test_advise_on_bad_input_gives_located_errors_and_no_traceback(tmp_path, capsys):
    from extractval.cli import main
    text = STUDY_YAML.format(runs="runs.csv") + "advice:\n  target: P7\n"
    folder = write_study(tmp_path, yaml_text=text)
    assert main(["advise", str(folder), "--jobs", "1"]) == 1
    err = capsys.readouterr().err
    assert "study.yaml" in err and "unknown advice target" in err and "P7" in err
    assert "Traceback" not in err
    assert main(["advise", str(tmp_path / "missing"), "--jobs", "1"]) == 1
    assert "no such" in capsys.readouterr().err


def test_the_log_d_plot_marks_the_advised_batch_and_the_register_names_its_numbers():
    import json

    from extractval.report.plots import log_d_plot
    from extractval.report.register import study_register
    study = _study(WEAK_PH, WEAK_THETA, ratios=(1.0,), procedures=[PROC])
    d = json.loads(json.dumps(fit_study(study).to_dict(), allow_nan=False))
    svg = log_d_plot(d).decode("utf-8")
    assert 'id="advised-runs"' in svg and "advised next runs (batch of 3)" in svg
    numbers = {n.identifier: n.value for q in study_register(d) for n in q.numbers}
    b3 = d["next_runs"]["batches"][1]
    assert numbers["ADV/next_runs/k3/width_after"] == b3["width_after"]
    assert numbers["ADV/next_runs/k3/run1/pH"] == b3["groups"][0]["pH"]
    assert numbers["ADV/next_runs/width_before"] == b3["width_before"]


def test_an_interval_open_now_is_reported_open_not_as_a_wald_width():
    """Base with recoveries all near 100 % and the pKa beyond the search range: the pKa is at
    its search limit, so no honest finite width exists now; the advice says "open" and still
    ranks runs (towards the pKa, at small ratios, where the recovery can move)."""
    import json
    study = _study([8, 9, 10], model="base", theta=(4.0, 3.0), form="recovery")
    d = json.loads(json.dumps(fit_study(study).to_dict(), allow_nan=False))
    a = d["next_runs"]
    assert a["method"] == "simulation" and any("search limit" in w
                                               for w in a["linearisation_weak"])
    for b in a["batches"]:
        assert b["width_before"] is None and b["shrink_pct"] is None
    assert a["batches"][-1]["groups"][0]["pH"] == a["candidates"]["pH_range"][0]
