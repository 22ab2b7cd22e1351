"""The solvent table (extractval/solvents.py) against its cited sources, the matching of
solvent names from study.yaml, and the cautions the study page shows."""

from __future__ import annotations

import chemicals
import pytest
from chemicals import miscdata, safety

from extractval.solvents import (SOLVENTS, Fact, ghs_flammable_category, match_solvents,
                                 procedure_cautions, solvent_report)
from extractval.study import Procedure
from reference import solvents_refs as ref

IEC_METHOD = "IEC 60079-20-1 (2010)"
REQUIRED = {"dichloromethane", "chloroform", "ethyl acetate", "diethyl ether",
            "methyl tert-butyl ether", "toluene", "n-heptane", "n-hexane", "1-butanol",
            "isopropyl acetate", "2-methyltetrahydrofuran", "1-octanol"}


def test_table_shape_and_every_value_has_a_source():
    assert REQUIRED <= set(SOLVENTS) and len(SOLVENTS) == 13
    for s in SOLVENTS.values():
        for name, value in vars(s).items():
            if isinstance(value, Fact):
                assert value.source.strip(), (s.name, name)
        for topic, note in s.notes:
            assert topic and note.source.strip(), (s.name, topic)
        assert s.cas == chemicals.CAS_from_any(s.name), s.name     # the CAS is this solvent's


@pytest.mark.parametrize("name", sorted(SOLVENTS))
def test_density_and_boiling_point_are_the_crc_handbooks(name):
    """CRC Handbook, Physical Constants of Organic Compounds (chemicals.miscdata), at the
    table's precision: density to 0.001 g/mL, boiling point to 0.1 degC."""
    s = SOLVENTS[name]
    row = miscdata.CRC_organic_data.loc[s.cas]
    assert s.density_g_mL.value == pytest.approx(row["rho"] / 1000.0, abs=5e-4)
    assert s.boiling_point_C.value == pytest.approx(row["Tb"] - 273.15, abs=0.05)


@pytest.mark.parametrize("name", sorted(SOLVENTS))
def test_flash_point_is_iec_60079_20_1_where_listed(name):
    s = SOLVENTS[name]
    if IEC_METHOD in safety.T_flash_methods(s.cas):
        assert s.flash_point_C.source.startswith("IEC 60079-20-1")
        assert s.flash_point_C.value == pytest.approx(
            safety.T_flash(s.cas, method=IEC_METHOD) - 273.15, abs=0.05)
    else:
        assert "from memory" in s.flash_point_C.source


def test_ghs_categories_follow_the_criteria_and_match_the_harmonised_ones():
    # UN GHS Table 2.6.1 edges (from memory): flash point 23 and 60 and 93 degC, boiling 35 degC
    assert ghs_flammable_category(22.9, 35.0) == 1 and ghs_flammable_category(22.9, 35.1) == 2
    assert ghs_flammable_category(23.0, 80) == 3 and ghs_flammable_category(60.0, 80) == 3
    assert ghs_flammable_category(60.1, 150) == 4 and ghs_flammable_category(93.1, 200) is None
    for name, category in ref.CLP_FLAMMABLE_CATEGORY.items():
        assert SOLVENTS[name].ghs_flammable_category == category, name
    for name in ref.GHS_CATEGORY_4:
        assert SOLVENTS[name].ghs_flammable_category == 4, name


def test_ich_q3c_classes_halogens_peroxides_and_layers():
    for name, (cls, limit) in ref.ICH_Q3C_CLASS.items():
        s = SOLVENTS[name]
        assert s.ich_q3c_class.value == cls, name
        assert (s.ich_q3c_limit_ppm.value if s.ich_q3c_limit_ppm else None) == limit, name
    for s in SOLVENTS.values():
        assert s.halogenated.value == (s.name in ref.HALOGENATED), s.name
        assert s.peroxide_former.value == ref.PEROXIDE_FORMERS.get(s.name, "no"), s.name
        assert s.layer == ("lower" if s.name in ref.LOWER_LAYER else "upper"), s.name


@pytest.mark.parametrize("text, names, presaturated", [
    ("Ethyl acetate", ["ethyl acetate"], False),
    ("EtOAc, pre-saturated with water", ["ethyl acetate"], True),
    ("dichloromethane (DCM)", ["dichloromethane"], False),
    ("Methylene chloride", ["dichloromethane"], False),
    ("n-heptane/MTBE 4:1 (v/v), pre-saturated with buffer",
     ["n-heptane", "methyl tert-butyl ether"], True),
    ("tert-butyl methyl ether, water-saturated", ["methyl tert-butyl ether"], True),
    ("cyclohexane", ["cyclohexane"], False),                 # not n-hexane
    ("n\u2011hexane", ["n-hexane"], False),                  # a non-breaking hyphen
    ("isopropyl acetate", ["isopropyl acetate"], False),     # not ethyl acetate
    ("2-MeTHF", ["2-methyltetrahydrofuran"], False),
    ("n-Octanol (water saturated)", ["1-octanol"], True),
    ("chloroform stabilised with amylene", ["chloroform"], False),
])
def test_solvent_names_are_matched_robustly(text, names, presaturated):
    m = match_solvents(text)
    assert [s.name for s in m.solvents] == names
    assert m.unmatched is None and m.presaturated == presaturated


def test_an_unknown_solvent_gets_the_general_cautions_and_says_so():
    r = solvent_report("anisole", [Procedure("P1", "x", 7.0, 25.0, (10.0,))])
    assert not r["in_table"] and r["solvents"] == []
    assert len(r["cautions"]) == 1 and "not in the tool's table" in r["cautions"][0]["text"]
    part = solvent_report("heptane + diisopropyl ether")
    assert part["unmatched"] == "diisopropyl ether" and "not in the tool's table" in \
        part["cautions"][0]["text"]


def test_cautions_follow_the_solvent_and_the_procedure():
    dcm = solvent_report("dichloromethane")["cautions"]
    dcm = [f"{c['topic']}: {c['text']}" for c in dcm]
    assert any("lower layer" in c for c in dcm) and any("halogenated waste" in c for c in dcm)
    assert not any("Peroxides" in c for c in dcm)
    ether = [f"{c['topic']}: {c['text']}" for c in solvent_report("diethyl ether")["cautions"]]
    assert any("explosive peroxides" in c for c in ether)
    assert any("GHS category 1" in c for c in ether) and any("upper layer" in c for c in ether)
    m = match_solvents("ethyl acetate")
    p = Procedure("P1", "x", 11.0, 25.0, (10.0, 10.0))
    lines = procedure_cautions(m, p, "0.1 M phosphate")
    # 25 mL of water dissolves 25 * 8.3 / 100 / 0.900 = 2.3 mL of ethyl acetate: 23 % of 10 mL
    assert any("about 2.3 mL of ethyl acetate, about 23 %" in c for c in lines)
    assert any("hydrolysed" in c for c in lines)
    assert not procedure_cautions(m, Procedure("P2", "x", 4.0, 25.0, (10.0,)),
                                  "phosphate")[1:]          # no ester or gas line at pH 4
    gas = procedure_cautions(match_solvents("toluene"), Procedure("P3", "x", 6.0, 25.0, (10.0,)),
                             "sodium hydrogen carbonate")
    assert any("carbon dioxide" in c for c in gas)


def _page(organic: str, procedures) -> str:
    from extractval.analysis import fit_study
    from extractval.report.pages import Pages, StudyInput
    from extractval.report.register import Dossier
    from site_factory import synthetic_study
    from test_report_pages import TEMPLATES, as_json
    d = as_json(fit_study(synthetic_study("SYN-SOLV", organic=organic,
                                          procedures=procedures)).to_dict())
    return Pages(TEMPLATES).study_page(StudyInput("SYN-SOLV", d),
                                       Dossier("dv-0", "extractval test", "2026-01-01"))


def test_study_page_shows_cautions_once_and_procedure_lines_under_each():
    procs = (Procedure("P1", "Two 10 mL portions at pH 11", 11.0, 25.0, (10.0, 10.0)),
             Procedure("P2", "One 10 mL portion at pH 7", 7.0, 25.0, (10.0,)))
    page = _page("Ethyl acetate", procs)
    assert page.count("## Before working at the bench") == 1
    assert page.count("Shaking a separatory funnel builds pressure") == 1
    assert page.index("## Before working at the bench") < page.index("## Procedures")
    assert "it is the upper layer" in page and "ICH Q3C(R8) class 3" in page
    # the table's values with their sources
    assert "IEC 60079-20-1 (2010)" in page and "Flash point, closed cup" in page
    p1 = page[page.index("### P1"):page.index("### P2")]
    p2 = page[page.index("### P2"):page.index("\n## ", page.index("### P2"))]  # to the next "## "
    assert "At the bench for P1" in p1 and "hydrolysed" in p1 and "upper layer" in p1
    assert "At the bench for P2" in p2 and "hydrolysed" not in p2
    assert "safety data sheet (SDS)" in page and "approved procedures" in p2


def test_study_page_of_an_unknown_solvent_says_it_is_not_in_the_table():
    page = _page("anisole", (Procedure("P1", "x", 7.0, 25.0, (10.0,)),))
    assert "not in the tool&#39;s table of common extraction solvents" in page
    assert "Shaking a separatory funnel builds pressure" in page
    assert "Flash point, closed cup" not in page
