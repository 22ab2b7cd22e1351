"""Studies that give instrument responses: reading the calibration table, amounts read off it,
censoring, calibration uncertainty in the weights, and the report's calibration key."""

import csv
import io
import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from extractval.analysis import fit_study
from extractval.cli import main
from extractval.study import check_study, load_study
from tests.study_factory import write_study

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "studies" / "HPA-2026-014"
A, B = 120.0, 5000.0          # response = A + B * concentration (per mL)


def _demo_rows() -> list[dict]:
    text = (DEMO / "runs.csv").read_text(encoding="utf-8-sig")
    rows = list(csv.DictReader(io.StringIO(text), delimiter=";"))
    return [{k: v.replace(",", ".") for k, v in r.items() if isinstance(v, str)} for r in rows]


def _write_csv(path: Path, header: list[str], rows: list[list]) -> None:
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(header)
        w.writerows(rows)


def responses_study(root: Path, *, noise: float = 0.0, levels=None, seed: int = 1,
                    lowest_factor: float = 0.9) -> Path:
    """The demo study HPA-2026-014 with each found amount replaced by the response a line
    A + B c gives at its concentration c = amount / phase volume, and a calibration table of
    duplicate standards (relative noise ``noise``) spanning the concentrations."""
    folder = root / "CAL-EQ"
    folder.mkdir(parents=True)
    yaml_text = (DEMO / "study.yaml").read_text().replace(
        "runs: runs.csv", "runs: runs.csv\ncalibration:\n  table: calibration.csv\n"
                          "  level: concentration\n  unit: ug/mL")
    (folder / "study.yaml").write_text(yaml_text)
    rows, conc = [], []
    for d in _demo_rows():
        cells = []
        for col, vol in (("found_aqueous", "aqueous_mL"), ("found_organic", "organic_mL")):
            if d[col] == "":
                cells.append("")
                continue
            c = float(d[col]) / float(d[vol])
            conc.append(c)
            cells.append(repr(A + B * c))
        rows.append([d["run"], d["pH"], d["aqueous_mL"], d["organic_mL"], d["spiked"], *cells,
                     d["replicate"], d["excluded"]])
    _write_csv(folder / "runs.csv", ["run", "pH", "aqueous_mL", "organic_mL", "spiked",
                                     "response_aqueous", "response_organic", "replicate",
                                     "excluded"], rows)
    if levels is None:
        levels = np.geomspace(lowest_factor * min(conc), 1.1 * max(conc), 8)
    rng = np.random.default_rng(seed)
    std = [[f"CS{i + 1}-{k + 1}", repr(float(x)),
            repr(float((A + B * x) * (1 + noise * rng.standard_normal())))]
           for i, x in enumerate(levels) for k in range(2)]
    _write_csv(folder / "calibration.csv", ["standard", "level", "response"], std)
    return folder


def test_responses_give_the_log_k_of_the_equivalent_amounts(tmp_path):
    """Noise-free standards: the amounts read off the line are the demo's found amounts, so
    the fit is the demo's (to the round-off of the inverse prediction)."""
    amounts = fit_study(load_study(DEMO))
    study = load_study(responses_study(tmp_path))
    responses = fit_study(study)
    for name in ("logK", "pKa"):
        a, r = amounts.fit.parameters[name], responses.fit.parameters[name]
        assert r.value == pytest.approx(a.value, abs=1e-6)
        assert r.ci95.lo == pytest.approx(a.ci95.lo, abs=1e-5)
        assert r.ci95.hi == pytest.approx(a.ci95.hi, abs=1e-5)
    d = responses.to_dict()
    assert d["calibration"]["uncertainty"]["included_in_weights"] is False
    assert d["calibration"]["readings"]["below_lloq"] == 0
    row = d["run_table"][0]
    assert row["quantitation"][0]["status"] == "quantified"
    assert row["found_aqueous"] == pytest.approx(28.99, rel=1e-9)   # 1.4495 ug/mL x 20 mL


def test_below_lloq_phase_is_censored_and_the_run_fitted_from_the_other(tmp_path):
    study = load_study(responses_study(tmp_path, lowest_factor=5.0))
    report = fit_study(study)
    d = report.to_dict()
    censored = [r for r in d["run_table"] if r["censored"]]
    assert censored, "the lowest concentrations now fall below the LLOQ"
    assert d["calibration"]["readings"]["below_lloq"] == len(censored)
    for r in censored:
        q = {x["phase"]: x for x in r["quantitation"]}
        assert q["aqueous"]["status"] == "below LLOQ" and q["aqueous"]["amount"] is None
        assert r["found_aqueous"] is None            # never extrapolated
        if r["status"] == "used":
            assert r["measurement"] == "organic" and r["fitted_as"] == "log E"
            assert "fitted from the organic phase alone" in r["reason"]


def test_both_phases_outside_the_range_leave_the_run_visible_and_unfitted(tmp_path):
    folder = responses_study(tmp_path)
    text = (folder / "runs.csv").read_text().splitlines()
    cells = text[1].split(",")
    cells[5], cells[6] = "1", "1e9"            # below the lowest and above the highest standard
    text[1] = ",".join(cells)
    (folder / "runs.csv").write_text("\n".join(text) + "\n")
    d = fit_study(load_study(folder)).to_dict()
    row = d["run_table"][0]
    assert row["status"] == "not usable"
    assert "below LLOQ" in row["reason"] and "above range" in row["reason"]
    assert "no amount to fit" in row["reason"]


def test_noisy_calibration_enters_the_weights(tmp_path):
    """Standards with 8 % scatter: the curve's uncertainty is not negligible against the fit's
    3.9 % and is added to each run's weight; log K stays near the amounts' value."""
    study = load_study(responses_study(tmp_path, noise=0.08, seed=3))
    report = fit_study(study)
    u = report.to_dict()["calibration"]["uncertainty"]
    assert u["negligible"] is False and u["included_in_weights"] is True
    assert u["median_ratio"] >= 1 / 3
    assert report.fit.obs.extra_var is not None and np.all(report.fit.obs.extra_var >= 0)
    plain = fit_study(load_study(DEMO))
    assert report.fit.parameters["logK"].value == pytest.approx(
        plain.fit.parameters["logK"].value, abs=0.15)


def test_fit_json_and_summary_carry_the_calibration(tmp_path, capsys):
    folder = responses_study(tmp_path)
    assert main(["fit", str(folder), "--json"]) == 0
    d = json.loads(capsys.readouterr().out.splitlines()[0])
    cal = d["calibration"]
    assert cal["status"] == "pass" and cal["curves"][0]["id"] == "curve"
    curve = cal["curves"][0]
    assert curve["acceptance"]["standards_passing"] == 16
    assert set(curve["parameters"]) == {"intercept", "slope"}
    assert curve["parameters"]["slope"]["value"] == pytest.approx(B, rel=1e-9)
    assert any(v["criterion"] == "calibration curve (ICH M10)" for v in d["verdicts"])
    assert main(["fit", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "calibration curve: linear" in out and "16/16 standards" in out


# -- located errors -------------------------------------------------------------------------------

CAL_YAML = """\
title: Test study
analyte:
  name: TX-1
  model: base
system:
  aqueous: 0.1 M phosphate buffer
  organic: n-heptane
  temperature_C: 25
runs: runs.csv
calibration: {calibration}
"""
RUNS = """\
run,pH,aqueous_mL,organic_mL,spiked,response_aqueous,response_organic{extra_head}
R1,7.0,10,10,100,400,590{extra}
R2,8.0,10,10,100,200,790{extra}
R3,9.0,10,20,100,50,960{extra}
R4,9.5,10,20,100,30,970{extra}
"""
CAL = """\
standard,level,response
C1,1,10
C2,5,50
C3,10,100
C4,50,500
C5,100,1000
C6,150,1500
"""


def _problems(tmp_path, *, calibration="cal.csv", cal=CAL, runs=None, extra_head="",
              extra="") -> list:
    folder = write_study(tmp_path, yaml_text=CAL_YAML.format(calibration=calibration),
                         runs=runs or RUNS.format(extra_head=extra_head, extra=extra))
    if cal is not None:
        (folder / "cal.csv").write_text(cal)
    study, problems = check_study(folder)
    return study, [p for p in problems if p.severity == "error"]


def test_valid_calibrated_study_reads(tmp_path):
    study, errors = _problems(tmp_path)
    assert errors == [] and study.calibration is not None
    assert [r.found_organic for r in study.runs] == pytest.approx([59, 79, 96, 97])
    assert study.inputs[-1].role == "calibration"


@pytest.mark.parametrize("cal, column, message, line", [
    (CAL.replace("response", "area"), "response", "missing column", 1),
    (CAL.replace("C3,10,100", "C3,ten,100"), "level", "not a number", 4),
    (CAL.replace("C3,10,100", "C3,-10,100"), "level", "negative level", 4),
    (CAL.replace("C3,10,100", "C3,0,100"), "level", "level 0", 4),
    (CAL.replace("C2,5,50", "C2,5,-50"), "response", "negative response", 3),
    (CAL.replace("C2,5,50", "C2,5,"), "response", "empty cell", 3),
    ("standard,level,response\nC1,1,10\nC2,1,11\nC3,1,9\n", "level", "fewer than 2 levels", 2),
    (CAL.replace("standard,level,response", "standard,level,response,phase")
        .replace("C1,1,10", "C1,1,10,water"), "phase", "unknown phase", 2),
])
def test_malformed_calibration_tables_get_located_errors(tmp_path, cal, column, message, line):
    study, errors = _problems(tmp_path, cal=cal)
    assert study is None
    hit = [p for p in errors if message in p.message]
    assert hit, [str(p) for p in errors]
    assert hit[0].file.endswith("cal.csv") and hit[0].line == line
    assert hit[0].column == column


def test_calibration_errors_in_study_yaml_are_located(tmp_path):
    _, errors = _problems(tmp_path, calibration="missing.csv")
    assert errors[0].key == "calibration" and "does not exist" in errors[0].message
    _, errors = _problems(tmp_path / "b", calibration="{table: cal.csv, level: mass}")
    assert errors[0].key == "calibration.level" and errors[0].found == "mass"
    _, errors = _problems(tmp_path / "c", calibration="{table: cal.csv, modle: linear}")
    assert errors[0].key == "calibration.modle"


def test_responses_without_a_calibration_are_an_error(tmp_path):
    folder = write_study(tmp_path, yaml_text=CAL_YAML.replace("calibration: {calibration}\n",
                                                              ""),
                         runs=RUNS.format(extra_head="", extra=""))
    study, problems = check_study(folder)
    assert study is None
    assert "names no calibration table" in problems[0].message and problems[0].run == "R1"


def test_run_naming_an_unknown_sequence(tmp_path):
    cal = CAL.replace("standard,level,response", "standard,level,response,sequence")
    cal = "\n".join(line + ",S1" if i else line for i, line in enumerate(cal.splitlines()))
    _, errors = _problems(tmp_path, cal=cal + "\n", extra_head=",sequence", extra=",S2")
    assert errors and all("no calibration for sequence 'S2'" in p.message for p in errors)
    assert errors[0].run == "R1" and errors[0].line == 2


def test_internal_standard_rules(tmp_path):
    cal = CAL.replace("standard,level,response", "standard,level,response,is_response")
    cal = "\n".join(line + ",2" if i else line for i, line in enumerate(cal.splitlines()))
    _, errors = _problems(tmp_path, cal=cal + "\n")
    assert errors and "needs its internal-standard response" in errors[0].message
    assert errors[0].column == "is_response_aqueous"
    study, errors = _problems(tmp_path / "b", cal=cal + "\n",
                              extra_head=",is_response_aqueous,is_response_organic",
                              extra=",2,2")
    assert errors == []
    assert study.runs[0].found_organic == pytest.approx(59)


def test_found_amount_and_response_in_one_phase_is_refused(tmp_path):
    runs = RUNS.format(extra_head=",found_aqueous", extra=",40")
    _, errors = _problems(tmp_path, runs=runs)
    assert errors and "both a found amount and a response" in errors[0].message


def test_demo_folder_is_not_written(tmp_path):
    before = {p.name: p.read_bytes() for p in DEMO.iterdir()}
    shutil.copytree(DEMO, tmp_path / "copy")
    fit_study(load_study(responses_study(tmp_path)))
    assert {p.name: p.read_bytes() for p in DEMO.iterdir()} == before


# -- the Calibration section of the study page ------------------------------------------------

def _page_dict(tmp_path, noise=0.0):
    folder = responses_study(tmp_path, noise=noise)
    cal = (folder / "calibration.csv").read_text().splitlines()
    cells = cal[5].split(",")
    cells[2] = repr(float(cells[2]) * 1.25)         # standard CS3-1 reads 25 % high
    cal[5] = ",".join(cells)
    (folder / "calibration.csv").write_text("\n".join(cal) + "\n")
    return json.loads(json.dumps(fit_study(load_study(folder)).to_dict()))


def test_calibration_section_numbers_are_the_dicts_and_in_the_register(tmp_path):
    import html
    import re

    from extractval.report.pages import Pages, StudyInput
    from extractval.report.plots import plot_name, study_plots
    from extractval.report.register import study_register
    from tests.test_report_pages import DOSSIER, SPAN, TEMPLATES, assert_numbers_are_the_dicts

    d = _page_dict(tmp_path)
    curve = d["calibration"]["curves"][0]
    assert [r["standard"] for r in curve["standards"] if r["verdict"] == "fail"] == ["CS3-1"]
    plots = study_plots(d)
    assert {plot_name("calibration", "curve"), plot_name("calibration_errors", "curve")} \
        <= set(plots)
    shown = StudyInput("CAL-EQ", d, plots=tuple(plots))
    page = Pages(TEMPLATES, trace=True).study_page(shown, DOSSIER)
    section = page[page.index("## Calibration"):page.index("## Fitted constants")]
    assert "calibration-curve.svg" in section and "calibration-curve-errors.svg" in section
    assert re.search(r"<tr><td>CS3-1</td>.*?xv-verdict--fail", section)
    assert section.count("xv-verdict--fail\">fail") == 1
    assert_numbers_are_the_dicts(section, d, ("int", "g", "g6", "f1", "f2", "r4", "se", "rel"), 50)
    register = {n.source: n for q in study_register(d) for n in q.numbers}
    ids = [n.identifier for n in register.values()]
    assert len(ids) == len(set(ids))
    for ident in ("CAL-EQ/calibration/curve/slope", "CAL-EQ/calibration/curve/slope/ci95_lo",
                  "CAL-EQ/calibration/curve/CS3-1/relative_error_pct",
                  "CAL-EQ/quantitation/K118-01/aqueous/amount"):
        assert ident in ids
    cal_sources = {s for s in register if s.startswith("/calibration/")}
    assert cal_sources <= {html.unescape(s[1]) for s in SPAN.findall(page)}
