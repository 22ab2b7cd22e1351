"""Method-validation runs in a study folder: reading the spike_stage / matrix / level / day /
analyst / instrument columns with located errors, ``method_targets:``, and the
``method_recovery`` and ``precision`` keys of ``fit --json`` and the CLI summary."""

from __future__ import annotations

import csv
import io
import json
import shutil
from pathlib import Path

import pytest

from extractval.analysis import fit_study
from extractval.cli import main
from extractval.study import check_study, load_study

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "studies" / "HPA-2026-030"


def _copy(tmp_path: Path) -> Path:
    folder = tmp_path / "MV-1"
    shutil.copytree(DEMO, folder)
    return folder


def _rows(folder: Path) -> tuple[list[str], list[dict]]:
    text = (folder / "runs.csv").read_text(encoding="utf-8")
    reader = csv.DictReader(io.StringIO(text))
    return reader.fieldnames, list(reader)


def _write(folder: Path, header, rows) -> None:
    out = io.StringIO()
    w = csv.DictWriter(out, header, lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    (folder / "runs.csv").write_text(out.getvalue(), encoding="utf-8")


def _edit(folder: Path, run: str, **cells) -> int:
    """Set cells of one run; returns the run's line in runs.csv."""
    header, rows = _rows(folder)
    for i, r in enumerate(rows):
        if r["run"] == run:
            r.update(cells)
            _write(folder, header, rows)
            return i + 2
    raise KeyError(run)


def _errors(folder: Path):
    study, problems = check_study(folder)
    return study, [p for p in problems if p.severity == "error"]


def test_demo_reads_method_runs_apart_from_the_fit():
    study = load_study(DEMO)
    assert len(study.method_runs) == 81 and len(study.runs) == 18
    assert {r.spike_stage for r in study.method_runs} == {"pre", "post", "neat"}
    assert all(r.spike_stage is None for r in study.runs)
    assert study.method_targets == {"recovery_rsd_max_pct": 15.0,
                                    "repeatability_rsd_max_pct": 10.0,
                                    "intermediate_rsd_max_pct": 15.0}
    pre = [r for r in study.method_runs if r.spike_stage == "pre"]
    assert {(r.day, r.analyst) for r in pre} == {(f"D{d}", a) for d in (1, 2, 3)
                                                 for a in ("AN", "JS")}
    assert {r.matrix for r in study.method_runs if r.spike_stage == "post"} == {
        "PL-0311", "PL-0327", "PL-0402", "PL-0419", "PL-0505", "PL-0522"}


@pytest.mark.parametrize("run,cells,column,message,found", [
    ("V30-001", {"spike_stage": "before"}, "spike_stage", "unknown spike stage", "before"),
    ("V30-025", {"matrix": "PL-0311", "spike_stage": "neat", "level": "low"}, "matrix",
     "a neat standard (in solvent) has no matrix lot", "PL-0311"),
    ("M30-01", {"day": "D1"}, "day", "a method-validation cell on a run without spike_stage",
     "day='D1'"),
])
def test_bad_method_cells_get_located_errors(tmp_path, run, cells, column, message, found):
    folder = _copy(tmp_path)
    line = _edit(folder, run, **cells)
    study, errors = _errors(folder)
    assert study is None
    (p,) = [e for e in errors if message in e.message]
    assert p.file.endswith("runs.csv") and p.line == line and p.run == run
    assert p.column == column and found in p.found
    assert p.expected


def test_method_run_without_an_extract_value_is_located(tmp_path):
    folder = _copy(tmp_path)
    header, rows = _rows(folder)
    line = None
    for i, r in enumerate(rows):
        if r["run"] == "V30-013":
            r["response_aqueous"], r["response_organic"] = r["response_organic"], ""
            r["is_response_aqueous"], r["is_response_organic"] = r["is_response_organic"], ""
            line = i + 2
    _write(folder, header, rows)
    _, errors = _errors(folder)
    (p,) = [e for e in errors if "without a value in the final extract" in e.message]
    assert (p.line, p.run) == (line, "V30-013")
    assert "response_organic" in p.expected


def test_mixed_bases_are_refused_with_both_runs_named(tmp_path):
    folder = _copy(tmp_path)
    line = _edit(folder, "V30-030", is_response_organic="")
    _, errors = _errors(folder)
    (p,) = [e for e in errors if "mix measurement bases" in e.message]
    assert p.run == "V30-030" and p.line == line
    assert "response per unit spiked here" in p.found and "V30-001" in p.found


def test_every_run_a_method_run_is_an_error(tmp_path):
    folder = _copy(tmp_path)
    header, rows = _rows(folder)
    _write(folder, header, [r for r in rows if r["spike_stage"]])
    text = (folder / "study.yaml").read_text()
    (folder / "study.yaml").write_text(text.replace(
        "calibration:\n  table: calibration.csv\n  level: amount\n  unit: ug\n", ""))
    study, errors = _errors(folder)
    assert study is None
    assert any("no shake-flask run is left to fit" in e.message for e in errors)


@pytest.mark.parametrize("yaml_text,key,message", [
    ("method_targets:\n  intermediate_rsd_max_pct: -3\n", "intermediate_rsd_max_pct", ""),
    ("method_targets:\n  recovery_pct: 90\n", "recovery_pct", "pair of percentages"),
    ("method_targets:\n  matrix_lots_min: 2.5\n", "matrix_lots_min", ""),
    ("method_targets:\n  matrix_cv: 15\n", "matrix_cv", ""),
])
def test_method_targets_errors_are_located(tmp_path, yaml_text, key, message):
    folder = _copy(tmp_path)
    text = (folder / "study.yaml").read_text()
    start = text.index("method_targets:")
    end = text.index("procedures:")
    text = text[:start] + yaml_text + text[end:]
    (folder / "study.yaml").write_text(text)
    line = text[:text.index(key, start)].count("\n") + 1
    _, errors = _errors(folder)
    assert errors, "a bad method_targets entry is an error"
    p = errors[0]
    assert p.file.endswith("study.yaml") and p.line == line
    assert message in p.message


def test_excluded_method_run_stays_listed_with_its_reason(tmp_path):
    folder = _copy(tmp_path)
    header, rows = _rows(folder)
    if "excluded" not in header:
        header = header + ["excluded"]
        for r in rows:
            r["excluded"] = ""
    for r in rows:
        if r["run"] == "V30-002":
            r["excluded"] = "vial dropped"
    _write(folder, header, rows)
    d = fit_study(load_study(folder)).to_dict()
    m = d["method_recovery"]
    (lo,) = m["left_out"]
    assert (lo["run"], lo["reason"]) == ("V30-002", "excluded: vial dropped")
    assert lo["location"].endswith("runs.csv, line 21")
    row = [r for r in m["run_table"] if r["run"] == "V30-002"][0]
    assert row["left_out"] == "excluded: vial dropped" and row["value"] is None
    assert m["runs"]["used"] == 80 and m["runs"]["total"] == 81
    assert any("V30-002" in w and "vial dropped" in w for w in d["warnings"])


def test_fit_json_and_summary_carry_method_recovery_and_precision(capsys):
    assert main(["fit", "--json", str(DEMO)]) == 0
    d = json.loads(capsys.readouterr().out.splitlines()[0])
    m, prec = d["method_recovery"], d["precision"]
    assert set(m["recovery"]) == {"low", "mid", "high"}
    assert m["is_normalised"] is True
    assert m["matrix_factor"]["low"]["n_lots"] == 6
    assert m["matrix_factor_lots"]["n_lots"] == 6
    assert m["recovery_overall"]["n"] == 36
    assert [p["level"] for p in prec["levels"]] == ["low", "mid", "high"]
    assert prec["levels"][0]["factors"] == ["day", "analyst"]
    assert prec["levels"][0]["n_groups"] == 6 and prec["levels"][0]["unit"] == "recovery, %"
    # the verdicts of the method are the study's verdicts (one list, one status)
    crit = [v["criterion"] for v in d["verdicts"]]
    assert [c for c in crit if c.startswith("matrix_factor_cv_pct")] == [
        "matrix_factor_cv_pct[low]", "matrix_factor_cv_pct[mid]", "matrix_factor_cv_pct[high]"]
    assert sum(c.startswith("intermediate_rsd_pct[") for c in crit) == 3
    mf = [v for v in d["verdicts"] if v["criterion"].startswith("matrix_factor_cv_pct")]
    assert all(v["basis"] == "default" for v in mf)       # not set in study.yaml
    own = [v for v in d["verdicts"] if v["criterion"].startswith("intermediate_rsd_pct")]
    assert all(v["basis"] == "target" for v in own)
    assert main(["fit", str(DEMO)]) == 0
    text = capsys.readouterr().out
    low = m["recovery"]["low"]
    assert f"recovery low: {low['value']:.1f} %" in text
    assert f"IS-normalised matrix factor low: {m['matrix_factor']['low']['mean']:.3f}" in text
    assert f"RSD_I {prec['levels'][0]['rsd_I_pct']:.2f} %" in text
    assert "Intermediate-precision RSD, ISO 5725-3 (%), level mid: Met" in text


def test_unset_limits_are_not_judged(tmp_path):
    folder = _copy(tmp_path)
    text = (folder / "study.yaml").read_text()
    start, end = text.index("method_targets:"), text.index("procedures:")
    (folder / "study.yaml").write_text(text[:start] + text[end:])
    d = fit_study(load_study(folder)).to_dict()
    crit = {v["criterion"].partition("[")[0] for v in d["verdicts"]}
    assert "matrix_factor_cv_pct" in crit          # the guideline default
    assert not crit & {"intermediate_rsd_pct", "repeatability_rsd_pct",
                       "method_recovery_rsd_pct", "method_recovery_pct"}


def test_method_section_numbers_are_the_dicts_and_in_the_register():
    import html
    import re

    from extractval.report.pages import Pages, StudyInput
    from extractval.report.register import study_register
    from tests.test_report_pages import DOSSIER, SPAN, TEMPLATES, assert_numbers_are_the_dicts

    d = fit_study(load_study(DEMO)).to_dict()
    page = Pages(TEMPLATES, trace=True).study_page(StudyInput("HPA-2026-030", d), DOSSIER)
    section = page[page.index("## Method recovery"):page.index("## Fitted constants")]
    assert_numbers_are_the_dicts(section, d, ("int", "g", "f1", "f2", "f3"), 150)
    spans = SPAN.findall(section)
    # the level table, the lots' matrix factors and the precision components are all there
    for ptr in ("/method_recovery/recovery/low/value", "/method_recovery/recovery/high/ci95/1",
                "/method_recovery/matrix_factor/mid/lots/PL-0402",
                "/method_recovery/matrix_factor_lots/cv_pct", "/precision/levels/2/s_I",
                "/precision/levels/0/rsd_r_pct", "/method_recovery/recovery_consistency/p_value"):
        assert ptr in {html.unescape(s[1]) for s in spans}, ptr
    register = {n.source: n for q in study_register(d) for n in q.numbers}
    ids = [n.identifier for n in register.values()]
    assert len(ids) == len(set(ids))
    for ident in ("HPA-2026-030/method/recovery/low", "HPA-2026-030/method/recovery/low/ci95_lo",
                  "HPA-2026-030/method/matrix_factor/high/cv_pct",
                  "HPA-2026-030/method/matrix_factor/mid/PL-0311",
                  "HPA-2026-030/method/matrix_factor/lots/PL-0522",
                  "HPA-2026-030/precision/mid/s_I", "HPA-2026-030/precision/mid/rsd_I_pct"):
        assert ident in ids, ident
    shown = {html.unescape(s[1]) for s in SPAN.findall(page)}
    method_sources = {s for s in register if s.startswith(("/method_recovery/", "/precision/"))
                      and "/run_table/" not in s and "/verdicts/" not in s
                      # kept for the register's citation lines, not shown on the page
                      and not s.endswith("/se") and "/s_r_ci95/" not in s}
    assert method_sources <= shown, method_sources - shown
    assert re.search(r"method/recovery/overall", section)


def test_acceptance_table_shows_per_level_criteria_as_a_grid():
    from extractval.report.pages import Pages, StudyInput
    from tests.test_report_pages import DOSSIER, TEMPLATES

    d = fit_study(load_study(DEMO)).to_dict()
    page = Pages(TEMPLATES).study_page(StudyInput("HPA-2026-030", d), DOSSIER)
    section = page[page.index("## Acceptance criteria"):page.index("## Checks of the data")]
    grid = section[section.index("Criterion, per level"):section.index("</table>",
                                                                       section.index("per level"))]
    assert grid.count("<tr>") == 4              # one row per criterion (after the header)
    assert "<th>low</th><th>mid</th><th>high</th>" in grid
    assert grid.count("xv-verdict--pass") == 12
    assert "15 (default)" in grid                # the matrix-factor CV limit nobody set
    # every per-level verdict is also listed on its own, with how it was judged, in a fold
    import html

    folded = html.unescape(section[section.index("one by one"):])
    for v in d["verdicts"]:
        if "[" in v["criterion"]:
            assert v["detail"] in folded


@pytest.mark.parametrize("drop_stage,drop_cols", [("neat", ("day", "analyst")),
                                                  ("post", ()), (None, ("matrix",))])
def test_partial_method_designs_render_with_their_notes(tmp_path, drop_stage, drop_cols):
    """No neat runs (no matrix factor) and no day/analyst (no precision), no post runs (no
    recovery), no lots: the page says what is missing and names no number it lacks."""
    import html

    from extractval.report.pages import Pages, StudyInput
    from tests.test_report_pages import DOSSIER, TEMPLATES

    folder = _copy(tmp_path)
    header, rows = _rows(folder)
    rows = [r for r in rows if r["spike_stage"] != drop_stage]
    for r in rows:
        for c in drop_cols:
            r[c] = ""
    _write(folder, header, rows)
    d = fit_study(load_study(folder)).to_dict()
    m = d["method_recovery"]
    page = Pages(TEMPLATES).study_page(StudyInput("MV-1", d), DOSSIER)
    section = html.unescape(page[page.index("## Method recovery"):
                                 page.index("## Fitted constants")])
    if drop_stage == "post":
        assert all("note" in r for r in m["recovery"].values())
        assert "recovery needs pre and post runs at this level: 12 pre, 0 post" in section
        assert all("note" in mf for mf in m["matrix_factor"].values())
        low = d["precision"]["levels"][0]
        assert low["unit"] == "% of the level's mean value"
        assert low["s_r"] == pytest.approx(low["rsd_r_pct"], rel=1e-9)   # mean 100
    if drop_stage == "neat":
        assert d["precision"]["levels"] == []
        assert all("note" in mf for mf in m["matrix_factor"].values())
        assert "the matrix factor needs post runs in a named lot and neat runs" in section
        assert not any(v["criterion"].startswith("matrix_factor_cv_pct")
                       for v in d["verdicts"])
    if drop_cols == ("matrix",):
        assert m["matrix_factor_lots"] is None
        assert all(r["lots"] == {} for r in m["recovery"].values())
        assert "PL-0311" not in section


def test_check_prints_located_method_errors_and_fails(tmp_path, capsys):
    folder = _copy(tmp_path)
    line = _edit(folder, "V30-040", spike_stage="after")
    assert main(["check", str(folder)]) == 1
    err = capsys.readouterr().err
    assert f"line {line}" in err and "V30-040" in err and "spike_stage" in err
    assert "unknown spike stage" in err and "after" in err and "Traceback" not in err


def test_every_shake_flask_run_excluded_is_warned_although_method_runs_remain(tmp_path):
    folder = _copy(tmp_path)
    header, rows = _rows(folder)
    header = header + ["excluded"]
    for r in rows:
        r["excluded"] = "" if r["spike_stage"] else "buffer prepared wrongly"
    _write(folder, header, rows)
    study, problems = check_study(folder)
    assert study is not None and len(study.method_runs) == 81
    assert any("every run is excluded" in p.message and p.severity == "warning"
               for p in problems)


def test_check_counts_the_method_runs(capsys):
    assert main(["check", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "HPA-2026-030: ok (18 runs, 0 excluded, 81 method-validation runs" in out
