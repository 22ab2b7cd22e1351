"""Method-validation runs in the runs table and ``method_targets:`` in study.yaml (reading only).

Reading rules
-------------
* A run with a ``spike_stage`` cell is a method-validation run: ``pre`` (spiked into the
  matrix before the extraction), ``post`` (spiked into the blank matrix extract after it) or
  ``neat`` (a standard in solvent). Such runs do not enter the log D fit; they feed the method
  recovery, matrix factor and precision (method.py) and stay listed there.
* ``matrix`` (the lot id of the real matrix), ``level`` (a QC label such as low / mid / high,
  or a number, kept as written), ``day``, ``analyst`` and ``instrument`` describe such a run;
  on a run without ``spike_stage`` they are an error (they would be silently unused). A
  ``neat`` run has no matrix lot.
* The measured value of a method run is taken in the final extract (the organic phase): the
  response per unit spiked (``response_organic / spiked``, divided by ``is_response_organic``
  when an internal standard is given), else the percentage of spiked found there
  (``found_organic / spiked`` or ``recovery_pct``). All used method runs of a study share one
  such basis, since only ratios of the values are reported.

This module imports no numpy; :func:`method_runs` builds method.py's records on demand.
"""

from __future__ import annotations

from .errors import Problem

STAGES = ("pre", "post", "neat")
TAG_COLUMNS = ("matrix", "spike_stage", "level", "day", "analyst", "instrument")
#: study.yaml ``method_targets:`` keys (README, "Method recovery and matrix effect")
TARGET_KEYS = ("matrix_factor_cv_max_pct", "matrix_lots_min", "recovery_pct",
               "recovery_rsd_max_pct", "repeatability_rsd_max_pct", "intermediate_rsd_max_pct")
BASIS_RESPONSE_IS = "analyte / internal-standard response per unit spiked"
BASIS_RESPONSE = "response per unit spiked"
BASIS_PCT = "% of spiked found in the extract"
_STAGE_WORDS = {"pre-extraction": "pre", "post-extraction": "post", "solvent": "neat"}


def read_tags(reader, row, run) -> dict | None:
    """The run's method-validation cells (None for each empty one); None when one is wrong."""
    headers = reader.table.headers
    tags = {c: (row.raw(c).strip() or None) if c in headers else None for c in TAG_COLUMNS}
    ok = True
    stage = tags["spike_stage"]
    if stage is not None:
        low = stage.casefold()
        low = _STAGE_WORDS.get(low, low)
        if low not in STAGES:
            reader.report(row, run, "spike_stage", "unknown spike stage", found=stage,
                          expected="pre (spiked before the extraction), post (spiked into the "
                                   "blank extract after it) or neat (standard in solvent)")
            ok = False
        else:
            tags["spike_stage"] = low
    else:
        given = [c for c in TAG_COLUMNS if tags[c] is not None]
        if given:
            reader.report(row, run, given[0], "a method-validation cell on a run without "
                          "spike_stage: it would be unused", found=", ".join(
                              f"{c}={tags[c]!r}" for c in given),
                          expected="spike_stage pre, post or neat on this run, or these cells "
                                   "left empty")
            ok = False
    if tags["spike_stage"] == "neat" and tags["matrix"] is not None:
        reader.report(row, run, "matrix", "a neat standard (in solvent) has no matrix lot",
                      found=tags["matrix"], expected="an empty matrix cell for a neat run, or "
                                                     "spike_stage post for a spiked blank "
                                                     "extract")
        ok = False
    return tags if ok else None


def measured_value(run) -> tuple[float | None, str | None, str | None]:
    """(value, basis, why not) of a method run (module docstring)."""
    if run.response_organic is not None:
        if not run.spiked:
            return None, None, "a response needs the spiked amount"
        if run.is_response_organic is not None:
            return (run.response_organic / run.is_response_organic / run.spiked,
                    BASIS_RESPONSE_IS, None)
        return run.response_organic / run.spiked, BASIS_RESPONSE, None
    if run.found_organic is not None and run.spiked:
        return 100.0 * run.found_organic / run.spiked, BASIS_PCT, None
    if run.recovery_pct is not None:
        return run.recovery_pct, BASIS_PCT, None
    return None, None, "no measurement in the final extract (organic phase)"


def check_method_runs(runs, problems: list[Problem]) -> None:
    """Every used method run measured in the extract, all on one basis (located errors)."""
    first: dict[str, object] = {}
    for r in runs:
        if r.excluded:
            continue
        value, basis, why = measured_value(r)
        where = dict(**r.location.where(), run=r.run_id)
        if value is None:
            problems.append(Problem(f"method-validation run ({r.spike_stage}) without a value "
                                    f"in the final extract: {why}", **where,
                                    column="response_organic, found_organic",
                                    found="found_aqueous / response_aqueous only"
                                    if (r.found_aqueous is not None
                                        or r.response_aqueous is not None) else "",
                                    expected="response_organic (with spiked), found_organic "
                                             "with spiked, or recovery_pct"))
            continue
        first.setdefault(basis, r)
    if len(first) > 1:
        (b1, r1), (b2, r2) = list(first.items())[:2]
        problems.append(Problem(
            "method-validation runs mix measurement bases: their values cannot be compared",
            **r2.location.where(), run=r2.run_id,
            column="response_organic, is_response_organic, found_organic",
            found=f"{b2} here, {b1} at run {r1.run_id} ({r1.location})",
            expected="one basis for every method run: all responses (all with or all without "
                     "an internal standard), or all found amounts / recoveries"))


def read_targets(doc, entries, is_null, positive, percent) -> dict:
    """``method_targets:`` as {key: value} of the keys the study sets (README)."""
    if "method_targets" not in entries or is_null(entries["method_targets"][1]):
        return {}
    node = entries["method_targets"][1]
    t = doc.mapping(node, "method_targets", TARGET_KEYS, "method_targets")
    if t is None:
        return {}
    out: dict = {}
    for key, what in (("matrix_factor_cv_max_pct", "a CV in %, e.g. 15"),
                      ("recovery_rsd_max_pct", "an RSD in %, e.g. 15"),
                      ("repeatability_rsd_max_pct", "an RSD in %, e.g. 10"),
                      ("intermediate_rsd_max_pct", "an RSD in %, e.g. 15")):
        v = doc.number(t, node, "method_targets", key, required=False, check=positive,
                       expected=what)
        if v is not None:
            out[key] = v
    lots = doc.number(t, node, "method_targets", "matrix_lots_min", required=False,
                      check=lambda v: None if v >= 1 and v == int(v) else
                      "a whole number of lots, at least 1", expected="a number of lots, e.g. 6")
    if lots is not None:
        out["matrix_lots_min"] = int(lots)
    if "recovery_pct" in t and not is_null(t["recovery_pct"][1]):
        from .study import percent_band

        band = percent_band(doc, t["recovery_pct"][1], "method_targets.recovery_pct", percent,
                            "[80, 120]")
        if band is not None:
            out["recovery_pct"] = band
    return out


def method_runs(study) -> list:
    """The study's method runs as :class:`extractval.method.MethodRun` records."""
    from .method import MethodRun, MethodTags

    out = []
    for r in study.method_runs:
        tags = MethodTags(sequence=r.sequence, **{c: getattr(r, c) for c in TAG_COLUMNS})
        value, basis, why = measured_value(r)
        left_out = (f"excluded: {r.excluded}" if r.excluded else
                    getattr(r, "suitability", None) or (None if value is not None else why))
        out.append(MethodRun(r.run_id, r.location, tags, None if left_out else value,
                             basis, left_out))
    return out


def method_targets(study):
    """:class:`extractval.method.MethodTargets` from the study's ``method_targets:``."""
    from .method import MethodTargets

    set_ = dict(study.method_targets)
    return MethodTargets(**set_, from_study=tuple(set_))
