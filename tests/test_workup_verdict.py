"""A procedure with steps is judged (and shown) on the recovery into its work-up's product.

Demo study HPA-2026-021 (invented amine KRV-402 with an acidic by-product): P1 is two 20 mL
portions at pH 11.5; P2 is the same extraction, a 20 mL wash at pH 11.5 and a back-extraction
into two 20 mL portions of pH 3 water. The product fraction is worked by hand from the
single-equilibration relation q = V_aq / (V_aq + D V_org), fresh portions multiplying (IUPAC
Gold Book, "distribution ratio" D01817 and "fraction extracted" F02503), with D from the fit.
"""

from __future__ import annotations

import dataclasses
import json
import shutil
from pathlib import Path

import pytest

from extractval.analysis import fit_study
from extractval.report.pages import Pages, StudyInput, study_page_path
from extractval.report.register import Dossier
from extractval.study import check_study, load_study

ROOT = Path(__file__).resolve().parent.parent
STUDY = ROOT / "studies" / "HPA-2026-021"
DOSSIER = Dossier("dv-000000000000", "extractval 0.0-test", "2026-01-01 00:00 UTC")


@pytest.fixture(scope="module")
def report():
    return fit_study(load_study(STUDY))


def _by_hand(d_ext: float, d_wash: float, d_back: float) -> float:
    """Fraction of a solute in the pH 3 back-extract of P2, by hand."""
    left = (40 / (40 + d_ext * 20)) ** 2            # two 20 mL portions from 40 mL
    kept = d_wash * 40 / (d_wash * 40 + 20)         # 40 mL solvent washed with 20 mL water
    stays = (d_back * 40 / (d_back * 40 + 20)) ** 2  # two 20 mL portions of pH 3 water
    return (1 - left) * kept * (1 - stays)


def test_p2_recovery_is_the_product_formula_not_the_extraction(report):
    d = report.to_dict()
    fit = report.fit
    D = {pH: 10 ** float(fit.log_d(pH)) for pH in (11.5, 3.0)}
    hand = 100 * _by_hand(D[11.5], D[11.5], D[3.0])
    w = next(w for w in d["selectivity"]["procedures"] if w["id"] == "P2")
    assert w["recovery_pct"]["value"] == pytest.approx(hand, rel=1e-9)
    # the wash costs about 20 / (40 D) of the product: visibly below the extraction alone
    single = next(p for p in d["procedures"] if p["id"] == "P2")["recovery_pct"]["value"]
    assert single == pytest.approx(100 * (1 - (40 / (40 + D[11.5] * 20)) ** 2), rel=1e-9)
    assert hand < single - 0.1
    # P2 is judged on the product's recovery (lower 95 % end), P1 on its worst case
    p2 = next(p for p in d["procedures"] if p["id"] == "P2")
    (v,) = [v for v in p2["verdicts"] if v["criterion"] == "recovery_pct"]
    assert v["value"] == w["recovery_pct"]["ci95"][0] and v["limit"] == 90.0
    assert v["status"] == "pass" and "back-extract at pH 3" in v["detail"]
    assert "through all the steps 99.7 %" in p2["reading"]
    p1 = next(p for p in d["procedures"] if p["id"] == "P1")
    assert p1["verdicts"][0]["value"] == p1["worst_case"]["recovery_pct"]
    # no purity target in study.yaml: no purity verdict
    assert not any(v["criterion"] == "purity_pct" for p in d["procedures"]
                   for v in p["verdicts"])


def test_p2_tile_and_index_show_the_work_up_recovery(report):
    d = json.loads(json.dumps(report.to_dict()))
    inputs = [StudyInput(d["study"], d, key="sv-test")]
    files = Pages(ROOT / "site_templates", trace=True).dossier_files(
        inputs, DOSSIER, {"studies_text": "1", "runs_text": "-"})
    page = files[study_page_path(d["study"])].decode()
    tiles = page[page.index('<div class="xv-keys">'):page.index("## System and inputs")]
    k = [p["id"] for p in d["procedures"]].index("P2")
    assert "P2 recovery, work-up" in tiles
    assert f'data-src="/selectivity/procedures/{k}/recovery_pct/value">99.7<' in tiles
    assert f'data-src="/procedures/{k}/recovery_pct/value"' not in tiles
    index = files["index.md"].decode()
    assert "P2 (work-up)" in index
    assert f'data-src="/selectivity/procedures/{k}/recovery_pct/value"' in index


def test_purity_target_is_judged_at_the_lower_end(report, tmp_path):
    d0 = report.to_dict()
    fits = {f["name"]: f for f in report.impurity_fits}
    imp = fits["KRV-402-A"]["solute"]
    fit = report.fit
    # purity by hand for P2: analyte fraction f_a, impurity fraction f_i (its own fit), feed
    # ratio r = 0.05: purity = f_a / (f_a + r f_i)
    Da = {pH: 10 ** float(fit.log_d(pH)) for pH in (11.5, 3.0)}
    Di = {pH: 10 ** float(imp.log_d(pH)[0]) for pH in (11.5, 3.0)}
    fa, fi = _by_hand(Da[11.5], Da[11.5], Da[3.0]), _by_hand(Di[11.5], Di[11.5], Di[3.0])
    w = next(w for w in d0["selectivity"]["procedures"] if w["id"] == "P2")
    assert w["purity_pct"]["value"] == pytest.approx(100 * fa / (fa + 0.05 * fi), rel=1e-9)
    # a target between the two procedures' purities: P2 (washed) meets it, P1 does not
    study = dataclasses.replace(report.study, targets=dataclasses.replace(
        report.study.targets, purity_pct=99.9))
    d = fit_study(study).to_dict()
    got = {p["id"]: next(v for v in p["verdicts"] if v["criterion"] == "purity_pct")
           for p in d["procedures"]}
    p1 = next(w for w in d["selectivity"]["procedures"] if w["id"] == "P1")
    assert got["P2"]["status"] == "pass" and got["P2"]["value"] == w["purity_pct"]["ci95"][0]
    assert got["P1"]["status"] == "fail" and got["P1"]["value"] == p1["purity_pct"]["ci95"][0]
    assert got["P1"]["value"] < 99.9 <= got["P2"]["value"]


def test_purity_target_is_read_from_study_yaml(tmp_path):
    folder = tmp_path / "HPA-2026-021"
    shutil.copytree(STUDY, folder)
    y = folder / "study.yaml"
    y.write_text(y.read_text().replace("  recovery_pct: 90\n",
                                       "  recovery_pct: 90\n  purity_pct: 99.5\n"))
    study, problems = check_study(folder)
    assert study.targets.purity_pct == 99.5
    y.write_text(y.read_text().replace("purity_pct: 99.5", "purity_pct: 150"))
    study, problems = check_study(folder)
    bad = [str(p) for p in problems if p.severity == "error"]
    assert any("purity_pct" in p and "150" in p for p in bad), bad
