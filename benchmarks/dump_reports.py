"""Write every report dict of a fixed set of studies to one JSON file, to check that a speed
change leaves the output unchanged to the byte.

The set: the first 80 simulated studies of ``bench_baseline.py`` (acid and base, both-phase
and recovery-only) and every demo study under ``studies/``. Run it before and after a change
and compare the two files with ``cmp``; any difference, even in a last digit, means the
change moved a number (DEVELOPERS.md, "Keeping the per-study report fast").

Run:  python benchmarks/dump_reports.py OUT.json [--root CHECKOUT]
``--root`` dumps another checkout of the project (e.g. a ``git worktree`` of main) with this
script, so both files come from the same code of the dump itself.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import warnings
from pathlib import Path


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", type=Path, help="the JSON file to write")
    ap.add_argument("--root", type=Path, default=Path(__file__).resolve().parent.parent,
                    help="the checkout whose extractval is dumped (default: this one)")
    ap.add_argument("--studies", type=int, default=80, help="simulated studies (default 80)")
    args = ap.parse_args(argv)
    root = args.root.resolve()
    args.out = args.out.resolve()
    sys.path[:0] = [str(root), str(root / "benchmarks")]
    from bench_baseline import make_study

    from extractval.analysis import fit_study
    from extractval.errors import StudyError
    from extractval.study import load_study

    warnings.simplefilter("ignore")
    out: dict = {}
    for i in range(args.studies):
        out[f"b{i}"] = fit_study(make_study(i)[0]).to_dict()
    os.chdir(root)            # the runs' locations read "studies/...", whichever checkout
    for folder in sorted(Path("studies").iterdir()):
        if (folder / "study.yaml").is_file():
            try:
                out[folder.name] = fit_study(load_study(folder)).to_dict()
            except StudyError as err:      # a demo study that does not load is part of the dump
                out[folder.name] = str(err)
    args.out.write_text(json.dumps(out, sort_keys=True, indent=0, default=repr),
                        encoding="utf-8")
    print(f"{len(out)} reports written to {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
