"""Each acceptance criterion with a case that passes and one that fails; outlier screening;
model choice by AICc. Studies are simulated (sources of the criteria in extractval/verdicts.py).
"""

import dataclasses

import numpy as np
import pytest

from extractval.analysis import fit_study
from extractval.simulate import simulated_study
from extractval.study import Procedure, Targets
from tests.reference import acceptance_refs as ref

BASE = (2.6, 8.3)
PH = [6.5, 7.5, 8.3, 9.0, 10.0]
#: inside the runs' pH (6.5 to 10) and volume ratios (0.5 to 2): its recovery is judged
PROC = Procedure("P1", "three portions at pH 9.5", 9.5, 20.0, (10.0, 10.0, 10.0))


def _d(targets=Targets(), model="base", theta=BASE, pH=PH, fit_model=None, edit=None, **kw):
    kw.setdefault("sigma", 0.03)
    kw.setdefault("rng", 5)
    study = simulated_study("V", model, theta, pH, (PROC,), targets=targets,
                            fit_model=fit_model, **kw)
    if edit:
        study = dataclasses.replace(study, runs=tuple(edit(list(study.runs))))
    return fit_study(study).to_dict()


def _verdict(d, criterion, procedure=None):
    rows = d["procedures"][0]["verdicts"] if procedure else d["verdicts"]
    (v,) = [v for v in rows if v["criterion"] == criterion]
    return v


def test_recovery_target_pass_and_fail():
    assert _verdict(_d(Targets(recovery_pct=95)), "recovery_pct", "P1")["status"] == "pass"
    v = _verdict(_d(Targets(recovery_pct=99.99999)), "recovery_pct", "P1")
    assert v["status"] == "fail" and v["limit"] == 99.99999


def test_recovery_without_target_is_not_judged_and_not_counted():
    d = _d()
    v = _verdict(d, "recovery_pct", "P1")
    assert v["status"] == "not judged" and v["basis"] == "none"
    assert d["status_counts"]["criteria"] == len(
        [v for v in d["verdicts"] if v["basis"] != "none"])


def test_repeatability_pass_and_fail():
    assert _verdict(_d(Targets(max_rsd_pct=10)), "max_rsd_pct")["status"] == "pass"
    v = _verdict(_d(Targets(max_rsd_pct=0.5)), "max_rsd_pct")
    assert v["status"] == "fail" and v["value"] > 0.5


def _spoil_mass_balance(runs):
    r = runs[3]
    runs[3] = dataclasses.replace(r, found_aqueous=r.found_aqueous * 0.7,
                                  found_organic=r.found_organic * 0.7)
    return runs


def test_mass_balance_pass_and_fail_names_the_run():
    assert _verdict(_d(), "mass_balance_pct")["status"] == "pass"
    d = _d(edit=_spoil_mass_balance)
    v = _verdict(d, "mass_balance_pct")
    assert v["status"] == "fail" and d["run_table"][3]["run"] in v["detail"]
    assert v["limit"] == [90.0, 110.0]


def _spoil_and_exclude(runs):
    runs = _spoil_mass_balance(runs)
    runs[3] = dataclasses.replace(runs[3], excluded="emulsion did not break")
    return runs


def test_mass_balance_names_an_excluded_run_outside_the_band():
    # an excluded run is not judged, but "every run" must not be read as including it
    d = _d(edit=_spoil_and_exclude)
    v = _verdict(d, "mass_balance_pct")
    run_id = d["run_table"][3]["run"]
    assert v["status"] == "pass"
    assert "in the fit" in v["detail"] and f"excluded by the study: {run_id}" in v["detail"]


def _ratio_study(seed):
    st = simulated_study("V1", "neutral", (0.85,), (5.0, 7.0, 9.0), form="recovery",
                         ratios=(0.3, 0.5, 1.0, 2.0), rng=seed, sigma=0.04)
    return fit_study(st).to_dict()


def test_ratio_agreement_on_one_phase_runs_does_not_fail_a_true_model():
    # recovery-only runs at ratios 0.3-2 with log K 0.85 (E = 0.68 to 0.93): log D read off
    # one phase near complete extraction is too noisy for +/-0.3 (OECD TG 107 assumes both
    # phases); such runs are left out by their fitted fraction (20-80 % compared). Before,
    # 5 of these 40 seeds failed the criterion although the model is true.
    fails = sum(_verdict(_ratio_study(seed), "ratio_agreement_log")["status"] == "fail"
                for seed in range(40))
    assert fails <= 2


def test_ratio_agreement_on_one_phase_runs_still_sees_an_emulsion():
    # ratios 0.1-0.4 (E = 0.41 to 0.74, inside the compared window); at ratio 0.1 an emulsion
    # carries 80 % more analyte into the measured organic phase than partition would
    st = simulated_study("V1", "neutral", (0.85,), (5.0, 7.0, 9.0), form="recovery",
                         ratios=(0.1, 0.2, 0.4), rng=1, sigma=0.04)
    clean_d = fit_study(st).to_dict()
    assert _verdict(clean_d, "ratio_agreement_log")["status"] == "pass"
    spoiled = dataclasses.replace(st, runs=tuple(
        dataclasses.replace(r, recovery_pct=r.recovery_pct * 1.8)
        if abs(r.volume_ratio - 0.1) < 1e-9 else r for r in st.runs))
    v = _verdict(fit_study(spoiled).to_dict(), "ratio_agreement_log")
    assert v["status"] == "fail" and "ratio 0.1" in v["detail"]


def _bias_high_ratio(runs):
    # micro-droplets of water carried into the organic phase at the 2:1 ratio: more analyte
    # appears to be in the organic phase
    return [dataclasses.replace(r, found_organic=r.found_organic * 3.0)
            if r.volume_ratio == 2.0 and r.pH == 10.0 else r for r in runs]


def test_ratio_agreement_pass_and_fail_mentions_emulsion():
    assert _verdict(_d(), "ratio_agreement_log")["status"] == "pass"
    v = _verdict(_d(edit=_bias_high_ratio), "ratio_agreement_log")
    assert v["status"] == "fail" and v["limit"] == 0.3       # OECD TG 107 default
    assert "emulsion" in v["detail"]


def test_lack_of_fit_judged_only_with_its_target():
    # with targets.lack_of_fit_alpha the F test is a criterion: pass, and fail when a base is
    # fitted as a neutral compound (the model misses the pH dependence)
    v = _verdict(_d(Targets(lack_of_fit_alpha=0.05)), "lack_of_fit")
    assert v["status"] == "pass" and v["limit"] == 0.05 and v["basis"] == "target"
    v = _verdict(_d(Targets(lack_of_fit_alpha=0.05), fit_model="neutral"), "lack_of_fit")
    assert v["status"] == "fail" and v["value"] < 0.05
    # without it the test is a diagnostic: shown with its p value, never a verdict row
    d = _d(fit_model="neutral")
    assert not [v for v in d["verdicts"] if v["criterion"] == "lack_of_fit"]
    lof = d["lack_of_fit"]
    assert lof["p_value"] < 0.05 and lof["target_alpha"] is None
    assert lof["role"].startswith("diagnostic")


def _true_model_studies(targets, n=40):
    """40 seeded studies simulated from the model they are fitted with."""
    for seed in range(n):
        study = simulated_study("V", "base", BASE, PH, (PROC,), targets=targets, sigma=0.03,
                                rng=seed)
        yield fit_study(study)


def test_true_model_never_fails_a_lack_of_fit_nobody_set():
    # issue 9: a study simulated from the true model must not fail one time in twenty for a
    # criterion nobody set. These 40 seeds include p values below 0.05 (checked below).
    p_values, rows = [], []
    for report in _true_model_studies(Targets(recovery_pct=95)):
        a = report.assessment
        rows = a["study"] + [v for vs in a["procedures"] for v in vs]
        assert not [v for v in rows if v.criterion == "lack_of_fit" and v.status == "fail"]
        assert a["status"] != "fail"
        p_values.append(a["details"]["lack_of_fit"]["p_value"])
        assert not [v for v in rows if v.criterion == "lack_of_fit"]
    assert min(p_values) < 0.05          # the test itself would have failed some of them


def test_lack_of_fit_target_rejects_the_true_model_at_about_alpha():
    # Under the true model the F test's p value is uniform on (0, 1) (Montgomery & Runger,
    # sec. S11; the F distribution of the lack-of-fit ratio): the number of fails at alpha =
    # 0.05 in 40 studies is binomial(40, 0.05), and the p values pass a KS test for uniformity
    # (scipy.stats as the reference).
    from scipy import stats
    p_values, fails = [], 0
    for report in _true_model_studies(Targets(lack_of_fit_alpha=0.05)):
        (v,) = [v for v in report.assessment["study"] if v.criterion == "lack_of_fit"]
        fails += v.status == "fail"
        p_values.append(report.assessment["details"]["lack_of_fit"]["p_value"])
    assert fails <= stats.binom.isf(0.001, 40, 0.05)
    assert stats.kstest(p_values, "uniform").pvalue > 0.001


def _measured_recovery_pct(run):
    return run.recovery_pct if run.recovery_pct is not None else \
        100.0 * run.found_organic / run.spiked


def test_aoac_recovery_judged_on_measured_runs_never_on_the_prediction():
    # AOAC Official Methods of Analysis (2012) Appendix F, Table A5: mean recovery ranges at
    # an analyte level, a statement about measured recoveries (10 ppm: 80-110 %; 1 %: 97-103 %)
    rows = {label: (lo, hi) for _, label, lo, hi in ref.AOAC_A5}
    one = Procedure("P1", "one 25 mL portion at pH 8.3", 8.3, 25.0, (25.0,))
    three = Procedure("P2", "three portions at pH 10", 10.0, 25.0, (10.0, 10.0, 10.0))
    study = simulated_study("A", "base", BASE, PH, (one, three), sigma=0.03, rng=5,
                            targets=Targets(level="10 ppm"))
    d = fit_study(study).to_dict()
    v1 = _verdict(d, "aoac_recovery_pct", "P1")
    measured = [_measured_recovery_pct(r) for r in study.runs
                if r.pH == 8.3 and r.volume_ratio == 1.0]
    assert len(measured) == 2
    assert v1["value"] == pytest.approx(sum(measured) / 2, rel=1e-9)
    assert v1["value"] != pytest.approx(d["procedures"][0]["recovery_pct"]["value"], rel=1e-6)
    lo, hi = rows["10 ppm"]
    assert v1["limit"] == [lo, hi]
    assert v1["status"] == ("pass" if lo <= v1["value"] <= hi else "fail")
    # the three-portion procedure was never run as such: nothing measured, nothing judged,
    # although its prediction (> 99 %) sits inside 80-110 %
    v2 = d["procedures"][1]["verdicts"][1]
    assert v2["criterion"] == "aoac_recovery_pct" and v2["status"] == "not judged"
    assert v2["value"] is None and "never on a model prediction" in v2["detail"]
    assert d["procedures"][1]["recovery_pct"]["value"] > 99
    strict = fit_study(dataclasses.replace(study, targets=Targets(level="1 %"))).to_dict()
    lo, hi = rows["1 %"]
    v = _verdict(strict, "aoac_recovery_pct", "P1")
    assert v["limit"] == [lo, hi] and v["status"] == ("pass" if lo <= v["value"] <= hi
                                                       else "fail")


def test_horrat_pass_and_note():
    # Horwitz PRSD_R at 1 ppm is 16 %; HorRat(r) acceptable 0.3-1.3 (AOAC Appendix F Annex D
    # 2.2.2); below 0.3 precision is better than expected: a note, never a fail
    assert _verdict(_d(Targets(level="1 ppm"), sigma=0.06), "horrat_r")["status"] == "pass"
    d = _d(Targets(level="1 ppm"), sigma=0.002)
    v = _verdict(d, "horrat_r")
    assert v["status"] == "note" and v["value"] < 0.3 and v["outcome"] == "To investigate"
    assert d["status"] != "fail"


def _pooled(groups):
    """Pooled RSD in % with weights n - 1 (ISO 5725-2 pooling of within-cell variances)."""
    num = sum((len(g) - 1) * (np.std(g, ddof=1) / np.mean(g)) ** 2 for g in groups)
    return 100.0 * np.sqrt(num / sum(len(g) - 1 for g in groups))


def test_pooled_rsd_is_of_the_measured_recovery_and_says_so():
    # runs measured in both phases: the pooled RSD is that of the recovery (organic amount over
    # spiked), not of D, which is derived from two amounts
    study = simulated_study("R", "base", BASE, PH, (PROC,), sigma=0.03, rng=7, replicates=3)
    d = fit_study(study).to_dict()
    rep = d["repeatability"]
    groups = {}
    for r in study.runs:
        groups.setdefault(r.replicate, []).append(_measured_recovery_pct(r))
    assert rep["rsd_pct"] == pytest.approx(_pooled(list(groups.values())), rel=1e-9)
    assert rep["quantity"].startswith("recovery") and rep["quantity_keys"] == ["recovery"]
    assert rep["n_groups"] == len(groups) and rep["df"] == 2 * len(groups)
    assert "RSD of the recovery" in _verdict(_d(Targets(max_rsd_pct=10)), "max_rsd_pct")["detail"]


def test_pooled_rsd_takes_ph_differences_out_through_the_model():
    # replicate flasks made to one nominal pH on the steep part of the curve but measured at
    # pH +/- 0.04 from it: with no assay noise the recovery differs only through the model, so
    # the pooled RSD must be ~0 once the pH difference is taken out
    def drift(runs):
        out = []
        for k, r in enumerate(runs):
            shifted = r.pH + (0.04 if k % 2 else -0.04)
            rd = r.volume_ratio * 10 ** (BASE[0] - np.log10(1 + 10 ** (BASE[1] - shifted)))
            e = rd / (1 + rd)
            out.append(dataclasses.replace(r, pH=shifted, found_organic=r.spiked * e,
                                           found_aqueous=r.spiked * (1 - e)))
        return out

    study = simulated_study("P", "base", BASE, PH, (PROC,), sigma=0.0, rng=1)
    study = dataclasses.replace(study, runs=tuple(drift(list(study.runs))))
    rep = fit_study(study).to_dict()["repeatability"]
    raw = {}
    for r in study.runs:
        raw.setdefault(r.replicate, []).append(_measured_recovery_pct(r))
    assert _pooled(list(raw.values())) > 0.5            # the raw values scatter by pH
    assert rep["rsd_pct"] < 1e-6
    assert "group's mean pH" in rep["pH_adjustment"]


def test_study_status_follows_verdicts():
    assert _d(Targets(recovery_pct=95))["status"] == "pass"
    assert _d(Targets(recovery_pct=95, max_rsd_pct=0.5))["status"] == "fail"


def test_outlier_flagged_kept_and_compared():
    def spoil(runs):
        r = runs[7]
        runs[7] = dataclasses.replace(r, found_organic=r.found_organic * 4.0)
        return runs

    d = _d(edit=spoil, replicates=3)
    flagged = {f["run"] for f in d["outlier_screen"]["flags"]}
    bad = d["run_table"][7]["run"]
    assert bad in flagged
    assert d["run_table"][7]["status"] == "used"               # flagged, never dropped
    side = d["outlier_screen"]["without_flagged"]
    assert bad in side["runs_left_out"]
    assert side["parameters"]["logK"]["value"] != d["parameters"]["logK"]["value"]
    levels = {f["level"] for f in d["outlier_screen"]["flags"] if f["run"] == bad}
    assert levels & {"flag", "outlier", "straggler"}


def test_clean_study_has_no_flags():
    d = _d()
    assert d["outlier_screen"]["flags"] == []
    assert d["outlier_screen"]["without_flagged"] is None


@pytest.mark.parametrize("model, theta, pH", [
    ("acid", (1.88, 4.21), [2.5, 3.5, 4.2, 5.0, 6.0]),     # benzoic acid: CRC log P, NBS pKa
    ("base", (0.90, 4.60), [3.0, 4.0, 4.6, 5.5, 7.0]),     # aniline: CRC log P, NIST SRD 46
    ("neutral", (1.48,), [5.0, 6.0, 7.0]),                  # phenol far below its pKa: CRC
])
def test_auto_picks_the_generating_model(model, theta, pH):
    d = _d(model=model, theta=theta, pH=pH, fit_model="auto", sigma=0.02)
    assert d["model"] == model
    sel = d["model_selection"]
    assert sel["chosen"] == model and len(sel["candidates"]) >= 3
    weights = [c["weight"] for c in sel["candidates"] if c["weight"] is not None]
    assert sum(weights) == pytest.approx(1.0)


def test_lack_of_fit_target_is_read_and_checked(tmp_path):
    from extractval.simulate import write_study_folder
    from extractval.study import check_study

    study = simulated_study("LOF-1", "base", BASE, PH, (PROC,), sigma=0.03, rng=5,
                            targets=Targets(recovery_pct=95, lack_of_fit_alpha=0.05))
    folder = write_study_folder(study, tmp_path / "LOF-1")
    read, problems = check_study(folder)
    assert read is not None and read.targets.lack_of_fit_alpha == 0.05
    text = (folder / "study.yaml").read_text()
    (folder / "study.yaml").write_text(text.replace("lack_of_fit_alpha: 0.05",
                                                    "lack_of_fit_alpha: 5"))
    read, problems = check_study(folder)
    assert read is None
    (p,) = [p for p in problems if p.severity == "error"]
    assert p.key == "targets.lack_of_fit_alpha" and p.line is not None
    assert "significance level" in p.expected
