"""extractval: validate liquid-liquid extraction procedures from shake-flask studies.

Public API::

    study = extractval.load_study("studies/HPA-2026-014")
    report = extractval.fit_study(study)       # StudyReport
    report.to_dict()                           # what `extractval fit --json` prints
"""

__version__ = "0.1.0"

from .analysis import StudyReport, fit_study  # noqa: E402
from .errors import Problem, StudyError  # noqa: E402
from .study import Study, load_study  # noqa: E402

__all__ = ["Problem", "Study", "StudyError", "StudyReport", "fit_study", "load_study",
           "__version__"]
