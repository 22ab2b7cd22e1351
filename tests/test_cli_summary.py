"""`extractval fit` in text: after the constants, the study's status in the dossier's words,
every verdict (criterion, outcome, value, limit) and each procedure's worst case, all read from
the same report dict that `fit --json` prints; warnings once, with one 'warning:' each, and
repeated input warnings grouped by run."""

from __future__ import annotations

import json
import re

import pytest

from extractval.acceptance import OUTCOME_WORDS
from extractval.cli import main
from extractval.formats import fmt_number
from extractval.report.register import CRITERION_LABELS, criterion_style
from site_factory import synthetic_study, write_study_folder

#: two runs whose organic-phase amount is planted 8 % high: recoveries above 100 % (warnings)
HIGH = {"R29": 1.08, "R30": 1.08}


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    root = tmp_path_factory.mktemp("cli")
    folder = write_study_folder(synthetic_study("SYN-CLI", scale=HIGH), root)
    return folder, (["fit", "--jobs", "1", str(folder)],
                    ["fit", "--json", "--jobs", "1", str(folder)])


def _run(capsys, args):
    status = main(args)
    out, err = capsys.readouterr()
    return status, out, err


def test_text_shows_status_verdicts_and_worst_cases_from_the_json(outputs, capsys):
    folder, (text_args, json_args) = outputs
    status, text, _ = _run(capsys, text_args)
    assert status == 0
    _, js, _ = _run(capsys, json_args)
    d = json.loads(js)
    lines = text.splitlines()
    # the status line comes after the constants and says what the dossier says
    status_at = lines.index(f"   status: {d['status_text']}")
    assert status_at > max(i for i, ln in enumerate(lines) if ln.lstrip().startswith("pKa"))
    verdicts = [("study", v) for v in d["verdicts"]]
    verdicts += [(p["id"], v) for p in d["procedures"] for v in p["verdicts"]]
    assert len(verdicts) >= 4
    for owner, v in verdicts:
        label = CRITERION_LABELS[v["criterion"]]
        hits = [ln for ln in lines if ln.split()[:1] == [owner] and f" {label}" in ln]
        assert len(hits) == 1, (owner, label)
        assert f": {OUTCOME_WORDS[v['status']]};" in hits[0]
        assert "value none" not in hits[0]
        if v["value"] is not None:
            assert f"; value {fmt_number(v['value'], criterion_style(v['criterion']))};" \
                in hits[0]
        else:
            assert "; value " not in hits[0]
    for p in d["procedures"]:
        wc = p["worst_case"]
        line, = [ln for ln in lines if ln.startswith(f"   {p['id']} worst case:")]
        assert f"at pH {fmt_number(wc['pH'], 'pH')}" in line
        assert f"lower 95 % end {fmt_number(wc['recovery_pct'], 'pct')} %" in line


def test_constants_read_as_the_register_writes_them(outputs, capsys):
    """log K and pKa, their SE and interval ends: the CLI line carries the register's digits
    (formats: styles log and se), so the terminal and the dossier never show two SEs."""
    from extractval.report.register import study_register

    _, (text_args, json_args) = outputs
    _, text, _ = _run(capsys, text_args)
    _, js, _ = _run(capsys, json_args)
    d = json.loads(js)
    register = {q.name: q for q in study_register(d)}
    for name in d["parameters"]:
        q = register[name]
        shown = [q.get(s).display for s in ("value", "se", "ci95_lo", "ci95_hi")]
        line, = [ln for ln in text.splitlines() if ln.split()[:1] == [name]]
        assert line.split() == [name, shown[0], "SE", shown[1], "95%", "CI",
                                f"[{shown[2]},", f"{shown[3]}]"]


def test_json_shape_is_unchanged(outputs, capsys):
    folder, (_, json_args) = outputs
    _, js, _ = _run(capsys, json_args)
    d = json.loads(js)
    assert len(js.strip().splitlines()) == 1
    assert {"study", "status", "status_text", "verdicts", "procedures", "warnings",
            "parameters", "run_table"} <= set(d)
    assert not any(w.startswith("warning:") for w in d["warnings"])


def test_no_doubled_warning_prefix_and_repeated_warnings_grouped(outputs, capsys):
    folder, (text_args, _) = outputs
    _, text, _ = _run(capsys, text_args)
    assert "warning: warning:" not in text
    grouped = [ln for ln in text.splitlines() if "recovery above 100 %" in ln]
    assert len(grouped) == 1, grouped
    n = int(re.search(r"in (\d+) runs: ", grouped[0]).group(1))
    assert n >= 2 and "R29 (line " in grouped[0] and "R30 (line " in grouped[0]
    assert grouped[0].count(" (line ") == n
    _, _, err = _run(capsys, ["check", str(folder)])
    assert "warning: warning:" not in err
    grouped = [ln for ln in err.splitlines() if "recovery above 100 %" in ln]
    assert len(grouped) == 1 and re.search(r"R29 \(line \d+, found '10\d\.\d % of spiked'\)",
                                           grouped[0])


def test_check_from_inside_the_study_folder_names_the_study(outputs, capsys, monkeypatch):
    # `extractval check .` run inside the folder: the summary names the study, not ''
    folder, _ = outputs
    monkeypatch.chdir(folder)
    status, out, _ = _run(capsys, ["check", "."])
    assert status == 0
    assert out.startswith(f"{folder.name}: ok (")
