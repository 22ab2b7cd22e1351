"""Predictions outside the data (issue 9): a procedure whose pH, pH tolerance band, any step's pH
or any organic:aqueous volume ratio lies outside the runs gets a located warning (check, fit,
page), its recovery verdict is not judged with the measured span named, and its robustness band
and pH window are clipped to the runs with the part beyond named as extrapolated.

The tolerance rule (0.05 pH unit and 10 % of a ratio outside the runs still count as inside)
is extractval's own convention (extractval/extrapolation.py), not an outside reference value;
the recoveries below are checked against the closed form of successive extractions, IUPAC Gold
Book "fraction extracted" (F02503): E_n = 1 - prod 1 / (1 + D V_org,i / V_aq).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from extractval.analysis import fit_study
from extractval.cli import main
from extractval.extrapolation import PH_SLACK, RATIO_SLACK, Span, extrapolation
from extractval.report.pages import Pages, StudyInput
from extractval.report.register import Dossier
from extractval.simulate import simulated_study, write_study_folder
from extractval.study import Procedure, Targets, WorkupStep, check_study, load_study

ROOT = Path(__file__).resolve().parents[1]
LOGK, PKA = 1.88, 4.21          # benzoic acid: CRC Handbook log P, J. Res. NBS 1967 71A 379
PH = [2.5, 3.5, 4.2, 5.0, 6.0]  # the runs' pH; their ratios are 0.5, 1 and 2 (simulate.py)


def _acid(procs, **kw) -> dict:
    study = simulated_study("XTRA", "acid", (LOGK, PKA), PH, procs, sigma=0.0, form="both",
                            targets=Targets(recovery_pct=95.0), **kw)
    return fit_study(study).to_dict()


def _recovery(pH: float, aq: float, org) -> float:
    d = 10 ** (LOGK - math.log10(1 + 10 ** (pH - PKA)))
    return 100 * (1 - math.prod(1 / (1 + d * v / aq) for v in org))


# -- the rule -----------------------------------------------------------------------------------

SPAN = Span((2.5, 6.0), (0.5, 2.0))


@pytest.mark.parametrize("pH, tol, inside", [
    (4.0, 0.2, True),
    (6.0 + PH_SLACK, 0.0, True),            # at the slack: still inside
    (6.0 + PH_SLACK + 0.01, 0.0, False),
    (5.9, 0.2, False),                      # the nominal is inside, the band is not
    (2.5 - PH_SLACK, 0.0, True),
    (2.0, 0.2, False),
])
def test_pH_and_its_band_against_the_span(pH, tol, inside):
    p = Procedure("P", "x", pH, 20.0, (10.0,), pH_tolerance=tol)
    assert (extrapolation(p, SPAN) is None) is inside


@pytest.mark.parametrize("organic, inside", [
    (10.0, True),                                   # 0.5
    (10.0 / (1 + RATIO_SLACK) + 1e-6, True),        # 10 % below the smallest ratio
    (9.0, False),                                   # 0.45: more than 10 % below
    (40.0 * (1 + RATIO_SLACK) - 1e-6, True),
    (45.0, False),                                  # 2.25
])
def test_ratio_per_portion_against_the_runs(organic, inside):
    p = Procedure("P", "x", 4.0, 20.0, (20.0, organic))
    x = extrapolation(p, SPAN)
    assert (x is None) is inside
    if not inside:
        assert x.pH_outside == () and x.ratio_outside == (
            f"portion 2 at organic:aqueous {organic / 20.0:.3g}",)
        assert x.reason.startswith("extrapolated beyond the runs (organic:aqueous 0.5 to 2)")


def test_every_step_of_a_work_up_is_checked():
    steps = (WorkupStep("extract", 4.0, (20.0,), (10.0, 10.0)),
             WorkupStep("wash", 4.0, (5.0,)),                # pooled 20 mL over 5 mL: ratio 4
             WorkupStep("back-extract", 9.0, (20.0,)))       # pH 9, beyond the runs
    p = Procedure("W", "x", 4.0, 20.0, (10.0, 10.0), steps=steps)
    x = extrapolation(p, SPAN)
    assert x.pH_outside == ("step 3 (back-extract) at pH 9",)
    assert x.ratio_outside == ("step 2 (wash), portion 1 at organic:aqueous 4",)
    assert x.reason.startswith("extrapolated beyond the runs (pH 2.50 to 6.00; organic:aqueous "
                               "0.5 to 2)")


def test_excluded_runs_do_not_widen_the_span():
    study = simulated_study("XTRA", "acid", (LOGK, PKA), PH, (), sigma=0.0, form="both")
    runs = list(study.runs)
    last = runs[-1]
    runs[-1] = type(last)(**{**vars(last), "pH": 8.0, "excluded": "emulsion"})
    assert Span.of_runs(runs).pH == (2.5, 6.0)
    # nor do runs of a sequence that fails system suitability (left out of the fit)
    runs[-1] = type(last)(**{**vars(last), "pH": 8.0, "suitability": "sequence S2 fails"})
    assert Span.of_runs(runs).pH == (2.5, 6.0)
    runs[-1] = type(last)(**{**vars(last), "pH": 8.0})
    assert Span.of_runs(runs).pH == (2.5, 8.0)


# -- the fit, the verdict, the reading, the page --------------------------------------------------

def test_verdict_not_judged_with_the_span_and_a_warning():
    d = _acid((Procedure("IN", "inside", 4.0, 20.0, (10.0, 10.0)),
               Procedure("OUT", "pH 7 beyond the runs", 7.0, 20.0, (10.0, 10.0))))
    inside, outside = d["procedures"]
    assert inside["extrapolation"] is None
    assert inside["verdicts"][0]["status"] in ("pass", "fail")
    v = outside["verdicts"][0]
    assert (v["criterion"], v["status"], v["outcome"], v["value"]) == (
        "recovery_pct", "not judged", "Not judged", None)
    assert v["detail"] == ("extrapolated beyond the runs (pH 2.50 to 6.00): pH 7 ± 0.2 "
                           "outside them")
    assert "Recovery target 95 %: not judged (extrapolated beyond the runs (pH 2.50 to 6.00)" \
        in outside["reading"]
    warning, = [w for w in d["warnings"] if "procedure 'OUT'" in w]
    assert "key 'procedures[2]'" in warning and "is extrapolated beyond the runs" in warning
    assert not any("procedure 'IN'" in w for w in d["warnings"])
    assert "1 not judged" in d["status_text"]
    # the prediction is still shown (the closed form at pH 7), only not judged
    assert outside["recovery_pct"]["value"] == pytest.approx(_recovery(7.0, 20.0, (10, 10)),
                                                             rel=1e-6)
    page = Pages(ROOT / "site_templates").study_page(
        StudyInput("XTRA", d), Dossier("dv-000000000000", "extractval 0.0-test", "2026-01-01"))
    section = page[page.index("### OUT"):]
    assert '<p class="xv-extrapolated"><strong>Extrapolated.</strong>' in section
    assert "The whole pH band lies beyond the runs: this worst case is extrapolated." in section


def test_band_and_window_clipped_to_the_runs():
    # an acid extracts less as the pH rises: the worst case of pH 6 +/- 0.2 is at the band's top,
    # which is cut at the runs' 6.0 + 0.05
    d = _acid((Procedure("EDGE", "at the top of the runs", 6.0, 20.0, (40.0, 40.0, 40.0)),),
              ratios=(0.5, 1.0, 2.0))
    pr = d["procedures"][0]
    wc = pr["worst_case"]
    assert wc["pH_band"] == [5.8, 6.0 + PH_SLACK]
    assert wc["pH_band_extrapolated"] == [[6.0 + PH_SLACK, 6.2]]
    assert wc["pH"] == pytest.approx(6.0 + PH_SLACK)
    f = 1.02                                   # the volumes 2 % off, the unfavourable way
    assert wc["predicted_recovery_pct"] == pytest.approx(
        _recovery(6.0 + PH_SLACK, 20.0 * f, [40.0 * (2 - f)] * 3), rel=1e-6)
    assert pr["verdicts"][0]["status"] == "not judged"     # the band still reaches beyond
    # the window: the target is met below about pH 6.4 (closed form), so past the runs' top
    lo, hi = pr["pH_window"]
    assert hi == pytest.approx(6.0 + PH_SLACK) and lo == pytest.approx(2.45)
    assert [round(a, 2) for a in pr["pH_window_extrapolated"][-1]][0] == 6.05
    assert "extrapolated, not part of the window" in pr["pH_window_note"]


# -- the command line, on a folder ----------------------------------------------------------------

@pytest.fixture
def folder(tmp_path):
    study = simulated_study("XTRA-CLI", "acid", (LOGK, PKA), PH,
                            (Procedure("P1", "inside", 4.0, 20.0, (10.0,)),
                             Procedure("P2", "one 2 mL portion", 4.0, 20.0, (2.0,))),
                            sigma=0.02, form="both", targets=Targets(recovery_pct=95.0), rng=3)
    return write_study_folder(study, tmp_path / "XTRA-CLI")


def test_check_and_fit_warn_with_the_location(folder, capsys, monkeypatch):
    monkeypatch.chdir(folder.parent)
    study, problems = check_study("XTRA-CLI")
    p, = [p for p in problems if "extrapolated" in p.message]
    assert (p.severity, p.file, p.key, p.line) == ("warning", "XTRA-CLI/study.yaml",
                                                   "procedures[2]", study.procedures[1].line)
    assert "portion 1 at organic:aqueous 0.1" in p.message and "organic:aqueous 0.5 to 2" in \
        p.message
    assert "project convention" in p.expected
    assert main(["check", "XTRA-CLI"]) == 0
    err = capsys.readouterr().err
    assert err.count("is extrapolated beyond the runs") == 1
    assert main(["fit", "--jobs", "1", "XTRA-CLI"]) == 0
    out = capsys.readouterr().out
    assert out.count("is extrapolated beyond the runs") == 1      # once, not twice
    line, = [ln for ln in out.splitlines() if ln.split()[:1] == ["P2"] and "Recovery" in ln]
    assert "Not judged" in line and "(extrapolated beyond the runs (organic:aqueous" in line


# -- the demo studies ---------------------------------------------------------------------------

def test_demo_runs_cover_their_procedures_but_one_labelled_extrapolation():
    outside = {}
    for folder in sorted((ROOT / "studies").iterdir()):
        if (folder / "study.yaml").exists():
            study = load_study(folder)
            span = Span.of_runs(study.runs)
            for p in study.procedures:
                if extrapolation(p, span) is not None:
                    outside[(study.study_id, p.id)] = p.label
    assert list(outside) == [("HPA-2026-014", "P1")]
    assert "extrapolation" in outside[("HPA-2026-014", "P1")]
