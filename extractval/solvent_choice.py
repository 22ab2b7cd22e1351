"""Studies of one analyte in different solvents, side by side (the "Solvents compared" page).

Studies whose ``analyte.name`` is the same and whose ``system.organic`` differ are grouped.
For each study the group shows its log K with its interval, the best of its procedures for
the recovery target, and the ICH Q3C(R8) class of its solvent (from
:mod:`extractval.solvents`). The input is the study dicts (``StudyReport.to_dict()``); this
module only picks and groups: every number stays in its study's dict and is shown through
that study's register (same identifiers as on the study page), nothing is computed again.

The best procedure of a study, for its recovery target:

1. procedures whose recovery verdict is met come first (without a target, none is judged
   and all stand equal);
2. then the higher lower end of the 95 % interval of the recovery the verdict judges (an
   open end counts as lowest);
3. then less solvent in total, then the order of study.yaml.

The recovery a procedure is judged on is :func:`judged_recovery`: the work-up's recovery
into the product for a procedure with steps, else the one-step extraction's.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

#: how the best procedure is chosen, as the page and results.json state it
BEST_RULE = ("procedures meeting the recovery target first; then the higher lower end of the "
             "95 % interval of the recovery judged (open ends last); then less solvent in "
             "total; then the order of study.yaml")


def _key(text) -> str:
    """Names compared without case and runs of spaces ("Ethyl  acetate" = "ethyl acetate")."""
    return re.sub(r"\s+", " ", str(text or "")).strip().casefold()


def judged_recovery(d: dict, k: int) -> str:
    """Register name of the recovery procedure ``k`` is judged on: ``<id>/workup/recovery_pct``
    for a procedure with steps (its product's recovery), else ``<id>/recovery_pct``."""
    pr = d["procedures"][k]
    workups = (d.get("selectivity") or {}).get("procedures") or []
    w = next((w for w in workups if w.get("id") == pr["id"]), None)
    if w is not None and len(w.get("steps") or ()) > 1:
        return f"{pr['id']}/workup/recovery_pct"
    return f"{pr['id']}/recovery_pct"


def _recovery_entry(d: dict, name: str) -> dict:
    pid, rest = name.split("/", 1)
    if rest.startswith("workup/"):
        w = next(w for w in d["selectivity"]["procedures"] if w["id"] == pid)
        return w["recovery_pct"]
    return next(p for p in d["procedures"] if p["id"] == pid)["recovery_pct"]


def recovery_verdict(pr: dict) -> dict | None:
    return next((v for v in pr.get("verdicts") or [] if v.get("criterion") == "recovery_pct"),
                None)


@dataclass(frozen=True)
class Choice:
    """The best procedure of one study: its id, the recovery judged and its verdict."""

    procedure: str
    index: int
    recovery: str               # register name of the recovery shown, e.g. "P2/workup/..."
    verdict: dict | None        # the recovery verdict as the study dict holds it
    of: int                     # how many procedures the study has

    def to_dict(self) -> dict:
        return {"procedure": self.procedure, "recovery_name": self.recovery,
                "verdict": None if self.verdict is None else self.verdict.get("status"),
                "verdict_outcome": None if self.verdict is None
                else self.verdict.get("outcome") or self.verdict.get("status"),
                "procedures": self.of}


def best_procedure(d: dict) -> Choice | None:
    """The study's best procedure for its recovery target (see the module's rule)."""
    procs = d.get("procedures") or []
    ranked = []
    for k, pr in enumerate(procs):
        name = judged_recovery(d, k)
        lo = (_recovery_entry(d, name).get("ci95") or [None])[0]
        v = recovery_verdict(pr)
        met = v is not None and v.get("status") == "pass"
        ranked.append(((not met, -(lo if lo is not None else float("-inf")),
                        pr.get("total_organic_mL") or 0.0, k), k, name, v))
    if not ranked:
        return None
    _, k, name, v = min(ranked, key=lambda t: t[0])
    return Choice(procs[k]["id"], k, name, v, len(procs))


@dataclass(frozen=True)
class SolventRow:
    """One study of the group: its solvent as named, what the table knows, its best procedure."""

    study: str
    organic: str
    solvents: tuple[dict, ...]       # the table's entries matched (solvents.Solvent.to_dict)
    unmatched: str | None            # part of the name the table does not know
    choice: Choice | None
    fitted: bool

    def q3c(self) -> list[dict]:
        """Each matched solvent's ICH Q3C(R8) class, limit and source, with its register name."""
        out = []
        for s in self.solvents:
            f = s["facts"]
            limit = f.get("ich_q3c_limit_ppm")
            out.append({"solvent": s["name"], "class": f["ich_q3c_class"]["value"],
                        "limit_ppm": None if limit is None else limit["value"],
                        "source": f["ich_q3c_class"]["source"],
                        "name": solvent_quantity(s["name"], "ich_q3c_class")})
        return out

    def to_dict(self) -> dict:
        sid = self.study
        return {"study": sid, "organic": self.organic, "fitted": self.fitted,
                "logK": f"{sid}/logK" if self.fitted else None,
                "best": None if self.choice is None else dict(
                    self.choice.to_dict(), recovery=f"{sid}/{self.choice.recovery}"),
                "ich_q3c": [dict(q, name=f"{sid}/{q['name']}") for q in self.q3c()],
                "in_table": bool(self.solvents), "not_in_table": self.unmatched}


@dataclass(frozen=True)
class SolventComparison:
    """The studies of one analyte in two or more different solvents."""

    analyte: str
    rows: tuple[SolventRow, ...]

    @property
    def anchor(self) -> str:
        return "analyte-" + re.sub(r"[^A-Za-z0-9._-]", "_", self.analyte)

    def to_dict(self) -> dict:
        """For results.json: register identifiers (the values are in its "numbers")."""
        return {"analyte": self.analyte, "best_rule": BEST_RULE,
                "studies": [r.to_dict() for r in self.rows]}


def solvent_quantity(solvent: str, what: str) -> str:
    """Register name of a fact of a matched solvent, e.g. ``solvent/toluene/ich_q3c_class``."""
    return f"solvent/{re.sub(r'[^A-Za-z0-9._-]', '_', solvent)}/{what}"


def comparisons(studies: list[dict]) -> list[SolventComparison]:
    """Groups of studies of one analyte in at least two different solvents, by analyte name;
    in each, the studies by solvent then id. Studies without an analyte name are left out
    (nothing says they are the same substance)."""
    groups: dict[str, list[dict]] = {}
    for d in studies:
        if d is None or not _key(d.get("analyte")):
            continue
        groups.setdefault(_key(d["analyte"]), []).append(d)
    out = []
    for members in groups.values():
        if len({_key((m.get("system") or {}).get("organic")) for m in members}) < 2:
            continue
        members = sorted(members, key=lambda m: (_key((m.get("system") or {}).get("organic")),
                                                 m["study"]))
        rows = []
        for m in members:
            sol = m.get("solvent") or {}
            fitted = not m.get("problems") and "logK" in (m.get("parameters") or {})
            rows.append(SolventRow(m["study"], str((m.get("system") or {}).get("organic")),
                                   tuple(sol.get("solvents") or ()), sol.get("unmatched"),
                                   best_procedure(m) if fitted else None, fitted))
        out.append(SolventComparison(str(members[0]["analyte"]), tuple(rows)))
    return sorted(out, key=lambda c: _key(c.analyte))
