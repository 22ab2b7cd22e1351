"""`extractval new`: a study folder from the templates, readable once a run is added."""

from __future__ import annotations

import csv

import pytest

from extractval.cli import main
from extractval.scaffold import new_study
from extractval.study import COLUMNS, check_study


def test_new_study_has_commented_yaml_and_the_contract_headers(tmp_path):
    folder = new_study("LAB-2026-001", tmp_path)
    text = (folder / "study.yaml").read_text()
    assert text.count("#") > 10 and "LAB-2026-001/P1/recovery_pct" in text
    header = next(csv.reader((folder / "runs.csv").open()))
    assert header[:4] == ["run", "pH", "aqueous_mL", "organic_mL"]
    assert set(header) <= set(COLUMNS.values())
    assert (folder / "README-runs.txt").is_file()


def test_the_scaffold_reads_once_a_run_is_filled_in(tmp_path):
    folder = new_study("LAB-2026-002", tmp_path)
    study, problems = check_study(folder)
    assert study is None and any("no runs" in p.message for p in problems)
    with (folder / "runs.csv").open("a", newline="") as fh:
        csv.writer(fh).writerow(["R1", 7.0, 10, 10, 100, 40, 59, "", "", "", ""])
    study, problems = check_study(folder)
    assert study is not None, [str(p) for p in problems]
    assert study.study_id == "LAB-2026-002" and study.procedures[0].id == "P1"


def test_an_existing_folder_is_never_touched(tmp_path, capsys):
    folder = new_study("LAB-2026-003", tmp_path)
    (folder / "study.yaml").write_text("mine")
    assert main(["new", "LAB-2026-003", "--studies", str(tmp_path)]) == 1
    assert "already exists" in capsys.readouterr().err
    assert (folder / "study.yaml").read_text() == "mine"


@pytest.mark.parametrize("bad", ["has space", "a/b", "ünï", ""])
def test_a_bad_study_id_is_refused_with_the_reason(tmp_path, capsys, bad):
    assert main(["new", bad, "--studies", str(tmp_path)]) == 1
    assert "expected ASCII letters, digits" in capsys.readouterr().err
    assert not any(tmp_path.iterdir())
