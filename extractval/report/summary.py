"""The readable per-study summary printed by ``extractval fit``."""

from __future__ import annotations

from ..formats import fmt_fraction, fmt_pct


def fmt(x, digits: int = 3) -> str:
    """A number for people: fixed decimals, 'open' for an open interval end."""
    if x is None:
        return "open"
    return f"{x:.{digits}f}"


def render_summary(d: dict) -> str:
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
        lines.append(f"   {name:<9} {fmt(p['value'])}  SE {fmt(p['se'])}  "
                     f"95% CI [{fmt(lo)}, {fmt(hi)}]")
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
    lines.extend(calibration_lines(d.get("calibration")))
    for w in d["warnings"]:
        lines.append(f"   warning: {w}")
    return "\n".join(lines)


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
