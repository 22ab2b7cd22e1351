"""The readable per-study summary printed by ``extractval fit``."""

from __future__ import annotations

from ..errors import grouped_lines
from ..formats import fmt_fraction, fmt_number, fmt_pct
from .register import CRITERION_LABELS, criterion_style, study_status


def fmt(x, digits: int = 3) -> str:
    """A number for people: fixed decimals, 'open' for an open interval end."""
    if x is None:
        return "open"
    return f"{x:.{digits}f}"


def render_summary(d: dict, input_warnings=()) -> str:
    """The study's summary for the terminal, from its report dict.

    ``input_warnings`` are the located Problems behind the first of ``d["warnings"]`` (what
    reading the study found); given, those that say the same thing about several runs are
    printed as one line listing every run (errors.grouped_lines).
    """
    lines = [f"== {d['study']}: {d['title']}",
             f"   analyte {d['analyte']}, model {d['model']}"
             + (f" (requested {d['model_requested']})" if d["model_requested"] != d["model"]
                else "")]
    runs = d["runs"]
    lines.append(f"   runs: {runs['used']} used, {runs['excluded']} excluded, "
                 f"{runs['not_usable']} not usable, {runs['total']} in all")
    for prob in d.get("problems", []):
        lines.append(f"   NOT FITTED: {prob}")
    for name, p in d["parameters"].items():
        lo, hi = p["ci95"]
        # the digits of the register and the study page (formats: log and se styles)
        lines.append(f"   {name:<9} {fmt_number(p['value'], 'log')}  "
                     f"SE {fmt_number(p['se'], 'se')}  "
                     f"95% CI [{fmt_number(lo, 'log')}, {fmt_number(hi, 'log')}]")
    st = d.get("statistics")
    if st:
        lines.append(f"   residual sd {100 * st['residual_sd']:.2f} % per measured amount, "
                     f"{st['dof']} dof; intervals: {st['interval_method']}")
    for pr in d["procedures"]:
        rec = pr["recovery_pct"]
        lo, hi = rec["ci95"]
        one_run = (f", one run [{fmt_pct(rec['pi95'][0])}, {fmt_pct(rec['pi95'][1])}]"
                   if rec.get("pi95") else "")
        left = pr.get("remaining_fraction", {}).get("value")
        left = f", left in the water {fmt_fraction(left)}" if left is not None else ""
        lines.append(f"   {pr['id']}: recovery {fmt_pct(rec['value'])} % "
                     f"[{fmt_pct(lo)}, {fmt_pct(hi)}]{one_run}{left}  ({pr['label']})")
    lines.extend(verdict_lines(d))
    lines.extend(calibration_lines(d.get("calibration")))
    lines.extend(suitability_lines(d.get("suitability")))
    lines.extend(method_lines(d.get("method_recovery"), d.get("precision")))
    lines.extend(warning_lines(d, input_warnings))
    return "\n".join(lines)


def _limit(limit) -> str:
    if limit is None:
        return "none set"
    if isinstance(limit, list):
        return f"{fmt_number(limit[0], 'g')} to {fmt_number(limit[1], 'g')}"
    return fmt_number(limit, "g")


def _verdict_line(owner: str, v: dict) -> str:
    label = CRITERION_LABELS.get(v["criterion"], v["criterion"])
    value = "none" if v.get("value") is None else fmt_number(v["value"],
                                                               criterion_style(v["criterion"]))
    basis = " (default)" if v.get("basis") == "default" else ""
    if v.get("value") is None and v.get("limit") is None and v.get("detail"):
        # a verdict that summarises others (a suitability sequence) says why in its detail
        return (f"     {owner:<6} {label}{basis}: {v.get('outcome') or v['status']}; "
                f"{v['detail']}")
    # a verdict without a value (not judged) shows none rather than 'value none'
    shown = "" if v.get("value") is None else f"value {value}; "
    line = (f"     {owner:<6} {label}{basis}: {v.get('outcome') or v['status']}; "
            f"{shown}limit {_limit(v.get('limit'))}")
    if v["status"] not in ("pass", "fail") and v.get("detail"):
        line += f" ({v['detail']})"
    return line


def verdict_lines(d: dict) -> list[str]:
    """The study's status in the dossier's words, every verdict (criterion, outcome, value,
    limit) and each procedure's worst case; nothing when the study was not fitted."""
    if d.get("problems"):
        return []
    _, text = study_status(d)
    out = [f"   status: {text}"]
    rows = [("study", v) for v in d.get("verdicts") or []]
    rows += [(pr["id"], v) for pr in d["procedures"] for v in pr.get("verdicts") or []]
    if rows:
        out.append("   verdicts (criterion: outcome; value; limit):")
        out.extend(_verdict_line(owner, v) for owner, v in rows)
    for pr in d["procedures"]:
        wc = pr.get("worst_case")
        if not wc:
            continue
        solvent = " + ".join(fmt_number(v, "mL") for v in wc["organic_mL"])
        out.append(f"   {pr['id']} worst case: lower 95 % end "
                   f"{fmt_number(wc.get('recovery_pct'), 'pct')} % (predicted "
                   f"{fmt_number(wc.get('predicted_recovery_pct'), 'pct')} %) at pH "
                   f"{fmt_number(wc['pH'], 'pH')}, {fmt_number(wc['aqueous_mL'], 'mL')} mL "
                   f"water, solvent {solvent} mL"
                   + ("; the pH band reaches beyond the runs (extrapolated)"
                      if wc.get("pH_band_extrapolated") else ""))
    return out


def warning_lines(d: dict, input_warnings=()) -> list[str]:
    """Every warning once, prefixed 'warning:'; repeated input warnings grouped by run."""
    problems = [p for p in input_warnings if p.severity == "warning"]
    texts = {p.text() for p in problems}
    out = [f"   {line}" for line in grouped_lines(problems)]
    out += [f"   warning: {w}" for w in d["warnings"] if w not in texts]
    return out


def calibration_lines(cal: dict | None) -> list[str]:
    """One line per calibration curve: model, weighting, slope, r and the ICH M10 verdict."""
    if not cal:
        return []
    out = []
    for c in cal["curves"]:
        if "acceptance" not in c:
            out.append(f"   calibration {c['id']}: not fitted ({c['problem']})")
            continue
        acc, lin = c["acceptance"], c["linearity"]
        r = lin["correlation_coefficient"]
        out.append(f"   calibration {c['id']}: {c['model']}, weighting {c['weighting']}, "
                   f"slope {c['parameters']['slope']['value']:.4g}, "
                   + (f"r {r:.4f}, " if r is not None else "")
                   + f"{acc['standards_passing']}/{acc['standards']} standards and "
                   f"{acc['levels_passing']}/{acc['levels']} levels pass: {acc['status']}")
    if cal.get("uncertainty"):
        out.append(f"   {cal['uncertainty']['statement']}")
    return out


def suitability_lines(suit: dict | None) -> list[str]:
    """One line per sequence of the suitability table: worst Rs, N, T, injection RSD, verdict
    (and, when it fails, the failing criteria and what happened to its runs)."""
    if not suit:
        return []
    out = []
    for s in suit["sequences"]:
        w = s["worst"]
        parts = []
        if w.get("resolution") is not None:
            parts.append(f"Rs {w['resolution']:.2f}")
        if w.get("plate_number") is not None:
            parts.append(f"N {w['plate_number']:.0f}")
        if w.get("tailing_factor") is not None:
            parts.append(f"tailing {w['tailing_factor']:.2f}")
        if s["injection_rsd_pct"] is not None:
            parts.append(f"injection RSD {s['injection_rsd_pct']:.2f} % (n {s['n_responses']})")
        line = (f"   suitability {s['sequence']}: {s['status']}"
                + (f" ({', '.join(parts)}; worst injection)" if parts else ""))
        if s["runs_left_out"]:
            line += f"; {len(s['runs_left_out'])} run(s) not used"
        out.append(line)
    return out


def _ci(ci, digits: int = 1) -> str:
    lo, hi = ci
    return f"[{fmt(lo, digits)}, {fmt(hi, digits)}]"


def method_lines(m: dict | None, prec: dict | None) -> list[str]:
    """Method recovery per level, matrix factor per level, precision components (their
    verdicts are among the study's, printed by :func:`verdict_lines`)."""
    if not m:
        return []
    st = m["runs"]["by_stage"]
    out = [f"   method runs: {st['pre']} pre, {st['post']} post, {st['neat']} neat used of "
           f"{m['runs']['total']}; values: {m['basis']}"]
    for level, r in m["recovery"].items():
        if "value" not in r:
            out.append(f"   recovery {level}: {r['note']}")
            continue
        rsd = f", RSD {r['rsd_pct']:.1f} %" if r.get("rsd_pct") is not None else ""
        out.append(f"   recovery {level}: {r['value']:.1f} % {_ci(r['ci95'])}{rsd}, "
                   f"{r['n_num']} pre / {r['n_den']} post")
    c = m.get("recovery_consistency")
    if c:
        out.append(f"   recovery across levels: F {c['F']:.2f}, p {c['p_value']:.3g}: "
                   + ("consistent" if c["consistent"] else "differs between levels")
                   + f" at alpha {c['alpha']:g}")
    word = "IS-normalised matrix factor" if m.get("is_normalised") else "matrix factor"
    for level, mf in m["matrix_factor"].items():
        if "lots" not in mf:
            out.append(f"   {word} {level}: {mf['note']}")
            continue
        cv = f", CV {mf['cv_pct']:.1f} %" if mf.get("cv_pct") is not None else ""
        out.append(f"   {word} {level}: {mf['mean']:.3f} {_ci(mf['ci95'], 3)} over "
                   f"{mf['n_lots']} lots{cv}")
    for p in (prec or {}).get("levels", []):
        if p.get("rsd_r_pct") is None:
            out.append(f"   precision {p['level']}: {p.get('note', 'no estimate')}")
            continue
        out.append(f"   precision {p['level']} ({p['grouping'].split(' (')[0]}, "
                   f"{p['n_groups']} groups, {p['n_runs']} runs): RSD_r {p['rsd_r_pct']:.2f} %, "
                   f"RSD_L {p['rsd_L_pct']:.2f} %, RSD_I {p['rsd_I_pct']:.2f} %")
    return out
