"""The "Solvents compared" page: studies of one analyte in two solvents, from a built set.

The classes of ICH Q3C(R8) are checked against tests/reference/solvents_refs.py (ICH Q3C(R8)
(2021), Tables 2 and 3; from memory, as marked there); every number on the page is checked
against the study dict it names (the page computes nothing).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from extractval.analysis import fit_study
from extractval.formats import fmt_number
from extractval.report.pages import SOLVENTS, Pages, StudyInput, nav
from extractval.report.register import Dossier, resolve, study_register
from extractval.solvent_choice import best_procedure, comparisons, judged_recovery
from extractval.study import Procedure
from reference.solvents_refs import ICH_Q3C_CLASS
from site_factory import synthetic_study

TEMPLATES = Path(__file__).resolve().parent.parent / "site_templates"
DOSSIER = Dossier("dv-000000000000", "extractval 0.0-test", "2026-01-01 00:00 UTC")
SPAN = re.compile(r'<span class="xv-num" data-study="([^"]*)" data-src="([^"]*)">([^<]*)</span>')

# inside the runs' pH (6 to 10) and volume ratios (0.5 to 2): both are judged
PROCS = (Procedure("P1", "One 10 mL portion at pH 7", 7.0, 20.0, (10.0,)),
         Procedure("P2", "Three 10 mL portions at pH 9.5", 9.5, 20.0, (10.0, 10.0, 10.0)))


@pytest.fixture(scope="module")
def built() -> dict[str, dict]:
    """An invented base SYN-S in ethyl acetate and in toluene (different log K), another
    analyte alone, and SYN-S once more in a solvent the table does not hold."""
    studies = [
        synthetic_study("SYN-S-EA", analyte="SYN-S", organic="ethyl acetate", log_k=2.2,
                        seed=11, procedures=PROCS),
        synthetic_study("SYN-S-TOL", analyte="SYN-S", organic="toluene", log_k=1.2, seed=12,
                        procedures=PROCS),
        synthetic_study("SYN-S-X", analyte="SYN-S", organic="cyclopentyl methyl ether",
                        log_k=1.8, seed=13, procedures=PROCS),
        synthetic_study("SYN-T-EA", analyte="SYN-T", organic="ethyl acetate", seed=14),
    ]
    return {s.study_id: json.loads(json.dumps(fit_study(s).to_dict())) for s in studies}


def _inputs(built) -> list[StudyInput]:
    return [StudyInput(k, d, key="sv-test") for k, d in built.items()]


def test_groups_only_analytes_in_two_or_more_solvents(built):
    groups = comparisons(list(built.values()))
    assert [g.analyte for g in groups] == ["SYN-S"]
    assert [r.study for r in groups[0].rows] == ["SYN-S-X", "SYN-S-EA", "SYN-S-TOL"]
    one = {k: v for k, v in built.items() if k in ("SYN-S-EA", "SYN-T-EA")}
    assert comparisons(list(one.values())) == []
    assert not any("Solvents compared" in item for item in nav(_inputs(one)))
    assert {"Solvents compared": SOLVENTS} in nav(_inputs(built))


def test_page_shows_each_study_numbers_and_q3c_class(built):
    files = Pages(TEMPLATES, trace=True).dossier_files(_inputs(built), DOSSIER,
                                                      {"studies_text": "4", "runs_text": "-"})
    page = files[SOLVENTS].decode()
    # every number on the page is the value at its pointer in the study it names
    spans = SPAN.findall(page)
    assert len(spans) >= 12
    for study, ptr, shown in spans:
        assert study in built, study
        value = resolve(built[study], ptr)
        assert shown.replace("&gt;", ">").replace("&lt;", "<").startswith(
            fmt_number(value, "int" if ptr.endswith("ich_q3c_class/value") else
                       _style(ptr))), (study, ptr, shown)
    for sid in ("SYN-S-EA", "SYN-S-TOL", "SYN-S-X"):
        assert f"data-study=\"{sid}\" data-src=\"/parameters/logK/value\"" in page
    assert "SYN-T-EA" not in page
    # the two fitted log K differ as simulated (2.2 and 1.2; from the dicts, not recomputed)
    lk = {k: built[k]["parameters"]["logK"]["value"] for k in ("SYN-S-EA", "SYN-S-TOL")}
    assert lk["SYN-S-EA"] == pytest.approx(2.2, abs=0.05)
    assert lk["SYN-S-TOL"] == pytest.approx(1.2, abs=0.05)
    # ICH Q3C(R8) classes (Tables 2 and 3; from memory, see solvents_refs): ethyl acetate
    # class 3, toluene class 2 with 890 ppm
    row = {sid: _row(page, sid) for sid in ("SYN-S-EA", "SYN-S-TOL", "SYN-S-X")}
    cls, limit = ICH_Q3C_CLASS["ethyl acetate"]
    assert cls == 3 and limit is None
    assert re.search(r"ethyl acetate: class <span[^>]*>3</span>", row["SYN-S-EA"])
    cls, limit = ICH_Q3C_CLASS["toluene"]
    assert (cls, limit) == (2, 890)
    assert re.search(r"toluene: class <span[^>]*>2</span>, limit <span[^>]*>890</span> ppm",
                     row["SYN-S-TOL"])
    assert "not in the table" in row["SYN-S-X"] and "class" not in row["SYN-S-X"].split(
        "not in the table")[0].rsplit("<td>", 1)[-1]
    assert "from memory" in page and "safety data sheet" in page


def _style(ptr: str) -> str:
    return "log" if "/parameters/" in ptr else "pct" if "recovery" in ptr else "g"


def _row(page: str, sid: str) -> str:
    start = page.index(f'href="../studies/{sid}/"')
    return page[start:page.index("</tr>", start)]


def test_best_procedure_is_the_one_meeting_the_target_with_the_higher_lower_end(built):
    d = built["SYN-S-TOL"]
    # log K 1.2, pKa 8: P1 (one 10 mL portion at pH 7) misses 95 %, P2 meets it
    v = {pr["id"]: pr["verdicts"][0]["status"] for pr in d["procedures"]}
    assert v == {"P1": "fail", "P2": "pass"}
    choice = best_procedure(d)
    assert choice.procedure == "P2" and choice.recovery == "P2/recovery_pct"
    assert judged_recovery(d, 0) == "P1/recovery_pct"
    # by hand: two passing procedures, the higher lower end wins; none passing, the same
    fake = {"procedures": [
        {"id": "A", "total_organic_mL": 10, "recovery_pct": {"ci95": [96.0, 97.0]},
         "verdicts": [{"criterion": "recovery_pct", "status": "pass"}]},
        {"id": "B", "total_organic_mL": 30, "recovery_pct": {"ci95": [98.0, 99.0]},
         "verdicts": [{"criterion": "recovery_pct", "status": "pass"}]},
        {"id": "C", "total_organic_mL": 5, "recovery_pct": {"ci95": [99.5, 99.9]},
         "verdicts": [{"criterion": "recovery_pct", "status": "fail"}]}]}
    assert best_procedure(fake).procedure == "B"
    fake["procedures"][1]["recovery_pct"]["ci95"] = [None, 99.0]      # open lower end
    assert best_procedure(fake).procedure == "A"


def test_results_json_names_registered_numbers(built):
    files = Pages(TEMPLATES).dossier_files(_inputs(built), DOSSIER,
                                           {"studies_text": "4", "runs_text": "-"})
    doc = json.loads(files["results.json"])
    ids = {row["id"] for row in doc["numbers"]}
    (group,) = doc["solvent_comparison"]
    assert group["analyte"] == "SYN-S"
    named = []
    for st in group["studies"]:
        named.append(st["logK"])
        named.append(st["best"]["recovery"])
        named.extend(q["name"] for q in st["ich_q3c"])
    assert len(named) == 3 + 3 + 2 and set(named) <= ids
    tol = next(s for s in group["studies"] if s["study"] == "SYN-S-TOL")
    assert tol["ich_q3c"][0]["class"] == 2 and tol["ich_q3c"][0]["limit_ppm"] == 890
    assert "from memory" in tol["ich_q3c"][0]["source"]
    x = next(s for s in group["studies"] if s["study"] == "SYN-S-X")
    assert x["in_table"] is False and x["ich_q3c"] == []


def test_register_holds_the_q3c_class_of_the_study_solvent(built):
    reg = {q.name: q for q in study_register(built["SYN-S-TOL"])}
    assert reg["solvent/toluene/ich_q3c_class"].get("value").value == 2
    assert reg["solvent/toluene/ich_q3c_limit_ppm"].get("value").value == 890
    reg = {q.name for q in study_register(built["SYN-S-X"])}
    assert not any(n.startswith("solvent/") for n in reg)


def test_built_site_has_the_page_in_its_navigation(tmp_path, monkeypatch):
    """A real build (MkDocs, strict) of two study folders of one analyte in two solvents."""
    from extractval import site
    from site_factory import write_study_folder

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    root = tmp_path / "studies"
    write_study_folder(synthetic_study("SYN-S-EA", analyte="SYN-S", organic="ethyl acetate",
                                       log_k=2.2, seed=11, procedures=PROCS), root)
    write_study_folder(synthetic_study("SYN-S-TOL", analyte="SYN-S", organic="toluene",
                                       log_k=1.2, seed=12, procedures=PROCS), root)
    out = tmp_path / "site"
    site.build(root, out, TEMPLATES.parent / "mkdocs.yml", cache_dir=tmp_path / "cache",
               jobs=1)
    page = (out / "solvents" / "index.html").read_text(encoding="utf-8")
    assert "SYN-S-EA" in page and "SYN-S-TOL" in page and "890" in page
    assert 'href="solvents/"' in (out / "index.html").read_text(encoding="utf-8")
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert [g["analyte"] for g in doc["solvent_comparison"]] == ["SYN-S"]
