"""Plot speed: every SVG of one ~50-run study (`study_plots`), in all and per plot.

Run:  python benchmarks/bench_plots.py [--quick] [--profile]

The study is the engine benchmark's first one (`bench_engine.study(0)`: 48 runs, two
procedures, a recovery target), fitted once; only the drawing is timed. Timings are wall-clock
medians after one warm-up call (the first call imports and caches fonts), beside the median
CPU time of this process, which other work on a shared machine disturbs less. ``--profile``
prints the functions that take the most cumulative time under cProfile.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import pstats
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import study  # noqa: E402

from extractval.analysis import fit_study  # noqa: E402
from extractval.report import plots  # noqa: E402


def study_dict() -> dict:
    d = fit_study(study(0, np.random.default_rng(1))).to_dict()
    return json.loads(json.dumps(d, allow_nan=False))    # as the site layer sees it


def _median_ms(fn, n_rep: int) -> tuple[float, float]:
    """Median wall-clock and CPU milliseconds of ``fn()``."""
    fn()                                                   # warm-up
    wall, cpu = [], []
    for _ in range(n_rep):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return 1e3 * statistics.median(wall), 1e3 * statistics.median(cpu)


def per_plot(d: dict, n_rep: int) -> dict[str, tuple[float, float]]:
    """Median wall-clock and CPU milliseconds of each plot function on the study dict."""
    out = {"log_d": _median_ms(lambda: plots.log_d_plot(d), n_rep),
           "residuals": _median_ms(lambda: plots.residual_plot(d), n_rep)}
    for pr in d.get("procedures", []):
        out[f"portions {pr['id']}"] = _median_ms(lambda pr=pr: plots.portions_plot(pr), n_rep)
    if hasattr(plots, "design_space_plot"):
        out["design_space"] = _median_ms(lambda: plots.design_space_plot(d), n_rep)
    return out


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="few repetitions (smoke run)")
    ap.add_argument("--profile", action="store_true", help="print a cProfile summary")
    args = ap.parse_args(argv)
    n_rep = 3 if args.quick else 15
    d = study_dict()
    wall, cpu = _median_ms(lambda: plots.study_plots(d), n_rep)
    names = sorted(plots.study_plots(d))
    print(f"study_plots, one study ({len(d['run_table'])} runs, {len(names)} plots: "
          f"{', '.join(names)}): {wall:.0f} ms wall, {cpu:.0f} ms CPU per study "
          f"(medians of {n_rep})")
    for name, (w, c) in per_plot(d, n_rep).items():
        print(f"  {name:<16} {w:6.1f} ms wall {c:6.1f} ms CPU")
    if args.profile:
        prof = cProfile.Profile()
        prof.enable()
        for _ in range(n_rep):
            plots.study_plots(d)
        prof.disable()
        buf = io.StringIO()
        pstats.Stats(prof, stream=buf).sort_stats("cumulative").print_stats(35)
        print(buf.getvalue())


if __name__ == "__main__":
    main()
