"""The ``extractval`` command line: check, fit, advise, build, serve, compare, new.

Errors in the input are printed as located messages on stderr with exit status 1; no traceback
reaches the user for bad input. Exit status 2 is a usage error.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import sys
import threading
from pathlib import Path

from . import __version__
from .errors import Problem, StudyError, grouped_lines


def _discover(paths: list[str]) -> tuple[list[Path], list[Problem]]:
    from .study import discover_studies

    folders, problems = [], []
    for p in paths:
        try:
            folders.extend(discover_studies(p))
        except StudyError as exc:
            problems.extend(exc.problems)
    return folders, problems


def _label(folder) -> str:
    """The study folder's name as people know it ('.' and 'x/..' resolved)."""
    return folder.name or folder.resolve().name


def _print_problems(problems, stream=None) -> None:
    # sys.stderr looked up at call time, not bound at import (a test or caller may swap it)
    for p in problems:
        print(str(p), file=stream or sys.stderr)


def cmd_check(args) -> int:
    from .study import check_study

    folders, problems = _discover(args.paths)
    _print_problems(problems)
    n_err = len([p for p in problems if p.severity == "error"])
    for folder in folders:
        study, found = check_study(folder)
        errors = [p for p in found if p.severity == "error"]
        n_err += len(errors)
        # warnings that say the same about several runs: one line naming every run
        for line in grouped_lines(found):
            print(line, file=sys.stderr)
        if errors:
            print(f"{_label(folder)}: {len(errors)} error(s), "
                  f"{len(found) - len(errors)} warning(s)", file=sys.stderr)
        else:
            method = (f", {len(study.method_runs)} method-validation runs"
                      if study.method_runs else "")
            print(f"{_label(folder)}: ok ({len(study.runs)} runs, "
                  f"{len(study.excluded_runs)} excluded{method}, {len(found)} warning(s))")
    return 1 if n_err else 0


def cmd_fit(args) -> int:
    from .batch import analyse_folder, map_ordered
    from .report.summary import render_summary

    folders, problems = _discover(args.paths)
    _print_problems(problems)
    status = 1 if problems else 0
    for folder, (found, data) in zip(folders, map_ordered(analyse_folder, folders, args.jobs)):
        if data is None:
            _print_problems(found)
            print(f"{_label(folder)}: not fitted, the input has errors (see above)",
                  file=sys.stderr)
            status = 1
            continue
        if data["problems"]:
            status = 1
        if args.json:
            sys.stdout.write(json.dumps(data, allow_nan=False) + "\n")
        else:
            sys.stdout.write(render_summary(data, found) + "\n")
        sys.stdout.flush()
    return status


def cmd_advise(args) -> int:
    from .batch import analyse_folder, map_ordered
    from .report.next_runs import render_next_runs

    folders, problems = _discover(args.paths)
    _print_problems(problems)
    status = 1 if problems else 0
    for folder, (found, data) in zip(folders, map_ordered(analyse_folder, folders, args.jobs)):
        if data is None:
            _print_problems(found)
            print(f"{_label(folder)}: no advice, the input has errors (see above)", file=sys.stderr)
            status = 1
            continue
        if data["problems"]:
            status = 1
        if args.json:
            line = {"study": data["study"], "next_runs": data["next_runs"]}
            sys.stdout.write(json.dumps(line, allow_nan=False) + "\n")
        else:
            sys.stdout.write(render_next_runs(data) + "\n")
        sys.stdout.flush()
    return status


def cmd_build(args) -> int:
    from .site import build_command

    return build_command(args)


def cmd_serve(args) -> int:
    from .site import serve_command

    return serve_command(args)


def cmd_compare(args) -> int:
    from .compare import compare_command

    return compare_command(args)


def cmd_new(args) -> int:
    from .scaffold import new_command

    return new_command(args)


def _site_options(p: argparse.ArgumentParser) -> None:
    """Where `build` and `serve` find the studies, the site configuration and templates."""
    p.add_argument("--studies", default=None,
                   help="folder of study folders (default studies/ in the project folder, "
                        "else here)")
    p.add_argument("--config", default=None,
                   help="the site's mkdocs.yml (default: the one in the project folder, i.e. "
                        "here or above; else the one extractval carries)")
    p.add_argument("--templates", default=None,
                   help="folder of page templates and CSS, in place of the configuration's "
                        "docs_dir (default: site_templates/ beside it)")


def make_parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(
        prog="extractval",
        description="Validate liquid-liquid extraction procedures from shake-flask studies.")
    ap.add_argument("--version", action="version", version=f"extractval {__version__}")
    sub = ap.add_subparsers(dest="command", required=True)

    p = sub.add_parser("check", help="validate study folders without fitting")
    p.add_argument("paths", nargs="+", metavar="PATH",
                   help="a study folder or a folder holding study folders")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("fit", help="fit log K and pKa, predict each procedure's recovery")
    p.add_argument("paths", nargs="+", metavar="PATH",
                   help="a study folder or a folder holding study folders")
    p.add_argument("--json", action="store_true", help="print JSON Lines, one object per study")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes (default: one per core)")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("advise", help="which runs to make next to narrow the key interval")
    p.add_argument("paths", nargs="+", metavar="PATH",
                   help="a study folder or a folder holding study folders")
    p.add_argument("--json", action="store_true",
                   help="print JSON Lines: the study id and its next_runs")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes (default: one per core)")
    p.set_defaults(func=cmd_advise)

    p = sub.add_parser("build", help="check, fit and build the dossier site")
    _site_options(p)
    p.add_argument("--site", default=None,
                   help="output folder (default site/ in the project folder, else here)")
    p.add_argument("--keep-going", action="store_true",
                   help="publish the good studies; a broken one gets a page listing its errors")
    p.add_argument("--cache-dir", default=None,
                   help="cache of fitted studies and plots (default: $EXTRACTVAL_CACHE_DIR, "
                        "else the user's cache folder, e.g. ~/.cache/extractval; safe to "
                        "delete)")
    p.add_argument("--jobs", type=int, default=0,
                   help="worker processes for fitting (default: one per core)")
    p.add_argument("--archive", default=None, metavar="DIR",
                   help="folder beside the site that keeps every published version "
                        "(DIR/dv-.../results.json, results.csv, register.html); read and "
                        "added to on each build")
    p.set_defaults(func=cmd_build)

    p = sub.add_parser("serve", help="live preview of the dossier")
    _site_options(p)
    p.add_argument("--addr", default="127.0.0.1:8000", help="address to serve on")
    p.set_defaults(func=cmd_serve)

    p = sub.add_parser("compare", help="what changed between two versions of the dossier")
    p.add_argument("old", metavar="OLD", help="a dossier site, a version folder "
                   "(site/versions/dv-... or ARCHIVE/dv-...) or a results.json file")
    p.add_argument("new", metavar="NEW", help="the same, for the newer version")
    p.add_argument("--json", action="store_true", help="print the comparison as JSON")
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser("new", help="scaffold a new study folder")
    p.add_argument("study_id", metavar="STUDY-ID")
    p.add_argument("--studies", default="studies", help="where to create it (default studies/)")
    p.set_defaults(func=cmd_new)
    return ap


def _stop(signum, frame):
    # a plain `kill` (SIGTERM) unwinds like Ctrl-C, so a build removes its half-built folder
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    args = make_parser().parse_args(argv)
    main_thread = threading.current_thread() is threading.main_thread()
    saved = signal.signal(signal.SIGTERM, _stop) if main_thread else None
    try:
        return int(args.func(args) or 0)
    except StudyError as exc:
        _print_problems(exc.problems)
        return 1
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader of our output went away (e.g. `| head`): stop quietly
        sys.stderr.close()
        return 0
    finally:
        if main_thread:
            signal.signal(signal.SIGTERM, saved)


def run() -> None:
    """The ``extractval`` command: :func:`main`, then, its output flushed, leave without the
    interpreter's teardown, which only frees memory the process gives back anyway (0.1 s
    after building a dossier of 200 studies). Every file was closed by then, the worker
    processes were joined."""
    code = main()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):       # closed, or its reader went away
            pass
    os._exit(code)


if __name__ == "__main__":
    run()
