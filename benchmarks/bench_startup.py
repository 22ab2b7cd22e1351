"""Start-up time of the command line: `--version`, `--help`, `check` and `fit --json` of one study.

Run:  python benchmarks/bench_startup.py [--quick] [--importtime]

Each command runs in a fresh interpreter the way the installed ``extractval`` script calls it
(``from extractval.cli import main``), against this checkout; the figure is the wall-clock
median (and the best) of several runs, with a bare ``python -c pass`` beside it for the floor.
``--importtime`` prints the ten slowest imports of each command (``python -X importtime``).
Writes benchmarks/out/startup.json.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
STUDY = ROOT / "studies" / "HPA-2026-014"
ENTRY = "import sys; from extractval.cli import main; sys.exit(main())"
GOALS = {"--version": 0.3, "--help": 0.3, "check": 0.6}
COMMANDS = {
    "python -c pass (floor)": ["-c", "pass"],
    "--version": ["-c", ENTRY, "--version"],
    "--help": ["-c", ENTRY, "--help"],
    "check": ["-c", ENTRY, "check", str(STUDY)],
    "fit --json": ["-c", ENTRY, "fit", "--json", "--jobs", "1", str(STUDY)],
}


def env() -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=os.pathsep.join(
        p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p))


def time_once(args: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, *args], env=env(), cwd=ROOT, check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def slowest_imports(args: list[str], n: int = 10) -> list[tuple[int, str]]:
    out = subprocess.run([sys.executable, "-X", "importtime", *args], env=env(), cwd=ROOT,
                         capture_output=True, text=True)
    rows = []
    for line in out.stderr.splitlines():
        if line.startswith("import time:") and "|" in line and "cumulative" not in line:
            _, cum, name = line.split("|")
            rows.append((int(cum), name.strip()))
    return sorted(rows, reverse=True)[:n]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="3 runs per command instead of 15")
    ap.add_argument("--importtime", action="store_true", help="print the slowest imports")
    a = ap.parse_args(argv)
    repeats = 3 if a.quick else 15
    results = {}
    print(f"{'command':<26}{'median':>9}{'best':>9}  goal")
    for label, args in COMMANDS.items():
        time_once(args)                                   # warm the file cache
        times = [time_once(args) for _ in range(repeats)]
        med, best = statistics.median(times), min(times)
        goal = GOALS.get(label)
        verdict = "" if goal is None else f"under {goal} s: {'met' if med < goal else 'NOT met'}"
        print(f"{label:<26}{med:>8.3f}s{best:>8.3f}s  {verdict}")
        results[label] = {"median_s": med, "best_s": best, "runs": repeats, "goal_s": goal}
        if a.importtime and label != "python -c pass (floor)":
            for cum, name in slowest_imports(args):
                print(f"    {cum / 1e6:6.3f} s  {name}")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "startup.json").write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
