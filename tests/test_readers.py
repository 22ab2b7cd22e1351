"""Reading study folders: every bad input gives located problems, good input gives records.

The limits checked here (pH 0-14, volumes above 0, found amounts at most 150 % of spiked, the
90-110 % mass-balance band) are the study-folder contract of extractval (see
``extractval/study.py``), not outside reference values.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from extractval import tables
from extractval.errors import StudyError
from extractval.study import check_study, discover_studies, load_study
from extractval.tables import parse_number, read_table
from tests.study_factory import (HEADER, ROWS, RUNS_CSV, STUDY_YAML, reading_problems,
                                 replace_line, snapshot,
                                 write_ods, write_study, write_xlsx)

REPO = Path(__file__).resolve().parents[1]
DEMO = {"HPA-2026-014": (40, 1, "base"), "HPA-2026-015": (36, 0, "acid"),
        "HPA-2026-016": (24, 0, "neutral")}


@pytest.fixture(autouse=True)
def in_tmp(tmp_path, monkeypatch):
    """Run every test from tmp_path, so that display paths read 'ST-1/runs.csv'."""
    monkeypatch.chdir(tmp_path)
    return tmp_path


def matching(problems, message: str | None = None, **fields):
    """Problems whose message contains ``message`` and whose fields equal ``fields``."""
    out = []
    for p in problems:
        if message is not None and message not in p.message:
            continue
        if all(getattr(p, k) == v for k, v in fields.items()):
            out.append(p)
    return out


def only(problems, message: str | None = None, **fields):
    """The single problem that matches; fails listing all problems otherwise."""
    hits = matching(problems, message, **fields)
    assert len(hits) == 1, "\n".join(str(p) for p in problems) or "no problems"
    return hits[0]


def errors(problems):
    return [p for p in problems if p.severity == "error"]


def check_csv(tmp_path, csv_text: str, yaml_text: str | None = None):
    folder = write_study(tmp_path, runs=csv_text, yaml_text=yaml_text)
    study, problems = check_study(folder)
    return study, reading_problems(problems)


def runs_with(row_line: str, header: str = ",".join(HEADER)) -> str:
    """A runs CSV whose second data line (file line 3) is ``row_line``."""
    lines = RUNS_CSV.splitlines()
    return "\n".join([header, lines[1], row_line, lines[3]]) + "\n"


# -- a valid study -------------------------------------------------------------------------------

def test_valid_study_reads_records_and_digests(tmp_path):
    folder = write_study(tmp_path)
    study, problems = check_study(folder)
    assert problems == []
    assert study.study_id == "ST-1"
    assert [r.run_id for r in study.runs] == ["R1", "R2", "R3"]
    r3 = study.runs[2]
    assert (r3.pH, r3.aqueous_mL, r3.organic_mL, r3.spiked, r3.found_aqueous,
            r3.found_organic) == (9.0, 10.0, 20.0, 100.0, 5.0, 96.0)
    assert r3.measurement == "both"
    assert str(r3.location) == "ST-1/runs.csv, line 4"
    assert study.model == "base" and study.analyte_name == "TX-1"
    assert study.system == {"aqueous": "0.1 M phosphate buffer", "organic": "n-heptane",
                            "temperature_C": 25.0}
    assert study.targets.recovery_pct == 95.0
    (p1,) = study.procedures
    assert (p1.id, p1.pH, p1.aqueous_mL, p1.organic_mL) == ("P1", 8.0, 10.0, (10.0, 10.0, 10.0))
    assert (p1.pH_tolerance, p1.volume_tolerance_pct, p1.line) == (0.2, 2.0, 13)
    digests = {f.role: f.sha256 for f in study.inputs}
    assert digests["study"] == hashlib.sha256((folder / "study.yaml").read_bytes()).hexdigest()
    assert digests["runs"] == hashlib.sha256((folder / "runs.csv").read_bytes()).hexdigest()
    assert [f.path for f in study.inputs] == ["ST-1/study.yaml", "ST-1/runs.csv"]


def test_text_fields_are_kept_exactly(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "title: Test study",
                        "title: 2026")
    text = replace_line(text, "name: TX-1", "  name: '007'")
    study, problems = check_csv(tmp_path, RUNS_CSV, text)
    assert errors(problems) == []
    assert study.title == "2026" and study.analyte_name == "007"


def test_load_study_raises_with_every_problem_and_check_study_does_not(tmp_path):
    folder = write_study(tmp_path, runs=runs_with("R2,seven,10,10,100,20,79"))
    study, problems = check_study(folder)
    assert study is None
    with pytest.raises(StudyError) as info:
        load_study(folder)
    assert info.value.problems == problems
    assert info.value.study == "ST-1"
    assert "ST-1/runs.csv, line 3, run 'R2', column 'pH'" in str(info.value)


# -- runs table: one test per bad input ----------------------------------------------------------

def test_missing_column(tmp_path):
    csv = "run,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic\nR1,10,10,100,40,59\n"
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "missing column", column="pH")
    assert (p.file, p.line) == ("ST-1/runs.csv", 1)
    assert p.found == "run, aqueous_mL, organic_mL, spiked, found_aqueous, found_organic"
    assert "pH" in p.expected


def test_missing_measurement_columns(tmp_path):
    _, problems = check_csv(tmp_path, "run,pH,aqueous_mL,organic_mL\nR1,7,10,10\n")
    p = only(problems, "no complete measurement form")
    assert (p.line, p.column) == (1, "spiked, found_aqueous, found_organic")
    assert "recovery_pct" in p.expected


def test_non_numeric_cell(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,seven,10,10,100,20,79"))
    p = only(problems, "not a number")
    assert (p.file, p.line, p.run, p.column, p.found) == (
        "ST-1/runs.csv", 3, "R2", "pH", "seven")
    assert "pH from 0 to 14" in p.expected


def test_overflowing_number_is_not_a_number(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,1e400,100,20,79"))
    p = only(problems, "not a number")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "organic_mL", "1e400")


def test_empty_required_cell(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,,10,100,20,79"))
    p = only(problems, "empty cell")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "aqueous_mL", "")
    assert "volume" in p.expected


def test_empty_run_id(tmp_path):
    _, problems = check_csv(tmp_path, runs_with(",8.0,10,10,100,20,79"))
    p = only(problems, "empty run id")
    assert (p.line, p.run, p.column, p.found) == (3, None, "run", "")


def test_pH_outside_0_to_14(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,15.2,10,10,100,20,79"))
    p = only(problems, "pH out of range")
    assert (p.line, p.run, p.column, p.found, p.expected) == (
        3, "R2", "pH", "15.2", "a pH from 0 to 14")


def test_volume_zero_or_negative(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,-5,0,100,20,79"))
    aq = only(problems, "greater than 0", column="aqueous_mL")
    org = only(problems, "greater than 0", column="organic_mL")
    assert (aq.line, aq.run, aq.found) == (3, "R2", "-5")
    assert (org.line, org.run, org.found) == (3, "R2", "0")
    assert "greater than 0" in aq.expected


def test_negative_amounts(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,-3,79"))
    p = only(problems, "negative amount")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "found_aqueous", "-3")
    assert "at least 0" in p.expected


def test_negative_spiked_amount(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,-100,20,79"))
    p = only(problems, "negative spiked amount")
    assert (p.line, p.column, p.found) == (3, "spiked", "-100")


def test_duplicate_run_id(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R1,8.0,10,10,100,20,79"))
    p = only(problems, "duplicate run id")
    assert (p.line, p.run, p.column, p.found) == (3, "R1", "run", "R1")
    assert "line 2" in p.message
    assert "unique" in p.expected


def test_empty_file(tmp_path):
    _, problems = check_csv(tmp_path, "")
    p = only(problems, "empty")
    assert (p.file, p.line) == ("ST-1/runs.csv", None)
    assert "header" in p.expected


def test_header_only(tmp_path):
    _, problems = check_csv(tmp_path, ",".join(HEADER) + "\n\n")
    p = only(problems, "header but no runs")
    assert (p.file, p.line) == ("ST-1/runs.csv", 1)


def test_binary_file_is_not_a_text_table(tmp_path):
    folder = write_study(tmp_path, runs=b"run,pH\nR1\x00\x01\x02,7\n")
    study, problems = check_study(folder)
    assert study is None
    p = only(problems, "not a text table")
    assert (p.file, p.line) == ("ST-1/runs.csv", 2)
    assert "NUL" in p.message and "UTF-8" in p.expected


def test_invalid_utf8_is_not_a_text_table(tmp_path):
    # 0xb5 is the micro sign in cp1252, an invalid start byte in UTF-8 (common practice:
    # spreadsheets export "CSV" in the Windows code page)
    data = (RUNS_CSV.replace("R3,9.0", "R3 \xb5g,9.0")).encode("cp1252")
    _, problems = check_study(write_study(tmp_path, runs=data))
    p = only(problems, "not a text table")
    assert p.line == 4 and "0xb5" in p.message


def test_workbook_saved_as_csv_is_not_a_text_table(tmp_path):
    write_xlsx(tmp_path / "book.xlsx", {1: HEADER, 2: ROWS[0]})
    data = (tmp_path / "book.xlsx").read_bytes()
    _, problems = check_study(write_study(tmp_path, runs=data))
    assert "zip archive" in only(problems, "not a text table").message


def test_broken_xlsx_is_located(tmp_path):
    folder = write_study(tmp_path, runs=b"PK\x03\x04 not really a workbook",
                         runs_name="runs.xlsx")
    _, problems = check_study(folder)
    p = only(problems, "not a readable XLSX workbook")
    assert p.file == "ST-1/runs.xlsx"


def test_unclosed_quote_in_csv(tmp_path):
    csv = ",".join(HEADER) + '\nR1,7.0,10,10,100,40,59\nR2,8.0,10,10,100,20,"79\nR3,9\n'
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "cannot be parsed")
    assert (p.file, p.line) == ("ST-1/runs.csv", 3)
    assert "unexpected end of data" in p.message


def test_quoted_cell_over_two_lines_is_fine(tmp_path):
    header = ",".join(HEADER) + ",note"
    csv = f'{header}\nR1,7.0,10,10,100,40,59,"first\nsecond"\nR2,8.0,10,10,100,20,79,\n'
    study, problems = check_csv(tmp_path, csv)
    assert problems == []
    assert study.runs[0].note == "first\nsecond" and study.runs[1].location.line == 4


# -- measurement forms ---------------------------------------------------------------------------

def test_one_phase_row_in_a_both_phase_table(tmp_path):
    study, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,,79"))
    assert errors(problems) == []
    assert study.runs[1].measurement == "organic" and study.runs[1].found_aqueous is None


def test_spiked_without_found_amount(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,,"))
    p = only(problems, "needs at least one found amount")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "found_aqueous, found_organic", "")


def test_found_amount_without_spiked(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,,20,79"))
    p = only(problems, "need the spiked amount")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "spiked", "")


def test_row_without_any_measurement(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,,,"))
    p = only(problems, "no measurement")
    assert (p.line, p.run) == (3, "R2")
    assert "recovery_pct" in p.expected


def test_two_forms_in_one_row(tmp_path):
    header = ",".join(HEADER) + ",recovery_pct"
    # recovery_pct beside the aqueous amount alone: the organic recovery cannot be checked
    csv = (f"{header}\nR1,7.0,10,10,100,40,59,\nR2,8.0,10,10,100,20,,79\n"
           "R3,9.0,10,20,,,,96\n")
    study, problems = check_csv(tmp_path, csv)
    p = only(problems, "two measurement forms")
    assert (p.line, p.run, p.column) == (3, "R2", "recovery_pct")
    assert p.found == "recovery_pct and found_aqueous, spiked"
    assert len(errors(problems)) == 1   # R1 (both phases) and R3 (recovery) are fine


def test_recovery_only_table(tmp_path):
    csv = "run,pH,aqueous_mL,organic_mL,recovery_pct\nR1,3,10,10,98.5\nR2,6,10,10,40\n"
    study, problems = check_csv(tmp_path, csv)
    assert problems == []
    assert [r.measurement for r in study.runs] == ["recovery", "recovery"]
    assert study.runs[0].recovery_pct == 98.5


# -- plausibility --------------------------------------------------------------------------------

def test_found_exceeds_150_pct_of_spiked(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,90,80"))
    p = only(problems, "more analyte found than plausibly spiked")
    assert (p.severity, p.line, p.run, p.column, p.found) == (
        "error", 3, "R2", "found_aqueous + found_organic", "170.0 % of spiked")
    assert "150 %" in p.expected


def test_one_found_amount_exceeds_150_pct(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,,151"))
    p = only(problems, "more analyte found than plausibly spiked")
    assert (p.column, p.found) == ("found_organic", "151.0 % of spiked")


def test_mass_balance_outside_90_110_is_a_warning(tmp_path):
    study, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,20,60"))
    p = only(problems, "mass balance outside")
    assert (p.severity, p.line, p.run, p.found) == ("warning", 3, "R2", "80.0 % of spiked")
    assert p.expected == "90 to 110 % of spiked"
    assert study is not None and study.warnings == (p,)


def test_recovery_above_150_is_an_error(tmp_path):
    csv = "run,pH,aqueous_mL,organic_mL,recovery_pct\nR1,3,10,10,98.5\nR2,6,10,10,151\n"
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "more analyte found than plausibly spiked")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "recovery_pct", "151 %")


def test_negative_recovery_is_an_error(tmp_path):
    csv = "run,pH,aqueous_mL,organic_mL,recovery_pct\nR1,3,10,10,-2\nR2,6,10,10,40\n"
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "negative recovery")
    assert (p.line, p.run, p.column, p.found) == (2, "R1", "recovery_pct", "-2")


# -- excluded runs -------------------------------------------------------------------------------

def test_excluded_run_is_kept_without_a_complete_form(tmp_path):
    # plausibility still applies to excluded runs: see tests/test_input_misreads.py
    header = ",".join(HEADER) + ",excluded,note"
    csv = (f"{header}\nR1,7.0,10,10,100,40,59,,\n"
           "R2,8.0,10,10,100,,,flask broke during shaking,\n"
           "R3,9.0,10,20,100,5,96,contaminated glassware,high blank\n")
    study, problems = check_csv(tmp_path, csv)
    assert problems == []
    assert [r.run_id for r in study.used_runs] == ["R1"]
    assert study.runs[1].excluded == "flask broke during shaking"
    assert study.runs[1].measurement == "none"
    assert study.runs[2].note == "high blank"


def test_excluded_cell_that_reads_like_keep(tmp_path):
    header = ",".join(HEADER) + ",excluded"
    csv = f"{header}\nR1,7.0,10,10,100,40,59,no\nR2,8.0,10,10,100,20,79,\n"
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "reads like 'keep the run'")
    assert (p.line, p.run, p.column, p.found) == (2, "R1", "excluded", "no")


# -- columns -------------------------------------------------------------------------------------

def test_header_names_ignore_case_and_spaces(tmp_path):
    header = " RUN , Ph ,Aqueous_ML,organic_mL, Spiked,found_aqueous,FOUND_ORGANIC"
    study, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,20,79", header))
    assert problems == []
    assert study.runs[1].pH == 8.0


def test_misspelt_column_is_an_error_and_unknown_one_a_warning(tmp_path):
    # "analyst" is a method-validation column now (method_input.py); "bench_id" is unknown
    header = ",".join(HEADER) + ",exluded,bench_id"
    csv = f"{header}\nR1,7.0,10,10,100,40,59,,AB\nR2,8.0,10,10,100,20,79,,CD\n"
    _, problems = check_csv(tmp_path, csv)
    typo = only(problems, "misspelling", column="exluded")
    assert (typo.severity, typo.line, typo.expected) == ("error", 1, "excluded")
    other = only(problems, "unknown column, ignored", column="bench_id")
    assert other.severity == "warning"


def test_duplicate_column(tmp_path):
    header = ",".join(HEADER) + ",PH"
    _, problems = check_csv(tmp_path, f"{header}\nR1,7.0,10,10,100,40,59,7.0\n")
    p = only(problems, "same column appears twice")
    assert (p.line, p.column, p.found) == (1, "PH", "'pH' and 'PH'")


def test_data_beyond_the_header(tmp_path):
    _, problems = check_csv(tmp_path, runs_with("R2,8.0,10,10,100,20,79,surplus"))
    p = only(problems, "the row has 8 cells but the header (line 1) has 7")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "field 8",
                                                  "R2,8.0,10,10,100,20,79,surplus")
    assert "separate the cells with ';'" in p.expected


def test_data_under_an_empty_header_cell(tmp_path):
    header = "run,pH,aqueous_mL,organic_mL,,spiked,found_aqueous,found_organic"
    csv = f"{header}\nR1,7.0,10,10,,100,40,59\nR2,8.0,10,10,x,100,20,79\n"
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "column without a header")
    assert (p.line, p.run, p.column, p.found) == (3, None, "field 5", "x")


# -- CSV dialects --------------------------------------------------------------------------------

def test_semicolon_and_decimal_comma(tmp_path):
    csv = ("run;pH;aqueous_mL;organic_mL;spiked;found_aqueous;found_organic\n"
           "R1;7,25;10;10;100;40,5;58,5\nR2;8;10;12,5;100;20;79\n")
    folder = write_study(tmp_path, runs=csv)
    table, problems = read_table(folder / "runs.csv")
    assert problems == [] and table.separator == ";" and table.decimal_comma
    assert table.rows[0].cells["ph"] == 7.25 and table.rows[0].text["ph"] == "7,25"
    study, problems = check_study(folder)
    assert reading_problems(problems) == []
    assert study.runs[0].pH == 7.25 and study.runs[1].organic_mL == 12.5


def test_tab_separated_with_decimal_comma(tmp_path):
    csv = RUNS_CSV.replace(",", "\t").replace(".", ",").replace("7,0", "7,25")
    study, problems = check_csv(tmp_path, csv)
    assert problems == [] and study.runs[0].pH == 7.25


def test_comma_decimal_is_a_number_only_with_semicolon_or_tab(tmp_path):
    study, problems = check_csv(tmp_path, runs_with('R2,"7,25",10,10,100,20,79'))
    p = only(problems, "not a number")
    assert (p.line, p.column, p.found) == (3, "pH", "7,25")
    assert parse_number("7,25") is None and parse_number("7,25", decimal_comma=True) == 7.25


def test_decimal_point_in_a_decimal_comma_file(tmp_path):
    csv = ("run;pH;aqueous_mL;organic_mL;spiked;found_aqueous;found_organic\n"
           "R1;7,25;10;10;100;40;59\nR2;8.5;10;10;100;20;79\n")
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "not a number")
    assert (p.line, p.column, p.found) == (3, "pH", "8.5")
    assert "decimal comma" in p.expected


def test_bom_is_ignored(tmp_path):
    folder = write_study(tmp_path, runs=RUNS_CSV.encode("utf-8-sig"))
    table, _ = read_table(folder / "runs.csv")
    assert table.columns[0] == "run"
    study, problems = check_study(folder)
    assert problems == [] and study.runs[0].run_id == "R1"


def test_excel_sep_line_and_crlf(tmp_path):
    csv = "sep=;\r\n" + RUNS_CSV.replace(",", ";").replace("\n", "\r\n")
    study, problems = check_csv(tmp_path, csv)
    assert problems == []
    assert study.runs[0].location.line == 3


def test_lines_are_physical_lines(tmp_path):
    header = ",".join(HEADER) + ",note"
    csv = (f"{header}\n\nR1,7.0,10,10,100,40,59,\"two\nlines\"\n,,,,,,,\n"
           "R2,8.0,10,10,100,20,seventy-nine,\n")
    _, problems = check_csv(tmp_path, csv)
    p = only(problems, "not a number")
    assert (p.line, p.run, p.column) == (6, "R2", "found_organic")


# -- workbooks -----------------------------------------------------------------------------------

def test_xlsx_keeps_sheet_row_numbers(tmp_path):
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    rows = {3: HEADER, 4: ROWS[0], 7: ["R2", "eight", 10, 10, 100, 20, 79], 8: ROWS[2]}
    write_xlsx(folder / "runs.xlsx", rows)
    _, problems = check_study(folder)
    p = only(problems, "not a number")
    assert (p.file, p.sheet, p.row, p.line, p.run, p.column, p.found) == (
        "ST-1/runs.xlsx", "Runs", 7, None, "R2", "pH", "eight")
    assert str(p).startswith("error: ST-1/runs.xlsx, sheet 'Runs', row 7, run 'R2'")


def test_xlsx_named_sheet_numbers_and_percentages(tmp_path):
    text = STUDY_YAML.format(runs="runs.xlsx") + "sheet: Runs\n"
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx", yaml_text=text)
    header = ["run", "pH", "aqueous_mL", "organic_mL", "recovery_pct"]
    write_xlsx(folder / "runs.xlsx", {1: header, 2: [7, 3.5, 10, 10, 0.955],
                                      3: ["R8", "4.25", 10, 10, 81.5]},
               before=("Info",), percent={(2, 5)})
    study, problems = check_study(folder)
    assert reading_problems(problems) == []
    r7, r8 = study.runs
    assert (r7.run_id, r7.recovery_pct, r7.location.row, r7.location.sheet) == (
        "7", 95.5, 2, "Runs")
    assert r8.pH == 4.25


def test_xlsx_missing_sheet(tmp_path):
    text = STUDY_YAML.format(runs="runs.xlsx") + "sheet: Data\n"
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx", yaml_text=text)
    write_xlsx(folder / "runs.xlsx", {1: HEADER, 2: ROWS[0]}, before=("Info",))
    _, problems = check_study(folder)
    p = only(problems, "no sheet of that name")
    assert (p.file, p.found, p.expected) == ("ST-1/runs.xlsx", "Data", "one of 'Info', 'Runs'")


def test_ods_keeps_sheet_row_numbers(tmp_path):
    folder = write_study(tmp_path, runs=None, runs_name="runs.ods")
    # row 1 header, rows 2-4 blank (one repeated row), row 5 R1, row 6 bad R2, row 7 R3
    write_ods(folder / "runs.ods",
              [HEADER, 3, ROWS[0], ["R2", 8.0, 10, 10, 100, 20, "lost"], ROWS[2]])
    table, problems = read_table(folder / "runs.ods")
    assert problems == []
    assert [r.location.row for r in table.rows] == [5, 6, 7]
    _, problems = check_study(folder)
    p = only(problems, "not a number")
    assert (p.file, p.sheet, p.row, p.run, p.column, p.found) == (
        "ST-1/runs.ods", "Runs", 6, "R2", "found_organic", "lost")


def test_ods_valid_study(tmp_path):
    folder = write_study(tmp_path, runs=None, runs_name="runs.ods")
    write_ods(folder / "runs.ods", [HEADER, *ROWS])
    study, problems = check_study(folder)
    assert problems == []
    assert [r.found_organic for r in study.runs] == [59.0, 79.0, 96.0]


# -- size limits: a table far longer than any study is refused before its cells are parsed ------

def test_csv_of_100000_rows_is_refused_before_parsing(tmp_path, monkeypatch):
    row = "R{},7.0,10,10,100,40,59\n"
    csv = ",".join(HEADER) + "\n" + "".join(row.format(i) for i in range(100_000))
    folder = write_study(tmp_path, runs=csv)

    def no_decoding(*args):
        raise AssertionError("the cells of a too long table were decoded")

    monkeypatch.setattr(tables, "decode_text", no_decoding)
    study, problems = check_study(folder)
    assert study is None
    p = only(problems, "too long")
    assert (p.file, p.line, p.found) == ("ST-1/runs.csv", tables.MAX_ROWS + 1, "100001 lines")
    assert p.expected.startswith(f"at most {tables.MAX_ROWS} lines, header included")
    assert tables.MAX_ROWS == 5000


def test_csv_at_the_row_limit_is_read_and_one_beyond_is_not(tmp_path, monkeypatch):
    monkeypatch.setattr(tables, "MAX_ROWS", 4)
    _, problems = check_csv(tmp_path, RUNS_CSV)               # header + 3 runs: 4 lines
    assert problems == []
    for ending in ("\n", "\r\n", "\r"):                       # every line ending counts
        csv = (RUNS_CSV + "R4,9.5,10,20,100,3,97\n").replace("\n", ending)
        _, problems = check_csv(tmp_path, csv)
        assert only(problems, "too long").found == "5 lines"


def test_file_above_the_byte_limit_is_not_read(tmp_path, monkeypatch):
    monkeypatch.setattr(tables, "MAX_BYTES", 100)
    _, problems = check_csv(tmp_path, RUNS_CSV)
    p = only(problems, "too large")
    assert (p.file, p.found) == ("ST-1/runs.csv", f"{len(RUNS_CSV)} bytes")
    assert "at most 100 bytes" in p.expected


def test_xlsx_with_data_beyond_the_row_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(tables, "MAX_ROWS", 4)
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    runs = [["R4", 9.5, 10, 20, 100, 3, 97], ["R5", 10.0, 10, 20, 100, 2, 98]]
    write_xlsx(folder / "runs.xlsx", {1: HEADER, 2: ROWS[0], 3: ROWS[1], 4: ROWS[2], 5: runs[0],
                                      6: runs[1]})
    _, problems = check_study(folder)
    p = only(problems, "too long")
    assert (p.file, p.sheet, p.row) == ("ST-1/runs.xlsx", "Runs", 5)
    assert p.found == "6 rows (the sheet's stated size)"
    assert p.expected.startswith("at most 4 rows")


def _streamed_xlsx(path, rows):
    """A workbook as streaming writers make it: no stated size in the sheet."""
    import openpyxl

    wb = openpyxl.Workbook(write_only=True)
    ws = wb.create_sheet("Runs")
    for row in rows:
        ws.append(row)
    wb.save(path)
    return path


def test_xlsx_without_a_stated_size_is_measured_before_it_is_opened(tmp_path, monkeypatch):
    import openpyxl

    monkeypatch.setattr(tables, "MAX_ROWS", 4)
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    runs = [["R4", 9.5, 10, 20, 100, 3, 97], ["R5", 10.0, 10, 20, 100, 2, 98]]
    _streamed_xlsx(folder / "runs.xlsx", [HEADER, *ROWS, *runs])
    assert b"<dimension" not in __import__("zipfile").ZipFile(
        folder / "runs.xlsx").read("xl/worksheets/sheet1.xml")

    def no_opening(*args, **kw):
        raise AssertionError("a too long workbook was opened")

    monkeypatch.setattr(openpyxl, "load_workbook", no_opening)
    study, problems = check_study(folder)
    assert study is None
    p = only(problems, "too long")
    assert (p.file, p.found) == ("ST-1/runs.xlsx", "more than 4 rows")
    assert "xl/worksheets/sheet1.xml" in p.message and "at most 4 rows" in p.expected


def test_xlsx_without_a_stated_size_inside_the_limit_is_read(tmp_path):
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    _streamed_xlsx(folder / "runs.xlsx", [HEADER, *ROWS])
    study, problems = check_study(folder)
    assert problems == [] and [r.run_id for r in study.runs] == [r[0] for r in ROWS]


def test_xlsx_formatted_blank_rows_beyond_the_limit_are_not_data(tmp_path, monkeypatch):
    import openpyxl

    monkeypatch.setattr(tables, "MAX_ROWS", 4)
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    path = write_xlsx(folder / "runs.xlsx", {1: HEADER, 2: ROWS[0], 3: ROWS[1], 4: ROWS[2]})
    wb = openpyxl.load_workbook(path)
    for number in range(5, 40):                   # styled cells without values, as sheets have
        wb.active.cell(row=number, column=2).number_format = "0.00"
    wb.save(path)
    study, problems = check_study(folder)
    assert problems == [] and len(study.runs) == 3


def test_ods_beyond_the_row_limit(tmp_path, monkeypatch):
    from odf.opendocument import load
    from odf.table import TableCell, TableRow
    from odf.text import P

    monkeypatch.setattr(tables, "MAX_ROWS", 4)
    folder = write_study(tmp_path, runs=None, runs_name="runs.ods")
    # one row element more than the limit: refused from the element count, before odfpy
    # builds the document (the rows' content does not matter then)
    write_ods(folder / "runs.ods", [HEADER, *ROWS, ROWS[2]])
    _, problems = check_study(folder)
    p = only(problems, "too long")
    assert (p.file, p.found) == ("ST-1/runs.ods", "more than 4 rows")
    assert p.expected.startswith("at most 4 rows in the spreadsheet, all sheets together")
    # few row elements, but one data row repeated past the limit
    path = write_ods(folder / "runs.ods", [HEADER, ROWS[0]])
    doc = load(str(path))
    repeated = TableRow(numberrowsrepeated="3")
    for value in ROWS[1]:
        cell = TableCell(valuetype="string")
        cell.addElement(P(text=str(value)))
        repeated.addElement(cell)
    doc.spreadsheet.childNodes[0].addElement(repeated)
    doc.save(str(path))
    _, problems = check_study(folder)
    p = only(problems, "too long")
    assert (p.sheet, p.row, p.found) == ("Runs", 5, "data in row 5")


def test_ods_row_count_is_exact_across_chunk_boundaries(tmp_path, monkeypatch):
    path = write_ods(tmp_path / "runs.ods", [HEADER, 2, *ROWS, ROWS[0]])
    rows, size = tables._ods_size(path.read_bytes())
    assert rows == 6                       # the repeated blank row is one element
    for chunk in (1, 7, 16, 17, 18, 1000):
        monkeypatch.setattr(tables, "_CHUNK", chunk)
        assert tables._ods_size(path.read_bytes()) == (rows, size)


def test_ods_trailing_blank_rows_do_not_count(tmp_path):
    # spreadsheets pad a sheet with one repeated blank row to its last row (common practice)
    folder = write_study(tmp_path, runs=None, runs_name="runs.ods")
    write_ods(folder / "runs.ods", [HEADER, *ROWS, 1_048_572])
    study, problems = check_study(folder)
    assert problems == [] and len(study.runs) == 3


# -- study.yaml ----------------------------------------------------------------------------------

def yaml_problems(tmp_path, text: str):
    return check_study(write_study(tmp_path, yaml_text=text))[1]


def test_invalid_yaml_names_the_line(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "model: base", '  model: "base')
    p = only(yaml_problems(tmp_path, text), "invalid YAML")
    assert p.file == "ST-1/study.yaml" and p.line in (4, 5)
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "organic: n-heptane",
                        "\torganic: n-heptane")
    p = only(yaml_problems(tmp_path, text), "invalid YAML")
    assert (p.line, p.found) == (7, "organic: n-heptane")


def test_yaml_that_is_not_a_mapping(tmp_path):
    p = only(yaml_problems(tmp_path, "- title: x\n- runs: runs.csv\n"), "must be a mapping")
    assert (p.file, p.line, p.found) == ("ST-1/study.yaml", 1, "a list")


def test_empty_study_yaml(tmp_path):
    p = only(yaml_problems(tmp_path, "# nothing yet\n"), "study.yaml is empty")
    assert p.file == "ST-1/study.yaml"


def test_study_yaml_missing(tmp_path):
    folder = tmp_path / "ST-2"
    folder.mkdir()
    p = only(check_study(folder)[1], "study.yaml is missing")
    assert p.file == "ST-2/study.yaml"


def test_unknown_model(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "model: base", "  model: basic")
    p = only(yaml_problems(tmp_path, text), "unknown model")
    assert (p.line, p.key, p.found) == (4, "analyte.model", "basic")
    assert "did you mean 'base'" in p.message
    assert p.expected == "one of neutral, acid, base, ampholyte, auto"


def test_ion_pair_needs_acid_or_base(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "model: base",
                        "  model: neutral\n  ion_pair: true")
    p = only(yaml_problems(tmp_path, text), "ion pair")
    assert (p.line, p.key) == (5, "analyte.ion_pair")


def test_unknown_keys_are_refused_with_line_and_allowed_keys(tmp_path):
    text = STUDY_YAML.format(runs="runs.csv").replace("recovery_pct: 95", "recovery_pc: 95")
    text += "titel: A second title\n"
    problems = yaml_problems(tmp_path, text)
    t = only(problems, "unknown key 'recovery_pc'")
    assert (t.file, t.line, t.key, t.found) == ("ST-1/study.yaml", 11, "targets.recovery_pc",
                                                "recovery_pc")
    assert "did you mean 'recovery_pct'" in t.message
    assert t.expected == ("one of recovery_pct, max_rsd_pct, mass_balance_pct, "
                          "ratio_agreement_log, level, lack_of_fit_alpha, purity_pct")
    top = only(problems, "unknown key 'titel'")
    assert (top.line, top.key) == (18, "titel")
    assert "title" in top.expected and "procedures" in top.expected
    assert problems.index(t) < problems.index(top)   # in file order


def test_duplicate_yaml_key(tmp_path):
    text = STUDY_YAML.format(runs="runs.csv") + "runs: other.csv\n"
    p = only(yaml_problems(tmp_path, text), "appears twice")
    assert (p.line, p.key) == (18, "runs")
    assert "line 9" in p.message


def test_missing_required_keys(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "name: TX-1", "")
    text = replace_line(text, "title: Test study", "")
    problems = yaml_problems(tmp_path, text)
    only(problems, "missing key 'title'", key="title", line=2)
    only(problems, "missing key 'name'", key="analyte.name", line=2)


def test_bad_study_id_folder_name(tmp_path):
    folder = write_study(tmp_path, name="my study!")
    p = only(check_study(folder)[1], "not a valid study id")
    assert (p.file, p.found) == ("my study!", "my study!")
    assert "letters, digits" in p.expected


@pytest.mark.parametrize("old, new, key, message, found", [
    ("recovery_pct: 95", "  recovery_pct: high", "targets.recovery_pct", "must be a number",
     "high"),
    ("recovery_pct: 95", "  recovery_pct: 120", "targets.recovery_pct", "out of range", "120"),
    ("recovery_pct: 95", "  recovery_pct: 95\n  mass_balance_pct: 95",
     "targets.mass_balance_pct", "pair of percentages", "'95'"),
    ("recovery_pct: 95", "  recovery_pct: 95\n  mass_balance_pct: [110, 90]",
     "targets.mass_balance_pct", "from low to high", "[110, 90]"),
    ("recovery_pct: 95", "  recovery_pct: 95\n  max_rsd_pct: [5]", "targets.max_rsd_pct",
     "must be a number", "a list"),
    ("recovery_pct: 95", "  recovery_pct: \"95\"", "targets.recovery_pct", "must be a number",
     "95"),
])
def test_targets_of_wrong_type(tmp_path, old, new, key, message, found):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), old, new)
    p = only(yaml_problems(tmp_path, text), message, key=key)
    assert p.file == "ST-1/study.yaml" and p.line in (11, 12) and p.found == found


def test_targets_that_are_not_a_mapping(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "recovery_pct: 95", "")
    text = text.replace("targets:\n", "targets: 95\n")
    p = only(yaml_problems(tmp_path, text), "targets must be a mapping")
    assert (p.line, p.key, p.found) == (10, "targets", "'95'")


def test_level_given_twice_differently(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "model: base",
                        "  model: base\n  level: 10 ppm")
    text = text.replace("  recovery_pct: 95\n", "  recovery_pct: 95\n  level: 1 ppm\n")
    p = only(yaml_problems(tmp_path, text), "level is given twice")
    assert p.found == "'10 ppm' and '1 ppm'"


# -- the runs path -------------------------------------------------------------------------------

def test_runs_key_missing(tmp_path):
    text = replace_line(STUDY_YAML.format(runs="runs.csv"), "runs: runs.csv", "")
    p = only(yaml_problems(tmp_path, text), "missing key 'runs'")
    assert (p.file, p.line, p.key) == ("ST-1/study.yaml", 1, "runs")


def test_runs_file_does_not_exist(tmp_path):
    folder = write_study(tmp_path, runs=None)
    p = only(check_study(folder)[1], "does not exist")
    assert (p.file, p.line, p.key, p.found) == ("ST-1/study.yaml", 9, "runs", "ST-1/runs.csv")


@pytest.mark.parametrize("runs", ["../shared/runs.csv", "data/../../runs.csv"])
def test_runs_path_leaving_the_folder(tmp_path, runs):
    (tmp_path / "shared").mkdir()
    (tmp_path / "shared" / "runs.csv").write_text(RUNS_CSV)
    text = STUDY_YAML.format(runs=runs)
    p = only(yaml_problems(tmp_path, text), "must not leave the study folder")
    assert (p.line, p.key, p.found) == (9, "runs", runs)


@pytest.mark.parametrize("runs", ["/etc/runs.csv", "C:\\lab\\runs.csv", "~/runs.csv"])
def test_absolute_runs_path(tmp_path, runs):
    text = STUDY_YAML.format(runs=f"'{runs}'")
    p = only(yaml_problems(tmp_path, text), "must be relative")
    assert (p.line, p.key, p.found) == (9, "runs", runs)


def test_runs_symlink_leading_outside(tmp_path):
    outside = tmp_path / "elsewhere.csv"
    outside.write_text(RUNS_CSV)
    folder = write_study(tmp_path, runs=None)
    os.symlink(outside, folder / "runs.csv")
    p = only(check_study(folder)[1], "outside the study folder")
    assert (p.line, p.key, p.found) == (9, "runs", "runs.csv")


def test_unsupported_extension(tmp_path):
    folder = write_study(tmp_path, runs=RUNS_CSV, runs_name="runs.xls")
    p = only(check_study(folder)[1], "unsupported runs table type")
    assert (p.line, p.key, p.found) == (9, "runs", "runs.xls")
    assert ".csv" in p.expected and ".xlsx" in p.expected and ".ods" in p.expected


def test_runs_in_a_subfolder(tmp_path):
    folder = write_study(tmp_path, runs=RUNS_CSV, runs_name="data/runs.csv")
    study, problems = check_study(folder)
    assert problems == [] and study.inputs[1].path == "ST-1/data/runs.csv"


# -- procedures ----------------------------------------------------------------------------------

PROC = STUDY_YAML.format(runs="runs.csv")


def test_procedure_without_volumes(tmp_path):
    text = replace_line(PROC, "organic_mL: [10, 10, 10]", "")
    p = only(yaml_problems(tmp_path, text), "missing key 'organic_mL'")
    assert (p.line, p.key) == (13, "procedures[1].organic_mL")
    text = replace_line(PROC, "organic_mL: [10, 10, 10]", "    organic_mL: []")
    p = only(yaml_problems(tmp_path, text), "no organic portions")
    assert (p.line, p.key, p.found) == (17, "procedures[1].organic_mL", "[]")


def test_procedure_with_non_positive_volumes(tmp_path):
    text = replace_line(PROC, "organic_mL: [10, 10, 10]", "    organic_mL: [10, 0, -5]")
    problems = yaml_problems(tmp_path, text)
    hits = matching(problems, "out of range", key="procedures[1].organic_mL")
    assert [p.found for p in hits] == ["0", "-5"]
    assert all(p.line == 17 and "greater than 0" in p.expected for p in hits)
    text = replace_line(PROC, "aqueous_mL: 10", "    aqueous_mL: 0")
    p = only(yaml_problems(tmp_path, text), "out of range", key="procedures[1].aqueous_mL")
    assert (p.line, p.found) == (16, "0")


def test_procedure_missing_pH_and_aqueous_volume(tmp_path):
    text = replace_line(replace_line(PROC, "pH: 8.0", ""), "aqueous_mL: 10", "")
    problems = yaml_problems(tmp_path, text)
    only(problems, "missing key 'pH'", key="procedures[1].pH", line=13)
    only(problems, "missing key 'aqueous_mL'", key="procedures[1].aqueous_mL", line=13)


def test_duplicate_procedure_ids(tmp_path):
    text = PROC + ("  - id: P1\n    label: Once at pH 10\n    pH: 10\n    aqueous_mL: 25\n"
                   "    organic_mL: 30\n")
    p = only(yaml_problems(tmp_path, text), "duplicate procedure id")
    assert (p.line, p.key, p.found) == (18, "procedures[2].id", "P1")
    assert "line 13" in p.message


def test_procedure_pH_out_of_range(tmp_path):
    text = replace_line(PROC, "pH: 8.0", "    pH: 15")
    p = only(yaml_problems(tmp_path, text), "out of range")
    assert (p.line, p.key, p.found, p.expected) == (15, "procedures[1].pH", "15",
                                                    "a pH from 0 to 14")


def test_single_portion_as_a_number(tmp_path):
    text = replace_line(PROC, "organic_mL: [10, 10, 10]", "    organic_mL: 30")
    study, problems = check_csv(tmp_path, RUNS_CSV, text)
    assert problems == [] and study.procedures[0].organic_mL == (30.0,)


# -- all at once, no writes, discovery, demo -----------------------------------------------------

def test_every_problem_is_reported_at_once(tmp_path):
    csv = "\n".join([",".join(HEADER), "R1,7.0,10,10,100,40,59", "R2,16,10,10,100,20,79",
                     "R3,9.0,10,-20,100,5,96", "R1,9.0,10,20,100,5,96"]) + "\n"
    _, problems = check_csv(tmp_path, csv)
    assert [(p.line, p.run, p.column) for p in problems] == [
        (3, "R2", "pH"), (4, "R3", "organic_mL"), (5, "R1", "run")]
    assert all(p.severity == "error" for p in problems)


def test_problems_in_yaml_and_table_together(tmp_path):
    text = replace_line(PROC, "model: base", "  model: basic")
    folder = write_study(tmp_path, yaml_text=text, runs=runs_with("R2,seven,10,10,100,20,79"))
    problems = check_study(folder)[1]
    assert [(p.file, p.line) for p in problems] == [("ST-1/study.yaml", 4),
                                                     ("ST-1/runs.csv", 3)]


def test_reading_never_writes_into_the_study_folder(tmp_path):
    good = write_study(tmp_path, "ST-1")
    bad = write_study(tmp_path, "ST-2", runs=runs_with("R2,seven,10,10,100,20,79"))
    book = write_study(tmp_path, "ST-3", runs=None, runs_name="runs.xlsx")
    write_xlsx(book / "runs.xlsx", {1: HEADER, 2: ROWS[0], 3: ROWS[1]})
    sheet = write_study(tmp_path, "ST-4", runs=None, runs_name="runs.ods")
    write_ods(sheet / "runs.ods", [HEADER, *ROWS])
    before = {f: snapshot(f) for f in (good, bad, book, sheet)}
    for folder in before:
        check_study(folder)
        try:
            load_study(folder)
        except StudyError:
            pass
    assert discover_studies(tmp_path) == [good, bad, book, sheet]
    assert {f: snapshot(f) for f in before} == before
    assert check_study(good)[0] is not None and check_study(bad)[0] is None


def test_discover_studies(tmp_path):
    write_study(tmp_path / "all", "ST-B")
    write_study(tmp_path / "all", "ST-A")
    (tmp_path / "all" / "notes").mkdir()
    assert [p.name for p in discover_studies(tmp_path / "all")] == ["ST-A", "ST-B"]
    assert discover_studies(tmp_path / "all" / "ST-A") == [tmp_path / "all" / "ST-A"]
    with pytest.raises(StudyError) as info:
        discover_studies(tmp_path / "all" / "notes")
    (p,) = info.value.problems
    assert p.file == "all/notes" and "no study here" in p.message
    with pytest.raises(StudyError) as info:
        discover_studies("nowhere")
    assert info.value.problems[0].file == "nowhere"


@pytest.mark.parametrize("study_id", sorted(DEMO))
def test_demo_studies_load_without_errors(study_id, monkeypatch):
    monkeypatch.chdir(REPO)
    study, problems = check_study(Path("studies") / study_id)
    assert errors(problems) == [], "\n".join(map(str, problems))
    n_runs, n_excluded, model = DEMO[study_id]
    assert (len(study.runs), len(study.excluded_runs), study.model) == (n_runs, n_excluded,
                                                                        model)
    assert study.study_id == study_id and study.procedures


def test_demo_base_study_is_a_european_csv():
    data = (REPO / "studies" / "HPA-2026-014" / "runs.csv").read_bytes()
    table, problems = read_table(REPO / "studies" / "HPA-2026-014" / "runs.csv")
    assert data.startswith(b"\xef\xbb\xbf") and problems == []
    assert table.separator == ";" and table.decimal_comma


# -- no traceback, whatever the bytes ------------------------------------------------------------

_settings = settings(max_examples=150, deadline=None,
                     suppress_health_check=[HealthCheck.function_scoped_fixture])


@_settings
@given(data=st.one_of(st.binary(max_size=300),
                      st.lists(st.sampled_from(["run", "pH", "7,25", "7.5", "", "-1", '"',
                                                "R1", "1e400", "nan", "\ufeff", "\r\n", "\n",
                                                ",", ";", "\t", "spiked", "found_organic",
                                                "recovery_pct", "excluded", "200"]),
                               max_size=60).map(lambda parts: "".join(parts).encode())))
def test_any_runs_bytes_give_problems_not_tracebacks(tmp_path, data):
    folder = write_study(tmp_path, runs=data)
    study, problems = check_study(folder)
    assert (study is None) == any(p.severity == "error" for p in problems)
    assert all(p.file for p in problems)


@_settings
@given(text=st.lists(st.sampled_from(["title: x\n", "analyte:\n", "  name: A\n",
                                      "  model: acid\n", "  model: [1]\n", "runs: runs.csv\n",
                                      "runs: ../x.csv\n", "system: 3\n", "targets:\n",
                                      "  recovery_pct: 95\n", "  mass_balance_pct: [1]\n",
                                      "procedures:\n", "  - id: P1\n", "    pH: x\n",
                                      "    organic_mL: [1, -1]\n", "  - 5\n", "- a\n", "&a b\n",
                                      "*a\n", "{\n", "'\n", "\t\n", ": :\n", "!!python/name:x\n",
                                      "? [a]\n: b\n"]),
                     max_size=14).map("".join))
def test_any_study_yaml_gives_problems_not_tracebacks(tmp_path, text):
    study, problems = check_study(write_study(tmp_path, yaml_text=text))
    assert study is None and problems
    assert all(p.file == "ST-1/study.yaml" or p.file == "ST-1/runs.csv" for p in problems)
