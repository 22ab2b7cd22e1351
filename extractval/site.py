"""Build orchestration of the dossier: read, fit (cached), render, build the site, publish.

The steps, each of which leaves the published site alone until the last:

1. find the study folders and read each one (located errors, never a traceback);
2. fit each study and draw its plots, reusing the cache entry whose key (a hash of the study's
   content and of the software) matches, in parallel on the machine's cores;
3. render every page and export (:mod:`extractval.report`);
4. build the site with the generator (:mod:`extractval.mkdocs_plugin`, strict) into a
   temporary folder beside the target;
5. replace the published site by the new one only when everything succeeded.

A study with errors stops the build before step 4 (the old site stays); with ``keep_going``
the others are published and the broken one gets a page listing its errors.
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import multiprocessing
import os
import shutil
import signal
import sys
import tempfile
import threading
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

from . import __version__
from .report.pages import (Pages, StudyInput, StudyParts, TemplateProblem, nav,
                           solvent_study_ids, study_page_path)
from .report.register import Dossier

SOFTWARE = f"extractval {__version__}"
CACHE_FORMAT = "v2"
#: written into every site this tool publishes; a folder without it is never replaced
MARKER = ".extractval-dossier"
CONFIG = "mkdocs.yml"
#: the package's own folder, where no build ever writes
PACKAGE = Path(__file__).resolve().parent
#: the site configuration and templates the package carries: in a source checkout links to
#: the project's mkdocs.yml and site_templates/ (one copy of each), in a wheel their copies
PACKAGED = PACKAGE / "dossier"
#: names the cache folder for every build (also `extractval serve` and `mkdocs build`)
ENV_CACHE = "EXTRACTVAL_CACHE_DIR"


#: What the pages carry in place of the dossier version and the build date while they are
#: generated; the real values are put in as each file is written (mkdocs_plugin). A study's
#: page is then the same text in every build until that study (or the software, templates,
#: navigation) changes, and the generator's finished page can be kept and reused.
VERSION_TOKEN = "XVDOSSIERVERSIONTOKENXV"
DATE_TOKEN = "XVBUILDDATETOKENXV"


class SiteBuildError(Exception):
    """The dossier could not be built; the message lists every located problem."""


# -- software and content fingerprints ------------------------------------------------------------
def _sha(*parts: bytes | str) -> str:
    h = hashlib.sha256()
    for p in parts:
        b = p.encode("utf-8") if isinstance(p, str) else p
        h.update(len(b).to_bytes(8, "big"))
        h.update(b)
    return h.hexdigest()


_SOFTWARE_FP: str | None = None


def software_fingerprint() -> str:
    """The version and the source of the package and matplotlib's version: what the numbers
    and plots depend on besides the inputs (a code change invalidates the cache)."""
    global _SOFTWARE_FP
    if _SOFTWARE_FP is None:
        from importlib.metadata import version   # not the import of matplotlib: a warm
                                                 # rebuild that draws nothing never needs it
        pkg = Path(__file__).resolve().parent
        parts: list[bytes | str] = [__version__, version("matplotlib")]
        for f in sorted(pkg.rglob("*.py")):
            parts += [f.relative_to(pkg).as_posix(), f.read_bytes()]
        _SOFTWARE_FP = _sha(*parts)
    return _SOFTWARE_FP


def _record(study) -> str:
    """A stable text of everything a Study says (its folder's place on disk left out)."""
    return repr(dataclasses.replace(study, folder=Path(study.study_id)))


def inputs_key(study) -> str:
    """The study's own inputs: the SHA-256 of each file read, or the record for a study
    made in memory. Shown on the study page; changes only when the study's files change."""
    if study.inputs:
        text = "\n".join(f"{f.path}\t{f.sha256}" for f in sorted(study.inputs,
                                                                   key=lambda f: f.path))
    else:
        text = _record(study)
    return "sv-" + _sha(text)[:12]


def folder_files(folder: Path | None) -> list[bytes | str]:
    """Each file below ``folder`` as (relative name, bytes), flattened, in name order; what
    a study folder's keys are made of."""
    parts: list[bytes | str] = []
    if folder is not None and folder.is_dir():
        for f in sorted(p for p in folder.rglob("*") if p.is_file()):
            parts += [f.relative_to(folder).as_posix(), f.read_bytes()]
    return parts


def _folder_key(files: list[bytes | str], errors) -> str:
    """For a study that could not be read: its files' bytes (and what went wrong)."""
    return "sv-" + _sha(*errors, *files)[:12]


# -- sources of studies ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Source:
    """Where one study comes from: a folder, or (tests, benchmarks) a Study in memory."""

    study_id: str
    folder: Path | None = None
    study: object | None = None

    def load(self) -> tuple[object | None, list[str]]:
        """(Study or None, located error lines). Warnings stay inside the Study."""
        if self.study is not None:
            return self.study, []
        from .study import check_study

        study, problems = check_study(self.folder)
        errors = [str(p) for p in problems if p.severity == "error"]
        return (study if not errors else None), errors


def discover(studies_dir: Path) -> list[Source]:
    """Every study folder under ``studies_dir``, sorted by id (the folder name)."""
    from .errors import StudyError
    from .study import discover_studies

    try:
        folders = discover_studies(studies_dir)
    except StudyError as exc:
        raise SiteBuildError("\n".join(str(p) for p in exc.problems)) from None
    return [Source(f.name, folder=f) for f in folders]


# -- fitting and plotting, with a cache -----------------------------------------------------------
def fit_report(study) -> str:
    """Fit one study: its dict as JSON text. Runs in a worker process."""
    from .analysis import fit_study

    return json.dumps(fit_study(study).to_dict(), allow_nan=False)


def draw(text: str) -> dict[str, bytes]:
    """The plots of one study from its dict's JSON text."""
    from .report.plots import study_plots

    return study_plots(json.loads(text))


class HelperFailed(Exception):
    """A task failed in a helper process; the message is its exception, type first."""


class _Helper:
    """A process that gets ready for one kind of task as soon as it starts (its imports:
    ``ready``) and then does the tasks it is sent (``task``), one at a time, through a pipe.

    A one-study rebuild starts two: one fits (scipy), one draws (matplotlib), each importing
    while this process looks the studies up in the cache. Plain processes and pipes, not
    pools: the build may still fork workers after starting them, and a pool runs threads.
    A helper that was given nothing to do is stopped at once when closed.
    """

    def __init__(self, method: str, ready, task):
        ctx = multiprocessing.get_context(method)
        self._conn, child = ctx.Pipe()
        self._proc = ctx.Process(target=_helper_loop, args=(child, ready, task), daemon=True)
        self._proc.start()
        child.close()
        self._used = False

    def send(self, payload) -> None:
        self._used = True
        self._conn.send(payload)

    def result(self):
        ok, value = self._conn.recv()
        if not ok:
            raise HelperFailed(value)
        return value

    def close(self) -> None:
        if self._used:
            try:
                self._conn.send(None)
            except OSError:
                pass
            self._proc.join(timeout=5)
        if self._proc.is_alive():
            self._proc.terminate()
            self._proc.join(timeout=5)
        self._conn.close()


def _helper_loop(conn, ready, task) -> None:
    """A helper's life: ``ready()``, then (ok, result or the error) for each payload, until
    told to stop or the build is gone. Ctrl-C is the build's to handle, and being stopped
    ends the process quietly."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    ready()
    while True:
        try:
            payload = conn.recv()
        except (EOFError, OSError):
            return
        if payload is None:
            return
        try:
            reply = (True, task(payload))
        except Exception as exc:             # the build reports it as the study's failure
            reply = (False, f"{type(exc).__name__}: {exc}")
        try:
            conn.send(reply)
        except OSError:
            return


def _import_fit() -> None:
    from . import analysis  # noqa: F401


def _import_plots() -> None:
    from .report import plots  # noqa: F401


def compute(study) -> tuple[str, dict[str, bytes]]:
    """Fit one study: its dict as JSON text, and its plots. Runs in a worker process."""
    text = fit_report(study)
    return text, draw(text)


class Cache:
    """Per study, the fitted dict and the plots, under a key of study content and software.

    Layout: ``<root>/v2/<study-id>/<key>/report.json``, ``meta.json`` (the study's inputs key
    and run count) and ``plots/*.svg``. A study folder is keyed by its files' bytes, a study
    made in memory by its record. The folder is safe to delete at any time; only the newest
    entry of each study is kept.
    """

    def __init__(self, root: Path | None):
        self.root = None if root is None else Path(root) / CACHE_FORMAT

    def key(self, study) -> str:
        return _sha(software_fingerprint(), _record(study))[:24]

    def folder_key(self, files: list[bytes | str], shown_as: str) -> str:
        """The key of a study folder by its files (:func:`folder_files`), without reading it
        as a study: a warm rebuild then skips parsing too. ``shown_as`` is the folder as the
        messages and pages name it (part of what the pages say)."""
        return _sha(software_fingerprint(), "folder", shown_as, *files)[:24]

    def get(self, study_id: str, key: str) -> tuple[str, dict[str, Path], dict] | None:
        """(report JSON text, plots, meta) of an entry, or None. The plots are the entry's
        files (the site links or copies them; they are never changed in place)."""
        if self.root is None:
            return None
        entry = self.root / study_id / key
        try:
            text = (entry / "report.json").read_text(encoding="utf-8")
            meta = json.loads((entry / "meta.json").read_text(encoding="utf-8"))
            plots = {p.name: p for p in sorted((entry / "plots").glob("*.svg"))}
        except (OSError, ValueError):
            return None
        return text, plots, meta

    def put(self, study_id: str, key: str, text: str, plots: dict[str, bytes],
            meta: dict) -> dict[str, Path] | None:
        """Store an entry; its plots' files (which the site may link), or None when the
        cache could not be written. An entry already there under the same key (the same
        content, e.g. from a build running beside this one) is kept as it is."""
        if self.root is None:
            return None
        base = self.root / study_id
        final = base / key
        try:
            base.mkdir(parents=True, exist_ok=True)
            tmp = Path(tempfile.mkdtemp(prefix=".tmp-", dir=base))
            (tmp / "plots").mkdir()
            for name, data in plots.items():
                (tmp / "plots" / name).write_bytes(data)
            (tmp / "report.json").write_text(text, encoding="utf-8")
            (tmp / "meta.json").write_text(json.dumps(meta), encoding="utf-8")
            if final.exists() and self.get(study_id, key) is None:
                shutil.rmtree(final, ignore_errors=True)       # unreadable: replace it
            try:
                os.replace(tmp, final)
            except OSError:
                if self.get(study_id, key) is None:
                    raise
                shutil.rmtree(tmp, ignore_errors=True)
            for old in base.iterdir():
                if old.name != key:
                    shutil.rmtree(old, ignore_errors=True)
            found = {name: final / "plots" / name for name in plots}
            if all(p.is_file() for p in found.values()):
                return found
        except OSError:
            pass        # a cache that cannot be written only costs time
        return None


# -- preparing the dossier ------------------------------------------------------------------------
class Outcome:
    """One study after reading and fitting.

    A study taken from the cache holds its report's JSON text (``text``) and parses it only
    when ``data`` is asked for: a rebuild that keeps the study's page and its parts of the
    pages listing every study never does. ``plots`` are by file name, bytes or the cache's
    file holding them.
    """

    def __init__(self, study_id: str, data: dict | None, plots: dict[str, bytes | Path],
                 errors: list[str], key: str, runs: int = 0, cached: bool = False,
                 seconds: float = 0.0, text_sha: str = "", text: str | None = None,
                 fit_problems: list[str] | None = None):
        self.study_id, self.plots, self.errors, self.key = study_id, plots, errors, key
        self.runs, self.cached, self.seconds = runs, cached, seconds
        self.text_sha = text_sha     # SHA-256 of the report's JSON text: what its pages show
        self._data, self._text, self._fit_problems = data, text, fit_problems

    @property
    def data(self) -> dict | None:
        if self._data is None and self._text is not None:
            self._data = json.loads(self._text)
        return self._data

    @property
    def has_data(self) -> bool:
        """The study was read and fitted (its dict exists, parsed or not)."""
        return self._data is not None or self._text is not None

    @property
    def loaded(self) -> bool:
        return self._data is not None or self._text is None

    @property
    def fit_problems(self) -> list[str]:
        """Why the fit was impossible (the dict's "problems"); [] when it was made."""
        if self._fit_problems is None:
            self._fit_problems = list((self.data or {}).get("problems", []))
        return self._fit_problems

    @property
    def problems(self) -> list[str]:
        """Why the study has no numbers: its read errors, or why the fit was impossible."""
        if not self.has_data:
            return list(self.errors)
        return [f"{self.study_id}: not fitted: {p}" for p in self.fit_problems]


@dataclass
class Prepared:
    """Everything the site generator needs: files by site path, the navigation, the footer.

    Pages and footer hold VERSION_TOKEN and DATE_TOKEN; ``tokens`` maps them to this build's
    values, which the generator's plugin puts in as it writes each file. ``page_keys`` are
    the keys of the pages whose finished HTML may be kept in ``page_cache``; the pages in
    ``reused`` were not rendered (their content is empty): their finished HTML and search
    entries, read from the cache, are here.
    """

    files: dict[str, bytes]
    nav: list
    footer: str
    dossier: Dossier
    outcomes: list[Outcome] = field(default_factory=list)
    tokens: dict[str, str] = field(default_factory=dict)
    page_keys: dict[str, str] = field(default_factory=dict)
    reused: dict[str, tuple[bytes, list]] = field(default_factory=dict)
    page_cache: PageCache | None = None
    #: files by site path whose bytes are those of a file already on disk (plots in the
    #: cache, versions already published), which the generator links or copies
    linked: dict[str, Path] = field(default_factory=dict)
    #: studies whose parts of the index, register and exports came from the cache
    parts_reused: list[str] = field(default_factory=list)

    @property
    def failed(self) -> list[Outcome]:
        return [o for o in self.outcomes if o.problems]


def build_date() -> tuple[str, int]:
    """The build's date as shown (UTC) and its epoch: SOURCE_DATE_EPOCH when set, else now."""
    raw = os.environ.get("SOURCE_DATE_EPOCH")
    if raw is not None and raw.strip():
        try:
            epoch = int(raw.strip())
        except ValueError:
            raise SiteBuildError(f"SOURCE_DATE_EPOCH: found {raw!r}; expected whole seconds "
                                 "since 1970-01-01 UTC, e.g. 1767225600") from None
    else:
        epoch = int(time.time())
    stamp = datetime.fromtimestamp(epoch, timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return stamp, epoch


def _progress_line(i: int, n: int, o: Outcome) -> str:
    width = len(str(n))
    bar = ""
    if n >= 10:
        filled = round(20 * i / n)
        bar = "[" + "#" * filled + "." * (20 - filled) + "] "
    if not o.has_data:
        state = f"ERROR ({len(o.errors)} problem{'s' if len(o.errors) != 1 else ''})"
    elif o.fit_problems:
        state = "not fitted"
    else:
        state = "fitted"
    how = "cached" if o.cached else f"{o.seconds:.1f} s"
    return f"{bar}{i:>{width}}/{n} {o.study_id:<20} {state:<14} {o.runs:>3} runs  {how}"


def _start_method() -> str:
    # fork is quick and safe while this is the only thread; otherwise (the preview server
    # runs threads) start clean workers
    return "fork" if threading.active_count() == 1 and sys.platform != "win32" else "spawn"


def _pool(n_jobs: int) -> ProcessPoolExecutor:
    return ProcessPoolExecutor(n_jobs, mp_context=multiprocessing.get_context(_start_method()))


@contextlib.contextmanager
def _working_folder(folder: Path | None):
    """Run the readers from ``folder``: the file names in their messages (and so on the
    pages) are then relative to it, whatever folder the command was started in."""
    if folder is None:
        yield
        return
    here = os.getcwd()
    os.chdir(folder)
    try:
        yield
    finally:
        os.chdir(here)


def collect(sources: list[Source], cache: Cache, jobs: int = 0,
            progress: Callable[[str], None] | None = None,
            display_root: Path | None = None,
            meanwhile: Callable[[list[Outcome]], None] | None = None) -> list[Outcome]:
    """Read every study, then fit the ones the cache does not hold (in parallel).

    ``meanwhile`` is called with the studies the cache held while worker processes fit the
    others (with two or more cores, even for one study: the fit's imports of scipy and
    matplotlib then cost this process nothing, and it reads what it will need next; one
    more worker draws the plots).

    File names in messages are given relative to ``display_root`` (the studies folder's
    parent), so that a page does not depend on where the build was started.
    """
    jobs = jobs or (os.cpu_count() or 1)
    # a rebuild that fits a few studies fits and draws them in helper processes: started
    # first, they import scipy and matplotlib while this process looks the studies up
    helpers = meanwhile is not None and jobs > 1
    fitter = _Helper(_start_method(), _import_fit, fit_report) if helpers else None
    drawer = _Helper(_start_method(), _import_plots, draw) if helpers else None
    try:
        outcomes: dict[str, Outcome] = {}
        todo: list[tuple[Source, object, str]] = []
        n, done = len(sources), 0

        def report(o: Outcome) -> None:
            nonlocal done
            done += 1
            outcomes[o.study_id] = o
            if progress:
                progress(_progress_line(done, n, o))

        def from_cache(src, text, plots, meta) -> Outcome:
            return Outcome(src.study_id, None, plots, [], meta["inputs_key"], meta["runs"],
                           cached=True, text_sha=_sha(text), text=text,
                           fit_problems=meta.get("problems"))

        for src in sources:
            t0 = time.perf_counter()
            key = None
            files = folder_files(src.folder)      # read once: the cache key, or the error key
            if src.folder is not None and cache.root is not None and src.folder.is_dir():
                shown = (os.path.relpath(src.folder, display_root) if display_root is not None
                         else str(src.folder))
                key = cache.folder_key(files, shown)
                hit = cache.get(src.study_id, key)
                if hit is not None:
                    report(from_cache(src, *hit))
                    continue
            try:
                with _working_folder(display_root):
                    study, errors = src.load()
            except Exception as exc:       # a reader bug must not hide the other studies
                study, errors = None, [f"{src.study_id}: the study could not be read "
                                       f"({type(exc).__name__}: {exc}); this is a fault in "
                                       "extractval, please report it"]
            if study is None:
                report(Outcome(src.study_id, None, {}, errors, _folder_key(files, errors),
                               seconds=time.perf_counter() - t0))
                continue
            if key is None:
                key = cache.key(study)
                hit = cache.get(src.study_id, key)
                if hit is not None:
                    report(from_cache(src, *hit))
                    continue
            todo.append((src, study, key))

        def finish(src, study, key, text, plots, seconds):
            data = json.loads(text)
            meta = {"inputs_key": inputs_key(study), "runs": len(study.runs),
                    "problems": list(data.get("problems", []))}
            kept = cache.put(src.study_id, key, text, plots, meta)
            report(Outcome(src.study_id, data, plots if kept is None else kept, [],
                           meta["inputs_key"],
                           meta["runs"], seconds=seconds, text_sha=_sha(text)))

        def failed(src, study, exc):
            what = str(exc) if isinstance(exc, HelperFailed) else f"{type(exc).__name__}: {exc}"
            report(Outcome(src.study_id, None, {}, [
                f"{src.study_id}: the fit stopped ({what}); this is a fault in extractval, "
                "please report it"], inputs_key(study), len(study.runs)))

        def drawn_by_helper(src, study, key, t0, fitted_text) -> None:
            """A study whose fit gives ``fitted_text()``, drawn by the drawer: finished."""
            try:
                text = fitted_text()
                drawer.send(text)
                drawn = drawer.result()
            except Exception as exc:
                failed(src, study, exc)
                return
            finish(src, study, key, text, drawn, time.perf_counter() - t0)

        if len(todo) == 1 and fitter is not None:
            # one study changed: the fitter (scipy imported by now) fits it while this
            # process reads ahead, then the drawer draws it
            (src, study, key), t0 = todo[0], time.perf_counter()
            fitter.send(study)
            meanwhile([o for o in outcomes.values() if o.cached])
            drawn_by_helper(src, study, key, t0, fitter.result)
        elif todo and len(todo) < jobs and drawer is not None:
            # a few studies changed: workers fit them while the drawer draws each as its fit
            # arrives, and this process reads ahead
            with _pool(len(todo)) as pool:
                started = {pool.submit(fit_report, study): (src, study, key, time.perf_counter())
                           for src, study, key in todo}
                meanwhile([o for o in outcomes.values() if o.cached])
                for fut in as_completed(started):
                    drawn_by_helper(*started[fut], fut.result)
        elif todo and jobs > 1 and (len(todo) >= 3 or meanwhile is not None):
            with _pool(min(jobs, len(todo))) as pool:
                started = {pool.submit(compute, study): (src, study, key, time.perf_counter())
                           for src, study, key in todo}
                if meanwhile is not None:
                    meanwhile([o for o in outcomes.values() if o.cached])
                for fut in as_completed(started):
                    src, study, key, t0 = started[fut]
                    try:
                        text, plots = fut.result()
                    except Exception as exc:
                        failed(src, study, exc)
                        continue
                    finish(src, study, key, text, plots, time.perf_counter() - t0)
        else:
            if meanwhile is not None:
                meanwhile([o for o in outcomes.values() if o.cached])
            for src, study, key in todo:
                t0 = time.perf_counter()
                try:
                    text, plots = compute(study)
                except Exception as exc:
                    failed(src, study, exc)
                    continue
                finish(src, study, key, text, plots, time.perf_counter() - t0)
        return [outcomes[s.study_id] for s in sources]
    finally:
        for helper in (fitter, drawer):
            if helper is not None:
                helper.close()


def dossier_version(outcomes: list[Outcome], templates_dir: Path, config_file: Path | None) -> str:
    """A short id of the content of every input, the templates, the config and the software."""
    parts: list[bytes | str] = [software_fingerprint()]
    for f in sorted(p for p in Path(templates_dir).rglob("*") if p.is_file()):
        parts += [f.relative_to(templates_dir).as_posix(), f.read_bytes()]
    if config_file is not None and Path(config_file).is_file():
        parts.append(Path(config_file).read_bytes())
    for o in sorted(outcomes, key=lambda o: o.study_id):
        parts += [o.study_id, o.key, "ok" if o.has_data else "failed"]
    return "dv-" + _sha(*parts)[:12]


def render(outcomes: list[Outcome], templates_dir: Path, config_file: Path | None,
           date: str, page_cache: PageCache | None = None) -> Prepared:
    """All files of the site from the outcomes (pages, plots, exports, CSS).

    With a ``page_cache``, a study page whose finished HTML the cache holds is not rendered,
    and a study whose parts of the pages listing every study (StudyParts) it holds is not
    rendered there either; a study with both is not even parsed.
    """
    dossier = Dossier(dossier_version(outcomes, templates_dir, config_file), SOFTWARE, date)
    shown = Dossier(VERSION_TOKEN, SOFTWARE, DATE_TOKEN)
    tokens = {VERSION_TOKEN: dossier.version, DATE_TOKEN: date}
    base = _site_digest(templates_dir, config_file)
    parts: dict[str, StudyParts] = {}
    part_keys = {o.study_id: _parts_key(base, o) for o in outcomes if o.has_data}
    if page_cache is not None:
        for sid, key in part_keys.items():
            got = page_cache.get_parts(sid, key)
            if got is not None:
                parts[sid] = got
    kept_parts = sorted(parts)

    def study_input(o: Outcome, load: bool) -> StudyInput:
        load = load or o.loaded
        return StudyInput(o.study_id, o.data if load else None, tuple(o.errors),
                          tuple(sorted(o.plots)), o.key, loaded=load)

    pages = Pages(templates_dir,
                  compiled=None if page_cache is None else page_cache.compiled / "pages")
    try:
        for o in outcomes:
            if o.study_id not in parts:
                parts[o.study_id] = pages.study_parts(study_input(o, True), shown)
        made = [parts[o.study_id] for o in outcomes]
        compared = solvent_study_ids(made)        # the Solvents compared page reads these
        site_nav = nav([StudyInput(o.study_id, None) for o in outcomes],
                       compared=bool(compared))
        page_keys = _page_keys(outcomes, site_nav, base)
        reused: dict[str, tuple[bytes, list]] = {}
        if page_cache is not None:
            for path, key in page_keys.items():
                hit = page_cache.get(path, key)
                if hit is not None:   # a missing or unreadable entry: the page is rendered
                    reused[path] = hit
        inputs = [study_input(o, o.study_id in compared
                              or study_page_path(o.study_id) not in reused)
                  for o in outcomes]
        runs = {k: sum(p.runs[k] for p in made if p.runs is not None)
                for k in ("total", "used", "excluded")}
        n_failed = sum(not o.has_data for o in outcomes)
        counts = {
            "studies_text": f"{len(outcomes)}" + (f" ({n_failed} not published: input "
                                                  "errors)" if n_failed else ""),
            "runs_text": f"{runs['total']} ({runs['used']} used, {runs['excluded']} excluded)",
        }
        files = pages.dossier_files(inputs, shown, counts, skip=reused, parts=parts)
    except TemplateProblem as exc:
        raise SiteBuildError(f"a page template failed: {exc}") from None
    if page_cache is not None:
        for sid, key in part_keys.items():
            if sid not in kept_parts:
                page_cache.put_parts(sid, key, parts[sid])
    for path in list(files):
        if not path.endswith(".md"):          # exports: this build's values right away
            files[path] = put_tokens(files[path], tokens)
    linked: dict[str, Path] = {}
    for o in outcomes:
        folder = study_page_path(o.study_id).rsplit("/", 1)[0]
        for name, data in sorted(o.plots.items()):
            if isinstance(data, Path):
                linked[f"{folder}/{name}"] = data
            else:
                files[f"{folder}/{name}"] = data
    footer = f"Dossier {shown.version} · {shown.software} · built {shown.build_date}"
    return Prepared(files, site_nav, footer, dossier, outcomes, tokens, page_keys, reused,
                    page_cache, linked, kept_parts)


def put_tokens(data: bytes, tokens: dict[str, str]) -> bytes:
    """``data`` with each token replaced by its value."""
    for token, value in tokens.items():
        data = data.replace(token.encode(), value.encode())
    return data


# -- finished pages, kept between builds ----------------------------------------------------------
def _site_digest(templates_dir: Path, config_file: Path | None) -> str:
    """What decides how every page is made besides its study: the software with the
    generator's, theme's and template engine's versions, the templates and mkdocs.yml."""
    from importlib.metadata import PackageNotFoundError, version

    parts: list[bytes | str] = [software_fingerprint()]
    for dist in ("mkdocs", "mkdocs-material", "markdown", "jinja2", "pymdown-extensions"):
        try:
            parts.append(f"{dist} {version(dist)}")
        except PackageNotFoundError:
            parts.append(f"{dist} -")
    for f in sorted(p for p in Path(templates_dir).rglob("*") if p.is_file()):
        parts += [f.relative_to(templates_dir).as_posix(), f.read_bytes()]
    if config_file is not None and Path(config_file).is_file():
        parts.append(Path(config_file).read_bytes())
    return _sha(*parts)


def _parts_key(base: str, o: Outcome) -> str:
    """The key of a study's parts of the pages listing every study (StudyParts)."""
    return _sha(base, "parts", o.study_id, o.key, o.text_sha)[:32]


def _page_keys(outcomes: list[Outcome], site_nav: list, base: str) -> dict[str, str]:
    """The key of each study page's finished HTML: the study's report (its JSON text), errors
    and plots, and everything of the site that shows on every page or decides how a page is
    made (``base``: :func:`_site_digest`; the navigation, the list of the site's files).
    The index and register pages show every study and are made every build (from each
    study's kept parts)."""
    paths = []
    for o in outcomes:
        page = study_page_path(o.study_id)
        paths += [page] + [f"{page.rsplit('/', 1)[0]}/{n}" for n in sorted(o.plots)]
    site_key = _sha(base, json.dumps(site_nav, sort_keys=True), json.dumps(sorted(paths)))
    return {study_page_path(o.study_id): _sha(site_key, o.study_id, o.key, o.text_sha,
                                              *o.errors, *sorted(o.plots))[:32]
            for o in outcomes}


class PageCache:
    """Finished HTML pages (with the tokens, not this build's version and date) and their
    search-index entries, one entry per page: ``<root>/pages/<page-hash>/<key>.html`` and
    ``.json`` (and a study page's body of the print page, ``.print.html``); and each
    study's parts of the pages listing every study (``<root>/parts/<study-hash>/<key>.parts``,
    :func:`_pack_texts`).
    Written whole or not at all; safe to delete."""

    def __init__(self, root: Path):
        self.root = Path(root) / "pages"
        #: compiled templates, Jinja2's bytecode cache: pages/ ours, theme/ the generator's
        #: (one folder per environment: the cache is keyed by file name, not by options)
        self.compiled = Path(root) / "templates"
        self._parts: dict[tuple[str, str], StudyParts | None] = {}   # read this build

    def _folder(self, page: str) -> Path:
        return self.root / _sha(page)[:16]

    def get(self, page: str, key: str) -> tuple[bytes, list] | None:
        base = self._folder(page) / key
        try:
            html = base.with_suffix(".html").read_bytes()
            entries = json.loads(base.with_suffix(".json").read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        return html, entries

    def put(self, page: str, key: str, html: bytes, entries: list) -> None:
        folder = self._folder(page)
        try:
            folder.mkdir(parents=True, exist_ok=True)
            for old in folder.iterdir():
                if not old.name.startswith(key + "."):
                    old.unlink(missing_ok=True)
            for suffix, data in ((".json", json.dumps(entries).encode()), (".html", html)):
                _write_whole(folder / (key + suffix), data)
        except OSError:
            pass        # a cache that cannot be written only costs time

    def get_print(self, page: str, key: str) -> str | None:
        """A study page's body of the print page (printview.study_body), kept with it."""
        try:
            return (self._folder(page) / (key + ".print.html")).read_text(encoding="utf-8")
        except (OSError, ValueError):
            return None

    def put_print(self, page: str, key: str, body: str) -> None:
        folder = self._folder(page)
        try:
            folder.mkdir(parents=True, exist_ok=True)
            _write_whole(folder / (key + ".print.html"), body.encode("utf-8"))
        except OSError:
            pass        # a cache that cannot be written only costs time

    def _parts_file(self, study_id: str, key: str) -> Path:
        return self.root.parent / "parts" / _sha(study_id)[:16] / f"{key}.parts"

    def get_parts(self, study_id: str, key: str) -> StudyParts | None:
        """A study's parts of the index, register and exports, or None."""
        if (study_id, key) not in self._parts:
            self._parts[study_id, key] = self._read_parts(study_id, key)
        return self._parts[study_id, key]

    def _read_parts(self, study_id: str, key: str) -> StudyParts | None:
        try:
            got = StudyParts.from_dict(_unpack_texts(
                self._parts_file(study_id, key).read_bytes(), _LONG_PARTS))
        except (OSError, ValueError, TypeError, KeyError):
            return None
        return got if got.study_id == study_id else None

    def put_parts(self, study_id: str, key: str, parts: StudyParts) -> None:
        target = self._parts_file(study_id, key)
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            for old in target.parent.iterdir():
                if old.name != target.name:
                    old.unlink(missing_ok=True)
            _write_whole(target, _pack_texts(parts.to_dict(), _LONG_PARTS))
        except OSError:
            pass        # a cache that cannot be written only costs time


def _write_whole(path: Path, data: bytes) -> None:
    """Write ``path`` whole or not at all: a temporary file beside it, then a rename."""
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=path.parent)
    with os.fdopen(fd, "wb") as fh:
        fh.write(data)
    os.replace(tmp, path)


#: the long texts of a StudyParts (HTML and JSON): kept as they are, not as JSON strings
_LONG_PARTS = ("index_row", "register_section", "listing_json", "numbers_json", "numbers_csv")


def _pack_texts(d: dict, long: tuple[str, ...]) -> bytes:
    """``d`` as one line of JSON without its ``long`` texts, then those texts as UTF-8, one
    after the other (their lengths are in the line). Reading it back costs a slice per text;
    as JSON strings they would be escaped and unescaped (HTML and JSON text are full of
    quotes), which took a rebuild of 200 studies ~0.1 s.

    >>> _unpack_texts(_pack_texts({"a": 1, "t": 'say "x"'}, ("t",)), ("t",))
    {'a': 1, 't': 'say "x"'}
    """
    d = dict(d)
    texts = [d.pop(k).encode("utf-8") for k in long]
    d["_lengths"] = [len(t) for t in texts]
    return json.dumps(d).encode("utf-8") + b"\n" + b"".join(texts)


def _unpack_texts(data: bytes, long: tuple[str, ...]) -> dict:
    """What :func:`_pack_texts` packed; ValueError when it is cut short or overlong."""
    head, _, rest = data.partition(b"\n")
    d = json.loads(head)
    lengths = d.pop("_lengths")
    if len(lengths) != len(long) or sum(lengths) != len(rest):
        raise ValueError("the kept parts are cut short or overlong")
    at = 0
    for name, n in zip(long, lengths):
        d[name] = rest[at:at + n].decode("utf-8")
        at += n
    return d


def _failure_text(failed: list[Outcome]) -> str:
    lines = []
    for o in failed:
        lines.append(f"study {o.study_id}: {len(o.problems)} error(s)")
        lines.extend(f"  {e}" for e in o.problems)
    return "\n".join(lines)


def prepare(studies_dir: Path | None, templates_dir: Path | Callable[[], Path],
            config_file: Path | None, *,
            keep_going: bool = False, cache_dir: Path | None = None, jobs: int = 0,
            progress: Callable[[str], None] | None = None,
            sources: list[Source] | None = None, reuse_pages: bool = False,
            also_meanwhile: Callable[[], None] | None = None) -> Prepared:
    """Read, fit and render every study: the site's files, ready for the generator.

    With ``reuse_pages`` (``extractval build``, whose generator step can put kept pages in
    place), study pages whose finished HTML is in the cache are not rendered again.

    ``templates_dir`` may be a function giving the folder, called once the changed studies
    are being fitted.

    Raises :class:`SiteBuildError` (with every located error) when a study cannot be read,
    unless ``keep_going``.
    """
    def templates() -> Path:
        return Path(templates_dir() if callable(templates_dir) else templates_dir)

    display_root = None
    if sources is None:
        studies_dir = Path(studies_dir).resolve()
        sources = discover(studies_dir)
        display_root = studies_dir.parent
    if cache_dir is None:
        cache_dir = default_cache_dir(studies_dir)
    page_cache = (PageCache(Path(cache_dir) / CACHE_FORMAT)
                  if reuse_pages and cache_dir is not None else None)

    def read_ahead(cached: list[Outcome]) -> None:
        """While studies are fitted: the kept parts of those the cache held (render asks
        for them again and gets them from memory), and whatever the caller reads ahead."""
        folder = templates()
        if page_cache is not None:
            base = _site_digest(folder, config_file)
            for o in cached:
                page_cache.get_parts(o.study_id, _parts_key(base, o))
        if also_meanwhile is not None:
            also_meanwhile()

    outcomes = collect(sources, Cache(cache_dir), jobs, progress, display_root,
                       meanwhile=read_ahead)
    failed = [o for o in outcomes if o.problems]
    if failed and not keep_going:
        raise SiteBuildError(_failure_text(failed) + "\nthe site was not built; correct the "
                             "files above, or use --keep-going to publish the other studies")
    date, _ = build_date()
    return render(outcomes, templates(), config_file, date, page_cache)


# -- publishing -----------------------------------------------------------------------------------
def _check_target(site_dir: Path, protected: list[Path]) -> None:
    site_dir = site_dir.resolve()
    if site_dir.is_relative_to(PACKAGE):
        raise SiteBuildError(f"{site_dir}: the site folder would be inside the extractval "
                             "package; choose another --site")
    for p in protected:
        p = p.resolve()
        if site_dir == p or p.is_relative_to(site_dir):
            raise SiteBuildError(f"{site_dir}: the site folder would replace {p}; choose "
                                 "another --site")
    if site_dir.exists():
        if not site_dir.is_dir():
            raise SiteBuildError(f"{site_dir}: exists and is not a folder; choose another "
                                 "--site")
        if any(site_dir.iterdir()) and not (site_dir / MARKER).is_file():
            raise SiteBuildError(f"{site_dir}: the folder holds files that extractval did not "
                                 "publish, so it is not replaced; choose another --site or "
                                 "empty it")


def _leftover(site_dir: Path, kind: str) -> str:
    """The name prefix of this process's temporary folders beside ``site_dir``."""
    return f".{site_dir.name}.{kind}-{os.getpid()}-"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass                    # it runs, as another user
    return True


def sweep_leftovers(site_dir: Path) -> None:
    """Clear what a build that was killed (power cut, SIGKILL) left beside the site.

    Its half-built folder goes; if it was killed between the two renames of :func:`publish`,
    the previous site is put back. Folders of builds still running are left alone.
    """
    parent = site_dir.parent
    if not parent.is_dir():
        return
    dead: dict[str, list[Path]] = {"building": [], "old": []}
    for kind, found in dead.items():
        for p in parent.glob(f".{site_dir.name}.{kind}-*"):
            pid = p.name[len(f".{site_dir.name}.{kind}-"):].split("-", 1)[0]
            if pid.isdigit() and not _alive(int(pid)):
                found.append(p)
    if not site_dir.exists():
        previous = sorted((p for p in dead["old"] if (p / MARKER).is_file()),
                          key=lambda p: p.stat().st_mtime)
        if previous:
            os.replace(previous[-1], site_dir)
            dead["old"].remove(previous[-1])
    for p in dead["building"] + dead["old"]:
        shutil.rmtree(p, ignore_errors=True)


def publish(built: Path, site_dir: Path, later: bool = False) -> None:
    """Put the finished site in place of the old one (two renames on the same disk); the old
    one is then removed, ``later`` by a process of its own (:func:`remove_later`)."""
    if site_dir.exists():
        old = Path(tempfile.mkdtemp(prefix=_leftover(site_dir, "old"), dir=site_dir.parent))
        os.rmdir(old)
        os.replace(site_dir, old)
        try:
            os.replace(built, site_dir)
        except BaseException:
            os.replace(old, site_dir)
            raise
        if later:
            remove_later(old, site_dir)
        else:
            shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(built, site_dir)


def remove_later(folder: Path, site_dir: Path) -> None:
    """Remove ``folder``, the site replaced at ``site_dir``, in a detached process, so that a
    build returns as soon as its site is published (a site of hundreds of studies is
    thousands of files: ~0.3 s to delete).

    POSIX only, and only while this process runs one thread (forking a threaded process is
    unsafe); otherwise the folder is removed now. The folder is first renamed after the
    process removing it, so a build starting meanwhile leaves it alone (sweep_leftovers
    clears folders of processes that no longer run, such as one killed halfway).
    """
    if not hasattr(os, "fork") or threading.active_count() != 1:
        shutil.rmtree(folder, ignore_errors=True)
        return
    pid = os.fork()
    if pid == 0:                            # the child: start the remover and leave at once
        try:
            if os.fork() == 0:              # the remover, adopted by init when the child ends
                os.setsid()
                mine = folder.with_name(_leftover(site_dir, "old") + "removing")
                try:
                    os.replace(folder, mine)
                except OSError:
                    mine = folder
                shutil.rmtree(mine, ignore_errors=True)
        finally:
            os._exit(0)
    os.waitpid(pid, 0)


@dataclass
class BuildResult:
    site_dir: Path
    prepared: Prepared
    seconds: float
    #: wall seconds of the steps: "studies and pages" (read, fit, plots, pages), "site generator"
    steps: dict[str, float] = field(default_factory=dict)


def build(studies_dir: Path | None, site_dir: Path, config_file: Path, *,
          keep_going: bool = False, cache_dir: Path | None = None, jobs: int = 0,
          progress: Callable[[str], None] | None = None,
          sources: list[Source] | None = None,
          templates_dir: Path | None = None, archive: Path | None = None,
          remove_old_later: bool = False) -> BuildResult:
    """The whole build; on any failure the published ``site_dir`` is left as it was.

    With ``remove_old_later`` (the command line) the previous site is removed by a process
    of its own once the new one is published (:func:`remove_later`).

    ``templates_dir`` replaces the configuration's ``docs_dir`` (the templates and CSS).
    Every version already published (in the site's versions/ and in ``archive``) is carried
    into the new site; this version is added to ``archive`` once it is published.
    """
    t0 = time.perf_counter()
    config_file = Path(config_file).resolve()
    if not config_file.is_file():
        raise SiteBuildError(f"{config_file}: no such file; expected the site's mkdocs.yml")
    site_dir = Path(site_dir).resolve()
    if templates_dir is not None:
        templates_dir = check_templates(Path(templates_dir))
    protected = [config_file.parent, PACKAGE]
    if templates_dir is not None:
        protected.append(templates_dir)
    if studies_dir is not None:
        protected.append(Path(studies_dir))
    _check_target(site_dir, protected)
    if archive is not None:
        archive = Path(archive).resolve()
        if archive == site_dir or archive.is_relative_to(site_dir):
            raise SiteBuildError(f"{archive}: the archive would be inside the site folder, "
                                 "which each build replaces; choose a folder beside it")

    def templates() -> Path:
        """The configuration's docs_dir when no folder was given: read with the site
        generator's import, while the changed studies are fitted (prepare asks for it)."""
        nonlocal templates_dir
        if templates_dir is None:
            from . import mkdocs_plugin

            templates_dir = mkdocs_plugin.docs_dir(config_file)
            _check_target(site_dir, [templates_dir])
        return templates_dir

    from .versions import read_ahead

    prepared = prepare(studies_dir, templates, config_file, keep_going=keep_going,
                       cache_dir=cache_dir, jobs=jobs, progress=progress, sources=sources,
                       reuse_pages=True, also_meanwhile=lambda: read_ahead(site_dir))
    templates_dir = templates()
    from . import mkdocs_plugin
    _add_approvals(prepared, templates_dir, studies_dir)
    own = _add_versions(prepared, templates_dir, site_dir, archive)
    t1 = time.perf_counter()
    site_dir.parent.mkdir(parents=True, exist_ok=True)
    sweep_leftovers(site_dir)
    tmp = Path(tempfile.mkdtemp(prefix=_leftover(site_dir, "building"), dir=site_dir.parent))
    try:
        _, epoch = build_date()
        saved = os.environ.get("SOURCE_DATE_EPOCH")
        os.environ["SOURCE_DATE_EPOCH"] = str(epoch)   # the generator's dates match ours
        try:
            mkdocs_plugin.build_site(config_file, tmp, prepared, docs_dir=templates_dir)
        finally:
            if saved is None:
                os.environ.pop("SOURCE_DATE_EPOCH", None)
            else:
                os.environ["SOURCE_DATE_EPOCH"] = saved
        (tmp / MARKER).write_text(f"{prepared.dossier.version}\n", encoding="utf-8")
        os.chmod(tmp, 0o755)        # mkdtemp makes it private; a web server must read it
        publish(tmp, site_dir, later=remove_old_later)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if archive is not None:
        from .versions import archive_version

        # a version kept from the previous site is named by its path in the site folder,
        # which now holds the new site's link to the same file
        try:
            archive_version(archive, prepared.dossier.version, own)
        except OSError as exc:
            raise SiteBuildError(f"{archive}: the site was published but this version could "
                                 f"not be archived ({exc.strerror or exc})") from None
    t2 = time.perf_counter()
    return BuildResult(site_dir, prepared, t2 - t0,
                       {"studies and pages": t1 - t0, "site generator": t2 - t1})


def _pages(prepared: Prepared, templates_dir: Path) -> Pages:
    cache = prepared.page_cache
    return Pages(templates_dir, compiled=None if cache is None else cache.compiled / "pages")


def _add_approvals(prepared: Prepared, templates_dir: Path, studies_dir: Path | None) -> None:
    """The Review and approval page from approvals.yaml (extractval.approvals); a malformed
    file stops the build with its located errors."""
    from .approvals import approval_rows, read_approvals

    approvals, errors = ([], []) if studies_dir is None else read_approvals(Path(studies_dir))
    if errors:
        raise SiteBuildError("\n".join(errors) + "\nthe site was not built; correct "
                             "approvals.yaml")
    keys = {o.study_id: o.key for o in prepared.outcomes}
    try:
        page = _pages(prepared, templates_dir).approvals_page(approval_rows(approvals, keys),
                                                               keys)
    except TemplateProblem as exc:
        raise SiteBuildError(f"a page template failed: {exc}") from None
    prepared.files["approvals.md"] = page.encode("utf-8")
    at = next((i for i, item in enumerate(prepared.nav) if "About this dossier" in item),
              len(prepared.nav))
    prepared.nav.insert(at, {"Review and approval": "approvals.md"})


def _add_versions(prepared: Prepared, templates_dir: Path, site_dir: Path,
                  archive: Path | None) -> dict[str, bytes | Path]:
    """versions/ and the Changes page (extractval.versions); this version's files."""
    from .versions import add_versions

    pages = _pages(prepared, templates_dir)
    try:
        return add_versions(prepared.files, prepared.nav, site_dir, archive,
                            pages.changes_page, prepared.linked)
    except TemplateProblem as exc:
        raise SiteBuildError(f"a page template failed: {exc}") from None
    except (OSError, ValueError, KeyError) as exc:
        raise SiteBuildError(f"{site_dir}: the published versions could not be read "
                             f"({type(exc).__name__}: {exc})") from None


# -- where a build reads and writes --------------------------------------------------------------
def user_cache_dir(environ: dict[str, str] | None = None,
                   platform: str = sys.platform) -> Path | None:
    """The user's cache folder for extractval: ``$XDG_CACHE_HOME/extractval``, else
    ``~/.cache/extractval`` (``%LOCALAPPDATA%\\extractval\\cache`` on Windows); None when the
    environment names no home.

    >>> user_cache_dir({"XDG_CACHE_HOME": "/c", "HOME": "/h"}, "linux").as_posix()
    '/c/extractval'
    >>> user_cache_dir({"XDG_CACHE_HOME": "relative", "HOME": "/h"}, "linux").as_posix()
    '/h/.cache/extractval'
    >>> user_cache_dir({}, "linux") is None
    True
    """
    env = os.environ if environ is None else environ
    if platform == "win32":
        base = env.get("LOCALAPPDATA")
        return Path(base) / "extractval" / "cache" if base else None
    xdg = env.get("XDG_CACHE_HOME", "")
    if xdg and os.path.isabs(xdg):          # the XDG rule: a relative value is ignored
        return Path(xdg) / "extractval"
    home = env.get("HOME")
    return Path(home) / ".cache" / "extractval" if home else None


def default_cache_dir(studies_dir: Path | None, site_dir: Path | None = None) -> Path | None:
    """Where a build keeps its cache when no ``--cache-dir`` is given: the folder named by
    ``EXTRACTVAL_CACHE_DIR``; else one folder per studies folder in the user's cache folder
    (so two projects never evict each other's entries); else, with no user cache folder,
    beside the site. Never the package's folder, nor the working folder. None: no cache."""
    named = os.environ.get(ENV_CACHE, "").strip()
    if named:
        return Path(named)
    base = user_cache_dir()
    if base is not None:
        if studies_dir is None:
            return base / "in-memory"
        where = Path(studies_dir).resolve()
        return base / f"{where.name}-{_sha(str(where))[:12]}"
    if site_dir is not None:
        site_dir = Path(site_dir).resolve()
        return site_dir.parent / f".{site_dir.name}.extractval-cache"
    return None


def check_templates(folder: Path) -> Path:
    """``folder`` resolved, when it holds the dossier's templates; else a clear error."""
    folder = folder.resolve()
    if not (folder / "study.md.j2").is_file():
        raise SiteBuildError(f"{folder}: no study.md.j2 there; expected a folder of dossier "
                             f"templates like {PACKAGED / 'site_templates'}")
    return folder


def find_project(start: Path | None = None) -> Path | None:
    """The nearest folder at or above ``start`` (default: the working folder) holding
    mkdocs.yml: a project folder with its own site configuration; None when there is none."""
    here = Path(start or Path.cwd()).resolve()
    for p in (here, *here.parents):
        if (p / CONFIG).is_file() and not p.is_relative_to(PACKAGE):
            return p
    return None


@dataclass(frozen=True)
class BuildPaths:
    """What a build or preview reads and where it writes, from the command's options."""

    config: Path
    templates: Path | None     # None: the configuration's docs_dir
    studies: Path
    site: Path
    cache: Path | None
    packaged: bool             # the configuration is the one the package carries


def build_paths(args, cwd: Path | None = None) -> BuildPaths:
    """The options of `build` / `serve` resolved against the working folder.

    The configuration is ``--config``, else the mkdocs.yml of the project folder at or above
    the working folder, else the one the package carries. Studies and site default to
    ``studies/`` and ``site/`` beside the project's mkdocs.yml, or in the working folder when
    the package's configuration is used. The cache is ``--cache-dir``, else
    :func:`default_cache_dir`.
    """
    cwd = Path(cwd or Path.cwd()).resolve()
    given = getattr(args, "config", None)
    if given:
        config, packaged = Path(given), False
        if not config.is_file():
            raise SiteBuildError(f"{config}: no such file; expected the site's mkdocs.yml "
                                 "(leave out --config to use the one extractval carries)")
        base = config.resolve().parent
    else:
        project = find_project(cwd)
        packaged = project is None
        config = PACKAGED / CONFIG if packaged else project / CONFIG
        base = cwd if packaged else project
        if not config.is_file():
            raise SiteBuildError(f"{config}: the site configuration extractval carries is "
                                 "missing; reinstall extractval, or pass --config")
    templates = getattr(args, "templates", None)
    studies = Path(getattr(args, "studies", None) or base / "studies")
    site_dir = Path(getattr(args, "site", None) or base / "site")
    cache = getattr(args, "cache_dir", None)
    cache = Path(cache) if cache else default_cache_dir(studies, site_dir)
    return BuildPaths(config, check_templates(Path(templates)) if templates else None,
                      studies, site_dir, cache, packaged)


# -- the commands ---------------------------------------------------------------------------------
def build_command(args) -> int:
    """``extractval build``: exit 0 when the site was published, 1 otherwise."""
    def say(line: str) -> None:
        print(line, flush=True)

    try:
        paths = build_paths(args)
        result = build(paths.studies, paths.site, paths.config,
                       keep_going=getattr(args, "keep_going", False), cache_dir=paths.cache,
                       jobs=getattr(args, "jobs", 0) or 0, progress=say,
                       templates_dir=paths.templates,
                       archive=Path(args.archive) if getattr(args, "archive", None) else None,
                       remove_old_later=True)
    except SiteBuildError as exc:
        print(str(exc), file=sys.stderr)
        print("build failed: the published site was left as it was", file=sys.stderr)
        return 1
    p = result.prepared
    failed = p.failed
    for o in failed:
        for e in o.problems:
            print(e, file=sys.stderr)
    n_cached = sum(o.cached for o in p.outcomes)
    summary = (f"built {len(p.outcomes)} stud{'y' if len(p.outcomes) == 1 else 'ies'} "
               f"({n_cached} from cache) into {result.site_dir} in {result.seconds:.1f} s ("
               + ", ".join(f"{k} {v:.1f} s" for k, v in result.steps.items())
               + f"), dossier {p.dossier.version}")
    if failed:
        summary += (f"; {len(failed)} with errors published without numbers: "
                    + ", ".join(o.study_id for o in failed))
    print(summary, flush=True)
    return 1 if failed else 0


def serve_command(args) -> int:
    """``extractval serve``: live preview; a study edit rebuilds its pages."""
    from . import mkdocs_plugin

    try:
        paths = build_paths(args)
        mkdocs_plugin.serve(paths.config, paths.studies.resolve(),
                            getattr(args, "addr", "127.0.0.1:8000"), docs_dir=paths.templates,
                            cache_dir=paths.cache)
    except SiteBuildError as exc:
        print(str(exc), file=sys.stderr)
        return 1
    return 0
