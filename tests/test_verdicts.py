"""Each acceptance criterion with a case that passes and one that fails; outlier screening;
model choice by AICc. Studies are simulated (sources of the criteria in extractval/verdicts.py).
"""

import dataclasses

import pytest

from extractval.analysis import fit_study
from extractval.simulate import simulated_study
from extractval.study import Procedure, Targets

BASE = (2.6, 8.3)
PH = [6.5, 7.5, 8.3, 9.0, 10.0]
PROC = Procedure("P1", "three portions at pH 10", 10.0, 25.0, (10.0, 10.0, 10.0))


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


def test_recovery_without_target_is_not_assessed():
    assert _verdict(_d(), "recovery_pct", "P1")["status"] == "not assessed"


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


def test_lack_of_fit_pass_and_fail():
    assert _verdict(_d(), "lack_of_fit")["status"] == "pass"
    # a base fitted as a neutral compound misses the pH dependence
    v = _verdict(_d(fit_model="neutral"), "lack_of_fit")
    assert v["status"] == "fail" and v["value"] < 0.05


def test_aoac_recovery_range_by_level():
    # AOAC Appendix F Table A5: 10 ppm -> 80-110 %, 1 % -> 97-103 %
    proc = Procedure("P1", "one small portion at pH 8.3", 8.3, 25.0, (1.0,))
    study = simulated_study("A", "base", BASE, PH, (proc,), sigma=0.03, rng=5,
                            targets=Targets(level="10 ppm"))
    d = fit_study(study).to_dict()
    rec = d["procedures"][0]["recovery_pct"]["value"]
    assert 80 < rec < 97
    assert _verdict(d, "aoac_recovery_pct", "P1")["status"] == "pass"
    d = fit_study(dataclasses.replace(study, targets=Targets(level="1 %"))).to_dict()
    assert _verdict(d, "aoac_recovery_pct", "P1")["status"] == "fail"


def test_horrat_pass_and_fail():
    # Horwitz PRSD_R at 1 ppm is 16 %; HorRat(r) acceptable 0.3-1.3 (AOAC Appendix F Annex D)
    assert _verdict(_d(Targets(level="1 ppm"), sigma=0.06), "horrat_r")["status"] == "pass"
    assert _verdict(_d(Targets(level="1 ppm"), sigma=0.002), "horrat_r")["status"] == "fail"


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
