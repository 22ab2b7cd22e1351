"""Engine speed: one ~50-run study, and 60 studies through one `extractval fit --json` call.

Run:  python benchmarks/bench_engine.py
Prints a small table; the README quotes its figures. Timings are wall-clock medians.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from extractval.analysis import fit_study
from extractval.simulate import simulated_study, write_study_folder
from extractval.study import Procedure, Targets

PROCS = (Procedure("P1", "three portions at pH 10.5", 10.5, 25.0, (10.0, 10.0, 10.0)),
         Procedure("P2", "one portion at pH 9", 9.0, 25.0, (10.0,)))


def study(i: int, rng):
    log_k = rng.uniform(1.0, 3.5)
    pka = rng.uniform(7.0, 9.5)
    pH = np.round(np.linspace(pka - 2.5, pka + 2.5, 8), 2)
    form = ("both", "organic", "recovery")[i % 3]
    # both phases measured: the OECD TG 107 ratios; one phase only: ratios chosen from the
    # expected log K so that r K ~ 1 and the recoveries stay informative (as TG 107 advises)
    ratios = (0.5, 1.0, 2.0) if form == "both" else tuple(
        float(f"{r * 10 ** -log_k:.3g}") for r in (0.5, 1.0, 2.0))
    return simulated_study(f"BENCH-{i:03d}", "base", (log_k, pka), pH, PROCS,
                           targets=Targets(recovery_pct=95), sigma=0.04, form=form,
                           ratios=ratios, replicates=2, rng=rng)


def time_one(n_rep: int = 15) -> dict:
    rng = np.random.default_rng(1)
    s = study(0, rng)
    fit_only, full = [], []
    for _ in range(n_rep):
        t0 = time.perf_counter()
        rep = fit_study(s)
        t1 = time.perf_counter()
        rep.to_dict()
        t2 = time.perf_counter()
        fit_only.append(t1 - t0)
        full.append(t2 - t0)
    return {"runs": len(s.runs), "fit_intervals_predictions_ms": 1e3 * statistics.median(fit_only),
            "with_band_design_map_ms": 1e3 * statistics.median(full)}


def time_cli(n_studies: int = 60) -> dict:
    rng = np.random.default_rng(2)
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for i in range(n_studies):
            write_study_folder(study(i, rng), root / f"BENCH-{i:03d}")
        t0 = time.perf_counter()
        out = subprocess.run([sys.executable, "-m", "extractval.cli", "fit", str(root), "--json"],
                             capture_output=True, text=True)
        wall = time.perf_counter() - t0
    lines = [ln for ln in out.stdout.splitlines() if ln.strip()]
    return {"studies": n_studies, "json_lines": len(lines), "exit": out.returncode,
            "wall_s_including_startup": wall}


def main() -> None:
    one = time_one()
    print(f"one study, {one['runs']} runs: fit + intervals + procedure predictions "
          f"{one['fit_intervals_predictions_ms']:.0f} ms; with log D band, procedure design "
          f"and design-space map {one['with_band_design_map_ms']:.0f} ms (median)")
    many = time_cli()
    print(f"`extractval fit --json` on {many['studies']} studies: "
          f"{many['wall_s_including_startup']:.1f} s wall including start-up "
          f"({many['json_lines']} JSON lines, exit {many['exit']})")


if __name__ == "__main__":
    main()
