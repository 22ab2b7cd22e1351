"""Engine speed: one ~50-run study, 60 studies through one `extractval fit --json` call, and
ampholyte studies measured at too few pH values to determine all three parameters.

Run:  python benchmarks/bench_engine.py
Prints a small table; the README quotes its figures. Timings are wall-clock medians unless
said otherwise.
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


def few_pH_ampholyte(i: int, rng):
    """An ampholyte at 2-4 pH values (three parameters): flat profiles along what the runs do
    not determine, the slow case of the engine."""
    n_ph = int(rng.integers(2, 5))
    pka1 = float(rng.uniform(2, 6))
    pka2 = pka1 + float(rng.uniform(3, 6))
    log_k = float(rng.uniform(0, 3))
    pH = sorted(np.round(rng.uniform(pka1 - 2, pka2 + 2, n_ph), 2).tolist())
    form = str(rng.choice(["both", "organic", "aqueous", "recovery"]))
    ratios = (0.5, 1.0, 2.0) if form == "both" else tuple(
        float(f"{r * 10 ** -log_k:.3g}") for r in (0.5, 1.0, 2.0))
    procs = (Procedure("P1", "two portions between the pKa values", round((pka1 + pka2) / 2, 1),
                       25.0, (10.0, 10.0)),)
    return simulated_study(f"AMPH-{i:03d}", "ampholyte", (log_k, pka1, pka2), pH, procs,
                           targets=Targets(recovery_pct=95), sigma=0.04, form=form,
                           ratios=ratios, rng=i)


def time_few_pH_ampholytes(n_studies: int = 30) -> dict:
    rng = np.random.default_rng(7)
    studies = [few_pH_ampholyte(i, rng) for i in range(n_studies)]
    times, open_ends = [], 0
    for s in studies:
        t0 = time.perf_counter()
        d = fit_study(s).to_dict()
        times.append(time.perf_counter() - t0)
        open_ends += sum(e is None for p in d["parameters"].values() for e in p["ci95"])
    return {"studies": n_studies, "mean_s": statistics.fmean(times),
            "median_s": statistics.median(times), "max_s": max(times),
            "open_parameter_ends": open_ends}


def main() -> None:
    one = time_one()
    print(f"one study, {one['runs']} runs: fit + intervals + procedure predictions "
          f"{one['fit_intervals_predictions_ms']:.0f} ms; with log D band, procedure design "
          f"and design-space map {one['with_band_design_map_ms']:.0f} ms (median)")
    many = time_cli()
    print(f"`extractval fit --json` on {many['studies']} studies: "
          f"{many['wall_s_including_startup']:.1f} s wall including start-up "
          f"({many['json_lines']} JSON lines, exit {many['exit']})")
    amph = time_few_pH_ampholytes()
    print(f"{amph['studies']} ampholyte studies at 2-4 pH values, fit + to_dict: mean "
          f"{amph['mean_s']:.2f} s, median {amph['median_s']:.2f} s, max {amph['max_s']:.2f} s "
          f"({amph['open_parameter_ends']} open parameter interval ends)")


if __name__ == "__main__":
    main()
