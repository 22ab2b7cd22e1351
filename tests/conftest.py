"""Test session set-up: the Hypothesis profile, a private cache, and a guard that the tests
write nothing into the working tree."""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest
from hypothesis import settings
from hypothesis.configuration import set_hypothesis_home_dir

from ci_env import in_ci

ROOT = Path(__file__).resolve().parent.parent

# In CI the examples are derived from each test's name, so a failure there fails the same way
# on a developer's machine; locally they are random and explore more over time. Neither
# profile keeps an example database (it would be written into the working folder): a
# failure prints the blob that replays it (@reproduce_failure). Settings objects made at a
# test module's import inherit the profile loaded here (conftest is imported first).
# (Hypothesis loads a profile of its own when CI is set at all, even to "false"; both are
# built on its "default" profile so that only the rule of ci_env decides.)
_base = settings.get_profile("default")
settings.register_profile("ci", _base, derandomize=True, database=None, print_blob=True)
settings.register_profile("dev", _base, derandomize=False, database=None, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE") or ("ci" if in_ci() else "dev"))

# Hypothesis keeps other files (e.g. constants it found in the code) in .hypothesis/ of the
# working folder unless told otherwise.
_SESSION_TMP = Path(tempfile.mkdtemp(prefix="extractval-tests-"))
set_hypothesis_home_dir(_SESSION_TMP / "hypothesis")

# The dossier cache defaults to the user's cache folder; no test writes there. Tests that
# build without naming a cache (and the processes they start) get a fresh one per test below;
# this one covers fixtures of a wider scope.
os.environ["EXTRACTVAL_CACHE_DIR"] = str(_SESSION_TMP / "cache")


@pytest.fixture(autouse=True)
def _private_cache(tmp_path_factory, monkeypatch):
    monkeypatch.setenv("EXTRACTVAL_CACHE_DIR", str(tmp_path_factory.mktemp("cache")))


def _tree_state() -> set[str] | None:
    """Paths git reports as new, changed or ignored in the working tree (None: not a git
    checkout, or no git). Byte-code and pytest's own cache are left out."""
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        return None
    proc = subprocess.run(["git", "status", "--porcelain", "--ignored", "--untracked-files=all"],
                          cwd=ROOT, capture_output=True, text=True)
    if proc.returncode != 0:
        return None
    skip = ("__pycache__/", ".pytest_cache/", ".egg-info/")
    state = set()
    for line in proc.stdout.splitlines():
        path = line[3:]
        if any(s in path or path.startswith(s) for s in skip) or path.endswith(".pyc"):
            continue
        if os.environ.get("EXTRACTVAL_UPDATE_GOLDEN") == "1" and path.startswith("tests/golden"):
            continue          # regenerating the golden files is the one deliberate write
        state.add(line)
    return state


@pytest.fixture(scope="session", autouse=True)
def _working_tree_untouched():
    """Fails the session when a test created or changed a file in the working tree."""
    before = _tree_state()
    yield
    shutil.rmtree(_SESSION_TMP, ignore_errors=True)
    after = _tree_state()
    if before is None or after is None:
        return
    new = sorted(after - before)
    assert not new, ("the tests wrote into the working tree (tests must write only into "
                     "temporary folders), or its files were edited while they ran: "
                     + ", ".join(new[:20]))
