"""The next-run table printed by ``extractval advise``: renders ``next_runs`` of the study dict."""

from __future__ import annotations

from ..results import fmt_pct

#: what a reader calls each measurement form
FORM_WORDS = {"both": "both phases", "organic": "organic phase", "aqueous": "aqueous phase",
              "recovery": "recovery_pct"}


def fmt_width(x) -> str:
    """An interval width: two significant digits are what a design decision needs."""
    return "open" if x is None else f"{x:#.2g}"


def run_text(run: dict) -> str:
    return (f"pH {run['pH']:.2f}, O:A {run['ratio']:g}, "
            f"{FORM_WORDS.get(run['form'], run['form'])}")


def batch_text(groups: list[dict]) -> str:
    """The runs of a batch, repeats counted: '3 x pH 4.00, O:A 1, both phases'."""
    return "; ".join(run_text(g) if g["count"] == 1 else f"{g['count']} x {run_text(g)}"
                     for g in groups)


def render_next_runs(d: dict) -> str:
    """The advice for one study as plain text."""
    lines = [f"== {d['study']}: next runs"]
    a = d.get("next_runs")
    if not a:
        why = "; ".join(d.get("problems") or []) or "no fit"
        lines.append(f"   no advice: the study is not fitted ({why})")
        return "\n".join(lines)
    t = a["target"]
    lines.append(f"   target: {t['quantity']} ({t['chosen_by']})")
    lines.append(f"   criterion: {a['criterion']}")
    c = a["candidates"]
    lo, hi = c["pH_range"]
    lines.append(f"   candidates: pH {lo:g} to {hi:g} on a {c['pH_step']:g} grid; O:A "
                 f"{', '.join(f'{x:g}' for x in c['ratios'])}; "
                 f"{', '.join(FORM_WORDS.get(f, f) for f in c['forms'])} ({c['count']} runs)")
    procedure = t["kind"] == "procedure"
    head = f"   {'k':>2}  {'width now':>9}  {'after':>7}  {'shrink':>6}"
    if procedure:
        head += f"  {'lower recovery bound %':>22}"
    lines.append(head + "  runs")
    for b in a["batches"]:
        row = (f"   {b['k']:>2}  {fmt_width(b['width_before']):>9}  "
               f"{fmt_width(b['width_after']):>7}  "
               f"{'' if b['shrink_pct'] is None else format(b['shrink_pct'], '.0f') + ' %':>6}")
        if procedure:
            bounds = (f"{fmt_pct(b['recovery_lower_pct_before'])} -> "
                      f"{fmt_pct(b['recovery_lower_pct_after'])}")
            row += f"  {bounds:>22}"
        lines.append(row + "  " + batch_text(b["groups"]))
    best = ", ".join(f"pH {r['pH']:.2f} ({fmt_width(r['width_after'])})"
                     for r in a["single_runs"])
    lines.append(f"   best single runs (width after): {best}")
    lines.append(f"   how: {a['method_note']}")
    for n in a["notes"]:
        lines.append(f"   note: {n}")
    lines.append("   The advice is about measurements only: plan each run under the SDS of the "
                 "solvent and the lab's approved procedures.")
    return "\n".join(lines)
