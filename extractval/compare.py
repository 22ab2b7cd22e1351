"""What changed between two published versions of the dossier: results.json documents in, a
:class:`Comparison` out (studies, runs and register numbers), rendered by the CLI and the
dossier's Changes page. Pure: no files are read here except by :func:`load_results`."""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from pathlib import Path

#: the fields of a run that results.json keeps; a run whose fields differ is "changed"
RUN_FIELDS = ("pH", "aqueous_mL", "organic_mL", "measurement", "status", "reason", "spiked",
              "found_aqueous", "found_organic", "recovery_pct")


class CompareError(Exception):
    """A side of the comparison could not be read; the message says which file and why."""


@dataclass(frozen=True)
class StudyChange:
    study: str
    old_key: str
    new_key: str


@dataclass(frozen=True)
class RunChange:
    study: str
    run: str
    kind: str                               # "added", "removed", "changed"
    fields: tuple[str, ...] = ()            # for "changed": which fields differ


@dataclass(frozen=True)
class Moved:
    """A register number whose shown value changed, with the old interval's half-width."""

    id: str
    study: str
    old: float | int | None
    new: float | int | None
    old_display: str
    new_display: str
    half_width: float | None                # of the old 95 % interval of its quantity
    beyond: bool                            # |new - old| > half_width


@dataclass
class Comparison:
    old_version: str
    new_version: str
    old_date: str
    new_date: str
    studies_added: list[str] = field(default_factory=list)
    studies_removed: list[str] = field(default_factory=list)
    studies_changed: list[StudyChange] = field(default_factory=list)
    runs: list[RunChange] = field(default_factory=list)
    moved: list[Moved] = field(default_factory=list)
    numbers_added: list[str] = field(default_factory=list)
    numbers_removed: list[str] = field(default_factory=list)

    @property
    def same(self) -> bool:
        return not (self.studies_added or self.studies_removed or self.studies_changed
                    or self.runs or self.moved or self.numbers_added or self.numbers_removed)

    @property
    def n_beyond(self) -> int:
        return sum(m.beyond for m in self.moved)

    def to_dict(self) -> dict:
        return asdict(self) | {"same": self.same, "n_beyond": self.n_beyond}


def _half_widths(rows: list[dict]) -> dict[tuple[str, str], float]:
    ends: dict[tuple[str, str], dict[str, float]] = {}
    for r in rows:
        if r.get("statistic") in ("ci95_lo", "ci95_hi") and isinstance(r.get("value"),
                                                                       (int, float)):
            ends.setdefault((r["study"], r["quantity"]), {})[r["statistic"]] = r["value"]
    return {k: (e["ci95_hi"] - e["ci95_lo"]) / 2 for k, e in ends.items()
            if "ci95_lo" in e and "ci95_hi" in e}


def compare(old: dict, new: dict) -> Comparison:
    """Compare two results.json documents (old first)."""
    c = Comparison(old.get("dossier_version", "?"), new.get("dossier_version", "?"),
                   old.get("build_date", ""), new.get("build_date", ""))
    s_old = {s["study"]: s for s in old.get("studies", [])}
    s_new = {s["study"]: s for s in new.get("studies", [])}
    c.studies_added = sorted(set(s_new) - set(s_old))
    c.studies_removed = sorted(set(s_old) - set(s_new))
    for sid in sorted(set(s_old) & set(s_new)):
        a, b = s_old[sid], s_new[sid]
        if a.get("inputs_key") != b.get("inputs_key"):
            c.studies_changed.append(StudyChange(sid, a.get("inputs_key", ""),
                                                 b.get("inputs_key", "")))
        r_old = {r["run"]: r for r in a.get("runs") or []}
        r_new = {r["run"]: r for r in b.get("runs") or []}
        for run in sorted(set(r_new) - set(r_old)):
            c.runs.append(RunChange(sid, run, "added"))
        for run in sorted(set(r_old) - set(r_new)):
            c.runs.append(RunChange(sid, run, "removed"))
        for run in sorted(set(r_old) & set(r_new)):
            diff = tuple(f for f in RUN_FIELDS if r_old[run].get(f) != r_new[run].get(f))
            if diff:
                c.runs.append(RunChange(sid, run, "changed", diff))
    n_old = {r["id"]: r for r in old.get("numbers", [])}
    n_new = {r["id"]: r for r in new.get("numbers", [])}
    halves = _half_widths(old.get("numbers", []))
    # the numbers of a study added or removed are not listed one by one
    c.numbers_added = sorted(i for i in set(n_new) - set(n_old)
                             if n_new[i]["study"] not in c.studies_added)
    c.numbers_removed = sorted(i for i in set(n_old) - set(n_new)
                               if n_old[i]["study"] not in c.studies_removed)
    for nid in sorted(set(n_old) & set(n_new)):
        a, b = n_old[nid], n_new[nid]
        if a.get("display") == b.get("display") and a.get("value") == b.get("value"):
            continue
        if a.get("display") == b.get("display"):
            continue                        # moved below the shown digits: not a change
        half = halves.get((a["study"], a["quantity"]))
        va, vb = a.get("value"), b.get("value")
        beyond = (half is not None and isinstance(va, (int, float))
                  and isinstance(vb, (int, float)) and abs(vb - va) > half)
        c.moved.append(Moved(nid, a["study"], va, vb, a.get("display", ""),
                             b.get("display", ""), half, beyond))
    return c


def render_text(c: Comparison) -> str:
    """The comparison as the terminal shows it."""
    out = [f"old {c.old_version} ({c.old_date})", f"new {c.new_version} ({c.new_date})"]
    if c.same:
        out.append("no study, run or reported number changed")
        return "\n".join(out)
    for sid in c.studies_added:
        out.append(f"study added    {sid}")
    for sid in c.studies_removed:
        out.append(f"study removed  {sid}")
    for s in c.studies_changed:
        out.append(f"study changed  {s.study}: inputs {s.old_key} -> {s.new_key}")
    for r in c.runs:
        extra = f" ({', '.join(r.fields)})" if r.fields else ""
        out.append(f"run {r.kind:<8}   {r.study} {r.run}{extra}")
    for nid in c.numbers_added:
        out.append(f"number added   {nid}")
    for nid in c.numbers_removed:
        out.append(f"number removed {nid}")
    for m in c.moved:
        mark = "  ** moved more than the old interval's half-width" if m.beyond else ""
        out.append(f"moved {m.id}: {m.old_display} -> {m.new_display}{mark}")
    out.append(f"{len(c.moved)} number(s) moved, {c.n_beyond} beyond the old interval's "
               "half-width")
    return "\n".join(out)


def load_results(path: Path | str) -> dict:
    """A results.json document from a site folder, a version folder (site/versions/dv-... or
    an archive's dv-... folder) or the file itself; a clear error otherwise."""
    p = Path(path)
    f = p
    if p.is_dir():
        f = p / "results.json"
        if not f.is_file():
            held = sorted(d.name for d in p.glob("dv-*") if (d / "results.json").is_file())
            if held:
                raise CompareError(f"{p}: an archive of {len(held)} versions; name one of "
                                   f"them, e.g. {p / held[-1]}")
            raise CompareError(f"{p}: no results.json here; expected a dossier site, a "
                               "version folder (versions/dv-...) or a results.json file")
    try:
        doc = json.loads(f.read_text(encoding="utf-8"))
    except OSError as exc:
        raise CompareError(f"{f}: cannot be read ({exc.strerror or exc})") from None
    except ValueError as exc:
        raise CompareError(f"{f}: not JSON ({exc})") from None
    if not isinstance(doc, dict) or "numbers" not in doc or "dossier_version" not in doc:
        raise CompareError(f"{f}: found JSON without 'dossier_version' and 'numbers'; "
                           "expected the results.json of an extractval dossier")
    return doc


def compare_command(args) -> int:
    """``extractval compare OLD NEW``: exit 0 when read (whatever changed), 1 on bad input."""
    import sys

    try:
        c = compare(load_results(args.old), load_results(args.new))
    except CompareError as exc:
        print(str(exc), file=sys.stderr)
        return 1
    if getattr(args, "json", False):
        print(json.dumps(c.to_dict(), allow_nan=False))
    else:
        print(render_text(c))
    return 0
