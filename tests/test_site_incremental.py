"""A rebuild after one study changed: the other studies' pages come from the page cache, and
the site is the same bytes a full build makes, with this build's version on every page.

What these check is outside any single build: a build from an empty cache (every page
converted by the site generator) is the reference for the bytes of a build that reuses pages.
"""

from __future__ import annotations

import hashlib
import json
import re
import shutil
from pathlib import Path

import pytest

from extractval import site
from site_factory import synthetic_study, write_study_folder

ROOT = Path(__file__).resolve().parent.parent
CONFIG = ROOT / "mkdocs.yml"
EPOCH = "1767225600"                      # 2026-01-01 00:00 UTC
TOKENS = (site.VERSION_TOKEN.encode(), site.DATE_TOKEN.encode())


@pytest.fixture()
def project(tmp_path, monkeypatch) -> Path:
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    root = tmp_path / "studies"
    for i, analyte in enumerate(("SYN-Alpha", "SYN-Beta", "SYN-Gamma")):
        write_study_folder(synthetic_study(f"SYN-00{i + 1}", analyte=analyte, seed=i + 1), root)
    return root


def build(studies: Path, out: Path, cache: Path) -> site.BuildResult:
    return site.build(studies, out, CONFIG, cache_dir=cache, jobs=1)


def tree(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def change_one_run(studies: Path, study_id: str) -> None:
    runs = studies / study_id / "runs.csv"
    lines = runs.read_text().splitlines()
    cells = lines[1].split(",")
    cells[5] = str(float(cells[5]) * 1.01)                 # one found amount, 1 % higher
    lines[1] = ",".join(cells)
    runs.write_text("\n".join(lines) + "\n")


def test_one_changed_study_is_the_only_page_made_again(project, tmp_path):
    cache = tmp_path / "cache"
    first = build(project, tmp_path / "a", cache)
    assert first.prepared.reused == {}                     # cold: every page made
    change_one_run(project, "SYN-002")
    second = build(project, tmp_path / "b", cache)
    assert sorted(second.prepared.reused) == ["studies/SYN-001/index.md",
                                              "studies/SYN-003/index.md"]
    # the reference: the same inputs built from an empty cache, every page converted
    full = build(project, tmp_path / "c", tmp_path / "empty-cache")
    assert full.prepared.reused == {}
    assert tree(tmp_path / "b") == tree(tmp_path / "c")


def test_a_reused_page_shows_the_new_dossier_version_and_no_token(project, tmp_path):
    cache = tmp_path / "cache"
    first = build(project, tmp_path / "a", cache)
    change_one_run(project, "SYN-003")
    second = build(project, tmp_path / "b", cache)
    old, new = first.prepared.dossier.version, second.prepared.dossier.version
    assert old != new
    page = (tmp_path / "b/studies/SYN-001/index.html").read_text(encoding="utf-8")
    assert "studies/SYN-001/index.md" in second.prepared.reused
    # a printed page says which dossier it belongs to: the new one, never the old
    assert new in page and old not in page
    assert "2026-01-01 00:00 UTC" in page
    for path in (tmp_path / "b").rglob("*"):
        if path.is_file():
            data = path.read_bytes()
            assert not any(t in data for t in TOKENS), path
    index = json.loads((tmp_path / "b/search/search_index.json").read_text(encoding="utf-8"))
    assert any(new in doc["text"] for doc in index["docs"])
    assert not any(old in doc["text"] for doc in index["docs"])


def test_an_unreadable_page_cache_entry_is_made_again(project, tmp_path):
    cache = tmp_path / "cache"
    build(project, tmp_path / "a", cache)
    entries = sorted((cache / site.CACHE_FORMAT / "pages").rglob("*.json"))
    assert len(entries) == 3                               # one per study page
    for entry in entries:
        entry.write_text("{ half written")                 # e.g. a disk that filled up
    again = build(project, tmp_path / "b", cache)
    assert again.prepared.reused == {}
    assert tree(tmp_path / "b") == tree(tmp_path / "a")
    # and the entries are whole again for the next build
    third = build(project, tmp_path / "c", cache)
    assert len(third.prepared.reused) == 3


def test_a_template_change_makes_every_page_again(project, tmp_path):
    cache = tmp_path / "cache"
    templates = tmp_path / "site_templates"
    shutil.copytree(ROOT / "site_templates", templates)
    config = tmp_path / "mkdocs.yml"
    config.write_text(CONFIG.read_text().replace("docs_dir: site_templates",
                                                 f"docs_dir: {templates}"))
    site.build(project, tmp_path / "a", config, cache_dir=cache, jobs=1)
    study = templates / "study.md.j2"
    study.write_text(study.read_text() + "\n<!-- a reviewer's note -->\n")
    again = site.build(project, tmp_path / "b", config, cache_dir=cache, jobs=1)
    assert again.prepared.reused == {}
    assert re.search(r"a reviewer.s note",
                     (tmp_path / "b/studies/SYN-001/index.html").read_text(encoding="utf-8"))
