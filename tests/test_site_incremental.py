"""A rebuild after one study changed: the other studies' pages come from the page cache, and
the site is the same bytes a full build makes, with this build's version on every page.

What these check is outside any single build: a build from an empty cache (every page
converted by the site generator) is the reference for the bytes of a build that reuses pages.
"""

from __future__ import annotations

import collections
import hashlib
import json
import os
import re
import shutil
from pathlib import Path

import mkdocs.commands.build as mkdocs_build
import pytest

from extractval import mkdocs_plugin, site
from extractval.report import pages
from extractval.report.register import Dossier, json_item, results_json, results_json_of_parts
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


def build(studies: Path, out: Path, cache: Path, jobs: int = 1) -> site.BuildResult:
    return site.build(studies, out, CONFIG, cache_dir=cache, jobs=jobs)


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


def test_two_changed_studies_with_spare_cores_are_fitted_by_workers_and_drawn_by_the_drawer(
        project, tmp_path):
    """With more cores than changed studies, workers fit them and the drawing helper draws
    each as its fit arrives: the site is the one an empty cache gives."""
    cache = tmp_path / "cache"
    build(project, tmp_path / "a", cache)
    change_one_run(project, "SYN-001")
    change_one_run(project, "SYN-003")
    second = build(project, tmp_path / "b", cache, jobs=4)
    assert sorted(o.study_id for o in second.prepared.outcomes if not o.cached) == [
        "SYN-001", "SYN-003"]
    assert all(o.plots for o in second.prepared.outcomes)
    build(project, tmp_path / "c", tmp_path / "empty-cache")
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
    parts = sorted((cache / site.CACHE_FORMAT / "parts").rglob("*.parts"))
    assert len(entries) == 3 and len(parts) == 3           # one per study page
    for entry in entries:
        entry.write_text("{ half written")                 # e.g. a disk that filled up
    for entry in parts:                                    # cut short, or one byte too many
        data = entry.read_bytes()
        entry.write_bytes(data[:len(data) // 2] if entry == parts[0] else data + b"x")
    again = build(project, tmp_path / "b", cache)
    assert again.prepared.reused == {} and again.prepared.parts_reused == []
    assert tree(tmp_path / "b") == tree(tmp_path / "a")
    # and the entries are whole again for the next build
    third = build(project, tmp_path / "c", cache)
    assert len(third.prepared.reused) == 3
    assert third.prepared.parts_reused == ["SYN-001", "SYN-002", "SYN-003"]


class Made:
    """Counts, by page or study, what a build makes: pages rendered from their template, the
    study parts of the pages listing every study, pages converted by the generator (its
    Markdown step, seen by the plugin's hook), pages it builds (its per-page step) and
    studies whose body of the print page is made from their page."""

    def __init__(self, monkeypatch):
        self.rendered, self.parts = collections.Counter(), collections.Counter()
        self.converted, self.built = collections.Counter(), collections.Counter()
        self.printed = collections.Counter()
        study_page, study_parts = pages.Pages.study_page, pages.Pages.study_parts
        study_body = mkdocs_plugin.study_body
        on_markdown = mkdocs_plugin.DossierPlugin.on_page_markdown
        build_page = mkdocs_build._build_page

        def count_page(this, s, dossier):
            self.rendered[s.study_id] += 1
            return study_page(this, s, dossier)

        def count_parts(this, s, dossier):
            self.parts[s.study_id] += 1
            return study_parts(this, s, dossier)

        def count_markdown(this, markdown, *, page, config, files):
            self.converted[page.file.src_uri] += 1
            return on_markdown(this, markdown, page=page, config=config, files=files)

        def count_build(page, *args, **kwargs):
            self.built[page.file.src_uri] += 1
            return build_page(page, *args, **kwargs)

        def count_print(study, to_dir):
            self.printed[study.study_id] += 1
            return study_body(study, to_dir)

        monkeypatch.setattr(mkdocs_plugin, "study_body", count_print)
        monkeypatch.setattr(pages.Pages, "study_page", count_page)
        monkeypatch.setattr(pages.Pages, "study_parts", count_parts)
        monkeypatch.setattr(mkdocs_plugin.DossierPlugin, "on_page_markdown", count_markdown)
        monkeypatch.setattr(mkdocs_build, "_build_page", count_build)


def test_unchanged_studies_are_neither_rendered_nor_converted_again(project, tmp_path,
                                                                    monkeypatch):
    cache = tmp_path / "cache"
    cold = Made(monkeypatch)
    build(project, tmp_path / "a", cache)
    studies = ["studies/SYN-001/index.md", "studies/SYN-002/index.md",
               "studies/SYN-003/index.md"]
    # the counters see a cold build make every page once
    assert sorted(cold.rendered) == ["SYN-001", "SYN-002", "SYN-003"]
    assert all(cold.built[p] == 1 and cold.converted[p] == 1 for p in studies)
    assert cold.printed == {"SYN-001": 1, "SYN-002": 1, "SYN-003": 1}
    change_one_run(project, "SYN-002")
    made = Made(monkeypatch)
    # two workers: the changed study is fitted in a worker process, its plots drawn in another
    second = build(project, tmp_path / "b", cache, jobs=2)
    assert [o.study_id for o in second.prepared.outcomes if not o.cached] == ["SYN-002"]
    assert made.rendered == {"SYN-002": 1}
    assert made.parts == {"SYN-002": 1}
    assert second.prepared.parts_reused == ["SYN-001", "SYN-003"]
    for page in ("studies/SYN-001/index.md", "studies/SYN-003/index.md"):
        assert made.built[page] == 0 and made.converted[page] == 0
    assert made.built["studies/SYN-002/index.md"] == 1
    # the print page takes the unchanged studies' sections as kept with their pages
    assert made.printed == {"SYN-002": 1}
    # the pages that list every study are made every build, from the kept parts
    for page in ("index.md", "register.md", "changes.md"):
        assert made.built[page] == 1
    # and the unchanged studies' reports were not even parsed
    loaded = {o.study_id: o.loaded for o in second.prepared.outcomes}
    assert loaded == {"SYN-001": False, "SYN-002": True, "SYN-003": False}
    # the rebuilt site is the one a build from an empty cache makes
    build(project, tmp_path / "c", tmp_path / "empty-cache")
    assert tree(tmp_path / "b") == tree(tmp_path / "c")


def test_kept_plots_and_versions_are_the_same_files(project, tmp_path):
    """Plots from the cache and versions already published are linked (or copied), never
    rewritten: their bytes equal the cache's and the first publication's."""
    cache = tmp_path / "cache"
    first = build(project, tmp_path / "site", cache)
    old = first.prepared.dossier.version
    kept = {p: p.read_bytes() for p in (tmp_path / "site" / "versions" / old).iterdir()}
    change_one_run(project, "SYN-001")
    second = build(project, tmp_path / "site", cache)
    assert second.prepared.dossier.version != old
    for path, data in kept.items():
        assert path.read_bytes() == data
    plots = sorted((tmp_path / "site/studies/SYN-003").glob("*.svg"))
    assert plots
    linked = second.prepared.linked
    for p in plots:
        source = linked[p.relative_to(tmp_path / "site").as_posix()]
        assert source.is_relative_to(cache) and source.read_bytes() == p.read_bytes()
        if os.stat(source).st_dev == os.stat(p).st_dev:
            assert os.path.samefile(source, p)                # a link, not a copy


def test_results_json_from_kept_parts_is_the_whole_document_written_at_once():
    """The exports are joined from each study's kept items; the reference is json.dumps of
    the whole document (the standard library's encoder), for lists empty and not."""
    d = Dossier("dv-000000000000", "extractval 0.0", "2026-01-01 00:00 UTC")
    studies = [{"study": "A", "runs": [{"run": "R1", "pH": 7.0, "reason": None}]},
               {"study": "B \u00e9", "runs": []}]
    rows = [{"id": "A/logK", "value": 1.25e-07, "display": "> 99.99"}, {"id": "A/se"}]
    for s, r in ((studies, rows), (studies, []), ([], [])):
        joined = results_json_of_parts(d, [json_item(x) for x in s],
                                       [",\n".join(json_item(x) for x in r)] if r else [])
        assert joined == results_json(r, d, s)
        assert json.loads(joined) == {"dossier_version": d.version, "software": d.software,
                                      "build_date": d.build_date, "studies": s, "numbers": r}


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


def test_studies_compared_by_solvent_are_read_for_that_page(tmp_path, monkeypatch):
    """The Solvents compared page shows numbers of every study of its group: those studies'
    reports are read on a rebuild even when their own pages are kept."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    root = tmp_path / "studies"
    for sid, analyte, organic, seed in (("SYN-001", "SYN-Delta", "ethyl acetate", 1),
                                        ("SYN-002", "SYN-Delta", "toluene", 2),
                                        ("SYN-003", "SYN-Eta", "ethyl acetate", 3)):
        write_study_folder(synthetic_study(sid, analyte=analyte, organic=organic, seed=seed),
                           root)
    cache = tmp_path / "cache"
    build(root, tmp_path / "a", cache)
    change_one_run(root, "SYN-003")
    second = build(root, tmp_path / "b", cache)
    assert "solvents.md" in second.prepared.files
    assert sorted(second.prepared.reused) == ["studies/SYN-001/index.md",
                                              "studies/SYN-002/index.md"]
    loaded = {o.study_id: o.loaded for o in second.prepared.outcomes}
    assert loaded == {"SYN-001": True, "SYN-002": True, "SYN-003": True}
    build(root, tmp_path / "c", tmp_path / "empty-cache")
    assert tree(tmp_path / "b") == tree(tmp_path / "c")
