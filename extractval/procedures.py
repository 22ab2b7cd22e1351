"""Recovery predictions for proposed procedures, with intervals propagated from the fit.

Recovery after successive fresh portions is a monotone (increasing) function of D at the
procedure's pH, so the 95 % interval of log D at that pH (profile likelihood, which carries the
parameters' correlation) maps end-for-end onto intervals of recovery and remaining fraction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from . import chemistry as chem
from .extrapolation import Span
from .fitting import FitResult
from .results import Estimate, Interval, clean, clean_all
from .study import Procedure


def _ratio(log_d) -> np.ndarray:
    """D = 10^log D. An interval end beyond the float range (a Wald end of a barely bounded
    fit) gives D = inf, complete extraction, instead of an OverflowError."""
    with np.errstate(over="ignore"):
        return np.power(10.0, np.asarray(log_d, dtype=float))


def recovery_pct_from_log_d(log_d, aqueous_mL: float, organic_mL) -> np.ndarray:
    """Percent extracted after the portions, 100 (1 - prod q_i)."""
    if isinstance(log_d, float):
        return _recovery_pct_scalar(log_d, aqueous_mL, organic_mL)
    return 100.0 * (1.0 - chem.remaining_fraction(_ratio(log_d), aqueous_mL, organic_mL))


def _recovery_pct_scalar(log_d: float, aqueous_mL: float, organic_mL) -> float:
    """:func:`recovery_pct_from_log_d` of one number: the same operations as
    chem.remaining_fraction (sum of log1p over the portions, then exp) in scalar arithmetic,
    which a design search calls a hundred times per study at a fifth of the cost of numpy's
    per-call overhead (equal to the array version to the last bit or two)."""
    try:
        d = 10.0 ** log_d
    except OverflowError:
        d = math.inf
    if math.isnan(d):
        return math.nan
    log_q, last, term = 0.0, None, 0.0
    for v in organic_mL:
        if v != last:         # equal portions share one log1p term (the same bits, once)
            term, last = math.log1p(d * float(v) / aqueous_mL), v
        log_q += term
    return 100.0 * (1.0 - math.exp(-log_q))


@dataclass(frozen=True)
class ValueInterval:
    """A derived quantity: value and its 95 % interval (ends None where open)."""

    value: float
    ci95: Interval
    pi95: Interval | None = None      # prediction interval: where one future run should fall

    def to_dict(self) -> dict:
        out = {"value": clean(self.value), "ci95": self.ci95.to_list(),
               "ci95_method": self.ci95.method}
        if self.pi95 is not None:
            out.update(pi95=self.pi95.to_list(), pi95_method=self.pi95.method)
        return out


@dataclass(frozen=True)
class ProcedurePrediction:
    """What a fitted model predicts for one proposed procedure."""

    procedure: Procedure
    log_d: Estimate
    recovery_pct: ValueInterval                # mean recovery: ci95, and pi95 for one run
    remaining_fraction: ValueInterval
    after_portions: tuple[ValueInterval, ...]  # remaining fraction after portion 1, 2, ..., n
    split_limit_remaining: ValueInterval       # same total solvent in ever more portions
    target_recovery_pct: float | None = None

    def to_dict(self) -> dict:
        p = self.procedure
        return {
            "id": p.id,
            "label": p.label,
            "pH": clean(p.pH),
            "aqueous_mL": clean(p.aqueous_mL),
            "organic_mL": [clean(v) for v in p.organic_mL],
            "total_organic_mL": clean(p.total_organic_mL),
            "pH_tolerance": clean(p.pH_tolerance),
            "volume_tolerance_pct": clean(p.volume_tolerance_pct),
            "log_d": self.log_d.to_dict(),
            "recovery_pct": self.recovery_pct.to_dict(),
            "remaining_fraction": self.remaining_fraction.to_dict(),
            "after_portions": [dict(portions=i + 1, **vi.to_dict())
                               for i, vi in enumerate(self.after_portions)],
            "split_limit_remaining_fraction": self.split_limit_remaining.to_dict(),
        }


def predict_procedure(fit: FitResult, procedure: Procedure,
                      target_recovery_pct: float | None = None) -> ProcedurePrediction:
    """Predicted recovery and remaining fraction of ``procedure`` with 95 % intervals."""
    p = procedure
    est = fit.log_d_interval(p.pH)
    method = f"{est.ci95.method}, mapped from log D at pH {p.pH:g}"

    # D at the value and the ends of log D, then the remaining fraction after each portion
    # there; after the last portion it is the procedure's, and the recovery is 100 (1 - q) of
    # it (what recovery_pct_from_log_d computes)
    d = _ratio(_value_and_ends(est))
    after_each = [_at_ends(chem.remaining_fraction(d, p.aqueous_mL, p.organic_mL[:n]), est)
                  for n in range(1, len(p.organic_mL) + 1)]
    q = after_each[-1]
    value, lo, hi = (None if x is None else 100.0 * (1.0 - x) for x in q)
    recovery = ValueInterval(value, Interval(lo, hi, method),
                             _prediction_interval(fit, est, value))
    # the remaining fractions fall as log D rises: the upper end of log D gives their lower end
    remaining = ValueInterval(q[0], Interval(q[2], q[1], method))
    after = [ValueInterval(value, Interval(hi, lo, method)) for value, lo, hi in after_each]
    value, lo, hi = _at_ends(chem.split_limit_remaining(d, p.aqueous_mL, p.total_organic_mL),
                             est)
    split_limit = ValueInterval(value, Interval(hi, lo, method))
    return ProcedurePrediction(p, est, recovery, remaining, tuple(after), split_limit,
                               target_recovery_pct)


def _value_and_ends(est: Estimate) -> np.ndarray:
    """est's value and the two ends of its interval (NaN where open), as one array."""
    lo, hi = est.ci95.lo, est.ci95.hi
    return np.array([est.value, np.nan if lo is None else lo, np.nan if hi is None else hi])


def _at_ends(out: np.ndarray, est: Estimate) -> tuple[float, float | None, float | None]:
    """A quantity computed at :func:`_value_and_ends`, as (value, lo, hi) (None where est's
    interval is open)."""
    return (float(out[0]), None if est.ci95.lo is None else float(out[1]),
            None if est.ci95.hi is None else float(out[2]))


def _prediction_interval(fit: FitResult, est: Estimate, recovery_pct: float) -> Interval:
    """95 % prediction interval of one future run's measured recovery: model uncertainty plus
    assay error (what an SOP's acceptance range for a single run should use).

    In log10 E space the assay adds sd sigma / ln 10 (the fit's error model); the model part is
    the delta-method sd of log E from log D. The two are combined in quadrature, with the t
    quantile of the fit's degrees of freedom (common practice for prediction intervals).
    """
    e = recovery_pct / 100.0
    slope = 1.0 - e                        # d log10 E / d log10 D
    sd = np.hypot(slope * est.se, fit.residual_sd / chem.LN10)
    t = fit.t95
    log_e = np.log10(max(e, 1e-300))
    lo, hi = 100.0 * 10 ** (log_e - t * sd), 100.0 * 10 ** (log_e + t * sd)
    return Interval(lo, hi, "prediction interval of one run (t, model and assay variance "
                            "combined)")


# -- procedure design: band, worst case, steps needed, pH window, design space -------------------
#: largest number of portions an SOP would reasonably prescribe; beyond it, "unreachable"
MAX_PORTIONS = 10
#: spacing of the pH grid on which the log D band is traced, pH units
BAND_STEP = 0.5
#: how far beyond the measured pH range the band (and so the pH window) is traced
BAND_MARGIN = 2.0
#: organic:aqueous ratios of the design-space map (per portion)
MAP_RATIOS = tuple(float(f"{r:.3g}") for r in np.geomspace(0.05, 2.0, 13))
MAP_PORTIONS = (1, 2, 3)


@dataclass(frozen=True)
class LogDBand:
    """log D(pH) with its pointwise 95 % interval on a pH grid (NaN where an end is open)."""

    pH: np.ndarray
    value: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    method: str

    def lower_at(self, pH) -> np.ndarray:
        return np.interp(pH, self.pH, self.lo)


def log_d_band(fit: FitResult, step: float = BAND_STEP) -> LogDBand:
    """Trace log D and its interval over the measured pH range widened by BAND_MARGIN."""
    lo_ph = max(0.0, np.floor((fit.obs.pH.min() - BAND_MARGIN) / step) * step)
    hi_ph = min(14.0, np.ceil((fit.obs.pH.max() + BAND_MARGIN) / step) * step)
    grid = np.round(np.arange(lo_ph, hi_ph + step / 2, step), 6)
    # in order, so that each point's end search starts from its neighbour's ends (or all at
    # once from the traced boundary of the joint region)
    ests = fit.log_d_intervals(grid)

    def arr(get):
        return np.array([np.nan if get(e) is None else get(e) for e in ests], dtype=float)

    return LogDBand(grid, arr(lambda e: e.value), arr(lambda e: e.ci95.lo),
                    arr(lambda e: e.ci95.hi), ests[0].ci95.method)


def _recovery_lower(log_d_lo: float | None, aqueous_mL: float, organic_mL) -> float | None:
    if log_d_lo is None or not math.isfinite(log_d_lo):
        return None
    return float(recovery_pct_from_log_d(log_d_lo, aqueous_mL, organic_mL))


@dataclass(frozen=True)
class ProcedureDesign:
    """Robustness and design figures for one procedure (all lower bounds are 95 % lower ends)."""

    worst_case: dict
    steps_needed: dict | None
    steps_note: str | None
    split: tuple[dict, ...]
    split_limit_recovery_pct: float
    pH_window: tuple[float, float] | None
    pH_window_note: str | None
    pH_window_extrapolated: tuple = ()   # [lo, hi] parts beyond the runs (extrapolation.py)

    def to_dict(self) -> dict:
        return {
            "worst_case": self.worst_case,
            "steps_needed": self.steps_needed,
            "steps_needed_note": self.steps_note,
            "best_split": list(self.split),
            "split_limit_recovery_pct": clean(self.split_limit_recovery_pct),
            "pH_window": None if self.pH_window is None else [clean(x, 6) for x in self.pH_window],
            "pH_window_note": self.pH_window_note,
            "pH_window_extrapolated": [list(x) for x in self.pH_window_extrapolated],
        }


def _outside(full: tuple[float, float], kept: tuple[float, float] | None) -> list[list]:
    """The parts of ``full`` not in ``kept`` (all of it when kept is None), as [lo, hi]."""
    if kept is None:
        return [[clean(full[0], 6), clean(full[1], 6)]]
    out = []
    if kept[0] > full[0] + 1e-9:
        out.append([clean(full[0], 6), clean(kept[0], 6)])
    if kept[1] < full[1] - 1e-9:
        out.append([clean(kept[1], 6), clean(full[1], 6)])
    return out


def worst_case(fit: FitResult, band: LogDBand, p: Procedure, span: Span | None = None) -> dict:
    """Lowest lower-bound recovery with pH anywhere in pH +/- tolerance and volumes off by
    their tolerance in the unfavourable direction (more water, less solvent).

    With ``span`` (the runs' pH span, extrapolation.py) the pH band is clipped to it and the
    part left out is named (``pH_band_extrapolated``); a band wholly outside is searched whole
    and named whole: every number there is an extrapolation.
    """
    f = p.volume_tolerance_pct / 100.0
    aq = p.aqueous_mL * (1 + f)
    org = tuple(v * (1 - f) for v in p.organic_mL)
    full = (max(0.0, p.pH - p.pH_tolerance), min(14.0, p.pH + p.pH_tolerance))
    lo_ph, hi_ph = full
    extrapolated: list[list] = []
    if span is not None:
        kept = span.clip_pH(*full)
        extrapolated = _outside(full, kept)
        if kept is not None:
            lo_ph, hi_ph = kept
    candidates = [lo_ph] + ([p.pH] if lo_ph <= p.pH <= hi_ph else []) + [hi_ph]
    inside = (band.pH > lo_ph) & (band.pH < hi_ph)
    candidates += [float(x) for x in band.pH[inside]]
    # the predicted recovery at every candidate in one call (the array path, as for one pH)
    predicted = recovery_pct_from_log_d(fit.log_d(candidates), aq, org).tolist()
    best = None
    for x, rec in zip(candidates, predicted):
        rec_lo = _recovery_lower(fit.log_d_lower(x), aq, org)
        key = -np.inf if rec_lo is None else rec_lo
        if best is None or key < best[0]:
            best = (key, x, rec_lo, rec)
    _, x, rec_lo, rec = best
    return {"recovery_pct": clean(rec_lo), "predicted_recovery_pct": clean(rec),
            "pH": clean(x, 6), "aqueous_mL": clean(aq), "organic_mL": [clean(v) for v in org],
            "pH_band": [clean(lo_ph, 6), clean(hi_ph, 6)],
            "pH_band_extrapolated": extrapolated}


def steps_needed(fit: FitResult, p: Procedure, target_pct: float) -> tuple[dict | None, str]:
    """Fewest equal portions (of the procedure's mean portion volume) whose lower-bound
    recovery meets the target: n = ceil(ln(1 - T) / ln q1) with q1 from the lower log D."""
    v = p.total_organic_mL / len(p.organic_mL)
    lo = fit.log_d_interval(p.pH).ci95.lo
    if lo is None:
        return None, "the lower end of log D at this pH is open: no number of portions is shown"
    if target_pct >= 100.0:
        return None, "a target of 100 % cannot be met by a finite number of portions"
    q1 = float(p.aqueous_mL / (p.aqueous_mL + 10.0 ** lo * v))
    need = np.log1p(-target_pct / 100.0) / np.log(q1) if q1 < 1.0 else np.inf
    n = max(1, int(np.ceil(need - 1e-9))) if np.isfinite(need) else MAX_PORTIONS + 1
    if n > MAX_PORTIONS:
        return None, (f"more than {MAX_PORTIONS} portions of {v:g} mL would be needed: "
                      "change pH, solvent or volumes")
    return ({"portions": n, "organic_mL_total": clean(n * v), "per_portion_mL": clean(v)},
            f"portions of {v:g} mL at pH {p.pH:g}, judged at the lower 95 % end")


def best_split(fit: FitResult, p: Procedure, n_max: int = MAX_PORTIONS) -> tuple[tuple, float]:
    """The procedure's total solvent split into 1..n_max equal portions, and the split limit."""
    est = fit.log_d_interval(p.pH)
    aq = p.aqueous_mL
    counts = range(1, n_max + 1)
    splits = [[p.total_organic_mL / n] * n for n in counts]
    # (the scalar recovery adds the n equal log1p terms of a split as one: _recovery_pct_scalar)
    rec = [float(recovery_pct_from_log_d(est.value, aq, split)) for split in splits]
    rec_lo = [_recovery_lower(est.ci95.lo, aq, split) for split in splits]
    # the three columns cleaned in one clean_all pass each (clean's rounding, 30 calls fewer)
    per, rec, rec_lo = (clean_all(col) for col in ([s[0] for s in splits], rec, rec_lo))
    rows = [{"portions": n, "per_portion_mL": per[i], "recovery_pct": rec[i],
             "recovery_lo_pct": rec_lo[i]} for i, n in enumerate(counts)]
    limit = 100.0 * (1.0 - chem.split_limit_remaining(10.0 ** est.value, p.aqueous_mL,
                                                       p.total_organic_mL))
    return tuple(rows), limit


def pH_window(fit: FitResult, band: LogDBand, p: Procedure, target_pct: float,
              span: Span | None = None):
    """pH range in which the procedure's volumes meet the target at the lower 95 % end.

    Found on the band's grid, then each edge is refined by root-finding on the exact lower
    bound (profile likelihood) to 0.001 pH. With ``span`` (the runs' pH span) the window is
    clipped to it: the part beyond the runs is named in the note and returned third, never
    given as window.
    """
    window, note = _pH_window(fit, band, p, target_pct)
    if span is None or window is None:
        return window, note, []
    kept = span.clip_pH(*window)
    outside = _outside(window, kept)
    if not outside:
        return window, note, []
    parts = " and ".join(f"pH {a:.2f} to {b:.2f}" for a, b in outside)
    words = (f"the target is also met at the lower 95 % end at {parts}, beyond the runs "
             f"({span.pH_words()}): extrapolated, not part of the window")
    if kept is None:
        return None, (f"the target is met at the lower 95 % end only at {parts}, beyond the "
                      f"runs ({span.pH_words()}): extrapolated, no window is given"), outside
    # the traced-range notes concern the part left out; keep the others
    rest = [n for n in (note or "").split("; ") if n and "edge of the traced range" not in n]
    return kept, "; ".join(rest + [words]), outside


def _pH_window(fit: FitResult, band: LogDBand, p: Procedure, target_pct: float):
    def rec_lo_at(x: float) -> float:
        r = _recovery_lower(fit.log_d_lower(x), p.aqueous_mL, p.organic_mL)
        return -1.0 if r is None else r      # an open lower end meets no target

    # on the band's grid the lower ends are the band's own (the same memoised numbers that
    # log_d_lower gives), so the recoveries there are computed in one vectorised pass
    rec = np.full(band.pH.shape, -1.0)
    closed = np.isfinite(band.lo)
    if closed.any():
        rec[closed] = recovery_pct_from_log_d(band.lo[closed], p.aqueous_mL, p.organic_mL)
    ok = rec >= target_pct
    if not ok.any():
        return None, "the target is not met at the lower 95 % end anywhere in the traced range"
    idx = np.flatnonzero(ok)
    i0, i1 = idx[0], idx[-1]

    def edge(i_in, i_out):
        if i_out < 0 or i_out >= len(rec):
            return float(band.pH[i_in])
        a, b = float(band.pH[i_in]), float(band.pH[i_out])
        g = lambda x: rec_lo_at(x) - target_pct  # noqa: E731
        return float(optimize.brentq(g, min(a, b), max(a, b), xtol=1e-3))

    lo, hi = edge(i0, i0 - 1), edge(i1, i1 + 1)
    notes = []
    if i0 == 0:
        notes.append(f"extends below pH {band.pH[0]:g}, the edge of the traced range")
    if i1 == len(rec) - 1:
        notes.append(f"extends above pH {band.pH[-1]:g}, the edge of the traced range")
    if len(idx) != i1 - i0 + 1:
        notes.append("the target is not met everywhere inside this range")
    return (lo, hi), ("; ".join(notes) or None)


def design_procedure(fit: FitResult, band: LogDBand, p: Procedure,
                     target_pct: float | None, span: Span | None = None) -> ProcedureDesign:
    """Worst case, portions needed, best split and pH window; with ``span`` (the runs' pH
    span) the robustness band and the window are clipped to it, the rest named."""
    split, limit = best_split(fit, p)
    wc = worst_case(fit, band, p, span)
    if target_pct is None:
        note = "no recovery target in study.yaml"
        return ProcedureDesign(wc, None, note, split, limit, None, note)
    steps, steps_note = steps_needed(fit, p, target_pct)
    window, window_note, outside = pH_window(fit, band, p, target_pct, span)
    return ProcedureDesign(wc, steps, steps_note, split, limit, window, window_note,
                           tuple(tuple(x) for x in outside))


def _map_place(p: Procedure, pH_span: tuple[float, float]) -> dict:
    """Where a procedure sits on the design-space map, or why it is not on it.

    The map holds equal portions only. A procedure of unequal portions is placed at its mean
    portion volume: for a given total, equal portions extract the most (the product of the
    q_i is smallest when the V_i are equal), so the map's value there bounds its recovery from
    above.
    """
    n = len(p.organic_mL)
    ratio = p.total_organic_mL / n / p.aqueous_mL
    equal = max(p.organic_mL) - min(p.organic_mL) <= 1e-9 * max(p.organic_mL)
    off = []
    if n not in MAP_PORTIONS:
        off.append(f"{n} portions; the map shows {MAP_PORTIONS[0]} to {MAP_PORTIONS[-1]}")
    if not MAP_RATIOS[0] <= ratio <= MAP_RATIOS[-1]:
        off.append(f"organic:aqueous {ratio:.3g} per portion, outside the map's "
                   f"{MAP_RATIOS[0]:g} to {MAP_RATIOS[-1]:g}")
    if not pH_span[0] <= p.pH <= pH_span[1]:
        off.append(f"pH {p.pH:g}, outside the map's {pH_span[0]:g} to {pH_span[1]:g}")
    if off:
        note = "; ".join(off)
    elif not equal:
        note = ("unequal portions, marked at their mean volume per portion; equal portions of "
                "the same total extract the most, so the map overstates its recovery there")
    else:
        note = None
    return {"id": p.id, "pH": clean(p.pH), "volume_ratio": clean(ratio), "portions": n,
            "equal_portions": equal, "on_map": not off, "map_note": note}


def design_space(band: LogDBand, procedures, target_pct: float | None,
                 aqueous_mL: float = 10.0, *,
                 measured_pH: tuple[float, float] | None = None) -> dict:
    """Lower-bound recovery over pH x organic:aqueous ratio per portion, for 1, 2, 3 portions.

    ``measured_pH`` is the pH span of the runs in the fit: the map beyond it (the band is
    traced BAND_MARGIN further on each side) is an extrapolation of the model.
    """
    # all cells at once: the same operations as recovery_pct_from_log_d, cell by cell. Its
    # log1p terms of n equal portions are one number per cell: that term is computed once and
    # added n times in order, the bits numpy's sum of the n copies gives (it adds fewer than
    # eight terms one by one; MAP_PORTIONS stays far below that)
    closed = np.isfinite(band.lo)
    D = _ratio(np.where(closed, band.lo, 0.0))
    term = np.log1p(D[:, None] * (np.array(MAP_RATIOS) * aqueous_mL) / aqueous_mL)
    recs = []
    for n in MAP_PORTIONS:
        log_q = term
        for _ in range(n - 1):
            log_q = log_q + term
        recs.append(100.0 * (1.0 - np.exp(-log_q)))
    # what clean(x, 6) gives, each table in one clean_all pass (a few hundred cells); no
    # number where the lower end of log D is open
    width = len(MAP_RATIOS)
    closed = closed.tolist()
    table = []
    for rec in recs:
        flat = clean_all(rec.ravel(), 6)
        table.append([flat[i * width:(i + 1) * width] if ok else [None] * width
                      for i, ok in enumerate(closed)])
    span = (float(band.pH[0]), float(band.pH[-1]))
    return {
        "pH": clean_all(band.pH, 6),
        "volume_ratio": list(MAP_RATIOS),
        "portions": list(MAP_PORTIONS),
        "recovery_lo_pct": table,
        "target_pct": target_pct,
        "measured_pH": None if measured_pH is None else [clean(x, 6) for x in measured_pH],
        "meaning": "lower end of the 95 % interval of recovery, equal portions each at the "
                   "given organic:aqueous ratio",
        "procedures": [_map_place(p, span) for p in procedures],
    }
