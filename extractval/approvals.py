"""Review and approval records: the optional approvals.yaml in the studies folder, read with
located errors, and each approval's state against the study's current inputs key.

The file is plain YAML, one list of approvals per study id::

    HPA-2026-014:
      - reviewer: A. Example
        role: QA reviewer
        date: 2026-11-30
        decision: approved
        inputs_key: sv-1a2b3c4d5e6f
        comment: Recovery of P1 accepted for the SOP draft.

Nothing here authenticates anyone: the record is as trustworthy as the folder's access control
and version control.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass
from pathlib import Path

FILE = "approvals.yaml"
DECISIONS = ("approved", "approved with comments", "rejected", "changes requested")
FIELDS = ("reviewer", "role", "date", "decision", "inputs_key", "comment")
REQUIRED = ("reviewer", "role", "date", "decision", "inputs_key")
_KEY = re.compile(r"sv-[0-9a-f]{12}")
STALE = "stale: inputs changed after approval"


@dataclass(frozen=True)
class Approval:
    study: str
    reviewer: str
    role: str
    date: str
    decision: str
    inputs_key: str
    comment: str
    line: int


@dataclass(frozen=True)
class ApprovalRow:
    """One approval as the page shows it: its state against the study's current key."""

    approval: Approval
    current_key: str | None            # None: no such study in the dossier
    state: str                         # "current", STALE, or "no such study in this dossier"


def read_approvals(studies_dir: Path) -> tuple[list[Approval], list[str]]:
    """(approvals, located errors) from ``studies_dir/approvals.yaml``; none when absent."""
    import yaml

    path = Path(studies_dir) / FILE
    if not path.is_file():
        return [], []
    where = f"{path}"
    try:
        root = yaml.compose(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        return [], [f"{where}: not UTF-8 text; expected a YAML file"]
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = f", line {mark.line + 1}" if mark else ""
        return [], [f"{where}{line}: not valid YAML ({getattr(exc, 'problem', exc)})"]
    if root is None:
        return [], []
    errors: list[str] = []
    out: list[Approval] = []
    if not isinstance(root, yaml.MappingNode):
        return [], [f"{where}, line {root.start_mark.line + 1}: found a {_kind(root)}; "
                    "expected study ids, each with a list of approvals"]
    for k_node, v_node in root.value:
        study = str(k_node.value)
        at = f"{where}, line {k_node.start_mark.line + 1}, study '{study}'"
        if not isinstance(v_node, yaml.SequenceNode):
            errors.append(f"{at}: found a {_kind(v_node)}; expected a list of approvals "
                          "(each item starting with '- reviewer: ...')")
            continue
        for item in v_node.value:
            line = item.start_mark.line + 1
            here = f"{where}, line {line}, study '{study}'"
            if not isinstance(item, yaml.MappingNode):
                errors.append(f"{here}: found a {_kind(item)}; expected an approval with "
                              f"keys {', '.join(FIELDS)}")
                continue
            values: dict[str, str] = {}
            n_errors = len(errors)
            for kn, vn in item.value:
                key = str(kn.value)
                kline = kn.start_mark.line + 1
                if key not in FIELDS:
                    errors.append(f"{where}, line {kline}, study '{study}', key '{key}': "
                                  f"unknown key; expected one of {', '.join(FIELDS)}")
                    continue
                if not isinstance(vn, yaml.ScalarNode):
                    errors.append(f"{where}, line {kline}, study '{study}', key '{key}': "
                                  f"found a {_kind(vn)}; expected a single value")
                    continue
                values[key] = str(vn.value).strip()
                problem = _check(key, values[key])
                if problem:
                    errors.append(f"{where}, line {kline}, study '{study}', key '{key}': "
                                  f"{problem}")
            missing = [f for f in REQUIRED if not values.get(f)]
            if missing:
                errors.append(f"{here}: missing {', '.join(missing)}; an approval needs "
                              f"{', '.join(REQUIRED)} (comment is optional)")
                continue
            if len(errors) > n_errors:          # a bad entry is reported, never half-used
                continue
            out.append(Approval(study, values["reviewer"], values["role"], values["date"],
                                values["decision"], values["inputs_key"],
                                values.get("comment", ""), line))
    return out, errors


def _kind(node) -> str:
    import yaml

    if isinstance(node, yaml.MappingNode):
        return "mapping"
    if isinstance(node, yaml.SequenceNode):
        return "list"
    return f"value '{node.value}'"


def _check(key: str, value: str) -> str | None:
    if key == "date":
        try:
            _dt.date.fromisoformat(value)
        except ValueError:
            return f"found '{value}'; expected a date as YYYY-MM-DD"
    if key == "decision" and value not in DECISIONS:
        return f"found '{value}'; expected one of {', '.join(DECISIONS)}"
    if key == "inputs_key" and not _KEY.fullmatch(value):
        return (f"found '{value}'; expected the study's inputs key as the dossier shows it, "
                "sv- and 12 hex digits (e.g. sv-1a2b3c4d5e6f)")
    return None


def approval_rows(approvals: list[Approval], keys: dict[str, str]) -> list[ApprovalRow]:
    """Each approval with its state: current when it names the study's inputs key today."""
    rows = []
    for a in sorted(approvals, key=lambda a: (a.study, a.date, a.line)):
        key = keys.get(a.study)
        if key is None:
            state = "no such study in this dossier"
        elif key == a.inputs_key:
            state = "current"
        else:
            state = STALE
        rows.append(ApprovalRow(a, key, state))
    return rows
