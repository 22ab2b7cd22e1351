"""Run every benchmark in turn: start-up, engine, plots, baseline, work-up, dossier (if present).

Run:  python benchmarks/run_all.py [--quick]

Each script prints its own table and writes its JSON under benchmarks/out/. ``--quick`` is
passed on to each script that accepts it (a smoke run whose figures are not for quoting). The
exit status is that of the first script that failed, else 0.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SCRIPTS = ("bench_startup.py", "bench_engine.py", "bench_plots.py", "bench_baseline.py",
           "bench_workup.py", "bench_dossier.py")
OPTIONAL = {"bench_dossier.py"}      # added with the dossier build; skipped while absent


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="pass --quick to every script")
    args = ap.parse_args(argv)
    status = 0
    for name in SCRIPTS:
        path = HERE / name
        if not path.exists():
            if name in OPTIONAL:
                print(f"== {name}: not present, skipped\n", flush=True)
                continue
            print(f"== {name}: missing", file=sys.stderr)
            status = status or 1
            continue
        cmd = [sys.executable, str(path)]
        if args.quick and "--quick" in path.read_text(encoding="utf-8"):
            cmd.append("--quick")
        print(f"== {' '.join([name, *cmd[2:]])}", flush=True)
        t0 = time.perf_counter()
        # the scripts measure this checkout, whichever copy of extractval is installed
        env = dict(os.environ, PYTHONPATH=os.pathsep.join(
            p for p in (str(HERE.parent), os.environ.get("PYTHONPATH")) if p))
        rc = subprocess.run(cmd, cwd=HERE.parent, env=env).returncode
        print(f"== {name}: exit {rc}, {time.perf_counter() - t0:.0f} s\n", flush=True)
        status = status or rc
    return status


if __name__ == "__main__":
    sys.exit(main())
