"""The built site: byte-identical rebuilds, atomic publishing, escaping, no outside requests."""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from extractval import site
from extractval.cli import main
from site_factory import synthetic_study, write_broken_folder, write_study_folder

ROOT = Path(__file__).resolve().parent.parent
CONFIG = ROOT / "mkdocs.yml"
EPOCH = "1767225600"                      # 2026-01-01 00:00 UTC
TITLE = "<script>alert(1)</script> & <b>bold</b>"
LOCAL_HOSTS = {"127.0.0.1", "localhost"}


@pytest.fixture(scope="module")
def env_epoch():
    saved = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = EPOCH
    yield EPOCH
    if saved is None:
        os.environ.pop("SOURCE_DATE_EPOCH", None)
    else:
        os.environ["SOURCE_DATE_EPOCH"] = saved


@pytest.fixture(scope="module")
def studies(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("studies")
    write_study_folder(synthetic_study("SYN-001", title=TITLE, analyte="SYN-Alpha"), root)
    write_study_folder(synthetic_study("SYN-002", analyte="SYN-Beta", organic="diethyl ether",
                                       seed=2), root)
    return root


@pytest.fixture(scope="module")
def cache(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("cache")


def build(studies: Path, site_dir: Path, cache: Path, **kw) -> site.BuildResult:
    return site.build(studies, site_dir, kw.pop("config", CONFIG), cache_dir=cache, jobs=2,
                      **kw)


@pytest.fixture(scope="module")
def built(studies, cache, env_epoch, tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("out") / "site"
    result = build(studies, out, cache)
    assert [o.cached for o in result.prepared.outcomes] == [False, False]
    return out


def tree(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_pages_exist_where_expected(built):
    for path in ("index.html", "register/index.html", "about/index.html", "results.json",
                 "results.csv", "studies/SYN-001/index.html", "studies/SYN-001/log-d-vs-ph.svg",
                 "studies/SYN-001/residuals-vs-ph.svg", "studies/SYN-001/portions-P1.svg",
                 "search/search_index.json", site.MARKER):
        assert (built / path).is_file(), path


def test_every_page_shows_the_dossier_version(built):
    version = (built / site.MARKER).read_text().strip()
    assert re.fullmatch(r"dv-[0-9a-f]{12}", version)
    pages = sorted(built.rglob("index.html"))
    assert len(pages) >= 5
    for page in pages:
        assert version in page.read_text(encoding="utf-8"), page


def test_rebuild_is_byte_identical(built, studies, cache, env_epoch, tmp_path):
    """The second build takes the fits from the cache: the bytes must not tell."""
    again = tmp_path / "site"
    result = build(studies, again, cache)
    assert all(o.cached for o in result.prepared.outcomes)
    assert tree(again) == tree(built)


def test_build_from_the_command_line_in_another_process_is_identical(built, studies, tmp_path):
    """Another hash seed, locale and working folder, and no cache: the same bytes."""
    out = tmp_path / "site"
    env = dict(os.environ, PYTHONHASHSEED="12345", LC_ALL="C", LANG="C",
               SOURCE_DATE_EPOCH=EPOCH, PYTHONPATH=str(ROOT))     # this checkout's code
    proc = subprocess.run(
        [sys.executable, "-m", "extractval.cli", "build", "--studies", str(studies), "--site",
         str(out), "--config", str(CONFIG), "--cache-dir", str(tmp_path / "cache")],
        cwd=tmp_path, env=env, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.strip().splitlines()
    assert re.match(r"\s*1/2 SYN-001 +fitted", lines[0]) or re.match(r"\s*1/2 SYN-00", lines[0])
    assert lines[-1].startswith("built 2 studies") and str(out) in lines[-1]
    assert tree(out) == tree(built)


def test_markup_in_a_title_is_text_in_the_html(built):
    for page in (built / "studies/SYN-001/index.html", built / "index.html"):
        text = page.read_text(encoding="utf-8")
        assert "<script>alert" not in text and "<b>bold" not in text
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    index = (built / "search/search_index.json").read_text(encoding="utf-8")
    assert "<script>alert" not in json.dumps(json.loads(index))


def _external_refs(text: str) -> list[str]:
    refs = re.findall(r"""(?:src|href|srcset|action|poster|data)\s*=\s*["']?\s*(https?:)?//"""
                      r"""([^/"'\s>]+)""", text, flags=re.I)
    refs += re.findall(r"""url\(\s*["']?(https?:)?//([^/"')\s]+)""", text, flags=re.I)
    refs += re.findall(r"""@import\s+["'](https?:)?//([^/"'\s]+)""", text, flags=re.I)
    return [host for _, host in refs if host.split(":")[0] not in LOCAL_HOSTS]


def test_no_external_resource_in_any_built_file(built):
    checked = 0
    for path in built.rglob("*"):
        if path.suffix in (".html", ".css", ".js", ".svg", ".xml", ".json"):
            text = path.read_text(encoding="utf-8", errors="replace")
            if path.suffix == ".js":
                # scripts: only markup they would insert counts; Material names a CDN copy
                # of Mermaid in a string it uses for Mermaid diagrams only (none here)
                text = text.replace("https://unpkg.com/mermaid", "")
            assert not _external_refs(text), f"{path.relative_to(built)}: {_external_refs(text)}"
            checked += 1
    assert checked > 10


def test_failed_build_leaves_the_published_site(built, studies, cache, env_epoch, tmp_path):
    work = tmp_path / "studies"
    shutil.copytree(studies, work)
    target = tmp_path / "site"
    shutil.copytree(built, target)
    before = tree(target)
    write_broken_folder(work)
    with pytest.raises(site.SiteBuildError) as exc:
        build(work, target, cache)
    message = str(exc.value)
    assert "SYN-BAD" in message and "line 2" in message and "'pH'" in message
    assert tree(target) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site", "studies"]   # no leftovers


def test_keep_going_publishes_the_others_with_an_error_page(studies, cache, env_epoch, tmp_path):
    work = tmp_path / "studies"
    shutil.copytree(studies, work)
    write_broken_folder(work)
    result = build(work, tmp_path / "site", cache, keep_going=True)
    assert [o.study_id for o in result.prepared.failed] == ["SYN-BAD"]
    page = (tmp_path / "site/studies/SYN-BAD/index.html").read_text(encoding="utf-8")
    bad = page[page.index("<article"):page.index("</article>")]
    assert "not a number" in bad and "line 2" in bad
    assert "Fitted constants" not in bad and "Number register" not in bad
    assert (tmp_path / "site/studies/SYN-001/index.html").is_file()
    numbers = json.loads((tmp_path / "site/results.json").read_text())["numbers"]
    assert {r["study"] for r in numbers} == {"SYN-001", "SYN-002"}


def test_cli_keep_going_exit_status_and_located_errors(studies, cache, env_epoch, tmp_path,
                                                       capsys):
    work = tmp_path / "studies"
    shutil.copytree(studies, work)
    write_broken_folder(work)
    args = ["build", "--studies", str(work), "--site", str(tmp_path / "site"), "--config",
            str(CONFIG), "--cache-dir", str(cache)]
    assert main(args) == 1                                   # stops: nothing published
    err = capsys.readouterr().err
    assert "SYN-BAD/runs.csv, line 2" in err and "site was left as it was" in err
    assert not (tmp_path / "site").exists()
    assert main(args + ["--keep-going"]) == 1                # published, but says so
    out, err = capsys.readouterr()
    assert "1 with errors published without numbers: SYN-BAD" in out.splitlines()[-1]
    assert (tmp_path / "site/index.html").is_file()


def test_a_study_the_model_cannot_fit_stops_the_build_too(studies, cache, env_epoch, tmp_path):
    """Two runs cannot fit a base (log K and pKa need more): no numbers, so no publishing
    unless --keep-going, which publishes the study's page with the reason."""
    work = tmp_path / "studies"
    shutil.copytree(studies, work)
    write_study_folder(synthetic_study("SYN-FEW", pH=(9.0,), ratios=(1.0,), excluded={}),
                       work)
    with pytest.raises(site.SiteBuildError, match="SYN-FEW: not fitted"):
        build(work, tmp_path / "site", cache)
    assert not (tmp_path / "site").exists()
    result = build(work, tmp_path / "site", cache, keep_going=True)
    assert [o.study_id for o in result.prepared.failed] == ["SYN-FEW"]
    page = (tmp_path / "site/studies/SYN-FEW/index.html").read_text(encoding="utf-8")
    assert "Not fitted" in page


def test_a_folder_not_made_by_the_tool_is_not_replaced(studies, cache, env_epoch, tmp_path):
    target = tmp_path / "somebody-else"
    target.mkdir()
    (target / "notes.txt").write_text("keep me")
    with pytest.raises(site.SiteBuildError, match="not replaced"):
        build(studies, target, cache)
    assert (target / "notes.txt").read_text() == "keep me"


def test_one_changed_study_is_the_only_one_fitted_again(studies, cache, env_epoch, tmp_path):
    work = tmp_path / "studies"
    shutil.copytree(studies, work)
    first = build(work, tmp_path / "a", cache)
    runs = work / "SYN-002" / "runs.csv"
    lines = runs.read_text().splitlines()
    cells = lines[1].split(",")
    cells[5] = str(float(cells[5]) * 1.01)                 # one found amount, 1 % higher
    lines[1] = ",".join(cells)
    runs.write_text("\n".join(lines) + "\n")
    second = build(work, tmp_path / "b", cache)
    assert [o.cached for o in second.prepared.outcomes] == [True, False]
    assert first.prepared.dossier.version != second.prepared.dossier.version
    a = json.loads((tmp_path / "a/results.json").read_text())
    b = json.loads((tmp_path / "b/results.json").read_text())

    def rows(doc, study):
        return {r["id"]: r["value"] for r in doc["numbers"] if r["study"] == study}

    assert rows(a, "SYN-001") == rows(b, "SYN-001")
    assert rows(a, "SYN-002").keys() == rows(b, "SYN-002").keys()
    assert rows(a, "SYN-002") != rows(b, "SYN-002")


def test_a_cached_study_folder_is_not_even_read_again(built, studies, cache, env_epoch,
                                                       tmp_path, monkeypatch):
    """A warm rebuild knows an unchanged folder by its bytes and takes the entry without
    parsing the study; the site it publishes is the same."""
    def no_reading(self):
        raise AssertionError(f"{self.study_id} was read although its files did not change")

    own_cache = tmp_path / "cache"                # other tests refill the shared one
    build(studies, tmp_path / "first", own_cache)
    monkeypatch.setattr(site.Source, "load", no_reading)
    result = build(studies, tmp_path / "site", own_cache)
    assert all(o.cached for o in result.prepared.outcomes)
    assert tree(tmp_path / "site") == tree(built)


def test_privacy_guard_fails_the_build_on_an_external_asset(studies, cache, env_epoch,
                                                           tmp_path):
    """An external image in a template must stop the build (privacy plugin, strict mode)."""
    templates = tmp_path / "templates"
    shutil.copytree(ROOT / "site_templates", templates)
    about = templates / "about.md.j2"
    about.write_text(about.read_text() + "\n![x](https://example.com/x.png)\n")
    config = tmp_path / "mkdocs.yml"
    config.write_text(CONFIG.read_text().replace("docs_dir: site_templates",
                                                 f"docs_dir: {templates}"))
    with pytest.raises(site.SiteBuildError, match="External file: https://example.com"):
        build(studies, tmp_path / "site", cache, config=config)
    assert not (tmp_path / "site").exists()


def test_plain_mkdocs_build_strict_passes(studies, tmp_path):
    """`mkdocs build --strict` on the project's mkdocs.yml builds the generated docs."""
    env = dict(os.environ, EXTRACTVAL_STUDIES=str(studies), SOURCE_DATE_EPOCH=EPOCH,
               PYTHONPATH=str(ROOT))
    proc = subprocess.run([sys.executable, "-m", "mkdocs", "build", "--strict", "-q", "-f",
                           str(CONFIG), "-d", str(tmp_path / "site")], env=env,
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "site/studies/SYN-002/index.html").is_file()


def test_bad_source_date_epoch_is_a_clear_error(studies, cache, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    with pytest.raises(site.SiteBuildError, match="SOURCE_DATE_EPOCH"):
        build(studies, tmp_path / "site", cache)


# -- the generator's fast path and interrupted builds ---------------------------------------------
def test_html_set_aside_gives_the_html_markdown_gives(tmp_path):
    """The plugin keeps raw HTML blocks away from Python-Markdown and puts them back: the
    page must be the one Markdown alone makes (golden pages: a study, the index, the
    register, a study that failed)."""
    import markdown

    from extractval.mkdocs_plugin import (put_back_html, put_back_late, set_aside_html,
                                          set_aside_late)

    pages = sorted((ROOT / "tests" / "golden" / "pages").rglob("*.md"))
    assert len(pages) >= 4
    n_blocks = n_late = 0
    for page in pages:
        text = page.read_text(encoding="utf-8")
        alone = markdown.markdown(text, extensions=["tables", "attr_list", "toc"])
        # as the plugin does: the parts marked late before the generator reads the page
        text, late = set_aside_late(text)
        n_late += len(late)
        short, blocks = set_aside_html(text)
        n_blocks += len(blocks)
        html = markdown.markdown(short, extensions=["tables", "attr_list", "toc"])
        html = put_back_html(put_back_html(html, blocks, True), blocks, False)
        html = put_back_late(html, late)
        assert html == alone, page
    assert n_blocks >= 20          # the study page's tables, figures and register
    assert n_late >= 1             # the register's citation lines


def test_set_aside_leaves_what_markdown_would_not_take_as_one_block():
    from extractval.mkdocs_plugin import set_aside_html

    inline = "Text <div>not a block</div>\n\n<table>\n<tr><td>open"   # never closed
    assert set_aside_html(inline) == (inline, [])
    md_inside = '<div class="x" markdown>\n*emphasis*\n</div>\n'
    assert set_aside_html(md_inside) == (md_inside, [])
    nested = "<div a>\n<div b>\nx\n</div>\n</div>\n\nafter"
    assert set_aside_html(nested) == ("<!--xv-block-0-->\n\nafter",
                                      ["<div a>\n<div b>\nx\n</div>\n</div>"])


def test_register_is_on_the_page_but_not_in_the_search_index(built):
    html = (built / "studies" / "SYN-001" / "index.html").read_text(encoding="utf-8")
    assert 'id="SYN-001/logK"' in html and "<!--xv-block-" not in html
    index = json.loads((built / "search" / "search_index.json").read_text(encoding="utf-8"))
    texts = " ".join(d["title"] + " " + d["text"] for d in index["docs"]
                     if d["location"].startswith("studies/SYN-001/"))
    assert "Fitted constants" in texts           # the page itself is searchable
    assert "SYN-001/logK/ci95" not in texts      # its register lines (data-search-exclude) not


def test_an_interrupted_build_leaves_the_site_and_no_half_built_folder(
        built, studies, cache, env_epoch, tmp_path, monkeypatch):
    from extractval import mkdocs_plugin

    target = tmp_path / "site"
    shutil.copytree(built, target)
    before = tree(target)

    def half_then_interrupt(config_file, site_dir, prepared, **kw):
        (Path(site_dir) / "index.html").write_text("half", encoding="utf-8")
        raise KeyboardInterrupt

    monkeypatch.setattr(mkdocs_plugin, "build_site", half_then_interrupt)
    with pytest.raises(KeyboardInterrupt):
        build(studies, target, cache)
    assert tree(target) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


def test_the_old_site_removed_later_goes_in_a_process_of_its_own(tmp_path):
    """`extractval build` returns once the new site is in place; a detached process
    removes the old one (named after itself meanwhile, so a build starting then leaves it)."""
    import time

    old = tmp_path / ".site.old-1-abc"
    for i in range(50):
        (old / f"s{i}").mkdir(parents=True)
        (old / f"s{i}" / "index.html").write_text("x", encoding="utf-8")
    # in a process of one thread, as the command line is (pytest's may run others)
    subprocess.run([sys.executable, "-c", "import sys; from pathlib import Path; "
                    "from extractval.site import remove_later; "
                    "remove_later(Path(sys.argv[1]), Path(sys.argv[2]))",
                    str(old), str(tmp_path / "site")],
                   check=True, timeout=60, env=dict(os.environ, PYTHONPATH=str(ROOT)))
    deadline = time.monotonic() + 30
    while any(tmp_path.iterdir()) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert list(tmp_path.iterdir()) == []


def test_a_killed_build_leaves_the_site_and_the_next_build_clears_its_folder(
        built, studies, cache, env_epoch, tmp_path):
    """SIGKILL while the generator writes: nothing can clean up then, so the published site
    must already be safe, and the next build removes the half-built folder."""
    import signal
    import time

    target = tmp_path / "site"
    shutil.copytree(built, target)
    before = tree(target)
    env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH, PYTHONPATH=str(ROOT))
    cmd = [sys.executable, "-m", "extractval.cli", "build", "--studies", str(studies),
           "--site", str(target), "--config", str(CONFIG), "--cache-dir", str(cache)]
    killed = False
    for _ in range(5):                 # the window is short; try again if the build won
        proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL)
        end = time.monotonic() + 300
        while proc.poll() is None and time.monotonic() < end:
            half = list(tmp_path.glob(".site.building-*/**/*.html"))
            if half:
                proc.send_signal(signal.SIGKILL)
                killed = True
                break
            time.sleep(0.005)
        proc.wait(timeout=60)
        if killed:
            break
    assert killed, "the build always finished before it could be killed"
    assert tree(target) == before
    assert list(tmp_path.glob(".site.building-*"))          # what the kill left behind
    build(studies, target, cache)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]
    assert tree(target) == before                           # same inputs, same bytes


def test_a_site_killed_between_the_two_renames_is_put_back(built, tmp_path):
    """Killed after the old site was moved aside and before the new one took its place: the
    next build finds no site and the previous one beside it, and puts it back."""
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    aside = tmp_path / f".site.old-{dead.pid}-abc"
    shutil.copytree(built, aside)
    before = tree(aside)
    site.sweep_leftovers(tmp_path / "site")
    assert tree(tmp_path / "site") == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


def test_the_command_line_build_stops_cleanly_on_sigterm(studies, cache, env_epoch, tmp_path):
    import signal
    import time

    env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH, PYTHONPATH=str(ROOT))
    target = tmp_path / "site"
    cmd = [sys.executable, "-m", "extractval.cli", "build", "--studies", str(studies),
           "--site", str(target), "--config", str(CONFIG), "--cache-dir", str(cache)]
    for _ in range(5):
        proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                                text=True)
        end = time.monotonic() + 300
        sent = False
        while proc.poll() is None and time.monotonic() < end:
            if list(tmp_path.glob(".site.building-*/**/*.html")):
                proc.send_signal(signal.SIGTERM)
                sent = True
                break
            time.sleep(0.005)
        _, err = proc.communicate(timeout=60)
        if sent and proc.returncode == 130:
            break
        shutil.rmtree(target, ignore_errors=True)
    assert sent and proc.returncode == 130, err
    assert "interrupted" in err and "Traceback" not in err
    assert list(tmp_path.iterdir()) == []        # no site was there before, none now


def test_a_helper_process_does_its_tasks_reports_failures_and_stops():
    """The helpers of a one-study rebuild (site._Helper): results and errors come back
    through the pipe (an error as its type and message, for the located build error), and a
    helper given nothing to do is stopped at once, however long its imports would take."""
    import functools
    import gc
    import math
    import time

    helper = site._Helper(site._start_method(), gc.collect, math.sqrt)
    helper.send(6.25)
    assert helper.result() == 2.5
    helper.send(-1.0)
    with pytest.raises(site.HelperFailed, match="^ValueError: math domain error$"):
        helper.result()
    helper.close()
    assert not helper._proc.is_alive()
    idle = site._Helper(site._start_method(), functools.partial(time.sleep, 60), math.sqrt)
    t0 = time.monotonic()
    idle.close()
    assert time.monotonic() - t0 < 10 and not idle._proc.is_alive()
