"""Start-up laziness: the command line module and the package load without the heavy libraries.

This checks *which modules* a fresh interpreter has imported, not how long it took (speed is
measured by benchmarks/bench_startup.py, never by a test). Each case runs in a subprocess so
that the modules this test session has already imported do not hide an eager import.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
STUDY = ROOT / "studies" / "HPA-2026-014"
# the libraries that dominate start-up (scipy.stats alone is ~0.3 s) and that `--version`,
# `--help` and `check` never use; the site generator is imported only by build/serve
HEAVY = ("scipy", "scipy.stats", "scipy.optimize", "statsmodels", "matplotlib", "pandas",
         "mkdocs", "jinja2", "markdown")

PROBE = """
import json, sys
{code}
print(json.dumps(sorted(m for m in {heavy!r} if m in sys.modules)))
"""


def loaded_after(code: str) -> list[str]:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(
        p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p))
    out = subprocess.run([sys.executable, "-c", PROBE.format(code=code, heavy=HEAVY)],
                         capture_output=True, text=True, env=env, cwd=ROOT, timeout=120)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("code", [
    "import extractval.cli",
    "import extractval; extractval.__version__",
    "from extractval.cli import make_parser; make_parser().format_help()",
    f"from extractval.cli import main; assert main(['check', {str(STUDY)!r}]) == 0",
], ids=["import-cli", "version", "help", "check"])
def test_light_paths_import_no_heavy_library(code):
    assert loaded_after(code) == []


def test_probe_sees_an_eager_import():
    # the probe itself must be able to fail: fitting does need scipy.optimize (and not
    # scipy.stats any more: its quantiles come from scipy.special, extractval/quantiles.py)
    loaded = loaded_after("import extractval.fitting")
    assert "scipy.optimize" in loaded and "scipy.stats" not in loaded


def test_public_names_still_resolve():
    import extractval
    from extractval import analysis, errors, study

    assert extractval.fit_study is analysis.fit_study
    assert extractval.StudyReport is analysis.StudyReport
    assert extractval.load_study is study.load_study
    assert extractval.Study is study.Study
    assert extractval.Problem is errors.Problem
    assert extractval.StudyError is errors.StudyError
    assert set(extractval.__all__) <= set(dir(extractval))
    with pytest.raises(AttributeError):
        extractval.no_such_name  # noqa: B018
