"""Studies with a suitability table: reading it (located errors), limits from study.yaml,
verdicts per sequence, runs of a failing sequence left out of the fit and kept visible, and the
report's suitability key in fit --json, the CLI summary and the study page."""

import html
import json
import shutil
from pathlib import Path

import pytest

from extractval import suitability as su
from extractval.analysis import fit_study
from extractval.cli import main
from extractval.study import check_study, load_study

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "studies" / "HPA-2026-014"

HEADER = ("sequence,injection,rt_analyte,rt_neighbour,rt_unretained,w_half_analyte,"
          "w_half_neighbour,w_5pct,f_5pct,response")
#: five passing injections (Rs 1.18 x 0.8 / 0.36 = 2.62, T 1.375, N 5899) per sequence
GOOD = "{seq},{i},6.20,5.40,1.00,0.19,0.17,0.44,0.16,{resp}"
RESPONSES = (1000.0, 1004.0, 998.0, 1001.0, 997.0)


def suitability_csv(sequences=("S1", "S2"), bad: dict | None = None) -> str:
    """Five injections per sequence; ``bad`` maps a sequence to (column, value) set on its
    third injection."""
    cols = HEADER.split(",")
    lines = [HEADER]
    for seq in sequences:
        for i, r in enumerate(RESPONSES, 1):
            cells = GOOD.format(seq=seq, i=f"I{i}", resp=r).split(",")
            if bad and seq in bad and i == 3:
                col, value = bad[seq]
                cells[cols.index(col)] = value
            lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


def suitability_study(root: Path, table: str | None = None, *, limits: str = "",
                      sequences=("S1", "S2"), bad: dict | None = None,
                      table_name: str = "suitability.csv", yaml_value: str | None = None) -> Path:
    """The demo study HPA-2026-014 with a sequence column (odd runs S1, even runs S2) and a
    suitability table."""
    folder = root / "SU-1"
    shutil.copytree(DEMO, folder)
    # the sequence goes in as the second column: a cell after the last would meet the demo's
    # one unquoted ';' in an exclusion reason
    lines = (folder / "runs.csv").read_text(encoding="utf-8-sig").splitlines()
    out = [lines[0].replace("run;", "run;sequence;", 1)]
    for k, line in enumerate(lines[1:]):
        run, rest = line.split(";", 1)
        out.append(f"{run};{sequences[k % len(sequences)]};{rest}")
    (folder / "runs.csv").write_text("\n".join(out) + "\n", encoding="utf-8")
    y = (folder / "study.yaml").read_text()
    value = yaml_value if yaml_value is not None else table_name
    y = y.replace("runs: runs.csv", f"runs: runs.csv\nsuitability: {value}" + limits)
    (folder / "study.yaml").write_text(y)
    (folder / table_name).write_text(table if table is not None
                                     else suitability_csv(sequences, bad))
    return folder


def test_passing_sequences_judge_and_fit_every_run(tmp_path):
    study = load_study(suitability_study(tmp_path))
    assert study.suitability.report.failed() == {}
    assert not any(r.suitability for r in study.runs)
    assert study.inputs[-1].role == "suitability"
    d = fit_study(study).to_dict()
    s = d["suitability"]
    assert [x["status"] for x in s["sequences"]] == ["pass", "pass"]
    assert s["runs_flagged"] == 0
    # the worked numbers of tests/reference/chromatography.py
    assert s["sequences"][0]["worst"]["resolution"] == pytest.approx(1.18 * 0.8 / 0.36)
    assert s["sequences"][0]["worst"]["tailing_factor"] == pytest.approx(0.44 / 0.32)
    assert s["limits"]["resolution_min"] == {"value": 2.0,
                                             "source": "default (common practice)"}
    v = [x for x in d["verdicts"] if x["criterion"].startswith("system suitability")]
    assert [(x["status"], x["basis"]) for x in v] == [("pass", "default")] * 2
    assert {r["suitability"] for r in d["run_table"]} == {"pass"}


def test_failing_sequence_leaves_its_runs_out_and_visible(tmp_path):
    # one chromatogram of S2 with a neighbour at 5.90: Rs = 1.18 x 0.3 / 0.36 = 0.98 < 2
    folder = suitability_study(tmp_path, bad={"S2": ("rt_neighbour", "5.90")})
    study = load_study(folder)
    assert set(study.suitability.report.failed()) == {"S2"}
    report = fit_study(study)
    d = report.to_dict()
    s2 = [r for r in d["run_table"] if r["sequence"] == "S2"]
    s1 = [r for r in d["run_table"] if r["sequence"] == "S1"]
    assert s2 and all(r["suitability"] == "fail" for r in s2)
    # not silently used: every S2 run that was not excluded is "not usable", with the reason
    for r in s2:
        if r["status"] != "excluded":
            assert r["status"] == "not usable"
            assert "sequence S2 fails system suitability" in r["reason"]
            assert "resolution" in r["reason"] and "left out of the fit" in r["reason"]
            assert "fitted" not in r
    assert len(d["run_table"]) == 40          # the demo HPA-2026-014, runs at four ratios
    assert any(r["status"] == "used" for r in s1)
    assert d["runs"]["used"] == sum(r["status"] == "used" for r in s1)
    left = [r["run"] for r in s2 if r["status"] == "not usable"]
    assert d["suitability"]["runs_flagged"] == len(left) == len(s2) - 1   # K118-20 excluded
    assert d["suitability"]["sequences"][1]["runs_left_out"] == left
    warn = [w for w in d["warnings"] if "fails system suitability" in w]
    assert len(warn) == 1 and "'S2'" in warn[0] and "are not used" in warn[0]
    v = {x["criterion"]: x for x in d["verdicts"]}
    assert v["system suitability S2"]["status"] == "fail"
    assert v["system suitability S1"]["status"] == "pass"
    assert d["status"] == "fail"


def test_study_limits_and_switching_a_default_off(tmp_path):
    limits = ("\nsuitability_limits:\n  resolution_min: 3.0\n  tailing_max: null\n"
              "  plates_min: 5000\n")
    d = fit_study(load_study(suitability_study(tmp_path, limits=limits))).to_dict()
    s = d["suitability"]
    assert s["limits"]["resolution_min"] == {"value": 3.0, "source": "study.yaml"}
    assert s["limits"]["tailing_max"] == {"value": None, "source": "switched off in study.yaml"}
    assert s["limits"]["injection_rsd_max_pct"]["source"] == "default (common practice)"
    crit = {v["criterion"]: v for v in s["sequences"][0]["verdicts"]}
    assert "suitability_tailing_max" not in crit           # no limit: not judged at all
    assert crit["suitability_resolution_min"]["status"] == "fail"     # 2.62 < 3
    assert crit["suitability_resolution_min"]["basis"] == "target"
    assert crit["suitability_plates_min"]["status"] == "pass"         # 5899 >= 5000
    assert crit["suitability_injection_rsd_max_pct"]["basis"] == "default"
    assert d["suitability"]["runs_flagged"] == 39          # the 40 runs but the excluded one


def test_fit_json_and_summary_carry_the_suitability(tmp_path, capsys):
    folder = suitability_study(tmp_path, bad={"S1": ("w_5pct", "0.70")})   # T = 2.19 > 2
    assert main(["fit", str(folder), "--json"]) == 0
    d = json.loads(capsys.readouterr().out.splitlines()[0])
    assert d["suitability"]["failed_sequences"] == ["S1"]
    assert main(["fit", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "suitability S1: fail" in out and "tailing" in out
    assert "suitability S2: pass" in out
    assert "warning: " in out and "sequence 'S1' fails system suitability" in out


# -- located errors ------------------------------------------------------------------------------

def _errors(tmp_path, table, **kw):
    study, problems = check_study(suitability_study(tmp_path, table, **kw))
    return study, [p for p in problems if p.severity == "error"]


def _swap(column: str, value: str, line: int = 4) -> str:
    """The passing table with one cell replaced (``line`` is the file's line number)."""
    lines = suitability_csv().splitlines()
    cols = lines[0].split(",")
    cells = lines[line - 1].split(",")
    cells[cols.index(column)] = value
    lines[line - 1] = ",".join(cells)
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("table, column, message, line", [
    (suitability_csv().replace("sequence,", "seq,", 1), "sequence", "missing column", 1),
    (_swap("rt_analyte", "six"), "rt_analyte", "not a number", 4),
    (_swap("w_half_analyte", "-0.19"), "w_half_analyte", "negative width", 4),
    (_swap("rt_unretained", "0"), "rt_unretained", "zero time", 4),
    (_swap("response", "-5"), "response", "negative response", 4),
    (_swap("rt_unretained", "6.5"), "rt_analyte", "no later than the unretained marker", 4),
    (_swap("f_5pct", "0.50"), "f_5pct", "f is not inside W0.05", 4),
    (_swap("sequence", ""), "sequence", "empty sequence", 4),
    (_swap("injection", "I2"), "injection", "duplicate injection label", 4),
    (HEADER + "\nS1,I1,,,,,,,,\n", "sequence", "gives no time, width or response", 2),
    ("sequence,injection\nS1,I1\n", None, "no column of times, widths or responses", 1),
    (HEADER + "\n", None, "header but no injections", 1),
])
def test_malformed_suitability_tables_get_located_errors(tmp_path, table, column, message,
                                                         line):
    study, errors = _errors(tmp_path, table)
    assert study is None
    hit = [p for p in errors if message in p.message]
    assert hit, [str(p) for p in errors]
    assert hit[0].file.endswith("suitability.csv") and hit[0].line == line
    assert hit[0].column == column
    assert hit[0].expected


def test_neighbour_width_without_its_time(tmp_path):
    table = _swap("rt_neighbour", "")
    _, errors = _errors(tmp_path, table)
    assert errors[0].message == "w_half_neighbour is given without rt_neighbour"
    assert errors[0].line == 4 and errors[0].column == "rt_neighbour"


def test_xlsx_suitability_table_is_read_with_rows(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    for line in suitability_csv().splitlines():
        ws.append([c if i < 2 else float(c) for i, c in enumerate(line.split(","))]
                  if not line.startswith("sequence") else line.split(","))
    ws.cell(row=5, column=3).value = "late"
    folder = suitability_study(tmp_path, "", table_name="suitability.xlsx")
    wb.save(folder / "suitability.xlsx")
    study, problems = check_study(folder)
    errors = [p for p in problems if p.severity == "error"]
    assert study is None and errors[0].row == 5 and errors[0].column == "rt_analyte"
    assert errors[0].message == "not a number" and errors[0].found == "late"


def test_study_yaml_errors_are_located(tmp_path):
    _, errors = _errors(tmp_path / "a", None, yaml_value="missing.csv")
    assert errors[0].key == "suitability" and "does not exist" in errors[0].message
    _, errors = _errors(tmp_path / "b", None, yaml_value="{table: suitability.csv, unit: min}")
    assert errors[0].key == "suitability.unit"
    _, errors = _errors(tmp_path / "c", None, limits="\nsuitability_limits:\n  tailing_max: -1\n")
    assert errors[0].key == "suitability_limits.tailing_max" and errors[0].line
    _, errors = _errors(tmp_path / "d", None,
                        limits="\nsuitability_limits:\n  injections_min: 4.5\n")
    assert errors[0].key == "suitability_limits.injections_min"
    _, errors = _errors(tmp_path / "e", None,
                        limits="\nsuitability_limits:\n  resolution: 2\n")
    assert errors[0].key == "suitability_limits.resolution"


def test_unknown_column_warns_and_sequences_without_rows_warn(tmp_path):
    table = suitability_csv(("S1",)).replace("response", "area")
    study, problems = check_study(suitability_study(tmp_path, table))
    assert study is not None
    warn = [p for p in problems if p.severity == "warning"]
    assert any("unknown column" in p.message and p.column == "area" for p in warn)
    # runs of S2 have no suitability rows: fitted, with a warning naming the sequence
    assert any("sequence 'S2' has no row in the suitability table" in p.message for p in warn)
    assert not any(r.suitability for r in study.runs)


def test_demo_folder_is_not_written(tmp_path):
    before = {p.name: p.read_bytes() for p in DEMO.iterdir()}
    fit_study(load_study(suitability_study(tmp_path, bad={"S2": ("rt_neighbour", "5.9")})))
    assert {p.name: p.read_bytes() for p in DEMO.iterdir()} == before


def test_injections_min_applies(tmp_path):
    limits = "\nsuitability_limits:\n  injections_min: 6\n"
    d = fit_study(load_study(suitability_study(tmp_path, limits=limits))).to_dict()
    v = {x["criterion"]: x for x in d["suitability"]["sequences"][0]["verdicts"]}
    rsd = v["suitability_injection_rsd_max_pct"]
    assert rsd["status"] == "fail" and "at least 6" in rsd["detail"]
    assert rsd["value"] == pytest.approx(su.rsd_pct(RESPONSES))


# -- the System suitability section of the study page ------------------------------------------

def test_suitability_section_numbers_are_the_dicts_and_in_the_register(tmp_path):
    from extractval.report.pages import Pages, StudyInput
    from extractval.report.register import study_register
    from tests.test_report_pages import DOSSIER, SPAN, TEMPLATES, assert_numbers_are_the_dicts

    folder = suitability_study(tmp_path, bad={"S2": ("rt_neighbour", "5.90")})
    d = json.loads(json.dumps(fit_study(load_study(folder)).to_dict()))
    page = Pages(TEMPLATES, trace=True).study_page(StudyInput("SU-1", d), DOSSIER)
    start = page.index("## System suitability")
    section = page[start:page.index("\n## ", start + 5)]
    assert "common practice" in section
    assert section.count('xv-verdict--fail">') >= 2       # the sequence and its resolution
    assert "<details" in section                          # per-injection table folded
    assert_numbers_are_the_dicts(section, d, ("int", "g", "g6", "f1", "f2", "r4", "se", "rel"), 30)
    register = {n.source: n for q in study_register(d) for n in q.numbers}
    ids = [n.identifier for n in register.values()]
    assert len(ids) == len(set(ids))
    for ident in ("SU-1/suitability/S2/resolution", "SU-1/suitability/S1/tailing_factor",
                  "SU-1/suitability/S1/injection_rsd_pct", "SU-1/suitability/S2/I3/resolution"):
        assert ident in ids
    su_sources = {s for s in register if s.startswith("/suitability/")}
    assert su_sources <= {html.unescape(s[1]) for s in SPAN.findall(page)}


def test_worked_check_through_the_table(tmp_path):
    # the hand-worked check of tests/reference/chromatography.py (USP <621>, Ph. Eur. 2.2.46
    # formulas, from memory), read from a table with base and half-height widths
    from tests.reference import chromatography as ref

    w = ref.WORKED
    head = ("sequence,rt_analyte,rt_neighbour,rt_unretained,w_base_analyte,w_base_neighbour,"
            "w_half_analyte,w_half_neighbour,w_5pct,f_5pct")
    row = ",".join(str(w[k]) for k in ("tR", "tR_neighbour", "tM", "width_base",
                                       "width_base_neighbour", "width_half",
                                       "width_half_neighbour", "width_5pct", "front_5pct"))
    table = head + "\n" + "\n".join(f"S1,{row}" for _ in range(2)) + "\n"
    d = fit_study(load_study(suitability_study(tmp_path, table, sequences=("S1",)))).to_dict()
    q = d["suitability"]["sequences"][0]["injections"][0]
    assert round(q["retention_factor"], 2) == ref.WORKED_K
    assert round(q["selectivity"], 4) == ref.WORKED_ALPHA
    assert round(q["resolution"], 4) == ref.WORKED_RS_BASE
    assert q["resolution_method"] == "base widths"
    assert round(q["plate_number"], 1) == ref.WORKED_N_HALF
    assert q["tailing_factor"] == pytest.approx(ref.WORKED_TAILING, abs=5e-4)
    v = {x["criterion"]: x for x in d["suitability"]["sequences"][0]["verdicts"]}
    assert v["suitability_injection_rsd_max_pct"]["status"] == "not judged"   # no responses
    assert v["suitability_resolution_min"]["status"] == "pass"


def test_demo_method_study_shows_suitability_with_verdicts():
    # studies/HPA-2026-030 (benchmarks/make_demo_studies.py): both sequences pass, with the
    # defaults and the study's own plate-number minimum
    study = load_study(ROOT / "studies" / "HPA-2026-030")
    d = fit_study(study).to_dict()
    s = d["suitability"]
    assert [q["sequence"] for q in s["sequences"]] == ["SEQ-A", "SEQ-B"]
    assert [q["status"] for q in s["sequences"]] == ["pass", "pass"]
    assert s["limits"]["plates_min"] == {"value": 5000.0, "source": "study.yaml"}
    assert s["limits"]["resolution_min"]["source"] == "default (common practice)"
    assert all(len(q["verdicts"]) == 4 and q["n_injections"] == 6 for q in s["sequences"])
    assert s["runs_flagged"] == 0
    # every run of the study (shake-flask and method runs) names one of the two sequences
    assert sorted(r for q in s["sequences"] for r in q["runs"]) == sorted(
        r.run_id for r in study.runs + study.method_runs)
    v = [x for x in d["verdicts"] if x["criterion"].startswith("system suitability")]
    assert [x["status"] for x in v] == ["pass", "pass"]


def test_failing_sequence_leaves_method_runs_out_too(tmp_path):
    # the demo method study with one SEQ-B chromatogram whose neighbour moves to 4.75 min
    folder = tmp_path / "MV-1"
    shutil.copytree(ROOT / "studies" / "HPA-2026-030", folder)
    lines = (folder / "suitability.csv").read_text().splitlines()
    cols = lines[0].split(",")
    row = next(i for i, line in enumerate(lines) if line.startswith("SEQ-B,"))
    cells = lines[row].split(",")
    cells[cols.index("rt_neighbour")] = "4.75"
    lines[row] = ",".join(cells)
    (folder / "suitability.csv").write_text("\n".join(lines) + "\n")
    study = load_study(folder)
    d = fit_study(study).to_dict()
    assert d["suitability"]["failed_sequences"] == ["SEQ-B"]
    seq_b = {r.run_id for r in study.runs + study.method_runs if r.sequence == "SEQ-B"}
    assert set(d["suitability"]["sequences"][1]["runs_left_out"]) == seq_b
    left = {r["run"]: r["reason"] for r in d["method_recovery"]["left_out"]}
    method_b = {r.run_id for r in study.method_runs if r.sequence == "SEQ-B"}
    assert method_b and method_b <= set(left)
    assert all("SEQ-B fails system suitability" in left[r] for r in method_b)
    fitted_b = [r for r in d["run_table"] if r["run"] in seq_b]
    assert fitted_b and all(r["status"] == "not usable" for r in fitted_b)
