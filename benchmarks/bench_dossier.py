"""Dossier build at scale: cold builds of 10, 50 and 200 studies, a one-study rebuild, memory.

Run:  python benchmarks/bench_dossier.py [--quick] [--sizes 10 50 200] [--jobs N]

For each size a fresh project folder (mkdocs.yml, site_templates/, studies/ of simulated
~50-run studies) is built with the command a user types, ``extractval build``, in its own
process:

1. cold: empty cache, every study fitted and plotted, every page generated;
2. one study changed: one measured amount of one run edited, the cache warm, so one study is
   fitted again and the whole site regenerated and published;
3. nothing changed: the cache serves every study.

Peak memory is the largest sum, over the build process and its worker processes, of each
one's proportional set size (PSS: shared pages split between the processes that share them),
sampled every 50 ms. Prints a table, writes ``benchmarks/out/bench_dossier.json`` and draws the
scaling curve into ``benchmarks/dossier-scaling.svg`` (shown in the README).
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

from bench_engine import study  # noqa: E402  (the engine benchmark's simulated studies)

from extractval.simulate import write_study_folder  # noqa: E402

GOALS = {"cold_s_at_200": 120.0, "peak_mb": 1024.0, "rebuild_fraction": 0.10}


# -- memory of a process tree ----------------------------------------------------------------------
def _children(pid: int) -> list[int]:
    out = []
    for task in Path(f"/proc/{pid}/task").glob("*"):
        try:
            out += [int(c) for c in (task / "children").read_text().split()]
        except OSError:
            pass
    return out


def _pss_kb(pid: int) -> int:
    """PSS of one process in kB (RSS where the kernel gives no smaps_rollup)."""
    for name, key in (("smaps_rollup", "Pss:"), ("status", "VmRSS:")):
        try:
            for line in Path(f"/proc/{pid}/{name}").read_text().splitlines():
                if line.startswith(key):
                    return int(line.split()[1])
        except OSError:
            continue
    return 0


class PeakMemory(threading.Thread):
    """Samples the summed PSS of a process and all its descendants until stopped."""

    def __init__(self, pid: int, every_s: float = 0.05):
        super().__init__(daemon=True)
        self.pid, self.every_s, self.peak_kb = pid, every_s, 0
        self._stop_event = threading.Event()

    def run(self) -> None:
        while not self._stop_event.is_set():
            todo, total = [self.pid], 0
            while todo:
                p = todo.pop()
                total += _pss_kb(p)
                todo += _children(p)
            self.peak_kb = max(self.peak_kb, total)
            self._stop_event.wait(self.every_s)

    def stop(self) -> float:
        self._stop_event.set()
        self.join()
        return self.peak_kb / 1024.0


# -- one project -----------------------------------------------------------------------------------
def make_project(folder: Path, n: int) -> Path:
    """A project folder of ``n`` simulated studies: what a lab's dossier checkout holds."""
    shutil.copy(ROOT / "mkdocs.yml", folder / "mkdocs.yml")
    shutil.copytree(ROOT / "site_templates", folder / "site_templates")
    rng = np.random.default_rng(20261202)
    for i in range(n):
        write_study_folder(study(i, rng), folder / "studies" / f"BENCH-{i:03d}")
    return folder


def edit_one_study(folder: Path) -> None:
    """Change one measured amount by 1 % in the first study: a corrected run."""
    runs = folder / "studies" / "BENCH-000" / "runs.csv"
    with open(runs, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    head = rows[0]
    col = next(head.index(c) for c in ("found_organic", "found_aqueous", "recovery_pct")
               if c in head and rows[1][head.index(c)])
    rows[1][col] = repr(float(rows[1][col]) * 1.01)
    with open(runs, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)


_STEPS = re.compile(r"\(([^()]*\d s[^()]*)\), dossier")
_STEP = re.compile(r"([a-z][a-z ]*?) (\d+(?:\.\d+)?) s")


def build(folder: Path, jobs: int) -> dict:
    """One ``extractval build`` in its own process: wall seconds, steps, peak memory."""
    cmd = [sys.executable, "-m", "extractval.cli", "build", "--config",
           str(folder / "mkdocs.yml"), "--cache-dir", str(folder / ".cache")]
    if jobs:
        cmd += ["--jobs", str(jobs)]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(
        p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p))
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, cwd=folder, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    mem = PeakMemory(proc.pid)
    mem.start()
    out, err = proc.communicate()
    wall = time.perf_counter() - t0
    peak = mem.stop()
    if proc.returncode != 0:
        raise SystemExit(f"build failed in {folder}:\n{err}")
    last = out.strip().splitlines()[-1]
    m = _STEPS.search(last)
    steps = {name: float(secs) for name, secs in _STEP.findall(m.group(1))} if m else {}
    return {"wall_s": wall, "peak_mb": peak, "steps_s": steps, "summary": last}


def measure(n: int, jobs: int) -> dict:
    with tempfile.TemporaryDirectory(prefix=f"xv-bench-{n}-") as tmp:
        folder = make_project(Path(tmp), n)
        cold = build(folder, jobs)
        edit_one_study(folder)
        one = build(folder, jobs)
        none = build(folder, jobs)
    return {"studies": n, "cold": cold, "one_changed": one, "unchanged": none,
            "per_study_s": cold["wall_s"] / n,
            "rebuild_fraction": one["wall_s"] / cold["wall_s"]}


# -- output ----------------------------------------------------------------------------------------
def table(rows: list[dict]) -> str:
    head = ("| studies | cold build (s) | per study (s) | fit+plots+pages / generator (s) | "
            "one study changed (s) | fraction of cold | nothing changed (s) | peak memory (MB) |")
    lines = [head, "|" + "---|" * 8]
    for r in rows:
        steps = r["cold"]["steps_s"]
        split = " / ".join(f"{v:.1f}" for v in steps.values()) if steps else "-"
        lines.append(f"| {r['studies']} | {r['cold']['wall_s']:.1f} | {r['per_study_s']:.2f} | "
                     f"{split} | {r['one_changed']['wall_s']:.1f} | "
                     f"{100 * r['rebuild_fraction']:.0f} % | {r['unchanged']['wall_s']:.1f} | "
                     f"{max(r[k]['peak_mb'] for k in ('cold', 'one_changed', 'unchanged')):.0f} |")
    return "\n".join(lines)


def plot(rows: list[dict], path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    n = np.array([r["studies"] for r in rows], dtype=float)
    cold = np.array([r["cold"]["wall_s"] for r in rows])
    one = np.array([r["one_changed"]["wall_s"] for r in rows])
    mem = np.array([max(r[k]["peak_mb"] for k in ("cold", "one_changed", "unchanged"))
                    for r in rows])
    with plt.rc_context({"svg.hashsalt": "bench", "font.size": 9}):
        fig, (ax, bx) = plt.subplots(1, 2, figsize=(8.0, 3.2), layout="constrained")
        ax.plot(n, cold, "o-", color="#1f4e79", label="cold build")
        ax.plot(n, one, "s--", color="#b85c00", label="one study changed")
        ax.plot(n, GOALS["rebuild_fraction"] * cold, ":", color="#b85c00",
                label=f"rebuild goal: {100 * GOALS['rebuild_fraction']:.0f} % of cold")
        ax.plot([200], [GOALS["cold_s_at_200"]], marker="x", markersize=8, color="0.2",
                linestyle="none", label=f"cold goal at 200: {GOALS['cold_s_at_200']:.0f} s")
        ax.set(xlabel="studies in the dossier", ylabel="wall time (s)",
               title="Build time, 2 cores")
        ax.set_xlim(0, n.max() * 1.05)
        ax.set_ylim(0, max(cold.max(), GOALS["cold_s_at_200"]) * 1.1)
        ax.legend(frameon=False, loc="upper left")
        bx.plot(n, mem, "o-", color="#1f4e79")
        bx.axhline(GOALS["peak_mb"], color="0.3", linestyle=":",
                   label=f"goal {GOALS['peak_mb']:.0f} MB")
        bx.set(xlabel="studies in the dossier", ylabel="peak memory, PSS (MB)",
               title="Peak memory of the build")
        bx.set_xlim(0, n.max() * 1.05)
        bx.set_ylim(0, GOALS["peak_mb"] * 1.1)
        bx.legend(frameon=False, loc="center right")
        fig.savefig(path, metadata={"Date": None})
        plt.close(fig)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[10, 50, 200])
    ap.add_argument("--jobs", type=int, default=0, help="worker processes (default all cores)")
    ap.add_argument("--quick", action="store_true", help="sizes 3 and 6, a smoke run")
    ap.add_argument("--plot-only", action="store_true",
                    help="redraw the scaling curve from benchmarks/out/bench_dossier.json")
    args = ap.parse_args(argv)
    if args.plot_only:
        saved = json.loads((HERE / "out" / "bench_dossier.json").read_text("utf-8"))
        plot(saved["rows"], HERE / "dossier-scaling.svg")
        print(table(saved["rows"]))
        return
    sizes = [3, 6] if args.quick else args.sizes
    rows = []
    for n in sizes:
        r = measure(n, args.jobs)
        rows.append(r)
        print(f"{n} studies: cold {r['cold']['wall_s']:.1f} s, one changed "
              f"{r['one_changed']['wall_s']:.1f} s, unchanged {r['unchanged']['wall_s']:.1f} s",
              flush=True)
    print()
    print(table(rows))
    big = rows[-1]
    print(f"\ngoals on 2 cores: {GOALS['cold_s_at_200']:.0f} s for 200 studies, peak "
          f"{GOALS['peak_mb']:.0f} MB, one-study rebuild under "
          f"{100 * GOALS['rebuild_fraction']:.0f} % of a full build; largest size here: "
          f"{big['studies']} studies, cold {big['cold']['wall_s']:.1f} s, rebuild "
          f"{100 * big['rebuild_fraction']:.0f} %")
    out = HERE / "out"
    out.mkdir(exist_ok=True)
    (out / "bench_dossier.json").write_text(json.dumps(
        {"cpu_count": os.cpu_count(), "goals": GOALS, "rows": rows}, indent=2), "utf-8")
    if not args.quick:
        plot(rows, HERE / "dossier-scaling.svg")
        print(f"scaling curve: {HERE / 'dossier-scaling.svg'}")


if __name__ == "__main__":
    main()
