"""Impurities and work-up steps in study.yaml and the runs table: read, located errors, fitted.

The engine numbers are checked in tests/test_workup.py (product formula by hand, profile
intervals); here: what a study folder says reaches the engine, bad input gets a located error,
and the dict carries every number under ``selectivity``.
"""

import pytest

from extractval.analysis import fit_study
from extractval.study import check_study, load_study
from tests.study_factory import STUDY_YAML, write_study

RUNS = """\
run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic,spiked:IMP-1,found_organic:IMP-1
R1,7.0,10,10,100,40,59,10,1.0
R2,8.0,10,10,100,20,79,10,0.5
R3,9.0,10,20,100,5,96,10,0.2
R4,10.0,10,20,100,2,97,10,0.1
"""

IMPURITY_MEASURED = """\
impurities:
  - name: IMP-1
    model: neutral
    amount_ratio: 0.1
"""

IMPURITY_DECLARED = """\
impurities:
  - name: benzoic-acid
    model: acid
    logK: 1.88
    pKa: 4.21
    source: CRC Handbook of Chemistry and Physics (log P); J. Res. NBS 1967, 71A, 379 (pKa)
    amount_ratio: 0.02
"""

STEPS = """\
  - id: P2
    label: Extract, wash, back-extract
    steps:
      - kind: extract
        pH: 10
        aqueous_mL: 25
        organic_mL: [10, 10]
      - kind: wash
        pH: 9
        aqueous_mL: 5
      - kind: back-extract
        pH: 7
        aqueous_mL: [10, 10]
"""


def _yaml(extra_top: str = "", extra_procedures: str = "") -> str:
    return STUDY_YAML.format(runs="runs.csv") + extra_procedures + extra_top


def _errors(problems):
    return [p for p in problems if p.severity == "error"]


def test_measured_impurity_and_steps_are_read(tmp_path):
    folder = write_study(tmp_path, yaml_text=_yaml(IMPURITY_MEASURED, STEPS), runs=RUNS)
    study = load_study(folder)
    imp, = study.impurities
    assert imp.name == "IMP-1" and not imp.declared and imp.amount_ratio == 0.1
    assert [r.found_organic for r in imp.runs] == [1.0, 0.5, 0.2, 0.1]
    assert [r.pH for r in imp.runs] == [r.pH for r in study.runs]
    p2 = study.procedures[1]
    assert [s.kind for s in p2.steps] == ["extract", "wash", "back-extract"]
    # the first step gives the procedure's own pH and volumes (single-step machinery)
    assert (p2.pH, p2.aqueous_mL, p2.organic_mL) == (10.0, 25.0, (10.0, 10.0))
    assert p2.steps[1].aqueous_mL == (5.0,)


def test_declared_impurity_and_selectivity_in_the_dict(tmp_path):
    folder = write_study(tmp_path, yaml_text=_yaml(IMPURITY_DECLARED, STEPS))
    report = fit_study(load_study(folder))
    d = report.to_dict()
    sel = d["selectivity"]
    imp, = sel["impurities"]
    assert imp["declared"] and imp["parameters"]["pKa"]["value"] == 4.21
    assert "CRC" in imp["source"]
    assert [p["id"] for p in sel["procedures"]] == ["P1", "P2"]
    p2 = sel["procedures"][1]
    assert p2["product_phase"] == "aqueous"
    lo, hi = p2["recovery_pct"]["ci95"]      # three runs, two parameters: ends may be open
    assert (lo is None or lo <= p2["recovery_pct"]["value"]) and (hi is None or hi >= lo)
    # the declared impurity has no interval of its own: its carry-over interval is a point
    co = p2["carry_over_pct"]["benzoic-acid"]
    assert co["ci95"] == [co["value"], co["value"]]
    assert "benzoic-acid" in sel["separation"]
    # the runs span pH 7-9: the extraction at pH 10 is named as extrapolated, the others not
    note, = [n for n in p2["notes"] if "extrapolated" in n]
    assert "pH 10 " in note and "9" not in note.split("pH 10")[1].split("lies")[0]


def test_fitted_impurity_gets_its_own_parameters(tmp_path):
    folder = write_study(tmp_path, yaml_text=_yaml(IMPURITY_MEASURED), runs=RUNS)
    d = fit_study(load_study(folder)).to_dict()
    imp, = d["selectivity"]["impurities"]
    assert not imp["declared"] and imp["runs"]["used"] == 4
    assert imp["parameters"]["logK"]["ci95"][0] is not None


@pytest.mark.parametrize("extra, where, message", [
    ("impurities:\n  - name: IMP-1\n    model: neutral\n", "impurities",
     "neither declared constants nor measured columns"),
    ("impurities:\n  - name: X\n    model: acid\n    logK: 1.0\n    source: memo\n",
     "impurities[1].logK", "do not match the model"),
    ("impurities:\n  - name: X\n    model: acid\n    logK: 1.0\n    pKa: 4.0\n",
     "impurities[1].source", "missing key 'source'"),
    ("impurities:\n  - name: 'a b'\n    model: neutral\n    logK: 1\n    source: s\n",
     "impurities[1].name", "may hold only"),
])
def test_bad_impurities_are_located(tmp_path, extra, where, message):
    folder = write_study(tmp_path, yaml_text=_yaml(extra))
    study, problems = check_study(folder)
    assert study is None
    errs = _errors(problems)
    assert any(p.key == where and message in p.message and p.line for p in errs), errs


def test_impurity_cells_follow_the_form_rule(tmp_path):
    runs = RUNS.replace("R2,8.0,10,10,100,20,79,10,0.5", "R2,8.0,10,10,100,20,79,,0.5")
    folder = write_study(tmp_path, yaml_text=_yaml(IMPURITY_MEASURED), runs=runs)
    study, problems = check_study(folder)
    assert study is None
    err, = _errors(problems)
    assert (err.line, err.run, err.column) == (3, "R2", "spiked:IMP-1")


def test_undeclared_impurity_column_is_not_silently_read(tmp_path):
    # a suffixed column whose impurity study.yaml does not declare is an unknown column
    folder = write_study(tmp_path, runs=RUNS)
    study, problems = check_study(folder)
    assert any(p.column == "found_organic:IMP-1" for p in problems)


@pytest.mark.parametrize("steps, message", [
    ("    steps:\n      - kind: wash\n        pH: 9\n        aqueous_mL: 5\n",
     "first step must be 'extract'"),
    ("    steps:\n      - kind: extract\n        pH: 9\n        aqueous_mL: 5\n",
     "missing key 'organic_mL'"),
    ("    steps:\n      - kind: extract\n        pH: 9\n        aqueous_mL: 5\n"
     "        organic_mL: 5\n      - kind: rinse\n        pH: 9\n        aqueous_mL: 5\n",
     "unknown step kind"),
    ("    pH: 7\n    steps:\n      - kind: extract\n        pH: 9\n        aqueous_mL: 5\n"
     "        organic_mL: 5\n", "given on a procedure that has steps"),
])
def test_bad_steps_are_located(tmp_path, steps, message):
    text = _yaml(extra_procedures="  - id: P2\n    label: bad\n" + steps)
    folder = write_study(tmp_path, yaml_text=text)
    study, problems = check_study(folder)
    assert study is None
    assert any(message in p.message and p.line and "procedures[2]" in (p.key or "")
               for p in _errors(problems)), _errors(problems)


def test_selectivity_section_numbers_are_the_dicts(tmp_path):
    """The study page's work-up section shows each register number of 'selectivity' from its
    pointer in the dict (same check as tests/test_report_pages.py, restricted to this part)."""
    import html
    import json
    import re
    from pathlib import Path

    from extractval.report.pages import Pages, StudyInput
    from extractval.report.plots import plot_name
    from extractval.report.register import Dossier, fmt_number, resolve, study_register

    folder = write_study(tmp_path, yaml_text=_yaml(IMPURITY_MEASURED, STEPS), runs=RUNS)
    d = json.loads(json.dumps(fit_study(load_study(folder)).to_dict(), allow_nan=False))
    templates = Path(__file__).resolve().parent.parent / "site_templates"
    dossier = Dossier("dv-000000000000", "extractval 0.0-test", "2026-01-01 00:00 UTC")
    shown = StudyInput(d["study"], d, key="sv-x", plots=(plot_name("separation"),))
    page = Pages(templates, trace=True).study_page(shown, dossier)
    assert "## Impurities and work-up" in page and "### Work-up of P2" in page
    spans = re.findall(r'data-src="([^"]*)">([^<]*)</span>', page)
    on_page = {html.unescape(src) for src, _ in spans}
    sel_numbers = [n for q in study_register(d) for n in q.numbers
                   if n.source.startswith("/selectivity/")]
    assert len(sel_numbers) > 10
    for n in sel_numbers:
        assert n.source in on_page, n.identifier
    for src, text in spans:
        if src.startswith("/selectivity/"):
            value = resolve(d, html.unescape(src))
            assert html.unescape(text).removesuffix(" %") in {
                fmt_number(value, st) for st in ("pct", "frac", "log", "pH", "mL", "g")}
