"""Precision groups: which runs are replicates of one another, and the reason for each group.

The one place where runs are grouped for precision (pure error of the lack-of-fit test, Grubbs'
test inside a group, the pooled repeatability RSD): :func:`precision_groups`.

* A ``replicate`` label groups the runs that carry it when they were made at the same nominal
  conditions: the same aqueous and organic volumes (within :data:`VOLUME_TOLERANCE`) and pH
  values no further apart than the pH tolerance (default :data:`PH_TOLERANCE`, settable as
  ``replicate_pH_tolerance`` in study.yaml).
* A label shared by runs at different conditions (sheets often number replicates 1, 2, 3 at
  every pH) does not make a precision group: a warning names the runs and their conditions,
  and those runs are grouped by their nominal conditions instead, like unlabelled runs.
* Unlabelled runs are grouped by nominal conditions: the same volumes, and pH within the
  tolerance of the group's lowest pH (sorted by pH, a group starts at its lowest run and takes
  every run within the tolerance of it, so no group spans more than the tolerance).
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import Problem

#: pH units within which runs count as made at the same nominal pH. A project convention: a
#: calibrated glass electrode reads the pH of a buffer to about 0.02-0.05 units (common
#: practice), so replicates set to one pH land within 0.1 of each other, while runs 0.1 or
#: more apart were meant to be at different pH values.
PH_TOLERANCE = 0.1
#: Relative difference within which two volumes are the same nominal volume (a project
#: convention: class A glassware and pipettes deliver within a few tenths of a percent).
VOLUME_TOLERANCE = 0.01


@dataclass(frozen=True)
class PrecisionGroup:
    """Runs that are replicates of one another: a key (the label, or the conditions), the run
    ids in table order, and the reason they form a group."""

    key: str
    run_ids: tuple[str, ...]
    reason: str


@dataclass(frozen=True)
class Grouping:
    """The precision groups of a set of runs and the warnings found while grouping them."""

    groups: tuple[PrecisionGroup, ...]
    warnings: tuple[Problem, ...] = ()

    def key_of(self) -> dict[str, str]:
        """Run id -> the key of its precision group."""
        return {rid: g.key for g in self.groups for rid in g.run_ids}


def _same_volume(a: float, b: float) -> bool:
    return abs(a - b) <= VOLUME_TOLERANCE * max(abs(a), abs(b))


def _same_volumes(run, other) -> bool:
    return (_same_volume(run.aqueous_mL, other.aqueous_mL)
            and _same_volume(run.organic_mL, other.organic_mL))


def _conditions(run) -> str:
    return f"{run.run_id} (pH {run.pH:g}, {run.aqueous_mL:g} + {run.organic_mL:g} mL)"


def _span(runs) -> str:
    return _span_of([r.pH for r in runs])


def _span_of(pHs: list[float]) -> str:
    lo, hi = min(pHs), max(pHs)
    return f"pH {lo:g}" if lo == hi else f"pH {lo:g} to {hi:g}"


def precision_groups(runs, ph_tolerance: float = PH_TOLERANCE) -> Grouping:
    """The precision groups of ``runs`` (the runs to group: excluded runs are the caller's to
    leave out), with the reason for each and a located warning per label that is shared by
    runs at different conditions. Every run is in exactly one group (possibly alone)."""
    runs = list(runs)
    order = {r.run_id: i for i, r in enumerate(runs)}
    labelled: dict[str, list] = {}
    for r in runs:
        if r.replicate:
            labelled.setdefault(r.replicate, []).append(r)
    groups: list[PrecisionGroup] = []
    warnings: list[Problem] = []
    by_conditions = [r for r in runs if not r.replicate]
    for label, members in labelled.items():
        pHs = [r.pH for r in members]
        spread = max(pHs) - min(pHs)
        consistent = (spread <= ph_tolerance + 1e-9
                      and all(_same_volumes(r, members[0]) for r in members))
        if consistent:
            groups.append(PrecisionGroup(label, tuple(r.run_id for r in members), (
                f"replicate label {label!r}: the same volumes, {_span_of(pHs)} (within "
                f"{ph_tolerance:g})")))
            continue
        first = members[0]
        warnings.append(Problem(
            f"the replicate label {label!r} is shared by runs at different conditions, so "
            "they are not one precision group; they are grouped by their nominal conditions "
            f"instead (the same volumes, pH within {ph_tolerance:g})",
            **first.location.where(), column="replicate",
            found=", ".join(_conditions(r) for r in members),
            expected=f"one label per set of runs at the same volumes and pH within "
                     f"{ph_tolerance:g} (e.g. 'pH7-1:1'), or the cell left empty",
            severity="warning"))
        by_conditions.extend(members)
    groups.extend(_by_conditions(by_conditions, ph_tolerance, order))
    groups.sort(key=lambda g: order[g.run_ids[0]])
    return Grouping(tuple(groups), tuple(warnings))


def _by_conditions(runs, ph_tolerance: float, order: dict) -> list[PrecisionGroup]:
    """Groups of runs at the same volumes and pH within the tolerance (module docstring)."""
    classes: list[list] = []
    for r in sorted(runs, key=lambda r: (r.aqueous_mL, r.organic_mL, order[r.run_id])):
        home = next((c for c in classes if _same_volumes(r, c[0])), None)
        if home is None:
            classes.append([r])
        else:
            home.append(r)
    out = []
    for members in classes:
        members.sort(key=lambda r: (r.pH, order[r.run_id]))
        while members:
            start = members[0].pH
            group = [r for r in members if r.pH <= start + ph_tolerance + 1e-9]
            members = members[len(group):]
            group.sort(key=lambda r: order[r.run_id])
            lo = group[0]
            span = _span(group)
            key = f"{span}, {lo.aqueous_mL:g} + {lo.organic_mL:g} mL"
            reason = (f"no replicate label: the same volumes ({lo.aqueous_mL:g} + "
                      f"{lo.organic_mL:g} mL), {span} (within {ph_tolerance:g})")
            out.append(PrecisionGroup(key, tuple(r.run_id for r in group), reason))
    return out
