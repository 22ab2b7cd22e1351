"""Report layer without a site: golden Markdown, numbers equal to the dict, escaping, register.

The golden files are rendered from a stored study dict (tests/golden/SYN-GOLD.report.json, the
engine's output for a small synthetic study), so they test the pages, not the fit. Regenerate
both after a deliberate change with ``EXTRACTVAL_UPDATE_GOLDEN=1 python -m pytest
tests/test_report_pages.py`` and read the diff before committing it.
"""

from __future__ import annotations

import copy
import csv
import html
import io
import json
import math
import os
import re
from pathlib import Path

import pytest

from extractval.analysis import fit_study
from extractval.formats import STYLES
from extractval.report.pages import Pages, StudyInput, nav, study_page_path
from extractval.report.plots import plot_name, study_plots
from extractval.report.register import (Dossier, csv_cell, fmt_number, resolve, results_csv,
                                        study_register)
from extractval.report.text import md_text
from extractval.study import Procedure
from site_factory import synthetic_study

ROOT = Path(__file__).resolve().parent.parent
TEMPLATES = ROOT / "site_templates"
GOLDEN = Path(__file__).resolve().parent / "golden"
UPDATE = os.environ.get("EXTRACTVAL_UPDATE_GOLDEN") == "1"
DOSSIER = Dossier("dv-000000000000", "extractval 0.0-test", "2026-01-01 00:00 UTC")
SPAN = re.compile(r'<span class="xv-num"(?: data-study="([^"]*)")? '
                  r'data-src="([^"]*)">([^<]*)</span>')


def assert_numbers_are_the_dicts(section: str, d: dict, styles, more_than: int) -> None:
    """Every traced number of ``section`` (a traced page or part of one) shows the value at its
    pointer in ``d`` in one of the formatter's ``styles`` (a trailing " %" allowed), and there
    are more than ``more_than`` of them."""
    from extractval.report.register import fmt_number, resolve

    spans = SPAN.findall(section)
    assert len(spans) > more_than
    for _, src, text in spans:
        value = resolve(d, html.unescape(src))
        text = html.unescape(text)
        assert any(fmt_number(value, st) in (text, text.removesuffix(" %")) for st in styles), \
            (src, text)


GOLD_PROCEDURES = (
    Procedure("P1", "Three 10 mL portions at pH 10", 10.0, 25.0, (10.0, 10.0, 10.0)),
    Procedure("P2", "One 10 mL portion at pH 5.5", 5.5, 25.0, (10.0,)),
    # P1 and P2 lie outside the runs (pH 6 to 9, ratios 1 and 2): extrapolated; P3 inside
    Procedure("P3", "Two 20 mL portions at pH 8", 8.0, 20.0, (20.0, 20.0)),
)


def gold_study():
    return synthetic_study("SYN-GOLD", title="Golden synthetic study", pH=(6.0, 7.0, 8.0, 9.0),
                           ratios=(1.0, 2.0), replicates=1, seed=7,
                           excluded={"R02": "emulsion"}, procedures=GOLD_PROCEDURES)


def read_golden(path: Path) -> str:
    """A golden file's text; a missing one fails (it is never made up on the spot)."""
    if not path.is_file():
        pytest.fail(f"{path} is missing; create it deliberately with EXTRACTVAL_UPDATE_GOLDEN=1 "
                    "python -m pytest tests/test_report_pages.py, then read it before "
                    "committing it", pytrace=False)
    return path.read_text(encoding="utf-8")


def as_json(d: dict) -> dict:
    """The dict as the site layer sees it (JSON round trip, as from the cache)."""
    return json.loads(json.dumps(d, allow_nan=False))


@pytest.fixture(scope="module")
def gold_dict() -> dict:
    path = GOLDEN / "SYN-GOLD.report.json"
    if UPDATE:
        d = as_json(fit_study(gold_study()).to_dict())
        GOLDEN.mkdir(exist_ok=True)
        path.write_text(json.dumps(d, indent=1, sort_keys=False) + "\n", encoding="utf-8")
    return json.loads(read_golden(path))


@pytest.fixture(scope="module")
def live() -> dict:
    """A fresh fit of a study with markup in its text, for the checks that need no golden."""
    study = synthetic_study("SYN-LIVE", title="<script>alert(1)</script> *bold* | [x](y)",
                            analyte="SYN-<b>B</b>", organic="dichloromethane",
                            scale={"R01": 2.5})    # an outlier, so the screens have a flag
    return as_json(fit_study(study).to_dict())


def gold_files(d: dict) -> dict[str, bytes]:
    s = StudyInput("SYN-GOLD", d, plots=tuple(sorted(study_plots(d))), key="sv-000000000000")
    broken = StudyInput("SYN-BROKEN", None, errors=(
        "error: SYN-BROKEN/runs.csv, line 3, run 'R1', column 'pH': not a number; "
        "found 'seven'; expected a pH between 0 and 14",))
    counts = {"studies_text": "2 (1 not published: input errors)", "runs_text": "8"}
    return Pages(TEMPLATES).dossier_files([s, broken], DOSSIER, counts)


@pytest.mark.parametrize("page", ["studies/SYN-GOLD/index.md", "studies/SYN-BROKEN/index.md",
                                  "index.md", "register.md", "print.md"])
def test_golden_markdown(gold_dict, page):
    files = gold_files(gold_dict)
    golden = GOLDEN / "pages" / page
    text = files[page].decode("utf-8")
    if UPDATE:
        golden.parent.mkdir(parents=True, exist_ok=True)
        golden.write_text(text, encoding="utf-8")
    assert text == read_golden(golden), f"{page} differs from {golden.name}"


def golden_differences(golden, fresh, path: str = "") -> list[str]:
    """Where ``fresh`` differs from ``golden``: keys, strings, booleans and nulls exactly,
    numbers within a tolerance.

    Numbers agree within 2e-5 relative (1e-12 absolute): the dict gives some quantities (the
    design space) to 6 significant digits, one unit of which is up to 1e-5, and the profile
    interval ends are found to about 1e-6 of their distance from the estimate; a change beyond
    that is a change of result. Positive numbers below 1e-6 (fractions left in the water, the
    split limit exp(-D V/V_aq)) are the exponential of a fitted quantity, which magnifies
    that accuracy; they are compared by their logarithm, with the same relative tolerance.
    """
    where = path or "/"
    if isinstance(golden, dict) and isinstance(fresh, dict):
        out = [f"{where}: key {k!r} {'missing' if k in golden else 'new'}"
               for k in sorted(set(golden) ^ set(fresh))]
        for k in golden:
            if k in fresh:
                out += golden_differences(golden[k], fresh[k], f"{path}/{k}")
        return out
    if isinstance(golden, list) and isinstance(fresh, list):
        if len(golden) != len(fresh):
            return [f"{where}: {len(fresh)} items, golden {len(golden)}"]
        return [d for i, (g, f) in enumerate(zip(golden, fresh))
                for d in golden_differences(g, f, f"{path}/{i}")]
    numbers = (int, float)
    if (isinstance(golden, numbers) and isinstance(fresh, numbers)
            and not isinstance(golden, bool) and not isinstance(fresh, bool)):
        if 0 < golden < 1e-6 and 0 < fresh < 1e-6:
            same = math.isclose(math.log(golden), math.log(fresh), rel_tol=2e-5)
        else:
            same = math.isclose(golden, fresh, rel_tol=2e-5, abs_tol=1e-12)
        return [] if same else [f"{where}: {fresh!r}, golden {golden!r}"]
    if type(golden) is not type(fresh) or golden != fresh:
        return [f"{where}: {fresh!r}, golden {golden!r}"]
    return []


def test_golden_differences_finds_each_kind_of_change():
    golden = {"a": 1.0, "b": [1, "x"], "c": None, "d": True, "tiny": 1e-80}
    assert golden_differences(golden, dict(golden, a=1.0 + 1e-6, tiny=1e-80 * (1 + 1e-4))) == []
    changed = dict(golden, a=1.001, b=[1, "y"], c=0, d=1, tiny=2e-80, e=1)
    assert golden_differences(golden, changed) == [
        "/: key 'e' new", "/a: 1.001, golden 1.0", "/b/1: 'y', golden 'x'",
        "/c: 0, golden None", "/d: 1, golden True", "/tiny: 2e-80, golden 1e-80"]
    assert golden_differences(golden, {"a": 1.0}) == [f"/: key {k!r} missing"
                                                      for k in ("b", "c", "d", "tiny")]


def test_stored_dict_still_matches_the_engine(gold_dict):
    """The engine still gives the golden dict, value by value (so the golden pages show
    what the engine gives), and the templates still render it."""
    fresh = as_json(fit_study(gold_study()).to_dict())
    found = golden_differences(gold_dict, fresh)
    assert not found, (f"{len(found)} differences from tests/golden/SYN-GOLD.report.json; if "
                       "the change is deliberate, regenerate it with EXTRACTVAL_UPDATE_GOLDEN=1 "
                       "and read the diff:\n  " + "\n  ".join(found[:30]))
    Pages(TEMPLATES).study_page(StudyInput("SYN-GOLD", fresh), DOSSIER)   # renders


def _strings(d) -> list[str]:
    if isinstance(d, str):
        return [d]
    if isinstance(d, dict):
        return [s for v in d.values() for s in _strings(v)] + [str(k) for k in d]
    if isinstance(d, list):
        return [s for v in d for s in _strings(v)]
    return []


def test_every_number_on_the_page_is_the_dicts(live):
    """Each number span holds the dict's value at its pointer and shows it as formatted;
    outside the spans no decimal number appears except inside text the dict itself holds."""
    one_study = StudyInput("SYN-LIVE", live, key="sv-x", plots=(plot_name("design_space"),))
    page = Pages(TEMPLATES, trace=True).study_page(one_study, DOSSIER)
    published = Pages(TEMPLATES).study_page(one_study, DOSSIER)
    assert "## Design space" in page
    assert SPAN.sub(lambda m: m.group(3), page) == published     # the same page, untraced
    spans = SPAN.findall(page)
    assert len(spans) > 100
    quantities = {n.source: n for q in study_register(live) for n in q.numbers}
    for study, src, shown in spans:
        assert study == ""                          # one study per page: named once, above
        src = html.unescape(src)
        shown = html.unescape(shown)
        expected = resolve(live, src)
        if expected is None:
            assert shown == "open", src
            continue
        # the shown text is the dict's value in one of the formatter's styles: nothing else
        assert any(fmt_number(expected, style) in (shown, shown.removesuffix(" %"))
                   for style in STYLES), (src, shown, expected)
        n = quantities.get(src)
        if n is not None:
            assert fmt_number(n.value, n.style) in (shown, shown.removesuffix(" %")), src
    # every register number is on the register page, most also in the study page's tables
    register = Pages(TEMPLATES, trace=True).register_page([one_study], DOSSIER)
    anchored = {html.unescape(a) for a in re.findall(r'<p class="xv-reg" id="([^"]*)"', register)}
    assert anchored == {n.identifier for n in quantities.values()}
    on_page = {html.unescape(s[1]) for s in spans}
    assert len(set(quantities) & on_page) > 0.8 * len(quantities)
    # citation lines are the register's text, with the inputs key: the same numbers, written
    # by the same formatter; the copy buttons on the study page carry the same lines
    citations = {str(md_text(q.citation(n, DOSSIER.version, DOSSIER.software, "sv-x")))
                 for q in study_register(live) for n in q.numbers}
    assert all("(inputs sv-x)" in c for c in citations)
    shown_citations = re.findall(r'<code class="xv-cite">([^<]*)</code>', register)
    assert len(shown_citations) == len(citations) and set(shown_citations) == citations
    assert "xv-cite" not in page                     # no citation lines in the page's body
    buttons = {html.unescape(c) for c in re.findall(r'data-cite="([^"]*)"', page)}
    assert len(buttons) > 10
    assert buttons <= {html.unescape(c) for c in citations}
    rest = re.sub(r'data-cite="[^"]*"', " ", SPAN.sub(" ", page))
    for text in sorted(set(_strings(live)) | {DOSSIER.version, DOSSIER.software,
                                              DOSSIER.build_date}, key=len, reverse=True):
        rest = rest.replace(str(md_text(text)), " ").replace(text, " ")
    rest = re.sub(r"&#\d+;", " ", rest)                         # character references
    rest = re.sub(r'(id|href|src|title)="[^"]*"', " ", rest)   # anchors, links, file names
    rest = re.sub(r"\([^()]*\.svg\)", " ", rest)
    stray = re.findall(r"\d+\.\d+", rest)
    assert not stray, f"numbers on the page that are not from a span: {stray[:10]}"


def test_flagged_runs_are_shown_beside_the_refit(live):
    flags = live["outlier_screen"]["flags"]
    assert [f["run"] for f in flags][:1] == ["R01"]
    page = Pages(TEMPLATES, trace=True).study_page(StudyInput("SYN-LIVE", live), DOSSIER)
    assert "Runs flagged by the screens" in page
    assert 'data-src="/outlier_screen/without_flagged/parameters/logK/value"' in page
    register = Pages(TEMPLATES).register_page([StudyInput("SYN-LIVE", live)], DOSSIER)
    assert 'id="SYN-LIVE/without_flagged/logK"' in register     # its register line


def test_study_text_is_shown_as_text(live):
    page = Pages(TEMPLATES).study_page(StudyInput("SYN-LIVE", live), DOSSIER)
    assert "<script>" not in page and "<b>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "&#42;bold&#42;" in page and "&#124;" in page and "&#91;x&#93;" in page
    # the solvent is chlorinated: its cautions say so (extractval/solvents.py)
    assert "Dichloromethane is halogenated" in page and "it is the lower layer" in page


def test_identifiers_are_names_not_positions(live):
    ids = [n.identifier for q in study_register(live) for n in q.numbers]
    assert len(ids) == len(set(ids))
    assert "SYN-LIVE/logK" in ids and "SYN-LIVE/pKa/ci95_hi" in ids
    assert "SYN-LIVE/P1/recovery_pct/ci95_lo" in ids
    assert "SYN-LIVE/P2/remaining_after/1" in ids


def test_identifiers_stable_when_a_study_is_added(gold_dict, live):
    """The register rows of one study do not change when another study joins the dossier
    (the dossier version in the citation aside)."""
    pages = Pages(TEMPLATES)
    one = pages.dossier_files([StudyInput("SYN-GOLD", gold_dict)], DOSSIER, {"studies_text": "1",
                                                                            "runs_text": ""})
    two = pages.dossier_files([StudyInput("SYN-LIVE", live), StudyInput("SYN-GOLD", gold_dict)],
                              Dossier("dv-111111111111", DOSSIER.software, DOSSIER.build_date),
                              {"studies_text": "2", "runs_text": ""})

    def gold_rows(files):
        rows = json.loads(files["results.json"])["numbers"]
        return [{k: v for k, v in r.items() if k != "citation"} for r in rows
                if r["study"] == "SYN-GOLD"]

    assert gold_rows(one) == gold_rows(two)
    assert len(gold_rows(one)) > 50
    page1 = one["register.md"].decode()
    page2 = two["register.md"].decode()
    anchors1 = re.findall(r'<p class="xv-reg" id="(SYN-GOLD/[^"]*)"', page1)
    assert len(anchors1) > 50
    assert anchors1 == re.findall(r'<p class="xv-reg" id="(SYN-GOLD/[^"]*)"', page2)
    # the anchors beside the numbers on the study page do not move either
    marks1 = re.findall(r'class="xv-idcell" id="([^"]*)"',
                        one[study_page_path("SYN-GOLD")].decode())
    assert len(marks1) > 5
    assert marks1 == re.findall(r'class="xv-idcell" id="([^"]*)"',
                                two[study_page_path("SYN-GOLD")].decode())


def test_results_json_values_are_the_dicts(gold_dict):
    files = gold_files(gold_dict)
    doc = json.loads(files["results.json"])
    assert doc["dossier_version"] == DOSSIER.version
    assert [s["study"] for s in doc["studies"]] == ["SYN-BROKEN", "SYN-GOLD"]
    by_id = {r["id"]: r for r in doc["numbers"]}
    p = gold_dict["parameters"]["logK"]
    assert by_id["SYN-GOLD/logK"]["value"] == p["value"]
    assert by_id["SYN-GOLD/logK/ci95_lo"]["value"] == p["ci95"][0]
    assert by_id["SYN-GOLD/logK/se"]["value"] == p["se"]
    rec = gold_dict["procedures"][0]["recovery_pct"]
    assert by_id["SYN-GOLD/P1/recovery_pct/ci95_hi"]["value"] == rec["ci95"][1]
    assert by_id["SYN-GOLD/P1/recovery_pct"]["url"] == "register/#SYN-GOLD/P1/recovery_pct"
    assert "dv-000000000000" in by_id["SYN-GOLD/P1/recovery_pct"]["citation"]
    assert "(inputs sv-000000000000)" in by_id["SYN-GOLD/P1/recovery_pct"]["citation"]
    assert by_id["SYN-GOLD/P1/recovery_pct"]["inputs_key"] == "sv-000000000000"
    assert not any(r["study"] == "SYN-BROKEN" for r in doc["numbers"])   # errors, no numbers


def test_results_csv_neutralises_formulas_and_keeps_numbers():
    """Cells starting with = + - @ would run in a spreadsheet (OWASP CSV injection advice,
    from memory); a number such as -1.2 stays a number."""
    rows = [{"id": "=HYPERLINK(\"x\")", "study": "@S", "quantity": "+q", "statistic": "value",
             "value": -1.2, "unit": "", "display": "-1.200", "description": "-2+3",
             "method": None, "citation": "\tx", "inputs_key": "sv-1", "url": "u"}]
    out = list(csv.reader(io.StringIO(results_csv(rows).decode())))
    assert out[1][:5] == ["'=HYPERLINK(\"x\")", "'@S", "'+q", "value", "-1.2"]
    assert out[1][6:10] == ["-1.200", "'-2+3", "", "'\tx"]
    assert float(out[1][4]) == -1.2
    assert csv_cell(3) == 3 and csv_cell("1e-5") == "1e-5"


def test_negative_log_d_is_numeric_in_the_csv(gold_dict):
    """At pH 6 the base is mostly ionised: the log D of a procedure there is below zero."""
    files = gold_files(gold_dict)
    rows = list(csv.DictReader(io.StringIO(files["results.csv"].decode())))
    assert rows and all(not r["value"].startswith("'") for r in rows)
    negative = [r for r in rows if r["value"] and float(r["value"]) < 0]
    assert negative, "expected at least one negative number in the register"
    assert all(not r["id"].startswith("'") for r in rows)


def test_nav_lists_every_page(gold_dict):
    studies = [StudyInput("SYN-GOLD", gold_dict), StudyInput("SYN-BROKEN", None, ("e",))]
    n = nav(studies)
    assert n[0] == {"Overview": "index.md"}
    assert n[1] == {"Studies": [{"SYN-BROKEN": "studies/SYN-BROKEN/index.md"},
                                {"SYN-GOLD": "studies/SYN-GOLD/index.md"}]}


def test_failed_study_page_has_errors_and_no_numbers():
    broken = StudyInput("SYN-BROKEN", None, errors=("error: SYN-BROKEN/runs.csv, line 3: "
                                                     "not a number",))
    page = Pages(TEMPLATES, trace=True).study_page(broken, DOSSIER)
    assert "not a number" in page and "line 3" in page
    assert 'class="xv-num"' not in page and "Number register" not in page


def test_home_page_numbers_are_each_studys(gold_dict, live):
    studies = [StudyInput("SYN-GOLD", gold_dict), StudyInput("SYN-LIVE", live)]
    page = Pages(TEMPLATES, trace=True).index_page(studies, DOSSIER, {"studies_text": "2",
                                                                      "runs_text": "-"})
    spans = SPAN.findall(page)
    assert {s[0] for s in spans} == {"SYN-GOLD", "SYN-LIVE"}
    by_id = {"SYN-GOLD": gold_dict, "SYN-LIVE": live}
    for study, src, shown in spans:
        value = resolve(by_id[study], html.unescape(src))
        shown = html.unescape(shown)                     # "&gt; 99.99" is "> 99.99"
        assert any(fmt_number(value, st) in (shown, shown.removesuffix(" %")) for st in STYLES)
    assert "&lt;script&gt;" in page and "<script>" not in page


def test_design_space_figure_on_the_study_page(live):
    """The map is shown with a caption whose numbers are the dict's; no plot, no section."""
    ds = live["design_space"]
    assert ds["target_pct"] == 95.0 and ds["measured_pH"] == [6.0, 10.0]
    name = plot_name("design_space")
    page = Pages(TEMPLATES, trace=True).study_page(
        StudyInput("SYN-LIVE", live, plots=(name,)), DOSSIER)
    section = page[page.index("## Design space"):page.index("## Next runs")]
    assert f'<img src="{name}"' in section
    assert section.count('data-src="/design_space/target_pct">95</span> %') == 1
    assert 'data-src="/design_space/measured_pH/0">6.00</span>' in section
    assert 'data-src="/design_space/measured_pH/1">10.00</span>' in section
    assert "lower end of the 95 % interval" in section and "extrapolates" in section
    assert "Procedures not marked on the map" not in section     # both of its are on it
    without = Pages(TEMPLATES).study_page(StudyInput("SYN-LIVE", live), DOSSIER)
    assert "## Design space" not in without and name not in without


def test_procedures_off_the_map_are_listed_under_it(live):
    d = json.loads(json.dumps(live))
    d["design_space"]["target_pct"] = None
    d["design_space"]["procedures"][0].update(on_map=False, map_note="5 portions; the map "
                                              "shows 1 to 3")
    page = Pages(TEMPLATES).study_page(
        StudyInput("SYN-LIVE", d, plots=(plot_name("design_space"),)), DOSSIER)
    section = page[page.index("## Design space"):page.index("## Next runs")]
    assert "Procedures not marked on the map" in section
    assert f"- {d['design_space']['procedures'][0]['id']}: 5 portions; the map shows 1 to 3" \
        in section
    assert "no target line is drawn" in section and "The dark line is the target" not in section


def test_no_repeated_blocks_on_a_study_page(live):
    """The cautions once per study (a block under each procedure points to them); the pooled
    RSD and the lack-of-fit F and p once each when the acceptance table judges them; no
    citation lines in the page's body; the runs table in a scroll box."""
    page = Pages(TEMPLATES, trace=True).study_page(StudyInput("SYN-LIVE", live, key="sv-x"),
                                                   DOSSIER)
    assert page.count("## Before working at the bench") == 1
    assert page.count("At the bench for ") == len(live["procedures"]) >= 2
    judged = {v["criterion"] for v in live["verdicts"] if v["value"] is not None}
    for criterion, pointer_ in (("max_rsd_pct", "/repeatability/rsd_pct"),
                                ("lack_of_fit", "/lack_of_fit/F")):
        shown = page.count(f'data-src="{pointer_}"')
        assert shown == (0 if criterion in judged else 1), (criterion, shown)
    assert "xv-cite" not in page and "## Number register" not in page
    if "max_rsd_pct" not in judged:          # judge it, as a study with a target would
        assert live["repeatability"]["rsd_pct"] is not None
        judging = copy.deepcopy(live)
        judging["verdicts"].append({"criterion": "max_rsd_pct", "status": "pass", "limit": 50,
                                    "value": live["repeatability"]["rsd_pct"], "detail": ""})
        again = Pages(TEMPLATES, trace=True).study_page(StudyInput("SYN-LIVE", judging),
                                                        DOSSIER)
        assert again.count('data-src="/repeatability/rsd_pct"') == 0
        assert again.count(f'data-src="/verdicts/{len(judging["verdicts"]) - 1}/value"') == 1
    runs = page.index('<table class="xv-runs">')
    assert page.rfind('<div class="xv-scroll"', 0, runs) > page.rfind("</div>", 0, runs)
