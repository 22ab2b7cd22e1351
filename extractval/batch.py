"""Check and fit many study folders, in parallel across cores, in a deterministic order."""

from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path


def default_jobs(jobs: int | None) -> int:
    """``jobs`` if given and positive, else the number of usable cores."""
    if jobs and jobs > 0:
        return jobs
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def analyse_folder(folder: Path):
    """(problems, report dict or None) for one study folder; never raises for bad input."""
    from .analysis import fit_study
    from .study import check_study

    study, problems = check_study(folder)
    if study is None:
        return problems, None
    return problems, fit_study(study).to_dict()


def map_ordered(fn, items: list, jobs: int | None = None):
    """Yield fn(item) for each item, in the items' order, using up to ``jobs`` processes."""
    n = min(default_jobs(jobs), len(items))
    if n <= 1:
        for item in items:
            yield fn(item)
        return
    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    with ProcessPoolExecutor(n, mp_context=multiprocessing.get_context(method)) as pool:
        yield from pool.map(fn, items)
