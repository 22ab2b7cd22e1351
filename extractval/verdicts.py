"""Acceptance criteria of a study (``targets:``) -> verdict rows, and the study's status.

Criteria and their sources:

* ``recovery_pct`` per procedure: the lower end of the 95 % interval of the predicted recovery,
  at the worst pH inside the procedure's pH tolerance and with each volume off by its volume
  tolerance, must reach the target (common practice of robustness by worst case, ICH Q2(R2)).
* ``max_rsd_pct``: pooled repeatability RSD of replicate runs (same pH and ratio), of D where
  both phases were measured, else of the measured fraction.
* ``mass_balance_pct`` (default 90-110 % when both phases are measured; common practice).
* ``ratio_agreement_log`` (default 0.3): at each pH run at several volume ratios, the log D
  values agree within +/- 0.3 (OECD TG 107, 1995: the shake-flask log Pow values should fall
  within a range of +/- 0.3 units).
* ``lack_of_fit``: the lack-of-fit F test with pure error from replicate groups (Montgomery &
  Runger, Applied Statistics and Probability for Engineers, sec. 11-7; NIST/SEMATECH
  e-Handbook of Statistical Methods, sec. 4.4.4) at the 5 % level.
* with ``level:`` given, AOAC Official Methods of Analysis Appendix F: Table A5 recovery range
  for each procedure and HorRat(r) of the repeatability (Annex D, 0.3-1.3).
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np

from . import acceptance as acc
from .acceptance import Verdict, verdict
from .fitting import LOG_D, LOG_E, FitResult
from .results import fmt_pct

DEFAULT_MASS_BALANCE = (90.0, 110.0)
#: runs whose measured pH differ by less than this belong to one nominal pH (pH units)
PH_CLUSTER_GAP = 0.15
#: fractions between which a one-phase run gives a log D precise enough to compare ratios
ONE_PHASE_RANGE = (0.10, 0.90)


def _measured_value(kind: str, y: float) -> float:
    """D for a both-phase run, else the measured fraction (E or q), from y = log10(...)."""
    return float(10.0 ** y)


def replicate_groups(fit: FitResult) -> dict[tuple, list[int]]:
    """Row indices of the fitted runs grouped by replicate label and measurement kind."""
    groups: dict[tuple, list[int]] = defaultdict(list)
    for i, (key, kind) in enumerate(zip(fit.obs.replicate_key, fit.obs.kind)):
        groups[(key, kind)].append(i)
    return dict(groups)


def repeatability(fit: FitResult) -> acc.PooledRSD | None:
    groups = {f"{k[0]} ({k[1]})": [_measured_value(k[1], fit.obs.y[i]) for i in idx]
              for k, idx in replicate_groups(fit).items() if len(idx) >= 2}
    if not groups:
        return None
    return acc.pooled_rsd(groups)


def lack_of_fit(fit: FitResult) -> acc.LackOfFit:
    labels = [f"{k}|{kind}" for k, kind in zip(fit.obs.replicate_key, fit.obs.kind)]
    return acc.lack_of_fit_test(fit.weighted_residuals, labels, fit.p)


def _ph_clusters(pH: np.ndarray) -> list[np.ndarray]:
    order = np.argsort(pH, kind="stable")
    clusters, current = [], [order[0]] if len(order) else []
    for a, b in zip(order, order[1:]):
        if pH[b] - pH[a] > PH_CLUSTER_GAP:
            clusters.append(np.array(current))
            current = []
        current.append(b)
    if current:
        clusters.append(np.array(current))
    return clusters


def ratio_agreement(fit: FitResult, limit: float) -> list[tuple[float, acc.RatioAgreement]]:
    """Per nominal pH with two or more ratios: agreement of log D across ratios.

    Uses runs measured in both phases (log D directly) and one-phase runs whose fraction lies
    between 10 % and 90 % (outside that, log D from one phase is too uncertain to compare:
    a 4 % error on E = 0.95 moves it by about 0.35 log units).
    Each value is moved to the cluster's mean pH along the fitted curve, so that small pH
    differences between flasks do not count as disagreement.
    """
    obs = fit.obs
    log_d = np.full(obs.n, np.nan)
    r = 10.0 ** obs.log_ratio
    for i, (kind, y) in enumerate(zip(obs.kind, obs.y)):
        v = 10.0 ** y
        if kind == LOG_D:
            log_d[i] = y
        elif ONE_PHASE_RANGE[0] < v < ONE_PHASE_RANGE[1]:
            e = v if kind == LOG_E else 1.0 - v
            log_d[i] = np.log10(e / (1.0 - e) / r[i])
    out = []
    for idx in _ph_clusters(obs.pH):
        idx = idx[np.isfinite(log_d[idx])]
        ratios = {float(f"{x:.4g}") for x in r[idx]}
        if len(ratios) < 2:
            continue
        ph_mean = float(np.mean(obs.pH[idx]))
        shift = float(fit.log_d(ph_mean)) - fit.log_d(obs.pH[idx])
        values: dict[float, list[float]] = defaultdict(list)
        for i, s in zip(idx, shift):
            values[float(f"{r[i]:.4g}")].append(float(log_d[i] + s))
        out.append((ph_mean, acc.ratio_agreement(dict(values), limit)))
    return out


def mass_balance(report_runs, lo_hi) -> Verdict | None:
    rows = [(o.run.run_id, o.run.mass_balance_pct) for o in report_runs
            if o.status != "excluded" and o.run.mass_balance_pct is not None]
    if not rows:
        return None
    lo, hi = lo_hi
    outside = [(rid, mb) for rid, mb in rows if not (lo <= mb <= hi)]
    worst = max(rows, key=lambda t: abs(t[1] - 100.0))[1]
    if outside:
        named = ", ".join(f"{rid} ({mb:.1f} %)" for rid, mb in outside)
        return verdict("fail", "mass_balance_pct", worst, (lo, hi),
                       f"{len(outside)} of {len(rows)} runs outside {lo:g}-{hi:g} %: {named}")
    return verdict("pass", "mass_balance_pct", worst, (lo, hi),
                   f"all {len(rows)} runs measured in both phases within {lo:g}-{hi:g} %")


def procedure_verdicts(prediction, design, targets) -> list[Verdict]:
    out = []
    t = targets.recovery_pct
    wc = design.worst_case
    if t is None:
        out.append(verdict("not assessed", "recovery_pct", wc["recovery_pct"], None,
                           "no recovery target in study.yaml"))
    elif wc["recovery_pct"] is None:
        out.append(verdict("fail", "recovery_pct", None, t,
                           "the lower end of the recovery interval is open at the worst case: "
                           "the target cannot be demonstrated"))
    else:
        ok = wc["recovery_pct"] >= t
        solvent = ", ".join(f"{v:g}" for v in wc["organic_mL"])
        detail = (f"lower 95 % end {fmt_pct(wc['recovery_pct'])} % at the worst case inside "
                  f"the tolerances (pH {wc['pH']:g}, {wc['aqueous_mL']:g} mL water, solvent "
                  f"{solvent} mL) {'meets' if ok else 'misses'} the {t:g} % target")
        out.append(verdict("pass" if ok else "fail", "recovery_pct", wc["recovery_pct"], t,
                           detail))
    if targets.level:
        out.append(acc.aoac_recovery_verdict(prediction.recovery_pct.value, targets.level))
    return out


def study_verdicts(fit: FitResult, outcomes, targets) -> tuple[list[Verdict], dict]:
    """Study-level verdicts and the numbers behind them (repeatability, lack of fit, ratios)."""
    out: list[Verdict] = []
    details: dict = {}
    rep = repeatability(fit)
    details["repeatability"] = None if rep is None else rep.to_dict()
    if targets.max_rsd_pct is not None:
        if rep is None or rep.rsd_pct is None:
            out.append(verdict("not assessed", "max_rsd_pct", None, targets.max_rsd_pct,
                               "no replicate runs (same pH and ratio)"))
        else:
            out.append(rep.verdict(targets.max_rsd_pct))
    if targets.level and rep is not None and rep.rsd_pct is not None:
        out.append(acc.horrat_verdict(rep.rsd_pct, targets.level, "r"))
    mb = mass_balance(outcomes, targets.mass_balance_pct or DEFAULT_MASS_BALANCE)
    if mb is not None:
        out.append(mb)
    elif targets.mass_balance_pct is not None:
        out.append(verdict("not assessed", "mass_balance_pct", None, targets.mass_balance_pct,
                           "no run was measured in both phases"))
    limit = targets.ratio_agreement_log if targets.ratio_agreement_log is not None \
        else acc.OECD_107_LOG_LIMIT
    agreements = ratio_agreement(fit, limit)
    details["ratio_agreement"] = [dict(pH=round(ph, 3), **a.to_dict()) for ph, a in agreements]
    if agreements:
        worst_ph, worst = max(agreements, key=lambda t: t[1].max_deviation)
        v = worst.verdict()
        out.append(Verdict(v.criterion, v.status, v.value, v.limit,
                           f"{len(agreements)} pH level(s) with several ratios; worst at pH "
                           f"{worst_ph:.2f}: {v.detail}"))
    elif targets.ratio_agreement_log is not None:
        out.append(verdict("not assessed", "ratio_agreement_log", None, limit,
                           "no pH was run at two or more volume ratios"))
    lof = lack_of_fit(fit)
    details["lack_of_fit"] = lof.to_dict()
    out.append(lof.verdict())
    return out, details


def overall_status(verdicts: list[Verdict]) -> str:
    """fail if any verdict fails; pass if at least one passes and none fails."""
    statuses = {v.status for v in verdicts}
    if "fail" in statuses:
        return "fail"
    if "pass" in statuses:
        return "pass"
    return "not assessed"
