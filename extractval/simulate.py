"""Simulated shake-flask studies from a known model, for tests, benchmarks and demo data.

The simulation follows the error model the fit assumes (a constant relative error on every
measured amount), with an option to add a run-to-run scatter of the spiked amount so that mass
balances vary as they do in a laboratory.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .models import get_model
from .study import Location, Procedure, Run, Study, Targets

FORMS = ("both", "organic", "aqueous", "recovery")


def simulate_runs(model: str, theta, pH_values, ratios=(0.5, 1.0, 2.0), replicates: int = 2,
                  sigma: float = 0.04, form: str = "both", aqueous_mL: float = 10.0,
                  spiked: float = 100.0, rng=None, ion_pair: bool = False) -> tuple[Run, ...]:
    """Runs at every pH x ratio x replicate, measured in ``form`` with relative error ``sigma``.

    ``ratios`` are organic:aqueous volume ratios (OECD TG 107 uses three, each in duplicate).
    """
    if form not in FORMS:
        raise ValueError(f"form must be one of {FORMS}, got {form!r}")
    rng = np.random.default_rng(rng)
    m = get_model(model, ion_pair)
    runs, k = [], 0
    for pH in pH_values:
        log_d = float(m.log_d(np.array([pH]), np.asarray(theta, dtype=float))[0])
        for r in ratios:
            rd = r * 10.0 ** log_d
            e = rd / (1.0 + rd)
            for rep in range(replicates):
                k += 1
                noise = 1.0 + sigma * rng.standard_normal(2)
                kw: dict = {"spiked": spiked}
                if form == "both":
                    kw.update(found_aqueous=spiked * (1 - e) * noise[0],
                              found_organic=spiked * e * noise[1])
                elif form == "organic":
                    kw.update(found_organic=spiked * e * noise[1])
                elif form == "aqueous":
                    kw.update(found_aqueous=spiked * (1 - e) * noise[0])
                else:
                    kw = {"recovery_pct": 100.0 * e * noise[1]}
                runs.append(Run(f"S{k:03d}", float(pH), aqueous_mL, aqueous_mL * r,
                                Location("simulated", line=k + 1),
                                replicate=f"pH{pH:g}-r{r:g}", **kw))
    return tuple(runs)


def simulated_study(study_id: str, model: str, theta, pH_values, procedures=(), *,
                    targets: Targets | None = None, fit_model: str | None = None,
                    **kw) -> Study:
    """A Study object (never written to disk) around :func:`simulate_runs`."""
    runs = simulate_runs(model, theta, pH_values, **kw)
    procs = tuple(p if isinstance(p, Procedure) else Procedure(**p) for p in procedures)
    return Study(study_id, Path("simulated") / study_id, f"Simulated {model} study",
                 f"SIM-{model}", fit_model or model, runs, procs, targets or Targets(),
                 ion_pair=kw.get("ion_pair", False),
                 system={"aqueous": "simulated buffer", "organic": "simulated solvent",
                         "temperature_C": 25})


def write_study_folder(study: Study, folder, runs_name: str = "runs.csv") -> Path:
    """Write a simulated Study as a study folder (study.yaml + CSV) for benchmarks and tests.

    Only for simulated data: the tool itself never writes into a study folder.
    """
    import csv

    import yaml

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    cols = ["run", "pH", "aqueous_mL", "organic_mL"]
    fields = [("spiked", "spiked"), ("found_aqueous", "found_aqueous"),
              ("found_organic", "found_organic"), ("recovery_pct", "recovery_pct")]
    present = [c for c, a in fields if any(getattr(r, a) is not None for r in study.runs)]
    cols += present + ["replicate", "excluded", "note"]
    with open(folder / runs_name, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        for r in study.runs:
            vals = [r.run_id] + [repr(float(x)) for x in (r.pH, r.aqueous_mL, r.organic_mL)]
            vals += ["" if getattr(r, c) is None else repr(float(getattr(r, c))) for c in present]
            vals += [r.replicate or "", r.excluded or "", r.note or ""]
            w.writerow(vals)
    doc = {
        "title": study.title,
        "analyte": {"name": study.analyte_name, "model": study.model},
        "system": dict(study.system),
        "runs": runs_name,
        "targets": {k: (list(v) if isinstance(v, tuple) else v)
                    for k, v in vars(study.targets).items() if v is not None},
        "procedures": [{"id": p.id, "label": p.label, "pH": p.pH, "aqueous_mL": p.aqueous_mL,
                        "organic_mL": list(p.organic_mL)} for p in study.procedures],
    }
    if not doc["targets"]:
        del doc["targets"]
    with open(folder / "study.yaml", "w", encoding="utf-8") as fh:
        yaml.safe_dump(doc, fh, sort_keys=False)
    return folder
