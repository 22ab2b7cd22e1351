"""The reading of a procedure: one paragraph saying what its prediction and its verdict mean.

It is written from the procedure's entry of ``StudyReport.to_dict()`` after the verdicts are
in it, so it cannot say anything its verdicts do not: the recovery criterion's outcome is the
verdict's own status, and the numbers are the entry's (the nominal prediction, the range of one
future run, the worst case inside the tolerances), written by :mod:`extractval.formats`.
"""

from __future__ import annotations

from .acceptance import OUTCOME_WORDS
from .formats import fmt_fraction, fmt_number, fmt_pct, in_words, span_words



def _volumes(values) -> str:
    return " + ".join(fmt_number(v, "mL") for v in values)


def _recovery_verdict(pr: dict) -> dict | None:
    for v in pr.get("verdicts") or []:
        if v.get("criterion") == "recovery_pct":
            return v
    return None


def workup_reading(pr: dict, w: dict, target_pct: float | None) -> str:
    """The paragraph of a procedure with steps: the extraction step alone, then the recovery
    into the work-up's product, which the recovery verdict judges, and the verdict's words.

    >>> pr = {"pH": 11.5, "pH_tolerance": 0.2, "aqueous_mL": 40.0, "organic_mL": [20.0, 20.0],
    ...       "recovery_pct": {"value": 99.97, "ci95": [99.96, 99.98]},
    ...       "verdicts": [{"criterion": "recovery_pct", "status": "pass",
    ...                     "detail": "lower 95 % end 99.86 % ... meets the 90 % target"}]}
    >>> w = {"steps": [{"kind": "extract", "pH": 11.5}, {"kind": "wash", "pH": 11.5},
    ...                {"kind": "back-extract", "pH": 3.0}], "product_phase": "aqueous",
    ...      "recovery_pct": {"value": 99.8626, "ci95": [99.8587, 99.8664]}}
    >>> print(workup_reading(pr, w, 90.0))  # doctest: +NORMALIZE_WHITESPACE
    A work-up of 3 steps (extract at pH 11.50, wash at pH 11.50, back-extract at pH 3.00);
    the product is the aqueous phase. The extraction step alone (pH 11.50 ± 0.20, 40 mL of
    aqueous phase, 2 portions of solvent: 20 + 20 mL) is predicted to put 99.97 % of the
    analyte in the solvent (95 % interval 99.96 to 99.98 %); through all the steps 99.86 %
    of it is predicted to reach the product (95 % interval 99.86 to 99.87 %). Recovery
    target 90 %: met (lower 95 % end 99.86 % ... meets the 90 % target).
    """
    steps = ", ".join(f"{st['kind']} at pH {fmt_number(st['pH'], 'pH')}" for st in w["steps"])
    rec, wr = pr["recovery_pct"], w["recovery_pct"]
    lo, hi = rec.get("ci95") or [None, None]
    wlo, whi = wr.get("ci95") or [None, None]
    n = len(pr["organic_mL"])
    tol = pr.get("pH_tolerance")
    text = (f"A work-up of {len(w['steps'])} steps ({steps}); the product is the "
            f"{w['product_phase']} phase. The extraction step alone (pH "
            f"{fmt_number(pr['pH'], 'pH')}" + (f" ± {fmt_number(tol, 'pH')}" if tol else "")
            + f", {fmt_number(pr['aqueous_mL'], 'mL')} mL of aqueous phase, {n} portion"
            f"{'s' if n != 1 else ''} of solvent: {_volumes(pr['organic_mL'])} mL) is "
            f"predicted to put {in_words(fmt_pct(rec['value']))} % of the analyte in the "
            f"solvent (95 % interval {span_words(fmt_pct(lo), fmt_pct(hi), ' %')}); through "
            f"all the steps {in_words(fmt_pct(wr['value']))} % of it is predicted to reach the "
            f"product (95 % interval {span_words(fmt_pct(wlo), fmt_pct(whi), ' %')}).")
    if target_pct is None:
        return text + " No recovery target is set (targets: recovery_pct in study.yaml)."
    v = _recovery_verdict(pr)
    head = f" Recovery target {fmt_number(target_pct, 'g')} %"
    if v is None:
        return text + head + ": not judged."
    outcome = OUTCOME_WORDS.get(v.get("status"), str(v.get("status"))).lower()
    detail = v.get("detail")
    return text + head + f": {outcome}{f' ({detail})' if detail else ''}."


def procedure_reading(pr: dict, target_pct: float | None) -> str:
    """The paragraph under a procedure's heading, from its dict entry with verdicts.

    >>> pr = {"pH": 7.0, "pH_tolerance": 0.2, "aqueous_mL": 25.0, "organic_mL": [5.0, 5.0],
    ...       "recovery_pct": {"value": 95.72, "ci95": [95.50, 95.93], "pi95": [88.3, 103.7]},
    ...       "remaining_fraction": {"value": 0.0428, "ci95": [0.0407, 0.045]},
    ...       "worst_case": {"recovery_pct": 90.77, "pH": 6.8, "aqueous_mL": 25.5,
    ...                      "organic_mL": [4.9, 4.9]},
    ...       "verdicts": [{"criterion": "recovery_pct", "status": "fail", "value": 90.77}]}
    >>> print(procedure_reading(pr, 95.0))  # doctest: +NORMALIZE_WHITESPACE
    At pH 7.00 (± 0.20), extracting 25 mL of aqueous phase with 2 portions of solvent
    (5 + 5 mL) is predicted to recover 95.7 % of the analyte on average (95 % interval 95.5 to
    95.9 %); one future run is expected within 88.3 to 103.7 % (95 % prediction interval). The
    fraction left in the water is 0.0428 (0.0407 to 0.045). Recovery target 95 %: not met. The
    lower 95 % end is 95.5 % at the nominal conditions but 90.8 % at the worst case inside the
    tolerances (pH 6.80, 25.5 mL of water, 4.9 + 4.9 mL of solvent): the procedure meets the
    target only with tighter tolerances.
    """
    n = len(pr["organic_mL"])
    rec = pr["recovery_pct"]
    lo, hi = (rec.get("ci95") or [None, None])
    tol = pr.get("pH_tolerance")
    at = f"At pH {fmt_number(pr['pH'], 'pH')}" + (
        f" (± {fmt_number(tol, 'pH')})" if tol else "")
    text = (f"{at}, extracting {fmt_number(pr['aqueous_mL'], 'mL')} mL of aqueous phase with "
            f"{n} portion{'s' if n != 1 else ''} of solvent ({_volumes(pr['organic_mL'])} mL) "
            f"is predicted to recover {in_words(fmt_pct(rec['value']))} % of the analyte on "
            f"average (95 % interval {span_words(fmt_pct(lo), fmt_pct(hi), ' %')})")
    pi = rec.get("pi95")
    if pi:
        text += (f"; one future run is expected within "
                 f"{span_words(fmt_pct(pi[0]), fmt_pct(pi[1]), ' %')} (95 % prediction "
                 "interval)")
    text += "."
    rem = pr.get("remaining_fraction") or {}
    if rem.get("value") is not None:
        r_lo, r_hi = rem.get("ci95") or [None, None]
        text += (f" The fraction left in the water is {in_words(fmt_fraction(rem['value']))} "
                 f"({span_words(fmt_fraction(r_lo), fmt_fraction(r_hi))}).")
    return text + _target_sentence(pr, target_pct)


def _target_sentence(pr: dict, target_pct: float | None) -> str:
    """What the recovery verdict says, with the nominal and the worst-case lower ends."""
    v = _recovery_verdict(pr)
    if target_pct is None:
        return " No recovery target is set (targets: recovery_pct in study.yaml)."
    head = f" Recovery target {fmt_number(target_pct, 'g')} %"
    if v is None:
        return head + ": not judged."
    status = v.get("status")
    # the verdict's own outcome words (acceptance.OUTCOME_WORDS), inside a sentence
    outcome = OUTCOME_WORDS.get(status, str(status)).lower()
    if status not in ("pass", "fail"):  # not judged (extrapolated, no data), or a later status
        detail = v.get("detail")
        return head + f": {outcome}{f' ({detail})' if detail else ''}."
    lo = (pr["recovery_pct"].get("ci95") or [None])[0]
    wc = pr.get("worst_case") or {}
    worst = wc.get("recovery_pct")
    if lo is None or worst is None:
        detail = v.get("detail")
        return head + f": {outcome}{f' ({detail})' if detail else ''}."
    where = (f"the worst case inside the tolerances (pH {fmt_number(wc['pH'], 'pH')}, "
             f"{fmt_number(wc['aqueous_mL'], 'mL')} mL of water, "
             f"{_volumes(wc['organic_mL'])} mL of solvent)")
    nominal = in_words(fmt_pct(lo))
    worst_text = in_words(fmt_pct(worst))
    if outcome == "met":
        return (head + f": met. The lower 95 % end is {nominal} % at the nominal conditions "
                f"and {worst_text} % at {where}.")
    if lo >= target_pct:
        return (head + f": not met. The lower 95 % end is {nominal} % at the nominal "
                f"conditions but {worst_text} % at {where}: the procedure meets the target "
                "only with tighter tolerances.")
    return (head + f": not met. The lower 95 % end is {nominal} % at the nominal conditions "
            f"and {worst_text} % at {where}.")
