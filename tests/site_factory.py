"""Synthetic studies for the report and site tests: Study records in memory, or study folders.

The runs follow the fit's own error model (a constant relative error on each measured amount)
around a known D(pH), so the fits are well behaved; the scenario (analytes "SYN-...", a lab that
does not exist) is invented.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import yaml

from extractval import chemistry as chem
from extractval.study import Location, Procedure, Run, Study, Targets

#: inside the runs' pH span (6 to 10) and volume ratios (0.5 to 2), so both are judged
PROCEDURES = (Procedure("P1", "Three 10 mL portions at pH 9.5", 9.5, 20.0, (10.0, 10.0, 10.0)),
              Procedure("P2", "One 10 mL portion at pH 7", 7.0, 20.0, (10.0,)))


def synthetic_runs(log_k: float = 2.2, pka: float = 8.0, pH=(6.0, 7.0, 8.0, 9.0, 10.0),
                   ratios=(0.5, 1.0, 2.0), replicates: int = 2, sigma: float = 0.03,
                   seed: int = 1, excluded: dict | None = None,
                   file: str = "runs.csv", scale: dict | None = None) -> tuple[Run, ...]:
    """Runs of a monoprotic base, both phases measured; ``excluded`` maps run id -> reason,
    ``scale`` run id -> a factor on its organic-phase amount (to plant an outlier)."""
    rng = np.random.default_rng(seed)
    excluded = excluded or {}
    scale = scale or {}
    runs, k = [], 0
    for ph in pH:
        d = 10.0 ** float(chem.log_d_base(ph, log_k, pka))
        for r in ratios:
            e = r * d / (1.0 + r * d)
            for rep in range(replicates):
                k += 1
                rid = f"R{k:02d}"
                noise = 1.0 + sigma * rng.standard_normal(2)
                runs.append(Run(rid, ph, 10.0, 10.0 * r, Location(file, line=k + 1),
                                spiked=100.0, found_aqueous=round(100.0 * (1 - e) * noise[0], 4),
                                found_organic=round(100.0 * e * noise[1] * scale.get(rid, 1.0),
                                                    4),
                                replicate=f"pH{ph:g}-r{r:g}", excluded=excluded.get(rid)))
    return tuple(runs)


def synthetic_study(study_id: str = "SYN-001", *, title: str | None = None,
                    analyte: str = "SYN-A", organic: str = "ethyl acetate", seed: int = 1,
                    procedures=PROCEDURES, **kw) -> Study:
    """A Study record (never on disk) of an invented base in an invented lab."""
    runs = synthetic_runs(seed=seed, excluded=kw.pop("excluded", {"R03": "phase not clear"}),
                          **kw)
    return Study(study_id, Path(study_id), title or f"Synthetic study {study_id}", analyte,
                 "base", runs, tuple(procedures), Targets(recovery_pct=95.0),
                 system={"aqueous": "0.1 M phosphate buffer", "organic": organic,
                         "temperature_C": 25})


def write_study_folder(study: Study, root: Path) -> Path:
    """The study as a folder the reader accepts (study.yaml + runs.csv), under ``root``."""
    folder = Path(root) / study.study_id
    folder.mkdir(parents=True, exist_ok=True)
    cols = ["run", "pH", "aqueous_mL", "organic_mL", "spiked", "found_aqueous",
            "found_organic", "replicate", "excluded"]
    with open(folder / "runs.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        for r in study.runs:
            w.writerow([r.run_id, r.pH, r.aqueous_mL, r.organic_mL, r.spiked, r.found_aqueous,
                        r.found_organic, r.replicate or "", r.excluded or ""])
    doc = {
        "title": study.title,
        "analyte": {"name": study.analyte_name, "model": study.model},
        "system": dict(study.system),
        "runs": "runs.csv",
        "targets": {"recovery_pct": study.targets.recovery_pct},
        "procedures": [{"id": p.id, "label": p.label, "pH": p.pH, "aqueous_mL": p.aqueous_mL,
                        "organic_mL": list(p.organic_mL)} for p in study.procedures],
    }
    (folder / "study.yaml").write_text(yaml.safe_dump(doc, sort_keys=False, allow_unicode=True),
                                       encoding="utf-8")
    return folder


def write_broken_folder(root: Path, study_id: str = "SYN-BAD") -> Path:
    """A study folder whose runs table has a pH that is not a number (a located error)."""
    folder = Path(root) / study_id
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "study.yaml").write_text(
        "title: Broken synthetic study\nanalyte:\n  name: SYN-X\n  model: base\n"
        "runs: runs.csv\nprocedures:\n  - id: P1\n    label: one portion\n    pH: 9\n"
        "    aqueous_mL: 10\n    organic_mL: [10]\n", encoding="utf-8")
    (folder / "runs.csv").write_text(
        "run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic\n"
        "R1,seven,10,10,100,40,59\nR2,8,10,10,100,20,79\nR3,9,10,10,100,5,96\n",
        encoding="utf-8")
    return folder
