"""Published versions and the change list: two built result sets, the versions carried
forward, `extractval compare` and the Changes page; the comparison rules checked on small
results documents worked by hand."""

from __future__ import annotations

import dataclasses
import json
import shutil
from pathlib import Path

import pytest

from extractval import site
from extractval.cli import main
from extractval.compare import compare, load_results, CompareError
from site_factory import synthetic_study, write_study_folder

ROOT = Path(__file__).resolve().parent.parent
CONFIG = ROOT / "mkdocs.yml"


def _doc(version, numbers, studies=None):
    return {"dossier_version": version, "build_date": "2026-01-01 00:00 UTC",
            "studies": studies or [{"study": "S", "inputs_key": "sv-1", "runs": []}],
            "numbers": numbers}


def _n(quantity, statistic, value, display):
    tail = "" if statistic == "value" else "/" + statistic
    return {"id": f"S/{quantity}{tail}", "study": "S", "quantity": quantity,
            "statistic": statistic, "value": value, "display": display}


def test_a_move_beyond_the_old_half_width_is_marked():
    """Old log K 2.000 with 95 % interval 1.900 to 2.100: half-width 0.100 (worked by hand).
    2.150 moved 0.150 > 0.100 (beyond); pKa 8.00 -> 8.02 within its 0.05; a value whose
    shown digits did not change is not a move."""
    old = _doc("dv-old", [_n("logK", "value", 2.0, "2.000"), _n("logK", "ci95_lo", 1.9, "1.900"),
                          _n("logK", "ci95_hi", 2.1, "2.100"), _n("pKa", "value", 8.0, "8.00"),
                          _n("pKa", "ci95_lo", 7.95, "7.95"), _n("pKa", "ci95_hi", 8.05, "8.05"),
                          _n("rsd", "value", 4.0001, "4.000")])
    new = _doc("dv-new", [_n("logK", "value", 2.15, "2.150"), _n("logK", "ci95_lo", 2.0, "2.000"),
                          _n("logK", "ci95_hi", 2.3, "2.300"), _n("pKa", "value", 8.02, "8.02"),
                          _n("pKa", "ci95_lo", 7.95, "7.95"), _n("pKa", "ci95_hi", 8.05, "8.05"),
                          _n("rsd", "value", 4.0002, "4.000"), _n("new", "value", 1, "1")])
    c = compare(old, new)
    moved = {m.id: m for m in c.moved}
    assert set(moved) == {"S/logK", "S/logK/ci95_lo", "S/logK/ci95_hi", "S/pKa"}
    assert moved["S/logK"].half_width == pytest.approx(0.1) and moved["S/logK"].beyond
    assert moved["S/logK/ci95_hi"].beyond                      # 2.1 -> 2.3, 0.2 > 0.1
    assert not moved["S/logK/ci95_lo"].beyond                  # 1.9 -> 2.0, 0.1 is not > 0.1
    assert moved["S/pKa"].half_width == pytest.approx(0.05) and not moved["S/pKa"].beyond
    assert (moved["S/logK"].old_display, moved["S/logK"].new_display) == ("2.000", "2.150")
    assert c.numbers_added == ["S/new"] and c.numbers_removed == []
    assert c.n_beyond == 2 and not c.same


def test_studies_and_runs_added_removed_changed():
    run = {"run": "R1", "pH": 7.0, "aqueous_mL": 10.0, "organic_mL": 10.0, "status": "used"}
    old = _doc("dv-a", [], [{"study": "A", "inputs_key": "sv-1",
                             "runs": [run, dict(run, run="R2")]},
                            {"study": "B", "inputs_key": "sv-2", "runs": []}])
    new = _doc("dv-b", [], [{"study": "A", "inputs_key": "sv-3",
                             "runs": [dict(run, pH=7.2), dict(run, run="R3")]},
                            {"study": "C", "inputs_key": "sv-4", "runs": []}])
    c = compare(old, new)
    assert c.studies_added == ["C"] and c.studies_removed == ["B"]
    assert [(s.study, s.old_key, s.new_key) for s in c.studies_changed] == [("A", "sv-1", "sv-3")]
    assert [(r.run, r.kind, r.fields) for r in c.runs] == [
        ("R3", "added", ()), ("R2", "removed", ()), ("R1", "changed", ("pH",))]
    assert compare(old, old).same


@pytest.fixture(scope="module")
def two_versions(tmp_path_factory):
    """v1 built with an archive; then SYN-002 changes (one run's organic amount x1.6, a run
    removed) and SYN-003 joins, and v2 is built into the same site without the archive."""
    base = tmp_path_factory.mktemp("versions")
    studies, cache = base / "studies", base / "cache"
    write_study_folder(synthetic_study("SYN-001"), studies)
    write_study_folder(synthetic_study("SYN-002", seed=2), studies)
    site_dir, archive = base / "site", base / "archive"
    v1 = site.build(studies, site_dir, CONFIG, cache_dir=cache, archive=archive)
    old = synthetic_study("SYN-002", seed=2)
    runs = list(old.runs)
    runs[5] = dataclasses.replace(runs[5], found_organic=runs[5].found_organic * 1.6)
    shutil.rmtree(studies / "SYN-002")
    write_study_folder(dataclasses.replace(old, runs=tuple(runs[:-1])), studies)
    write_study_folder(synthetic_study("SYN-003", seed=3), studies)
    v2 = site.build(studies, site_dir, CONFIG, cache_dir=cache)
    return {"site": site_dir, "archive": archive, "studies": studies, "cache": cache,
            "v1": v1.prepared.dossier.version, "v2": v2.prepared.dossier.version, "base": base}


def test_a_new_build_carries_every_published_version(two_versions):
    s, v1, v2 = two_versions["site"], two_versions["v1"], two_versions["v2"]
    assert v1 != v2
    for v in (v1, v2):
        for name in ("results.json", "results.csv", "register.html"):
            assert (s / "versions" / v / name).is_file(), (v, name)
    # v1's record is the one first published: its own version in every citation line
    doc = json.loads((s / "versions" / v1 / "results.json").read_text())
    assert doc["dossier_version"] == v1
    assert all(v1 in r["citation"] and "(inputs sv-" in r["citation"] for r in doc["numbers"])
    page = (s / "versions" / v1 / "register.html").read_text()
    assert 'id="SYN-002/logK"' in page and v1 in page
    assert (two_versions["archive"] / v1 / "results.json").read_bytes() == \
        (s / "versions" / v1 / "results.json").read_bytes()
    # a new site built elsewhere from the archive alone still holds v1
    fresh = two_versions["base"] / "fresh"
    site.build(two_versions["studies"], fresh, CONFIG, cache_dir=two_versions["cache"],
               archive=two_versions["archive"])
    assert (fresh / "versions" / v1 / "register.html").is_file()
    assert (two_versions["archive"] / v2).is_dir()          # and the archive now has v2


def test_the_inputs_key_changes_only_with_the_study(two_versions):
    s, v1, v2 = two_versions["site"], two_versions["v1"], two_versions["v2"]
    keys = [{x["study"]: x["inputs_key"] for x in
             json.loads((s / "versions" / v / "results.json").read_text())["studies"]}
            for v in (v1, v2)]
    assert keys[0]["SYN-001"] == keys[1]["SYN-001"]
    assert keys[0]["SYN-002"] != keys[1]["SYN-002"]


def test_compare_command_and_changes_page(two_versions, capsys):
    s, v1, v2 = two_versions["site"], two_versions["v1"], two_versions["v2"]
    assert main(["compare", str(s / "versions" / v1), str(s)]) == 0
    out = capsys.readouterr().out
    assert f"old {v1}" in out and f"new {v2}" in out
    assert "study added    SYN-003" in out
    assert "study changed  SYN-002" in out
    assert "run removed" in out and "SYN-002 R30" in out
    assert "moved SYN-002/logK: " in out and "SYN-001/" not in out
    c = compare(load_results(s / "versions" / v1), load_results(s / "results.json"))
    assert any(m.id == "SYN-002/logK" for m in c.moved)
    page = (s / "changes" / "index.html").read_text()
    assert v1 in page and v2 in page and "SYN-003" in page and "SYN-002/logK" in page
    assert f"versions/{v1}/register.html" in page


def test_compare_says_what_it_could_not_read(tmp_path, capsys):
    (tmp_path / "x.json").write_text('{"a": 1}')
    assert main(["compare", str(tmp_path / "x.json"), str(tmp_path)]) == 1
    err = capsys.readouterr().err
    assert "x.json: found JSON without 'dossier_version'" in err
    with pytest.raises(CompareError, match="no results.json here"):
        load_results(tmp_path)


def test_the_archive_may_not_live_inside_the_site(tmp_path):
    with pytest.raises(site.SiteBuildError, match="inside the site folder"):
        site.build(None, tmp_path / "site", CONFIG, archive=tmp_path / "site" / "keep",
                   sources=[])
