"""extractval: validate liquid-liquid extraction procedures from shake-flask studies.

Public API::

    study = extractval.load_study("studies/HPA-2026-014")
    report = extractval.fit_study(study)       # StudyReport
    report.to_dict()                           # what `extractval fit --json` prints

The names are imported on first use, so that ``extractval --version`` and ``check`` do not
pay for scipy and statsmodels (tests/test_startup.py guards this).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

__version__ = "0.1.0"

# public name -> module that defines it
_LAZY = {
    "StudyReport": ".analysis",
    "fit_study": ".analysis",
    "Problem": ".errors",
    "StudyError": ".errors",
    "Study": ".study",
    "load_study": ".study",
}

if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors only
    from .analysis import StudyReport, fit_study
    from .errors import Problem, StudyError
    from .study import Study, load_study

__all__ = ["Problem", "Study", "StudyError", "StudyReport", "fit_study", "load_study",
           "__version__"]


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'extractval' has no attribute {name!r}")
    value = getattr(importlib.import_module(module, __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
