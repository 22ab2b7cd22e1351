"""Write the demo study folders in ``studies/`` from a known model with realistic noise.

The scenario is invented: a contract laboratory, "Halvorsen Process Analytics", validates the
work-up of three invented intermediates (KRV-118, a base; KRV-204, an acid; KRV-311, a neutral
compound). The numbers are simulated, for demonstration only; they are no measurement of any
real substance.

Design, OECD TG 107 style: three organic:aqueous volume ratios, each in duplicate, at buffered
pH values spanning pKa +/- 2 (three pH values for the neutral compound, where pH should not
matter), widened so that the runs cover the pH and the volume ratios of the procedures each
study proposes (a procedure outside them is judged as an extrapolation, and only HPA-2026-014
P1, labelled so, is meant to be one). The ratios are 1:2, 1:1 and 2:1 where both phases or
the organic phase are measured, with 1:5 (KRV-118) or 3:10 (KRV-311) added for the procedures;
the recovery-only acid study uses small organic volumes (1:10, 1:5, 1:2) so that recoveries on
the neutral side stay below saturation and still carry information. Each measured amount
carries an independent relative error of 4 % (normal), each recorded pH a 0.02 unit scatter
around its nominal value.

The distribution ratio follows the textbook neutral-form partition (Henderson-Hasselbalch):

    base:    log D = log K - log10(1 + 10^(pKa - pH))
    acid:    log D = log K - log10(1 + 10^(pH - pKa))
    neutral: log D = log K

and one equilibration of V_aq with V_org leaves q = 1 / (1 + D V_org / V_aq) in the water.

Run ``python benchmarks/make_demo_studies.py`` from anywhere; it is seeded and writes the same
bytes every time, and only below ``studies/``.
"""

from __future__ import annotations

import io
import math
import re
import zipfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "studies"

REL_ERROR = 0.04            # relative error of each measured amount, [-]
PH_SCATTER = 0.02           # scatter of the recorded pH around the nominal buffer pH, [pH]
AQUEOUS_ML = 20.0
ORGANIC_ML = (10.0, 20.0, 40.0)   # ratios 1:2, 1:1, 2:1
REPLICATES = 2

#: The generating truth of each demo study (what a perfect fit would return).
TRUTH = {
    "HPA-2026-014": {"model": "base", "logK": 2.6, "pKa": 8.3},
    "HPA-2026-015": {"model": "acid", "logK": 2.1, "pKa": 4.6},
    "HPA-2026-016": {"model": "neutral", "logK": 0.9},
}
SEEDS = {"HPA-2026-014": 14_2026, "HPA-2026-015": 15_2026, "HPA-2026-016": 16_2026}


def log_d(model: str, pH: float, logK: float, pKa: float | None = None) -> float:
    """log D of the neutral-form partition model at ``pH`` (module docstring)."""
    if model == "base":
        return logK - math.log10(1.0 + 10.0 ** (pKa - pH))
    if model == "acid":
        return logK - math.log10(1.0 + 10.0 ** (pH - pKa))
    return logK


def _inside_out(path: Path) -> Path:
    """Refuse to write anywhere but below studies/."""
    path = path.resolve()
    if OUT.resolve() not in path.parents:
        raise RuntimeError(f"refusing to write outside {OUT}: {path}")
    return path


def _write(path: Path, data: bytes) -> None:
    path = _inside_out(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)


def _sig(value: float, digits: int = 4) -> str:
    """``value`` to ``digits`` significant figures, fixed-point (no exponent)."""
    if value == 0:
        return "0"
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(value)))))
    return f"{value:.{decimals}f}"


def simulate(study_id: str, pH_nominal, spiked: float, aqueous_mL: float = AQUEOUS_ML,
             organic_mL=ORGANIC_ML):
    """Rows of (run, pH, V_aq, V_org, spiked, found_aq, found_org, recovery_pct, group)."""
    truth = TRUTH[study_id]
    rng = np.random.default_rng(SEEDS[study_id])
    rows = []
    k = 0
    for nominal in pH_nominal:
        for v_org in organic_mL:
            for _ in range(REPLICATES):
                k += 1
                pH = round(nominal + PH_SCATTER * rng.standard_normal(), 2)
                d = 10.0 ** log_d(truth["model"], pH, truth["logK"], truth.get("pKa"))
                q = 1.0 / (1.0 + d * v_org / aqueous_mL)
                e_aq, e_org = 1.0 + REL_ERROR * rng.standard_normal(2)
                rows.append({
                    "n": k, "pH": pH, "aqueous_mL": aqueous_mL, "organic_mL": v_org,
                    "spiked": spiked,
                    "found_aqueous": spiked * q * e_aq,
                    "found_organic": spiked * (1.0 - q) * e_org,
                    "recovery_pct": 100.0 * (1.0 - q) * e_org,
                    "replicate": f"pH{nominal:g}-{v_org / aqueous_mL:g}",
                })
    return rows


# -- HPA-2026-014: base, both phases, European CSV ----------------------------------------------

BASE_YAML = """\
title: Work-up of amine intermediate KRV-118 into n-heptane/MTBE (demo data)
analyte:
  name: KRV-118
  model: base
  level: 100 ppm
system:
  aqueous: 0.05 M phosphate and borate buffers, ionic strength 0.1 M
  organic: n-heptane/MTBE 4:1 (v/v), pre-saturated with buffer
  temperature_C: 25
runs: runs.csv
targets:
  recovery_pct: 95
  max_rsd_pct: 5
  mass_balance_pct: [90, 110]
  ratio_agreement_log: 0.3
procedures:
  - id: P1
    label: Three 10 mL portions at pH 11 (beyond the measured pH, shown as an extrapolation)
    pH: 11.0
    aqueous_mL: 25
    organic_mL: [10, 10, 10]
  - id: P2
    label: Two 5 mL portions at pH 7 (mild work-up)
    pH: 7.0
    aqueous_mL: 25
    organic_mL: [5, 5]
    pH_tolerance: 0.2
    volume_tolerance_pct: 2
"""


def make_base() -> None:
    sid = "HPA-2026-014"
    # ratios 1:5 to 2:1: the runs cover the ratios of both procedures (0.4 and 0.2 per
    # portion); P1's pH 11 lies beyond the runs on purpose, to show an extrapolated procedure
    rows = simulate(sid, (6.3, 7.3, 8.3, 9.3, 10.3), spiked=50.0,
                    organic_mL=(4.0,) + ORGANIC_ML)
    excluded = {20: "emulsion did not break within 30 min; phases not cleanly separated"}
    notes = {7: "aqueous phase re-injected (air bubble in the first injection)"}
    lines = ["run;pH;aqueous_mL;organic_mL;spiked;found_aqueous;found_organic;replicate;"
             "excluded;note"]
    for r in rows:
        found_org = r["found_organic"] * (0.8 if r["n"] in excluded else 1.0)
        cells = [f"K118-{r['n']:02d}", f"{r['pH']:.2f}", _sig(r["aqueous_mL"], 3),
                 _sig(r["organic_mL"], 3), f"{r['spiked']:.2f}", _sig(r["found_aqueous"]),
                 _sig(found_org), r["replicate"], excluded.get(r["n"], ""),
                 notes.get(r["n"], "")]
        # a European-locale spreadsheet export: decimal commas, ';' between cells
        lines.append(";".join(c.replace(".", ",") if _is_number(c) else c for c in cells))
    text = "\r\n".join(lines) + "\r\n"
    _write(OUT / sid / "runs.csv", text.encode("utf-8-sig"))
    _write(OUT / sid / "study.yaml", BASE_YAML.encode("utf-8"))


def _is_number(cell: str) -> bool:
    return re.fullmatch(r"-?\d+(\.\d+)?", cell) is not None


# -- HPA-2026-015: acid, recovery only, XLSX -----------------------------------------------------

ACID_YAML = """\
title: Extraction of carboxylic acid KRV-204 into ethyl acetate (demo data)
analyte:
  name: KRV-204
  model: acid
system:
  aqueous: 0.05 M citrate and phosphate buffers, ionic strength 0.1 M
  organic: ethyl acetate, pre-saturated with buffer
  temperature_C: 22
runs: runs.xlsx
sheet: Runs
targets:
  recovery_pct: 95
  max_rsd_pct: 5
  level: 10 ppm
procedures:
  - id: P1
    label: Two 25 mL portions at pH 2.0
    pH: 2.0
    aqueous_mL: 50
    organic_mL: [25, 25]
  - id: P2
    label: One 10 mL portion at pH 4.0
    pH: 4.0
    aqueous_mL: 50
    organic_mL: [10]
    pH_tolerance: 0.2
"""


def make_acid() -> None:
    import openpyxl

    sid = "HPA-2026-015"
    # from pH 1.6: the runs cover P1 at pH 2.0 +/- 0.2
    rows = simulate(sid, (1.6, 2.6, 3.6, 4.6, 5.6, 6.6), spiked=40.0, aqueous_mL=40.0,
                    organic_mL=(4.0, 8.0, 20.0))
    wb = openpyxl.Workbook()
    info = wb.active
    info.title = "Info"
    for line in ("Halvorsen Process Analytics - shake-flask study HPA-2026-015 (demo data)",
                 "Analyte KRV-204; recovery in the organic phase, % of spiked",
                 "Simulated numbers for demonstration only"):
        info.append([line])
    ws = wb.create_sheet("Runs")
    ws.append(["run", "pH", "aqueous_mL", "organic_mL", "recovery_pct", "replicate", "note"])
    previous = None
    for r in rows:
        group = r["replicate"].split("-")[0]
        if previous is not None and group != previous:
            ws.append([])   # a blank row between pH groups, as people leave them
        previous = group
        ws.append([f"A204-{r['n']:02d}", r["pH"], r["aqueous_mL"], r["organic_mL"],
                   round(r["recovery_pct"], 1), r["replicate"], None])
    buf = io.BytesIO()
    wb.save(buf)
    _write(OUT / sid / "runs.xlsx", _deterministic_zip(buf.getvalue()))
    _write(OUT / sid / "study.yaml", ACID_YAML.encode("utf-8"))


def _deterministic_zip(data: bytes) -> bytes:
    """The same workbook with fixed timestamps, so that a rerun writes identical bytes."""
    fixed = (2026, 1, 15, 9, 0, 0)
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as src, \
            zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            body = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                body = re.sub(rb"(<dcterms:(created|modified)[^>]*>)[^<]*(</dcterms:)",
                              rb"\g<1>2026-01-15T09:00:00Z\g<3>", body)
            zi = zipfile.ZipInfo(info.filename, date_time=fixed)
            zi.compress_type = zipfile.ZIP_DEFLATED
            dst.writestr(zi, body)
    return out.getvalue()


# -- HPA-2026-016: neutral, organic phase only, plain CSV ----------------------------------------

NEUTRAL_YAML = """\
title: Extraction of neutral intermediate KRV-311 into dichloromethane (demo data)
analyte:
  name: KRV-311
  model: neutral
system:
  aqueous: 0.05 M phosphate buffers, ionic strength 0.1 M
  organic: dichloromethane, pre-saturated with buffer
  temperature_C: 20
runs: runs.csv
targets:
  recovery_pct: 95
procedures:
  - id: P1
    label: Three 30 mL portions of dichloromethane at pH 7
    pH: 7.0
    aqueous_mL: 100
    organic_mL: [30, 30, 30]
"""


def make_neutral() -> None:
    sid = "HPA-2026-016"
    # ratios 0.3 to 2: the runs cover P1's 30 mL portions per 100 mL
    rows = simulate(sid, (5.0, 7.0, 9.0), spiked=40.0, organic_mL=(6.0,) + ORGANIC_ML)
    lines = ["run,pH,aqueous_mL,organic_mL,spiked,found_organic,replicate,note"]
    for r in rows:
        lines.append(",".join([f"N311-{r['n']:02d}", f"{r['pH']:.2f}", _sig(r["aqueous_mL"], 3),
                               _sig(r["organic_mL"], 3), f"{r['spiked']:.2f}",
                               _sig(r["found_organic"]), r["replicate"], ""]))
    _write(OUT / sid / "runs.csv", ("\n".join(lines) + "\n").encode("utf-8"))
    _write(OUT / sid / "study.yaml", NEUTRAL_YAML.encode("utf-8"))


# -- HPA-2026-021/-022: amine product with an acidic impurity, two solvents --------------------

#: truth of the work-up studies: the amine KRV-402 (a base) and its phenolic (weakly acidic)
#: by-product KRV-402-A, in two solvents (invented values)
WORKUP_TRUTH = {
    "HPA-2026-021": {"solvent": "ethyl acetate, pre-saturated with buffer",
                     "amine": (2.3, 9.1), "acid": (2.0, 8.0), "seed": 21_2026},
    "HPA-2026-022": {"solvent": "toluene, pre-saturated with buffer",
                     "amine": (1.8, 9.1), "acid": (1.2, 8.0), "seed": 22_2026},
}

WORKUP_YAML = """\
title: Isolation of amine KRV-402 from its acidic by-product, {solvent_name} (demo data)
analyte:
  name: KRV-402
  model: base
system:
  aqueous: 0.05 M citrate, phosphate and borate buffers, ionic strength 0.1 M
  organic: {solvent}
  temperature_C: 22
runs: runs.csv
targets:
  recovery_pct: 90
impurities:
  - name: KRV-402-A
    model: acid
    amount_ratio: 0.05
procedures:
  - id: P1
    label: Two 20 mL portions at pH 11.5, no wash
    pH: 11.5
    aqueous_mL: 40
    organic_mL: [20, 20]
  - id: P2
    label: Extract at pH 11.5, wash at pH 11.5, back-extract into pH 3 water
    steps:
      - kind: extract
        pH: 11.5
        aqueous_mL: 40
        organic_mL: [20, 20]
      - kind: wash
        pH: 11.5
        aqueous_mL: [20]
      - kind: back-extract
        pH: 3.0
        aqueous_mL: [20, 20]
"""


def make_workup(sid: str) -> None:
    """Both phases of the amine and of the by-product in every run."""
    t = WORKUP_TRUTH[sid]
    rng = np.random.default_rng(t["seed"])
    lines = ["run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic,"
             "spiked:KRV-402-A,found_aqueous:KRV-402-A,found_organic:KRV-402-A,replicate,note"]
    k = 0
    for nominal in (2.0, 3.5, 5.0, 6.5, 8.0, 9.5, 11.0, 12.0):
        for v_org in ORGANIC_ML:
            for _ in range(REPLICATES):
                k += 1
                pH = round(nominal + PH_SCATTER * rng.standard_normal(), 2)
                d_a = 10.0 ** log_d("base", pH, *t["amine"])
                d_i = 10.0 ** log_d("acid", pH, *t["acid"])
                q_a = 1.0 / (1.0 + d_a * v_org / AQUEOUS_ML)
                q_i = 1.0 / (1.0 + d_i * v_org / AQUEOUS_ML)
                e = 1.0 + REL_ERROR * rng.standard_normal(4)
                lines.append(",".join([
                    f"W{sid[-2:]}-{k:02d}", f"{pH:.2f}", _sig(AQUEOUS_ML, 3), _sig(v_org, 3),
                    "50.00", _sig(50.0 * q_a * e[0]), _sig(50.0 * (1 - q_a) * e[1]),
                    "2.500", _sig(2.5 * q_i * e[2]), _sig(2.5 * (1 - q_i) * e[3]),
                    f"pH{nominal:g}-{v_org / AQUEOUS_ML:g}", ""]))
    _write(OUT / sid / "runs.csv", ("\n".join(lines) + "\n").encode("utf-8"))
    name = t["solvent"].split(",")[0]
    _write(OUT / sid / "study.yaml",
           WORKUP_YAML.format(solvent=t["solvent"], solvent_name=name).encode("utf-8"))


# -- HPA-2026-030: responses, calibration, method recovery, matrix effect, precision --------------

#: truth of the method-validation study (invented values): the amine KRV-517 extracted from
#: plasma into MTBE; the runs give LC-MS peak areas with an internal standard
METHOD_TRUTH = {
    "logK": 2.4, "pKa": 8.8, "seed": 30_2027,
    "slope": 0.021,               # analyte / IS area ratio per ug in the final extract
    "is_area": 84_000.0,          # internal-standard peak area in a neat extract
    "recovery": {"low": 0.885, "mid": 0.905, "high": 0.912},   # absolute recovery
    "spiked": {"low": 1.5, "mid": 20.0, "high": 45.0},         # ug per sample
    "mf_analyte": 0.86, "mf_is": 0.87,   # matrix factors of analyte and IS (mean of lots)
    "lot_sd": 0.05, "is_norm_lot_sd": 0.035,
    "day_sd": 0.018, "analyst_sd": 0.010, "rep_sd": 0.022,   # relative, on recovery
    "area_rsd": 0.012,            # injection-to-injection scatter of a peak area
    "flask_rsd": 0.025,           # scatter of a shake-flask run's amount in a phase
}
METHOD_LOTS = ("PL-0311", "PL-0327", "PL-0402", "PL-0419", "PL-0505", "PL-0522")
METHOD_SEQUENCES = ("SEQ-A", "SEQ-B")
#: calibration standards (ug in the final extract), in duplicate in each sequence
METHOD_STANDARDS = (0.2, 0.5, 1.0, 2.5, 10.0, 25.0, 60.0)

METHOD_YAML = """\
title: KRV-517 from plasma into MTBE, method validation with LC-MS responses (demo data)
analyte:
  name: KRV-517
  model: base
system:
  aqueous: 0.05 M phosphate and carbonate buffers; plasma diluted 1 + 1 with pH 10.5 buffer
  organic: methyl tert-butyl ether, pre-saturated with buffer
  temperature_C: 22
runs: runs.csv
calibration:
  table: calibration.csv
  level: amount
  unit: ug
suitability: suitability.csv
suitability_limits:
  plates_min: 5000
targets:
  recovery_pct: 95
method_targets:
  recovery_rsd_max_pct: 15
  repeatability_rsd_max_pct: 10
  intermediate_rsd_max_pct: 15
procedures:
  - id: P1
    label: One 6 mL portion of MTBE at pH 10.5 (the SOP)
    pH: 10.5
    aqueous_mL: 2
    organic_mL: [6]
"""


def make_method() -> None:
    """Shake-flask runs (both phases as peak areas) in two sequences, and the method runs:
    pre-spiked samples in six plasma lots at three levels on three days by two analysts,
    post-spiked blank extracts of every lot at every level, neat standards."""
    t = METHOD_TRUTH
    sid = "HPA-2026-030"
    rng = np.random.default_rng(t["seed"])

    def areas(amount: float, mf: float = 1.0, mf_is: float = 1.0) -> tuple[float, float]:
        e = 1.0 + t["area_rsd"] * rng.standard_normal(2)
        is_area = t["is_area"] * mf_is * e[1]
        return t["slope"] * amount * mf * t["is_area"] * e[0], is_area

    cal = ["standard,level,response,is_response,sequence"]
    for seq in METHOD_SEQUENCES:
        for i, x in enumerate(METHOD_STANDARDS):
            for k in range(2):
                a, b = areas(x)
                cal.append(f"{seq[-1]}CS{i + 1}-{k + 1},{x:g},{a:.0f},{b:.0f},{seq}")
    _write(OUT / sid / "calibration.csv", ("\n".join(cal) + "\n").encode("utf-8"))

    head = ("run,pH,aqueous_mL,organic_mL,spiked,response_aqueous,response_organic,"
            "is_response_aqueous,is_response_organic,sequence,replicate,matrix,spike_stage,"
            "level,day,analyst,note")
    lines = [head]
    k = 0
    # ratios 1:2, 1:1 and 3:1: the runs cover the SOP's 6 mL of MTBE per 2 mL of plasma
    for nominal in (6.8, 8.8, 10.8):
        for v_org in (10.0, 20.0, 60.0):
            for rep in range(REPLICATES):
                k += 1
                pH = round(nominal + PH_SCATTER * rng.standard_normal(), 2)
                d = 10.0 ** log_d("base", pH, t["logK"], t["pKa"])
                q = 1.0 / (1.0 + d * v_org / AQUEOUS_ML)
                e = 1.0 + t["flask_rsd"] * rng.standard_normal(2)
                a_aq, i_aq = areas(50.0 * q * e[0])
                a_org, i_org = areas(50.0 * (1.0 - q) * e[1])
                lines.append(",".join([
                    f"M30-{k:02d}", f"{pH:.2f}", _sig(AQUEOUS_ML, 3), _sig(v_org, 3), "50.00",
                    f"{a_aq:.0f}", f"{a_org:.0f}", f"{i_aq:.0f}", f"{i_org:.0f}",
                    METHOD_SEQUENCES[rep], f"pH{nominal:g}-{v_org / AQUEOUS_ML:g}",
                    "", "", "", "", "", ""]))
    # matrix lots: analyte and IS suppression share most of the lot's effect
    z = rng.standard_normal((len(METHOD_LOTS), 2))
    mf_is = {lot: t["mf_is"] * (1 + t["lot_sd"] * z[i, 0]) for i, lot in enumerate(METHOD_LOTS)}
    mf_an = {lot: mf_is[lot] * t["mf_analyte"] / t["mf_is"] * (1 + t["is_norm_lot_sd"] * z[i, 1])
             for i, lot in enumerate(METHOD_LOTS)}
    day_eff = 1 + t["day_sd"] * rng.standard_normal(3)
    analyst_eff = 1 + t["analyst_sd"] * rng.standard_normal(2)
    method_rows = []

    def row(run_id, stage, level, amount, a_org, i_org, seq, lot="", day="", analyst=""):
        method_rows.append(",".join([
            run_id, "10.50", "2.00", "6.00", f"{amount:g}", "", f"{a_org:.0f}", "",
            f"{i_org:.0f}", seq, "", lot, stage, level, day, analyst, ""]))

    n = 0
    for level, amount in t["spiked"].items():
        for day in range(3):
            for an in range(2):
                lot = METHOD_LOTS[2 * day + an]
                for _ in range(2):
                    n += 1
                    rec = (t["recovery"][level] * day_eff[day] * analyst_eff[an]
                           * (1 + t["rep_sd"] * rng.standard_normal()))
                    a, b = areas(amount * rec, mf_an[lot], mf_is[lot])
                    row(f"V30-{n:03d}", "pre", level, amount, a, b, METHOD_SEQUENCES[an], lot,
                        f"D{day + 1}", ("AN", "JS")[an])
        for i, lot in enumerate(METHOD_LOTS):
            for _ in range(2):
                n += 1
                a, b = areas(amount, mf_an[lot], mf_is[lot])
                row(f"V30-{n:03d}", "post", level, amount, a, b, METHOD_SEQUENCES[i % 2], lot)
        for j in range(3):
            n += 1
            a, b = areas(amount)
            row(f"V30-{n:03d}", "neat", level, amount, a, b, METHOD_SEQUENCES[j % 2])
    lines.extend(method_rows)
    _write(OUT / sid / "runs.csv", ("\n".join(lines) + "\n").encode("utf-8"))
    _write(OUT / sid / "study.yaml", METHOD_YAML.encode("utf-8"))


#: the suitability standard of HPA-2026-030 (invented chromatography, minutes): KRV-517 and its
#: nearest neighbour, the N-oxide KRV-517-NO, on a C18 column; six injections per sequence
METHOD_SST = {"tR": 4.85, "tR_neighbour": 4.42, "tM": 0.92, "w_half": 0.086,
              "w_half_neighbour": 0.081, "w_5pct": 0.176, "tailing": 1.15, "area": 412_000.0,
              "area_rsd": 0.006, "time_rsd": 0.002, "width_rsd": 0.02}


def make_method_suitability(sid: str = "HPA-2026-030") -> None:
    """The suitability table of the method study: both sequences pass the common-practice
    defaults and the study's own plate-number minimum (the failing case, and its runs left out
    of the fit, is shown by tests/test_suitability_study.py)."""
    t = METHOD_SST
    rng = np.random.default_rng(METHOD_TRUTH["seed"] + 1)
    lines = ["sequence,injection,rt_analyte,rt_neighbour,rt_unretained,w_half_analyte,"
             "w_half_neighbour,w_5pct,f_5pct,response"]
    for seq in METHOD_SEQUENCES:
        drift = 1.0 + 0.004 * rng.standard_normal()      # retention shifts between sequences
        for i in range(6):
            tr, tn = (x * drift * (1 + t["time_rsd"] * rng.standard_normal())
                      for x in (t["tR"], t["tR_neighbour"]))
            wh, wn, w5 = (x * (1 + t["width_rsd"] * rng.standard_normal())
                          for x in (t["w_half"], t["w_half_neighbour"], t["w_5pct"]))
            f = w5 / (2 * t["tailing"] * (1 + 0.03 * rng.standard_normal()))
            area = t["area"] * (1 + t["area_rsd"] * rng.standard_normal())
            lines.append(f"{seq},{seq[-1]}{i + 1},{tr:.3f},{tn:.3f},{t['tM']:.3f},{wh:.4f},"
                         f"{wn:.4f},{w5:.4f},{f:.4f},{area:.0f}")
    _write(OUT / sid / "suitability.csv", ("\n".join(lines) + "\n").encode("utf-8"))


README = """\
# Demo studies

Invented scenario: the contract laboratory "Halvorsen Process Analytics" validates the work-up
of three invented intermediates. The numbers are simulated from a known model by
`benchmarks/make_demo_studies.py` (seeded); they are for demonstration only.

| study | analyte | model | true log K | true pKa | runs table |
|---|---|---|---|---|---|
| HPA-2026-014 | KRV-118 | base | 2.6 | 8.3 | `runs.csv`, `;` and decimal commas, UTF-8 BOM; P1 beyond the runs' pH on purpose (an extrapolated procedure) |
| HPA-2026-015 | KRV-204 | acid | 2.1 | 4.6 | `runs.xlsx`, sheet `Runs`, recovery only |
| HPA-2026-016 | KRV-311 | neutral | 0.9 | - | `runs.csv`, organic phase only |
| HPA-2026-021 | KRV-402 in ethyl acetate, by-product KRV-402-A | base / acid | 2.3 / 2.0 | 9.1 / 8.0 | `runs.csv`, impurity columns, work-up steps |
| HPA-2026-022 | KRV-402 in toluene, by-product KRV-402-A | base / acid | 1.8 / 1.2 | 9.1 / 8.0 | `runs.csv`, impurity columns, work-up steps |
| HPA-2026-030 | KRV-517 from plasma into MTBE | base | 2.4 | 8.8 | `runs.csv` with LC-MS peak areas and an internal standard, `calibration.csv` (two sequences), `suitability.csv` (six injections per sequence, both passing); method runs: six plasma lots, pre/post/neat spikes, three levels, three days x two analysts |

In HPA-2026-030 each day x analyst group of pre-spiked samples uses its own plasma lot, so the
between-group component of the precision also holds the lots' differences in recovery.
"""


def main() -> None:
    make_base()
    make_acid()
    make_neutral()
    for sid in WORKUP_TRUTH:
        make_workup(sid)
    make_method()
    make_method_suitability()
    _write(OUT / "README.md", README.encode("utf-8"))
    print(f"demo studies written to {OUT}")


if __name__ == "__main__":
    main()
