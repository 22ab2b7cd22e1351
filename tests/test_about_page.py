"""The about page explains the judgements a reader of the dossier meets (issue 9): how the runs
tables are read (shifted cells, header_row, spiked beside recovery_pct) and that lack of fit is
a diagnostic unless the study sets a significance level for it."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from extractval.report.pages import Pages
from extractval.report.register import Dossier

ROOT = Path(__file__).resolve().parents[1]
TEMPLATES = ROOT / "site_templates"
PACKAGED = ROOT / "extractval" / "dossier" / "site_templates"


@pytest.fixture(scope="module")
def about() -> str:
    text = Pages(TEMPLATES).about_page(Dossier("dv-000000000000", "extractval 0.0-test",
                                               "2026-01-01 00:00 UTC"))
    return re.sub(r"\s+", " ", text)


def test_the_package_carries_the_same_about_page():
    assert (PACKAGED / "about.md.j2").read_bytes() == (TEMPLATES / "about.md.j2").read_bytes()


def test_shifted_cells_of_a_decimal_comma_are_errors(about):
    assert "decimal comma splits a number into two cells" in about
    assert "is an error naming the cells, never a run read with the wrong values" in about


def test_header_row_is_explained(about):
    assert "`header_row:` in study.yaml" in about
    assert "title row above the header" in about


def test_spiked_beside_recovery_is_one_measurement_checked_for_agreement(about):
    assert "`spiked` beside `recovery_pct` in one row" in about
    assert "is one measurement, the recovery" in about
    assert "must agree with 100 × found_organic / spiked" in about


def test_lack_of_fit_is_a_diagnostic_unless_the_study_sets_alpha(about):
    assert "shown with its p value as a diagnostic, never as a pass or fail" in about
    assert "`targets: lack_of_fit_alpha`" in about


def test_the_extrapolation_rule_is_stated_as_a_project_convention(about):
    assert "not judged: extrapolated beyond the runs" in about
    assert "0.05 unit outside the span of the runs" in about and "10 % outside" in about
    assert "project's convention" in about
