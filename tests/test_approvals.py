"""approvals.yaml: located errors for malformed entries, each approval's state against the
study's inputs key, and the Review and approval page in a built site."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from extractval import site
from extractval.approvals import STALE, approval_rows, read_approvals
from site_factory import synthetic_study, write_study_folder

CONFIG = Path(__file__).resolve().parent.parent / "mkdocs.yml"


def test_malformed_entries_are_located(tmp_path):
    (tmp_path / "approvals.yaml").write_text(
        "S-1:\n"
        "  - reviewer: A. Example\n"
        "    role: QA\n"
        "    date: 30.11.2026\n"
        "    decision: ok\n"
        "    inputs_key: sv-12\n"
        "    signed: yes\n"
        "  - reviewer: B. Example\n"
        "S-2: approved\n", encoding="utf-8")
    approvals, errors = read_approvals(tmp_path)
    assert approvals == []
    f = str(tmp_path / "approvals.yaml")
    assert errors == [
        f"{f}, line 4, study 'S-1', key 'date': found '30.11.2026'; expected a date as "
        "YYYY-MM-DD",
        f"{f}, line 5, study 'S-1', key 'decision': found 'ok'; expected one of approved, "
        "approved with comments, rejected, changes requested",
        f"{f}, line 6, study 'S-1', key 'inputs_key': found 'sv-12'; expected the study's "
        "inputs key as the dossier shows it, sv- and 12 hex digits (e.g. sv-1a2b3c4d5e6f)",
        f"{f}, line 7, study 'S-1', key 'signed': unknown key; expected one of reviewer, "
        "role, date, decision, inputs_key, comment",
        f"{f}, line 8, study 'S-1': missing role, date, decision, inputs_key; an approval "
        "needs reviewer, role, date, decision, inputs_key (comment is optional)",
        f"{f}, line 9, study 'S-2': found a value 'approved'; expected a list of approvals "
        "(each item starting with '- reviewer: ...')"]


def test_bad_yaml_and_no_file(tmp_path):
    assert read_approvals(tmp_path) == ([], [])
    (tmp_path / "approvals.yaml").write_text("S-1:\n  - reviewer: [unclosed\n")
    _, errors = read_approvals(tmp_path)
    assert len(errors) == 1 and "approvals.yaml, line 3: not valid YAML" in errors[0]


def test_state_follows_the_inputs_key(tmp_path):
    (tmp_path / "approvals.yaml").write_text(
        "S-1:\n"
        "  - {reviewer: A, role: QA, date: 2026-11-01, decision: approved,"
        " inputs_key: sv-aaaaaaaaaaaa}\n"
        "  - {reviewer: B, role: QA, date: 2026-11-02, decision: approved,"
        " inputs_key: sv-bbbbbbbbbbbb, comment: after the rerun}\n"
        "S-9:\n"
        "  - {reviewer: C, role: QA, date: 2026-11-03, decision: rejected,"
        " inputs_key: sv-cccccccccccc}\n")
    approvals, errors = read_approvals(tmp_path)
    assert errors == [] and len(approvals) == 3
    rows = approval_rows(approvals, {"S-1": "sv-bbbbbbbbbbbb"})
    assert [(r.approval.reviewer, r.state) for r in rows] == [
        ("A", STALE), ("B", "current"), ("C", "no such study in this dossier")]
    assert rows[1].approval.comment == "after the rerun"


def test_approvals_page_in_the_site(tmp_path):
    studies = tmp_path / "studies"
    write_study_folder(synthetic_study("SYN-001"), studies)
    write_study_folder(synthetic_study("SYN-002", seed=2), studies)
    cache = tmp_path / "cache"
    first = site.build(studies, tmp_path / "site", CONFIG, cache_dir=cache)
    keys = {o.study_id: o.key for o in first.prepared.outcomes}
    (studies / "approvals.yaml").write_text(
        f"SYN-001:\n  - {{reviewer: A. Example, role: QA, date: 2026-11-30, "
        f"decision: approved, inputs_key: {keys['SYN-001']}}}\n"
        f"SYN-002:\n  - {{reviewer: B. Example, role: QA, date: 2026-11-30, "
        f"decision: approved, inputs_key: sv-000000000000}}\n")
    site.build(studies, tmp_path / "site", CONFIG, cache_dir=cache)
    page = (tmp_path / "site" / "approvals" / "index.html").read_text()
    assert "stale: inputs changed after approval" in page
    assert "approved by A. Example (2026-11-30)" in page
    assert "access control and version control" in page
    assert keys["SYN-001"] in page
    # a malformed file stops the build, with its place, and leaves the site as it was
    before = (tmp_path / "site" / "results.json").read_bytes()
    (studies / "approvals.yaml").write_text("SYN-001:\n  - {reviewer: A}\n")
    with pytest.raises(site.SiteBuildError, match=r"approvals.yaml, line 2, study 'SYN-001'"):
        site.build(studies, tmp_path / "site", CONFIG, cache_dir=cache)
    assert (tmp_path / "site" / "results.json").read_bytes() == before
    assert json.loads(before)["dossier_version"].startswith("dv-")
