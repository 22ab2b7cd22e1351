"""Where a build reads and writes: the configuration and templates the package carries, the
options that replace them, the cache folder, and a build from a folder outside the project."""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
from fnmatch import fnmatch
from pathlib import Path

import pytest

from extractval import site
from site_factory import synthetic_study, write_study_folder

try:
    import tomllib
except ModuleNotFoundError:               # Python 3.10: pytest's own TOML reader
    import tomli as tomllib

ROOT = Path(__file__).resolve().parent.parent
EPOCH = "1767225600"                      # 2026-01-01 00:00 UTC


def args(**kw) -> argparse.Namespace:
    base = dict(config=None, templates=None, studies=None, site=None, cache_dir=None)
    return argparse.Namespace(**(base | kw))


def files_under(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


# -- the packaged defaults -------------------------------------------------------------------------
def test_the_package_carries_the_projects_configuration_and_templates():
    """One copy of each: the package's dossier/ shows the project's own mkdocs.yml and
    site_templates/ (links in a checkout, copies in a wheel), byte for byte."""
    packaged = site.PACKAGED
    assert (packaged / "mkdocs.yml").read_bytes() == (ROOT / "mkdocs.yml").read_bytes()
    assert files_under(packaged / "site_templates") == files_under(ROOT / "site_templates")
    if (packaged / "mkdocs.yml").is_symlink():                    # a checkout: no second copy
        assert (packaged / "mkdocs.yml").resolve() == (ROOT / "mkdocs.yml").resolve()
        assert (packaged / "site_templates").resolve() == (ROOT / "site_templates").resolve()


def test_package_data_patterns_cover_every_packaged_file():
    """pyproject.toml's package-data globs take every file of dossier/ into a wheel (a new
    sub-folder of site_templates/ needs a pattern of its own)."""
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    patterns = project["tool"]["setuptools"]["package-data"]["extractval"]
    names = [f"dossier/{n}" for n in ["mkdocs.yml"] + [
        f"site_templates/{k}" for k in files_under(site.PACKAGED / "site_templates")]]
    missing = [n for n in names if not any(fnmatch(n, p) and n.count("/") == p.count("/")
                                           for p in patterns)]
    assert not missing, f"not in any package-data pattern of pyproject.toml: {missing}"


# -- resolving the options -------------------------------------------------------------------------
def test_outside_a_project_the_packaged_configuration_and_this_folder_are_used(
        tmp_path, monkeypatch):
    monkeypatch.delenv(site.ENV_CACHE)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    here = tmp_path / "work"
    here.mkdir()
    p = site.build_paths(args(), cwd=here)
    assert p.packaged and p.config == site.PACKAGED / "mkdocs.yml" and p.templates is None
    assert p.studies == here / "studies" and p.site == here / "site"
    # the cache: the user's cache folder, one sub-folder per studies folder
    assert p.cache.parent == tmp_path / "xdg" / "extractval"
    assert p.cache.name.startswith("studies-")
    other = site.build_paths(args(studies=str(tmp_path / "b" / "studies")), cwd=here)
    assert other.cache.parent == p.cache.parent and other.cache != p.cache


def test_in_a_project_folder_its_own_configuration_is_used(tmp_path):
    project = tmp_path / "project"
    (project / "studies" / "ACME-1").mkdir(parents=True)
    shutil.copy(ROOT / "mkdocs.yml", project / "mkdocs.yml")
    p = site.build_paths(args(), cwd=project / "studies" / "ACME-1")      # found from below
    assert not p.packaged and p.config == project / "mkdocs.yml"
    assert p.studies == project / "studies" and p.site == project / "site"
    assert p.cache == Path(os.environ[site.ENV_CACHE])       # EXTRACTVAL_CACHE_DIR wins


def test_options_replace_the_defaults(tmp_path):
    templates = tmp_path / "t"
    shutil.copytree(ROOT / "site_templates", templates)
    config = tmp_path / "conf" / "mine.yml"
    config.parent.mkdir()
    shutil.copy(ROOT / "mkdocs.yml", config)
    p = site.build_paths(args(config=str(config), templates=str(templates),
                              cache_dir=str(tmp_path / "c")), cwd=tmp_path)
    assert p.config == config and p.templates == templates.resolve() and not p.packaged
    assert p.studies == config.parent / "studies" and p.cache == tmp_path / "c"


@pytest.mark.parametrize("kw, message", [
    ({"config": "nowhere.yml"}, "nowhere.yml: no such file; expected the site's mkdocs.yml"),
    ({"templates": "nowhere"}, "no study.md.j2 there; expected a folder of dossier templates"),
])
def test_a_wrong_option_is_a_clear_error(tmp_path, kw, message):
    with pytest.raises(site.SiteBuildError, match=message):
        site.build_paths(args(**kw), cwd=tmp_path)


def test_without_a_user_cache_folder_the_cache_is_beside_the_site(tmp_path, monkeypatch):
    for name in (site.ENV_CACHE, "XDG_CACHE_HOME", "HOME", "LOCALAPPDATA"):
        monkeypatch.delenv(name, raising=False)
    p = site.build_paths(args(site=str(tmp_path / "out" / "site")), cwd=tmp_path)
    assert p.cache == tmp_path / "out" / ".site.extractval-cache"


def test_the_site_is_never_published_into_the_package(tmp_path):
    with pytest.raises(site.SiteBuildError, match="inside the extractval package"):
        site.build(None, site.PACKAGE / "site", site.PACKAGED / "mkdocs.yml",
                   sources=[site.Source("SYN-X", study=synthetic_study("SYN-X"))])
    assert not (site.PACKAGE / "site").exists()


# -- building --------------------------------------------------------------------------------------
def test_templates_option_replaces_the_configurations_templates(tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    templates = tmp_path / "templates"
    shutil.copytree(ROOT / "site_templates", templates)
    about = templates / "about.md.j2"
    about.write_text(about.read_text(encoding="utf-8") + "\nOur own about text.\n",
                     encoding="utf-8")
    out = tmp_path / "site"
    site.build(None, out, site.PACKAGED / "mkdocs.yml", templates_dir=templates,
               cache_dir=tmp_path / "cache",
               sources=[site.Source("SYN-X", study=synthetic_study("SYN-X"))])
    assert "Our own about text." in (out / "about" / "index.html").read_text(encoding="utf-8")


def test_build_from_a_folder_outside_the_project(tmp_path):
    """`extractval build --studies DIR --site DIR` started in an empty folder, with the package
    alone (copied as a wheel installs it, links resolved; the project's files out of reach)
    and a fresh user cache folder: the site is built, the cache is in the user's cache folder,
    and nothing is written into the package, the working folder or the studies."""
    lib = tmp_path / "lib"
    shutil.copytree(site.PACKAGE, lib / "extractval", symlinks=False,
                    ignore=shutil.ignore_patterns("__pycache__"))
    studies = tmp_path / "data" / "studies"
    write_study_folder(synthetic_study("SYN-OUT", analyte="SYN-Gamma"), studies)
    here = tmp_path / "elsewhere"
    here.mkdir()
    before = {"lib": files_under(lib), "studies": files_under(studies)}
    env = {k: v for k, v in os.environ.items() if k not in (site.ENV_CACHE, "PYTHONPATH")}
    env.update(PYTHONPATH=str(lib), PYTHONDONTWRITEBYTECODE="1", SOURCE_DATE_EPOCH=EPOCH,
               XDG_CACHE_HOME=str(tmp_path / "xdg"))
    proc = subprocess.run(
        [sys.executable, "-m", "extractval.cli", "build", "--studies", str(studies), "--site",
         str(tmp_path / "out")], cwd=here, env=env, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip().splitlines()[-1].startswith("built 1 study")
    page = (tmp_path / "out" / "studies" / "SYN-OUT" / "index.html").read_text(encoding="utf-8")
    assert "SYN-Gamma" in page
    assert (tmp_path / "out" / "assets" / "extractval.css").is_file()
    (entry,) = (tmp_path / "xdg" / "extractval").iterdir()
    assert (entry / site.CACHE_FORMAT / "SYN-OUT").is_dir()
    assert list(here.iterdir()) == []
    assert files_under(lib) == before["lib"] and files_under(studies) == before["studies"]
