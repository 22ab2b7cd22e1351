"""System suitability of chromatographic sequences: k, alpha, Rs, N, tailing, injection RSD.

Pure functions and records, no I/O: the suitability table is read in
:mod:`extractval.suitability_input`.

Formulas (United States Pharmacopeia general chapter <621> Chromatography and European
Pharmacopoeia 2.2.46 Chromatographic separation techniques; recalled from memory):

* retention factor  k = (tR - tM) / tM                    (tM: unretained marker)
* selectivity       alpha = k2 / k1                       (k2 of the later peak, so alpha >= 1)
* resolution        Rs = 2 (tR2 - tR1) / (w1 + w2)        (widths at the base, tangent method)
                    Rs = 1.18 (tR2 - tR1) / (w0.5,1 + w0.5,2)   (widths at half height)
* plate number      N = 5.54 (tR / w0.5)^2                (width at half height)
                    N = 16 (tR / w)^2                     (width at the base, when no w0.5)
* tailing factor    T = W0.05 / (2 f)                     (W0.05: width at 5 % of the height,
                                                           f: front half of it, peak start to
                                                           the perpendicular from the apex)
* injection RSD     100 s / mean of the replicate standard injections' responses

Default limits are common practice, not a pharmacopoeial requirement for every method:
Rs >= 2.0 from the nearest neighbour, T <= 2.0, injection RSD <= 2.0 % with at least 5
replicate injections. A study may set its own (``suitability_limits:`` in study.yaml), and
may add a plate-number minimum and a retention-factor minimum, which have no default.

A sequence is judged on its worst injection for each quantity (the smallest Rs, N and k, the
largest T): a passing mean must not hide a failing chromatogram. A criterion whose inputs the
table does not give for a sequence is "not assessed" there; any failing criterion fails the
sequence, and the runs quantified in that sequence are flagged (see analysis.py).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .acceptance import Verdict, _at_least, _at_most, verdict
from .results import clean
from .tables import Location

#: Factor of the half-height resolution formula, 2 sqrt(2 ln 2) / 2 rounded as the
#: pharmacopoeias print it (USP <621>, Ph. Eur. 2.2.46; from memory).
RS_HALF_HEIGHT_FACTOR = 1.18
#: Factor of the half-height plate number, 8 ln 2 rounded as printed (from memory).
N_HALF_HEIGHT_FACTOR = 5.54
#: Factor of the base-width plate number (tangent method, 4 sigma base width; from memory).
N_BASE_FACTOR = 16.0


def retention_factor(tR: float, tM: float) -> float:
    """Retention factor k = (tR - tM) / tM (USP <621>, Ph. Eur. 2.2.46; from memory).

    tR, tM : retention time of the peak and of an unretained marker, [any one time unit]

    >>> retention_factor(6.0, 1.5)
    3.0
    """
    return (tR - tM) / tM


def selectivity(k1: float, k2: float) -> float:
    """Selectivity alpha = k(later peak) / k(earlier peak), so alpha >= 1 (from memory).

    >>> selectivity(3.0, 2.5)
    1.2
    """
    lo, hi = sorted((k1, k2))
    return hi / lo


def resolution_base(t1: float, t2: float, w1: float, w2: float) -> float:
    """Resolution from base widths, Rs = 2 |t2 - t1| / (w1 + w2) (USP <621>; from memory).

    >>> round(resolution_base(5.0, 5.6, 0.25, 0.30), 4)
    2.1818
    """
    return 2.0 * abs(t2 - t1) / (w1 + w2)


def resolution_half_height(t1: float, t2: float, wh1: float, wh2: float) -> float:
    """Resolution from half-height widths, Rs = 1.18 |t2 - t1| / (wh1 + wh2)
    (Ph. Eur. 2.2.46, USP <621>; from memory).

    >>> round(resolution_half_height(5.0, 5.6, 0.15, 0.17), 4)
    2.2125
    """
    return RS_HALF_HEIGHT_FACTOR * abs(t2 - t1) / (wh1 + wh2)


def plate_number_half_height(tR: float, w_half: float) -> float:
    """Plate number N = 5.54 (tR / w0.5)^2 (Ph. Eur. 2.2.46, USP <621>; from memory).

    >>> round(plate_number_half_height(5.0, 0.10))
    13850
    """
    return N_HALF_HEIGHT_FACTOR * (tR / w_half) ** 2


def plate_number_base(tR: float, w_base: float) -> float:
    """Plate number from the base width, N = 16 (tR / w)^2 (USP <621>; from memory).

    >>> plate_number_base(5.0, 0.2)
    10000.0
    """
    return N_BASE_FACTOR * (tR / w_base) ** 2


def tailing_factor(w_005: float, f: float) -> float:
    """Tailing (symmetry) factor T = W0.05 / (2 f) (USP <621>, Ph. Eur. 2.2.46; from memory).

    w_005 : peak width at 5 % of the height; f : its front part, from the peak start to the
    perpendicular from the apex, [time unit]. T = 1 for a symmetric peak, > 1 when it tails.

    >>> tailing_factor(0.30, 0.12)
    1.25
    """
    return w_005 / (2.0 * f)


def rsd_pct(values) -> float:
    """Relative standard deviation in percent, 100 s / mean (s with n - 1).

    >>> round(rsd_pct([100.0, 101.0, 99.0, 100.5, 99.5]), 4)
    0.7906
    """
    v = np.asarray(values, dtype=float)
    return float(100.0 * np.std(v, ddof=1) / np.mean(v))


# -- records -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Injection:
    """One row of the suitability table: one injection of the suitability standard.

    Times and widths in any one time unit (the same for all of them); None where not given.
    """

    sequence: str
    location: Location
    injection: str | None = None
    tR: float | None = None                   # analyte retention time
    tR_neighbour: float | None = None         # nearest neighbouring peak
    tM: float | None = None                   # unretained marker (dead time)
    width_base: float | None = None
    width_base_neighbour: float | None = None
    width_half: float | None = None
    width_half_neighbour: float | None = None
    width_5pct: float | None = None           # W0.05
    front_5pct: float | None = None           # f
    response: float | None = None             # peak area (or height) of the standard

    def quantities(self) -> dict[str, float | None]:
        """k, alpha, Rs, N and T of this injection, None where the inputs are missing."""
        k = k_n = alpha = rs = n = t = None
        rs_method = n_method = None
        if self.tR is not None and self.tM is not None:
            k = retention_factor(self.tR, self.tM)
            if self.tR_neighbour is not None:
                k_n = retention_factor(self.tR_neighbour, self.tM)
                if k > 0 and k_n > 0:
                    alpha = selectivity(k, k_n)
        if self.tR is not None and self.tR_neighbour is not None:
            if self.width_base is not None and self.width_base_neighbour is not None:
                rs, rs_method = resolution_base(self.tR, self.tR_neighbour, self.width_base,
                                                self.width_base_neighbour), "base widths"
            elif self.width_half is not None and self.width_half_neighbour is not None:
                rs = resolution_half_height(self.tR, self.tR_neighbour, self.width_half,
                                            self.width_half_neighbour)
                rs_method = "half-height widths"
        if self.tR is not None and self.width_half is not None:
            n, n_method = plate_number_half_height(self.tR, self.width_half), "half height"
        elif self.tR is not None and self.width_base is not None:
            n, n_method = plate_number_base(self.tR, self.width_base), "base width"
        if self.width_5pct is not None and self.front_5pct is not None:
            t = tailing_factor(self.width_5pct, self.front_5pct)
        return {"retention_factor": k, "retention_factor_neighbour": k_n, "selectivity": alpha,
                "resolution": rs, "resolution_method": rs_method, "plate_number": n,
                "plate_number_method": n_method, "tailing_factor": t}


@dataclass(frozen=True)
class SuitabilityLimits:
    """Acceptance limits of a suitability check; ``from_study`` names those study.yaml set."""

    resolution_min: float | None = 2.0
    tailing_max: float | None = 2.0
    injection_rsd_max_pct: float | None = 2.0
    injections_min: int = 5
    plates_min: float | None = None
    retention_factor_min: float | None = None
    from_study: tuple[str, ...] = ()

    def source(self, name: str) -> str:
        return "study.yaml" if name in self.from_study else "default (common practice)"

    def said(self, name: str) -> str:
        """Who set a limit, as verdict details say it."""
        return "set in study.yaml" if name in self.from_study else "common-practice default"

    def basis(self, name: str) -> str:
        """The verdict basis of a criterion (acceptance.BASES): set by the study or a default."""
        return "target" if name in self.from_study else "default"

    def to_dict(self) -> dict:
        out = {}
        for name in ("resolution_min", "tailing_max", "injection_rsd_max_pct",
                     "injections_min", "plates_min", "retention_factor_min"):
            value = getattr(self, name)
            if value is not None:
                out[name] = {"value": value, "source": self.source(name)}
            elif name in self.from_study:
                out[name] = {"value": None, "source": "switched off in study.yaml"}
        return out


@dataclass(frozen=True)
class SequenceSuitability:
    """The outcome of one sequence: per-injection quantities, worst values, verdicts."""

    sequence: str
    injections: tuple[Injection, ...]
    per_injection: tuple[dict, ...]
    worst: dict
    mean: dict
    injection_rsd_pct: float | None
    n_responses: int
    verdicts: tuple[Verdict, ...] = field(default_factory=tuple)

    @property
    def status(self) -> str:
        statuses = {v.status for v in self.verdicts}
        if "fail" in statuses:
            return "fail"
        return "pass" if "pass" in statuses else "not assessed"

    @property
    def failures(self) -> list[str]:
        return [v.detail for v in self.verdicts if v.status == "fail"]

    def to_dict(self) -> dict:
        return {
            "sequence": self.sequence,
            "status": self.status,
            "n_injections": len(self.injections),
            "n_responses": self.n_responses,
            "injection_rsd_pct": clean(self.injection_rsd_pct),
            "worst": {k: clean(v) if not isinstance(v, str) else v
                      for k, v in self.worst.items()},
            "mean": {k: clean(v) for k, v in self.mean.items()},
            "injections": [
                dict({"injection": inj.injection, "location": str(inj.location),
                      "response": clean(inj.response)},
                     **{k: (clean(v) if not isinstance(v, str) else v) for k, v in q.items()})
                for inj, q in zip(self.injections, self.per_injection)],
            "verdicts": [v.to_dict() for v in self.verdicts],
        }


#: quantities judged on their smallest (True) or largest (False) value over the injections
_WORST_IS_MIN = {"retention_factor": True, "selectivity": True, "resolution": True,
                 "plate_number": True, "tailing_factor": False}


def judge_sequence(sequence: str, injections, limits: SuitabilityLimits) -> SequenceSuitability:
    """Quantities of every injection of one sequence and its verdicts against ``limits``."""
    injections = tuple(injections)
    per = tuple(inj.quantities() for inj in injections)
    worst: dict = {}
    mean: dict = {}
    for name, smallest in _WORST_IS_MIN.items():
        vals = [q[name] for q in per if q[name] is not None]
        if not vals:
            continue
        worst[name] = min(vals) if smallest else max(vals)
        mean[name] = float(np.mean(vals))
    for name in ("resolution_method", "plate_number_method"):
        methods = sorted({q[name] for q in per if q[name]})
        if methods:
            worst[name] = ", ".join(methods)
    responses = [inj.response for inj in injections if inj.response is not None]
    rsd = rsd_pct(responses) if len(responses) >= 2 and np.mean(responses) > 0 else None
    verdicts = _verdicts(sequence, worst, rsd, len(responses), limits)
    return SequenceSuitability(sequence, injections, per, worst, mean, rsd, len(responses),
                               tuple(verdicts))


def _verdicts(seq: str, worst: dict, rsd: float | None, n_resp: int,
              limits: SuitabilityLimits) -> list[Verdict]:
    out: list[Verdict] = []

    def minimum(criterion, name, limit, label, fmt):
        if limit is None:
            return
        src = limits.said(criterion)
        value = worst.get(name)
        if value is None:
            out.append(verdict("not assessed", f"suitability_{criterion}", None, limit,
                               f"the table gives no inputs for {label}",
                               limits.basis(criterion)))
            return
        ok = _at_least(value, limit)
        out.append(verdict("pass" if ok else "fail", f"suitability_{criterion}", value, limit,
                           f"smallest {label} {value:{fmt}} "
                           f"{'>=' if ok else '<'} {limit:g} ({src})", limits.basis(criterion)))

    minimum("resolution_min", "resolution", limits.resolution_min,
            "resolution from the nearest neighbour", ".2f")
    if limits.tailing_max is not None:
        value = worst.get("tailing_factor")
        src = limits.said("tailing_max")
        if value is None:
            out.append(verdict("not assessed", "suitability_tailing_max", None,
                               limits.tailing_max,
                               "the table gives no W0.05 and f",
                               limits.basis("tailing_max")))
        else:
            ok = _at_most(value, limits.tailing_max)
            out.append(verdict("pass" if ok else "fail", "suitability_tailing_max", value,
                               limits.tailing_max,
                               f"largest tailing factor {value:.2f} "
                               f"{'<=' if ok else '>'} {limits.tailing_max:g} ({src})",
                               limits.basis("tailing_max")))
    minimum("plates_min", "plate_number", limits.plates_min, "plate number", ".0f")
    minimum("retention_factor_min", "retention_factor", limits.retention_factor_min,
            "retention factor", ".2f")
    if limits.injection_rsd_max_pct is not None:
        lim = limits.injection_rsd_max_pct
        src = limits.said("injection_rsd_max_pct")
        if n_resp == 0:
            out.append(verdict("not assessed", "suitability_injection_rsd_max_pct", None, lim,
                               "the table gives no replicate injection "
                               "responses", limits.basis("injection_rsd_max_pct")))
        elif rsd is None or n_resp < limits.injections_min:
            out.append(verdict("fail", "suitability_injection_rsd_max_pct", rsd, lim,
                               f"{n_resp} replicate injection(s); at least "
                               f"{limits.injections_min} are needed "
                               f"({limits.said('injections_min')})",
                               limits.basis("injection_rsd_max_pct")))
        else:
            ok = _at_most(rsd, lim)
            out.append(verdict("pass" if ok else "fail", "suitability_injection_rsd_max_pct",
                               rsd, lim, f"RSD of {n_resp} replicate "
                               f"injections {rsd:.2f} % {'<=' if ok else '>'} {lim:g} % "
                               f"({src})", limits.basis("injection_rsd_max_pct")))
    return out


@dataclass(frozen=True)
class SuitabilityReport:
    """Every sequence of the suitability table, judged; and which runs it leaves out."""

    sequences: tuple[SequenceSuitability, ...]
    limits: SuitabilityLimits
    file: str | None = None

    def by_sequence(self) -> dict[str, SequenceSuitability]:
        return {s.sequence: s for s in self.sequences}

    def failed(self) -> dict[str, str]:
        """sequence -> the reason its suitability failed (only failing sequences)."""
        return {s.sequence: "; ".join(s.failures) for s in self.sequences
                if s.status == "fail"}

    def to_dict(self) -> dict:
        return {"file": self.file, "limits": self.limits.to_dict(),
                "sequences": [s.to_dict() for s in self.sequences],
                "failed_sequences": sorted(self.failed())}


def judge_suitability(injections, limits: SuitabilityLimits,
                      file: str | None = None) -> SuitabilityReport:
    """Group the table's injections by sequence (in table order) and judge each sequence."""
    groups: dict[str, list[Injection]] = {}
    for inj in injections:
        groups.setdefault(inj.sequence, []).append(inj)
    return SuitabilityReport(tuple(judge_sequence(s, g, limits) for s, g in groups.items()),
                             limits, file)

