"""Engine speed: one ~50-run study, 60 studies through one `extractval fit --json` call,
ampholyte studies measured at too few pH values to determine all three parameters, and a
100-run study given as instrument responses (2 calibration sequences, a suitability table).

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


def instrument_study_folder(folder: Path, rng) -> Path:
    """A 100-run base study (10 pH x 5 ratios x 2) written as instrument responses: two
    sequences with their own straight calibration line (8 levels in duplicate, 2 % noise),
    runs alternating between them, and a suitability table of 6 injections per sequence."""
    import csv

    pH = np.round(np.linspace(6.0, 11.0, 10), 2)
    s = simulated_study("BENCH-RESP", "base", (2.2, 8.4), pH, PROCS,
                        targets=Targets(recovery_pct=95), sigma=0.03, form="both",
                        ratios=(0.25, 0.5, 1.0, 2.0, 4.0), replicates=2, rng=rng)
    write_study_folder(s, folder)
    lines = {"S1": (150.0, 2400.0), "S2": (90.0, 2650.0)}          # intercept, slope
    amounts = [a for r in s.runs for a in (r.found_aqueous, r.found_organic)]
    levels = np.geomspace(0.8 * min(amounts), 1.1 * max(amounts), 8)
    with open(folder / "calibration.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["standard", "level", "response", "sequence"])
        for seq, (a, b) in lines.items():
            for i, x in enumerate(levels):
                for k in range(2):
                    y = (a + b * x) * (1 + 0.02 * rng.standard_normal())
                    w.writerow([f"C{i + 1}-{k + 1}", repr(float(x)), repr(float(y)), seq])
    with open(folder / "runs.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["run", "sequence", "pH", "aqueous_mL", "organic_mL", "spiked",
                    "response_aqueous", "response_organic", "replicate"])
        for k, r in enumerate(s.runs):
            seq = "S1" if k % 2 == 0 else "S2"
            a, b = lines[seq]
            w.writerow([r.run_id, seq, r.pH, r.aqueous_mL, r.organic_mL, r.spiked,
                        repr(float(a + b * r.found_aqueous)), repr(float(a + b * r.found_organic)),
                        r.replicate])
    with open(folder / "suitability.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["sequence", "injection", "rt_analyte", "rt_neighbour", "rt_unretained",
                    "w_half_analyte", "w_half_neighbour", "w_5pct", "f_5pct", "response"])
        for seq in lines:
            for i in range(6):
                j = 1 + 0.004 * rng.standard_normal(4)
                w.writerow([seq, f"I{i + 1}"] + [f"{x:.4g}" for x in (
                    6.20 * j[0], 5.40 * j[1], 1.00, 0.19 * j[2], 0.17, 0.44, 0.16 * j[3],
                    50000 * (1 + 0.005 * rng.standard_normal()))])
    y = (folder / "study.yaml").read_text()
    (folder / "study.yaml").write_text(y.replace("runs: runs.csv\n", "runs: runs.csv\n"
                                                 "calibration: calibration.csv\n"
                                                 "suitability: suitability.csv\n"))
    return folder


def time_instrument_study(n_rep: int = 15) -> dict:
    """Reading (tables, both calibration fits, suitability), fit, the full report dict and its
    JSON: what `extractval fit --json` computes for the study, start-up aside."""
    import json

    from extractval.study import load_study

    with tempfile.TemporaryDirectory() as tmp:
        folder = instrument_study_folder(Path(tmp) / "BENCH-RESP", np.random.default_rng(11))
        load_study(folder)                        # first call: imports, statsmodels set-up
        read, full = [], []
        for _ in range(n_rep):
            t0 = time.perf_counter()
            st = load_study(folder)
            t1 = time.perf_counter()
            d = fit_study(st).to_dict()
            json.dumps(d)
            t2 = time.perf_counter()
            read.append(t1 - t0)
            full.append(t2 - t0)
    return {"runs": len(st.runs), "curves": len(st.calibration.curves),
            "sequences": len(st.suitability.report.sequences), "used": d["runs"]["used"],
            "read_ms": 1e3 * statistics.median(read), "full_ms": 1e3 * statistics.median(full),
            "full_max_ms": 1e3 * max(full)}


def main() -> None:
    one = time_one()
    print(f"one study, {one['runs']} runs: fit + intervals + procedure predictions "
          f"{one['fit_intervals_predictions_ms']:.0f} ms; with log D band, procedure design "
          f"and design-space map {one['with_band_design_map_ms']:.0f} ms (median)")
    inst = time_instrument_study()
    print(f"one study of {inst['runs']} runs as responses ({inst['curves']} calibration curves, "
          f"{inst['sequences']} suitability sequences, {inst['used']} runs fitted): read "
          f"{inst['read_ms']:.0f} ms, full report with JSON {inst['full_ms']:.0f} ms (median; "
          f"max {inst['full_max_ms']:.0f} ms; goal < 150 ms)")
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
