"""Input that used to be misread without a word: each case is now a located error or warning.

The limits here (150 % of spiked an error, above 100 % a warning, the rounding tolerance of
recovery_pct against found/spiked, the pH tolerance of a precision group) are extractval's own
study-folder contract (see ``extractval/study.py`` and ``extractval/replicates.py``), not
outside reference values.
"""

from __future__ import annotations

import pytest

from extractval.scaffold import template
from extractval.study import check_study
from tests.study_factory import (HEADER, RUNS_CSV, STUDY_YAML, reading_problems, replace_line,
                                 snapshot,
                                 write_ods, write_study, write_xlsx)

#: The header ``extractval new`` writes (its trailing columns are the optional ones).
SCAFFOLD_HEADER = template("runs.csv").strip()


@pytest.fixture(autouse=True)
def in_tmp(tmp_path, monkeypatch):
    """Run every test from tmp_path, so that display paths read 'ST-1/runs.csv'."""
    monkeypatch.chdir(tmp_path)
    return tmp_path


def only(problems, message: str, **fields):
    hits = [p for p in problems if message in p.message
            and all(getattr(p, k) == v for k, v in fields.items())]
    assert len(hits) == 1, "\n".join(str(p) for p in problems) or "no problems"
    return hits[0]


def errors(problems):
    return [p for p in problems if p.severity == "error"]


def check(tmp_path, runs: str, yaml_text: str | None = None, runs_name: str = "runs.csv"):
    folder = write_study(tmp_path, runs=runs, yaml_text=yaml_text, runs_name=runs_name)
    before = snapshot(folder)
    study, problems = check_study(folder)
    assert snapshot(folder) == before       # input files are never written
    return study, reading_problems(problems)


def with_yaml(line: str) -> str:
    """The factory's study.yaml with one more top-level line after ``runs:``."""
    return replace_line(STUDY_YAML.format(runs="runs.csv"), "runs: runs.csv",
                        f"runs: runs.csv\n{line}")


# -- 1. a decimal comma in a comma-separated file -------------------------------------------------

def test_decimal_comma_shifts_a_row_under_the_scaffold_header(tmp_path):
    # pH 3,98 typed with a decimal comma in a ','-file: read cell by cell it is pH 3, 98 mL of
    # water, and the replicate label 'r1' lands in 'excluded' (a reason), so the run used to
    # be excluded without a word and `check` said ok.
    runs = (f"{SCAFFOLD_HEADER}\n"
            "R1,7.0,10,10,,,,96.5,r1,,\n"
            "R10,3,98,10,10,,,,96.5,r1,,\n"
            "R11,9.5,10,10,,,,97.0,r2,,\n")
    study, problems = check(tmp_path, runs)
    assert study is None
    p = only(problems, "the row has 12 cells but the header (line 1) has 11")
    assert (p.severity, p.file, p.line, p.run, p.column) == (
        "error", "ST-1/runs.csv", 3, "R10", "pH")
    assert "'3' and '98'" in p.message and "3.98" in p.message
    assert p.found == "R10,3,98,10,10,,,,96.5,r1,,"
    assert "separate the cells with ';'" in p.expected and '"3,98"' in p.expected
    assert len(errors(problems)) == 1       # the shifted row is not read on (no cascade)


def test_decimal_comma_and_cells_left_out_at_the_end(tmp_path):
    # a hand-typed row that leaves out its empty trailing cells and splits a number: fewer
    # cells than the header, with two neighbours that read as one number
    runs = (f"{SCAFFOLD_HEADER}\n"
            "R1,7.0,10,10,100,40,59,,,,\n"
            "R2,3,98,10,10,100,2,97\n")
    _, problems = check(tmp_path, runs)
    p = only(problems, "the row has 8 cells but the header (line 1) has 11")
    assert (p.line, p.run, p.column) == (3, "R2", "pH")
    assert "write one ',' for each empty cell" in p.expected


def test_short_row_without_a_possible_split_is_read(tmp_path):
    # decimals written with a point: leaving out empty trailing cells is harmless
    runs = f"{SCAFFOLD_HEADER}\nR1,7.0,10,10,100,40,59\nR2,8.5,10,10,100,20,79.5\n"
    study, problems = check(tmp_path, runs)
    assert problems == [] and study.runs[1].found_organic == 79.5


def test_a_number_where_the_exclusion_reason_is_expected(tmp_path):
    header = ",".join(HEADER) + ",excluded,note"
    runs = f"{header}\nR1,7.0,10,10,100,40,59,,\nR2,8.0,10,10,100,20,79,96.5,\n"
    _, problems = check(tmp_path, runs)
    p = only(problems, "a number where the reason for excluding the run is expected")
    assert (p.severity, p.line, p.run, p.column, p.found) == (
        "error", 3, "R2", "excluded", "96.5")
    assert "decimal comma" in p.message


def test_semicolon_file_with_decimal_commas_is_unchanged(tmp_path):
    runs = (SCAFFOLD_HEADER.replace(",", ";") + "\n"
            "R1;3,98;10;10;100;40;58;;A;;\nR2;7,25;10;10;100;20;79;;B;;\n")
    study, problems = check(tmp_path, runs)
    assert problems == [] and study.runs[0].pH == 3.98


# -- 2. excluded runs are checked for plausibility ------------------------------------------------

def test_excluded_run_with_an_implausible_amount_is_an_error(tmp_path):
    header = ",".join(HEADER) + ",excluded"
    runs = (f"{header}\nR1,7.0,10,10,100,40,59,\n"
            "R2,8.0,10,10,100,,1031,emulsion\n")
    study, problems = check(tmp_path, runs)
    assert study is None
    p = only(problems, "more analyte found than plausibly spiked")
    assert (p.line, p.run, p.column, p.found) == (3, "R2", "found_organic",
                                                  "1031.0 % of spiked")


def test_excluded_run_gets_the_warnings_of_the_others(tmp_path):
    header = ",".join(HEADER) + ",excluded"
    runs = f"{header}\nR1,7.0,10,10,100,40,59,\nR2,8.0,10,10,100,20,60,emulsion\n"
    study, problems = check(tmp_path, runs)
    p = only(problems, "mass balance outside the usual band")
    assert (p.severity, p.run) == ("warning", "R2")
    assert study.runs[1].excluded == "emulsion"      # kept on record, still excluded


# -- 3. recoveries above 100 % --------------------------------------------------------------------

def test_recovery_pct_above_100_is_a_warning_with_its_run(tmp_path):
    runs = "run,pH,aqueous_mL,organic_mL,recovery_pct\nR1,3,10,10,98.5\nR2,6,10,10,104\n"
    study, problems = check(tmp_path, runs)
    p = only(problems, "recovery above 100 %")
    assert (p.severity, p.line, p.run, p.column, p.found) == (
        "warning", 3, "R2", "recovery_pct", "104 %")
    assert study is not None and reading_problems(study.warnings) == [p]


def test_found_organic_above_spiked_is_a_recovery_above_100(tmp_path):
    study, problems = check(tmp_path, RUNS_CSV.replace("R2,8.0,10,10,100,20,79",
                                                       "R2,8.0,10,10,100,,104"))
    p = only(problems, "recovery above 100 %")
    assert (p.severity, p.run, p.column, p.found) == ("warning", "R2", "found_organic",
                                                      "104.0 % of spiked")


def test_organic_recovery_above_100_inside_the_mass_balance_band(tmp_path):
    # 3 + 104 = 107 % is inside the 90-110 % band, but the organic phase alone holds more
    # than was spiked
    _, problems = check(tmp_path, RUNS_CSV.replace("R2,8.0,10,10,100,20,79",
                                                   "R2,8.0,10,10,100,3,104"))
    p = only(problems, "recovery above 100 %")
    assert (p.severity, p.run, p.column) == ("warning", "R2", "found_organic")


def test_recovery_at_the_hard_limit_is_an_error(tmp_path):
    runs = "run,pH,aqueous_mL,organic_mL,recovery_pct\nR1,3,10,10,98.5\nR2,6,10,10,150.5\n"
    _, problems = check(tmp_path, runs)
    p = only(problems, "more analyte found than plausibly spiked")
    assert (p.severity, p.run) == ("error", "R2")
    assert not [q for q in problems if "above 100" in q.message]


# -- 4. a title row above the header ---------------------------------------------------------------

def test_title_line_above_the_csv_header_is_named_with_the_fix(tmp_path):
    _, problems = check(tmp_path, "Extraction runs of TX-1, March\n" + RUNS_CSV)
    p = only(problems, "the header seems to be on line 2, not on line 1")
    assert (p.severity, p.file, p.line) == ("error", "ST-1/runs.csv", 1)
    assert "set `header_row: 2` in study.yaml" in p.message
    assert len(errors(problems)) == 1


def test_header_row_in_study_yaml_reads_a_csv_below_its_title(tmp_path):
    runs = "Extraction runs of TX-1\n\n" + RUNS_CSV.replace(",", ";")
    study, problems = check(tmp_path, runs, with_yaml("header_row: 3"))
    assert problems == []
    assert [r.run_id for r in study.runs] == ["R1", "R2", "R3"]
    assert study.runs[0].location.line == 4          # lines stay the file's own lines


def _sheet_rows():
    from tests.study_factory import ROWS
    return {1: ["Extraction runs of TX-1 (merged over A1:G1)"], 2: HEADER,
            **{i + 3: row for i, row in enumerate(ROWS)}}


def test_merged_title_row_in_xlsx_is_named_with_the_fix(tmp_path):
    folder = write_study(tmp_path, runs=None, runs_name="runs.xlsx")
    write_xlsx(folder / "runs.xlsx", _sheet_rows())
    _, problems = check_study(folder)
    p = only(problems, "the header seems to be on row 2, not on row 1")
    assert (p.file, p.sheet, p.row) == ("ST-1/runs.xlsx", "Runs", 1)
    assert "set `header_row: 2` in study.yaml" in p.message
    folder = write_study(tmp_path, "O", runs=None, runs_name="runs.ods",
                         yaml_text=STUDY_YAML.format(runs="runs.ods"))
    rows = _sheet_rows()
    write_ods(folder / "runs.ods", [rows[k] for k in sorted(rows)])
    _, problems = check_study(folder)
    p = only(problems, "the header seems to be on row 2, not on row 1")
    assert (p.file, p.sheet, p.row) == ("O/runs.ods", "Runs", 1)


def test_header_row_reads_xlsx_and_ods_below_a_title(tmp_path):
    yaml_xlsx = with_yaml("header_row: 2").replace("runs: runs.csv", "runs: runs.xlsx")
    folder = write_study(tmp_path, "X", runs=None, yaml_text=yaml_xlsx, runs_name="runs.xlsx")
    write_xlsx(folder / "runs.xlsx", _sheet_rows())
    study, problems = check_study(folder)
    assert problems == [] and study.runs[0].location.row == 3
    yaml_ods = yaml_xlsx.replace("runs.xlsx", "runs.ods")
    folder = write_study(tmp_path, "O", runs=None, yaml_text=yaml_ods, runs_name="runs.ods")
    rows = _sheet_rows()
    write_ods(folder / "runs.ods", [rows[k] for k in sorted(rows)])
    study, problems = check_study(folder)
    assert problems == [] and [r.location.row for r in study.runs] == [3, 4, 5]


def test_header_row_on_a_blank_line_or_not_a_row_number(tmp_path):
    _, problems = check(tmp_path, "title\n\n" + RUNS_CSV, with_yaml("header_row: 2"))
    p = only(problems, "header_row in study.yaml points at line 2, which holds no cells")
    assert p.file == "ST-1/runs.csv" and "first line with cells is 1" in p.expected
    _, problems = check(tmp_path, RUNS_CSV, with_yaml("header_row: 0"))
    p = only(problems, "'header_row' is out of range")
    assert (p.file, p.key, p.line) == ("ST-1/study.yaml", "header_row", 10)


# -- 5. spiked beside recovery_pct, and recovery against found/spiked ------------------------------

def test_spiked_beside_recovery_pct_is_one_form(tmp_path):
    runs = ("run,pH,aqueous_mL,organic_mL,spiked,recovery_pct\n"
            "R1,3,10,10,50,98.5\nR2,6,10,10,50,40\n")
    study, problems = check(tmp_path, runs)
    assert problems == []
    assert [(r.measurement, r.spiked, r.recovery_pct) for r in study.runs] == [
        ("recovery", 50.0, 98.5), ("recovery", 50.0, 40.0)]


def test_recovery_pct_that_agrees_with_found_over_spiked_is_accepted(tmp_path):
    # 100 x 68.5 / 70 = 97.857 %, written 97.9: inside the rounding of the three cells
    header = ",".join(HEADER) + ",recovery_pct"
    runs = f"{header}\nR1,7.0,10,10,70,1.3,68.5,97.9\nR2,8.0,10,10,100,20,79,\n"
    study, problems = check(tmp_path, runs)
    assert problems == []
    r1 = study.runs[0]
    assert (r1.measurement, r1.recovery_pct, r1.found_organic) == ("both", 97.9, 68.5)


def test_recovery_pct_that_disagrees_with_found_over_spiked_is_an_error(tmp_path):
    # 97.9 typed as 79.7: the row cannot say which cell is right
    header = ",".join(HEADER) + ",recovery_pct"
    runs = f"{header}\nR1,7.0,10,10,70,1.3,68.5,79.7\nR2,8.0,10,10,100,20,79,\n"
    study, problems = check(tmp_path, runs)
    assert study is None
    p = only(problems, "recovery_pct does not agree with found_organic / spiked")
    assert (p.severity, p.line, p.run, p.column) == ("error", 2, "R1", "recovery_pct")
    assert p.found == "79.7 % against 100 x 68.5 / 70 = 97.8571 %"
    # tolerance: 0.05 (79.7) + 100 x 0.05 / 70 (68.5) + 100 x 68.5 x 0.5 / 70^2 (70) = 0.82
    assert "within 0.82 percentage points" in p.expected


# -- 6. replicate labels against the runs' conditions ----------------------------------------------

#: Sheets often number replicates 1, 2, 3 at every pH: label '1' then means three conditions.
NUMBERED = ("run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic,replicate\n"
            "R1,3.00,10,10,100,40,59,1\nR2,3.02,10,10,100,41,58,2\nR3,3.01,10,10,100,40,60,3\n"
            "R4,7.00,10,10,100,20,79,1\nR5,7.03,10,10,100,21,78,2\nR6,6.98,10,10,100,20,80,3\n")


def test_numbered_replicates_do_not_group_runs_at_different_pH(tmp_path):
    from extractval.analysis import build_observations

    study, problems = check(tmp_path, NUMBERED)
    shared = [p for p in problems if "is shared by runs at different conditions" in p.message]
    assert [p.severity for p in shared] == ["warning"] * 3
    one = shared[0]
    assert (one.file, one.line, one.column) == ("ST-1/runs.csv", 2, "replicate")
    assert "'1'" in one.message
    assert one.found == "R1 (pH 3, 10 + 10 mL), R4 (pH 7, 10 + 10 mL)"
    # the fit's groups fall back to the nominal conditions: pH within 0.1, same volumes
    obs, _ = build_observations(study.runs, study.replicate_pH_tolerance)
    assert obs.replicate_key == ("pH 3 to 3.02, 10 + 10 mL",) * 3 + (
        "pH 6.98 to 7.03, 10 + 10 mL",) * 3


def test_precision_groups_give_the_reason_for_each_group(tmp_path):
    from extractval.replicates import precision_groups

    runs = (NUMBERED.replace("R1,3.00,10,10,100,40,59,1", "R1,3.00,10,10,100,40,59,A")
            .replace("R2,3.02,10,10,100,41,58,2", "R2,3.05,10,10,100,41,58,A"))
    study, problems = check(tmp_path, runs)
    grouping = precision_groups(study.runs)
    by_key = {g.key: g for g in grouping.groups}
    assert by_key["A"].run_ids == ("R1", "R2")
    assert by_key["A"].reason == ("replicate label 'A': the same volumes, pH 3 to 3.05 "
                                  "(within 0.1)")
    # label '3' still spans two pH values: its runs fall back to their conditions, alone
    assert grouping.key_of()["R3"] == "pH 3.01, 10 + 10 mL"
    assert grouping.key_of()["R6"] == "pH 6.98, 10 + 10 mL"
    assert by_key["1"].run_ids == ("R4",) and by_key["2"].run_ids == ("R5",)
    assert [p.found for p in grouping.warnings] == [
        "R3 (pH 3.01, 10 + 10 mL), R6 (pH 6.98, 10 + 10 mL)"]


def test_label_shared_by_runs_with_other_volumes_is_a_warning(tmp_path):
    runs = ("run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic,replicate\n"
            "R1,7.00,10,10,100,20,79,A\nR2,7.00,10,20,100,11,88,A\n")
    study, problems = check(tmp_path, runs)
    p = [p for p in problems if "is shared by runs at different conditions" in p.message]
    assert len(p) == 1 and p[0].found == "R1 (pH 7, 10 + 10 mL), R2 (pH 7, 10 + 20 mL)"
    from extractval.replicates import precision_groups
    assert len(precision_groups(study.runs).groups) == 2


def test_unlabelled_runs_group_by_pH_within_the_tolerance(tmp_path):
    from extractval.replicates import precision_groups

    runs = ("run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic\n"
            "R1,7.00,10,10,100,20,79\nR2,7.10,10,10,100,20,79\nR3,7.11,10,10,100,20,79\n"
            "R4,7.05,10.05,10,100,20,79\n")
    study, problems = check(tmp_path, runs)
    assert problems == []
    groups = precision_groups(study.runs).groups
    # from the lowest pH, every run within 0.1 of it; 10.05 mL is 10 mL within 1 %
    assert [g.run_ids for g in groups] == [("R1", "R2", "R4"), ("R3",)]


def test_replicate_pH_tolerance_is_set_in_study_yaml(tmp_path):
    runs = ("run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic,replicate\n"
            "R1,7.0,10,10,100,20,79,A\nR2,7.3,10,10,100,20,79,A\n")
    _, problems = check(tmp_path, runs)
    assert any("shared by runs at different conditions" in p.message for p in problems)
    study, problems = check(tmp_path, runs, with_yaml("replicate_pH_tolerance: 0.5"))
    assert problems == [] and study.replicate_pH_tolerance == 0.5
    _, problems = check(tmp_path, runs, with_yaml("replicate_pH_tolerance: -1"))
    assert only(problems, "'replicate_pH_tolerance' is out of range").key == \
        "replicate_pH_tolerance"


def test_shift_that_a_left_out_cell_hides_is_caught_by_the_label(tmp_path):
    # the row of the first test with its last ',' left out: 11 cells like the header, so the
    # count cannot tell; the recovery 96.5 lands in 'replicate' and 'r1' in 'excluded'
    runs = (f"{SCAFFOLD_HEADER}\n"
            "R1,7.0,10,10,,,,96.5,r1,,\n"
            "R10,3,98,10,10,,,,96.5,r1,\n")
    study, problems = check(tmp_path, runs)
    assert study is None
    p = only(problems, "a decimal number where a replicate label is expected")
    assert (p.severity, p.line, p.run, p.column, p.found) == ("error", 3, "R10", "replicate",
                                                              "96.5")
    assert "separate the cells with ';'" in p.expected
