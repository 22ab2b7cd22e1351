"""Side by side on the same simulated studies: extractval's fit against curve_fit + bootstrap.

The baseline is written the way a user without the tool would: per study one
``scipy.optimize.curve_fit`` of what was measured against pH (log D when both phases were
measured, recovery in % otherwise), unweighted, then 1000 bootstrap resamples of the runs (drawn
with replacement), each refitted with ``curve_fit`` from the first fit's values, and percentile
intervals (2.5 %, 97.5 %) of log K, pKa and each procedure's recovery.

extractval is timed on ``fit_study(study)``: the fit with profile-likelihood 95 % intervals of
the parameters and the procedures' recovery predictions with their intervals. ``to_dict()``
(log D band, procedure design, design-space map, verdicts, outlier screen) is timed apart.

Design of each study, OECD TG 107 style: five buffered pH values at pKa -2, -1, 0, +1, +2,
three organic:aqueous ratios each in duplicate (30 runs); acid and base alternate; half the
studies measure both phases (ratios 1:2, 1:1, 2:1), half report recovery only (ratios chosen
from the expected log K so that r K is near 1, as TG 107 advises for the one-phase case);
relative error per measured amount 2-6 %. Truth drawn per study: log K 1 to 3.5, pKa 3.5 to 9.5.

Timing is single-process, wall clock, the two methods alternating study by study. Coverage
is counted over more studies than are timed; the baseline's extra coverage studies run in a
process pool across the cores (untimed).

Run:  python benchmarks/bench_baseline.py [--quick]
Writes benchmarks/out/bench_baseline.json beside the printed table.
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import OptimizeWarning, curve_fit

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))     # measure the checkout this file is in, not an installed copy

from extractval import __version__  # noqa: E402
from extractval.analysis import fit_study  # noqa: E402
from extractval.batch import default_jobs, map_ordered  # noqa: E402
from extractval.models import get_model  # noqa: E402
from extractval.procedures import recovery_pct_from_log_d  # noqa: E402
from extractval.simulate import simulated_study  # noqa: E402
from extractval.study import Procedure, Study, Targets  # noqa: E402

OUT = Path(__file__).resolve().parent / "out"
SEED = 20261202
N_BOOT = 1000
PH_OFFSETS = (-2.0, -1.0, 0.0, 1.0, 2.0)
FULL = {"timed": 40, "coverage": 200}
QUICK = {"timed": 6, "coverage": 30}


# -- the simulated studies ------------------------------------------------------------------------

def make_study(i: int) -> tuple[Study, dict]:
    """Study ``i`` and its truth; seeded by its index, so any process rebuilds the same one."""
    rng = np.random.default_rng([SEED, i])
    model = ("acid", "base")[i % 2]
    form = ("both", "recovery")[(i // 2) % 2]
    log_k = float(rng.uniform(1.0, 3.5))
    pka = float(rng.uniform(3.5, 9.5))
    sigma = float(rng.uniform(0.02, 0.06))
    pH = [round(pka + d, 2) for d in PH_OFFSETS]
    ratios = (0.5, 1.0, 2.0) if form == "both" else tuple(
        float(f"{r * 10 ** -log_k:.3g}") for r in (0.5, 1.0, 2.0))
    neutral_side = round(pka - 2.0 if model == "acid" else pka + 2.0, 1)
    procs = (Procedure("P1", "three portions on the neutral side", neutral_side, 25.0,
                       (10.0, 10.0, 10.0)),
             Procedure("P2", "one portion at the pKa", round(pka, 1), 25.0, (20.0,)))
    study = simulated_study(f"BASE-{i:03d}", model, (log_k, pka), pH, procs,
                            targets=Targets(recovery_pct=95), sigma=sigma, form=form,
                            ratios=ratios, replicates=2, rng=rng)
    m = get_model(model)
    truth = {"logK": log_k, "pKa": pka,
             "recovery": [float(recovery_pct_from_log_d(
                 m.log_d(np.array([p.pH]), np.array([log_k, pka]))[0], p.aqueous_mL,
                 p.organic_mL)) for p in procs]}
    return study, {"model": model, "form": form, "truth": truth}


# -- extractval ------------------------------------------------------------------------------------

def ours(study: Study) -> dict:
    t0 = time.perf_counter()
    report = fit_study(study)
    t1 = time.perf_counter()
    report.to_dict()
    t2 = time.perf_counter()
    if report.fit is None:
        return {"fit_s": t1 - t0, "to_dict_s": t2 - t1, "failed": True}
    ci = {k: _ends(report.fit.parameters[k].ci95) for k in ("logK", "pKa")}
    ci["recovery"] = [_ends(p.recovery_pct.ci95) for p in report.predictions]
    return {"fit_s": t1 - t0, "to_dict_s": t2 - t1, "failed": False, "ci": ci}


def _ends(interval) -> tuple[float, float]:
    """An open end (the data do not close it) reaches as far as it can."""
    lo = -np.inf if interval.lo is None else interval.lo
    hi = np.inf if interval.hi is None else interval.hi
    return float(lo), float(hi)


# -- the baseline: what a user would write --------------------------------------------------------

def _log_d_acid(pH, log_k, pka):
    return log_k - np.log10(1 + 10 ** (pH - pka))


def _log_d_base(pH, log_k, pka):
    return log_k - np.log10(1 + 10 ** (pka - pH))


def baseline(study: Study, n_boot: int = N_BOOT, seed: int = 0) -> dict:
    """curve_fit, then a bootstrap over runs re-calling curve_fit; percentile intervals."""
    t0 = time.perf_counter()
    log_d = _log_d_acid if study.model == "acid" else _log_d_base
    runs = study.runs
    pH = np.array([r.pH for r in runs])
    ratio = np.array([r.organic_mL / r.aqueous_mL for r in runs])
    both_phases = runs[0].recovery_pct is None
    if both_phases:
        y = np.log10(np.array([r.found_organic / r.found_aqueous for r in runs]) / ratio)
        x = pH

        def f(x, log_k, pka):
            return log_d(x, log_k, pka)
    else:
        y = np.array([r.recovery_pct for r in runs])
        x = np.vstack([pH, ratio])

        def f(x, log_k, pka):
            rd = x[1] * 10 ** log_d(x[0], log_k, pka)
            return 100 * rd / (1 + rd)

    # a rough start: log K from the highest implied log D, pKa mid-range
    if both_phases:
        p0 = [y.max(), np.median(pH)]
    else:
        e = np.clip(y / 100, 1e-3, 0.999)
        p0 = [np.max(np.log10(e / (1 - e) / ratio)), np.median(pH)]
    rng = np.random.default_rng(seed)
    failed = 0
    draws = []
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", OptimizeWarning)
        try:
            popt, _ = curve_fit(f, x, y, p0=p0)
        except RuntimeError:
            return {"time_s": time.perf_counter() - t0, "failed": True}
        n = len(y)
        for _ in range(n_boot):
            idx = rng.integers(0, n, n)
            try:
                b, _ = curve_fit(f, x[..., idx], y[idx], p0=popt)
            except RuntimeError:
                failed += 1
                continue
            draws.append(b)
    draws = np.array(draws)

    def recovery(p, theta):
        rd = 10 ** log_d(p.pH, theta[:, 0], theta[:, 1])
        q = np.ones(len(theta))
        for v in p.organic_mL:
            q = q * p.aqueous_mL / (p.aqueous_mL + rd * v)
        return 100 * (1 - q)

    lo, hi = np.percentile(draws, [2.5, 97.5], axis=0)
    ci = {"logK": (lo[0], hi[0]), "pKa": (lo[1], hi[1]),
          "recovery": [tuple(np.nanpercentile(recovery(p, draws), [2.5, 97.5]))
                       for p in study.procedures]}
    return {"time_s": time.perf_counter() - t0, "failed": False, "ci": ci,
            "resamples_failed": failed}


def _baseline_by_index(i: int) -> dict:
    study, _ = make_study(i)
    return baseline(study, seed=i)


# -- the comparison ------------------------------------------------------------------------------

def _coverage(results: list[dict], infos: list[dict]) -> dict:
    """Share of studies whose 95 % interval holds the truth, per quantity, overall and by form."""
    out: dict = {}
    for group in ("all", "both", "recovery"):
        pairs = [(r, s) for r, s in zip(results, infos) if group in ("all", s["form"])]
        usable = [(r, s) for r, s in pairs if not r["failed"]]
        row = {"studies": len(pairs), "failed": len(pairs) - len(usable)}
        for key in ("logK", "pKa"):
            row[key] = _share([_inside(r["ci"][key], s["truth"][key]) for r, s in usable])
        for k in range(2):
            row[f"P{k + 1} recovery"] = _share([_inside(r["ci"]["recovery"][k],
                                                        s["truth"]["recovery"][k])
                                                for r, s in usable])
        out[group] = row
    return out


def _inside(ci, truth) -> bool:
    return bool(ci[0] <= truth <= ci[1])


def _share(hits: list[bool]) -> float | None:
    return sum(hits) / len(hits) if hits else None


def run(sizes: dict, jobs: int | None = None) -> dict:
    n_timed, n_cover = sizes["timed"], sizes["coverage"]
    studies = [make_study(i) for i in range(n_cover)]
    infos = [info for _, info in studies]
    ours(studies[0][0])                           # warm-up: imports, first-call caches
    mine = [ours(s) for s, _ in studies]
    # timed side by side, study by study (a fresh copy of each study for ours), so that a
    # change of load on a shared machine moves both methods alike instead of the ratio
    timed_ours, timed_base = [], []
    for i in range(n_timed):
        timed_ours.append(ours(make_study(i)[0]))
        timed_base.append(baseline(studies[i][0], seed=i))
    rest = list(map_ordered(_baseline_by_index, list(range(n_timed, n_cover)), jobs))
    theirs = timed_base + rest

    fit_ms = [1e3 * r["fit_s"] for r in timed_ours]
    dict_ms = [1e3 * r["to_dict_s"] for r in timed_ours]
    report_ms = [a + b for a, b in zip(fit_ms, dict_ms)]
    base_ms = [1e3 * r["time_s"] for r in timed_base]
    return {
        "benchmark": "fit with 95 % intervals and procedure predictions vs curve_fit + "
                     f"{N_BOOT}-resample bootstrap",
        "extractval_version": __version__,
        "machine": {"python": platform.python_version(), "cores": default_jobs(None),
                    "processor": platform.processor() or platform.machine()},
        "design": {"runs_per_study": len(studies[0][0].runs), "models": ["acid", "base"],
                   "forms": ["both", "recovery"], "bootstrap_resamples": N_BOOT,
                   "seed": SEED},
        "timed_studies": n_timed,
        "coverage_studies": {"extractval": n_cover, "baseline": len(theirs)},
        "time_per_study_ms": {
            "extractval_fit_study": {"mean": statistics.fmean(fit_ms),
                                     "median": statistics.median(fit_ms)},
            "extractval_to_dict": {"mean": statistics.fmean(dict_ms),
                                   "median": statistics.median(dict_ms)},
            "extractval_fit_study_plus_to_dict": {"mean": statistics.fmean(report_ms),
                                                  "median": statistics.median(report_ms)},
            "baseline": {"mean": statistics.fmean(base_ms),
                         "median": statistics.median(base_ms)},
        },
        "speed_ratio": {
            "fit_study": statistics.fmean(base_ms) / statistics.fmean(fit_ms),
            "fit_study_medians": statistics.median(base_ms) / statistics.median(fit_ms),
            "fit_study_plus_to_dict": statistics.fmean(base_ms) / statistics.fmean(report_ms),
            "fit_study_plus_to_dict_medians": statistics.median(base_ms)
            / statistics.median(report_ms),
        },
        "coverage": {"extractval": _coverage(mine, infos),
                     "baseline": _coverage(theirs, infos[:len(theirs)])},
        "baseline_failed_resamples": sum(r.get("resamples_failed", 0) for r in theirs),
        "extractval_open_interval_ends": sum(
            int(not np.isfinite(r["ci"][k][j])) for r in mine if not r["failed"]
            for k in ("logK", "pKa") for j in (0, 1)),
    }


def _pct(x: float | None) -> str:
    return "-" if x is None else f"{100 * x:.1f} %"


def report(res: dict, quick: bool) -> str:
    t, cov = res["time_per_study_ms"], res["coverage"]
    n_ours, n_base = res["coverage_studies"]["extractval"], res["coverage_studies"]["baseline"]
    half = 1.96 * np.sqrt(0.95 * 0.05 / n_ours)
    lines = [
        f"Side by side on {res['timed_studies']} simulated studies "
        f"({res['design']['runs_per_study']} runs each; acid and base; half both phases, half "
        "recovery only)" + ("  [--quick: too few studies to quote]" if quick else ""),
        f"{'':34}{'extractval':>14}{'curve_fit + bootstrap':>24}",
        f"{'time per study, mean (median)':34}"
        f"{t['extractval_fit_study']['mean']:>7.1f} ({t['extractval_fit_study']['median']:.1f}) ms"
        f"{t['baseline']['mean']:>14.0f} ({t['baseline']['median']:.0f}) ms",
        f"{'speed ratio of means (medians)':34}{res['speed_ratio']['fit_study']:>9.1f}x "
        f"({res['speed_ratio']['fit_study_medians']:.1f}x)",
        f"{'report: fit_study + to_dict()':34}"
        f"{t['extractval_fit_study_plus_to_dict']['mean']:>7.1f} "
        f"({t['extractval_fit_study_plus_to_dict']['median']:.1f}) ms"
        f"   (to_dict {t['extractval_to_dict']['mean']:.1f} ms mean: band, design, map, "
        "verdicts)",
        f"{'  speed ratio of means (medians)':34}"
        f"{res['speed_ratio']['fit_study_plus_to_dict']:>9.1f}x "
        f"({res['speed_ratio']['fit_study_plus_to_dict_medians']:.1f}x)   goal: 20x",
        f"95 % coverage over {n_ours} studies (extractval) and {n_base} (baseline); "
        f"Monte Carlo +/- {100 * half:.1f} % at 95 %:",
    ]
    for group in ("all", "both", "recovery"):
        a, b = cov["extractval"][group], cov["baseline"][group]
        for key in ("logK", "pKa", "P1 recovery", "P2 recovery"):
            label = f"  {key} ({group})"
            lines.append(f"{label:34}{_pct(a[key]):>14}{_pct(b[key]):>24}")
        if a["failed"] or b["failed"]:
            lines.append(f"{'  failed fits':34}{a['failed']:>14}{b['failed']:>24}")
    lines.append(f"baseline resamples whose curve_fit failed (skipped): "
                 f"{res['baseline_failed_resamples']}; extractval open interval ends (log K, "
                 f"pKa): {res['extractval_open_interval_ends']}")
    return "\n".join(lines)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a few studies only (smoke run)")
    ap.add_argument("--jobs", type=int, default=None,
                    help="processes for the untimed baseline coverage studies (default: cores)")
    args = ap.parse_args(argv)
    res = run(QUICK if args.quick else FULL, args.jobs)
    res["quick"] = args.quick
    print(report(res, args.quick))
    OUT.mkdir(exist_ok=True)
    path = OUT / ("bench_baseline.quick.json" if args.quick else "bench_baseline.json")
    path.write_text(json.dumps(res, indent=2, allow_nan=False) + "\n", encoding="utf-8")
    print(f"written {path.relative_to(Path.cwd()) if path.is_relative_to(Path.cwd()) else path}")


if __name__ == "__main__":
    main()
