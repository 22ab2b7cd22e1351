"""Work-up speed: the selectivity section of the demo work-up studies, boundary vs search.

Run:  python benchmarks/bench_workup.py [--quick] [--profile]

For each demo study with impurities (HPA-2026-021, HPA-2026-022: an amine with an acidic
by-product, one-step and extract / wash / back-extract procedures) the study is fitted once,
then its selectivity section (separation curve, each procedure's work-up prediction, the
best pH pair with its confirmations) is made alternately by the two paths of
``StudyReport.selectivity_section``: ``fast=True`` (ranges over each fit's traced boundary,
the default) and ``fast=False`` (SLSQP search over the regions, the reference). Alternating
keeps a change of load on a shared machine from moving one path only. Also timed: the whole
report of the study, ``fit_study`` + ``to_dict()``, with the default path. Figures are
wall-clock medians and CPU medians of this process; the JSON goes to benchmarks/out/.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import pstats
import statistics
import time
from pathlib import Path

from extractval.analysis import fit_study
from extractval.study import load_study

ROOT = Path(__file__).resolve().parent.parent
STUDIES = ("HPA-2026-021", "HPA-2026-022")


def _time(fn) -> tuple[float, float]:
    w, c = time.perf_counter(), time.process_time()
    fn()
    return 1e3 * (time.perf_counter() - w), 1e3 * (time.process_time() - c)


def measure(sid: str, n_rep: int) -> dict:
    study = load_study(ROOT / "studies" / sid)
    report = fit_study(study)
    report.to_dict()                                  # warm: imports, traces, caches
    fast, slow = [], []
    for _ in range(n_rep):
        fresh = fit_study(study)                      # a new fit: nothing kept between runs
        fast.append(_time(lambda: fresh.selectivity_section(True)))
        fresh = fit_study(study)
        slow.append(_time(lambda: fresh.selectivity_section(False)))
    whole = [_time(lambda: fit_study(study).to_dict()) for _ in range(n_rep)]

    def med(rows, k):
        return statistics.median(r[k] for r in rows)
    return {"study": sid, "n_rep": n_rep,
            "selectivity_fast_ms": med(fast, 0), "selectivity_fast_cpu_ms": med(fast, 1),
            "selectivity_search_ms": med(slow, 0), "selectivity_search_cpu_ms": med(slow, 1),
            "report_ms": med(whole, 0), "report_cpu_ms": med(whole, 1)}


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="few repetitions (smoke run)")
    ap.add_argument("--profile", action="store_true",
                    help="print a cProfile summary of the report of HPA-2026-021")
    args = ap.parse_args(argv)
    n_rep = 3 if args.quick else 11
    rows = [measure(sid, n_rep) for sid in STUDIES]
    print(f"selectivity section per study, medians of {n_rep} (wall ms / CPU ms)")
    print(f"{'study':<14} {'boundary':>16} {'search':>18} {'ratio':>7} {'whole report':>16}")
    for r in rows:
        print(f"{r['study']:<14} {r['selectivity_fast_ms']:7.1f} / "
              f"{r['selectivity_fast_cpu_ms']:6.1f}"
              f" {r['selectivity_search_ms']:8.1f} / {r['selectivity_search_cpu_ms']:7.1f}"
              f" {r['selectivity_search_ms'] / r['selectivity_fast_ms']:6.0f}x"
              f" {r['report_ms']:7.1f} / {r['report_cpu_ms']:6.1f}")
    out = ROOT / "benchmarks" / "out"
    out.mkdir(parents=True, exist_ok=True)
    (out / "bench_workup.json").write_text(json.dumps(rows, indent=1) + "\n")
    if args.profile:
        study = load_study(ROOT / "studies" / STUDIES[0])
        prof = cProfile.Profile()
        prof.enable()
        fit_study(study).to_dict()
        prof.disable()
        buf = io.StringIO()
        pstats.Stats(prof, stream=buf).sort_stats("cumulative").print_stats(25)
        print(buf.getvalue())


if __name__ == "__main__":
    main()
