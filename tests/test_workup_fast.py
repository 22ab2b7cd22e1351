"""Work-up intervals from the traced boundary against the SLSQP search (the reference path).

The reference is the range of each quantity over the confidence region searched by SLSQP
(``fast=False``), itself checked against the fit's profile-likelihood intervals in
tests/test_workup.py (and those against lmfit in tests/test_fit_reference.py).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from extractval.analysis import build_observations, fit_study
from extractval.fitting import fit_model
from extractval.models import MODELS
from extractval.simulate import simulate_runs
from extractval.study import load_study
from extractval.workup import (Solute, Step, boundary_range, predict_workup, region_points,
                               separation_curve, solute_log_d)

ROOT = Path(__file__).resolve().parent.parent
#: ends may differ by this share of the interval's half-width (the search stops a little
#: inside the region's true extremes; the boundary's own error is ~1e-8 of it)
HALF_WIDTH_TOL = 0.02


def _intervals(d, path=""):
    """Every (path, value, [lo, hi]) in a nested dict of quantities."""
    if isinstance(d, dict):
        if "ci95" in d and "value" in d:
            yield path, d["value"], d["ci95"]
        for k, v in d.items():
            yield from _intervals(v, f"{path}/{k}")
    elif isinstance(d, list):
        for i, v in enumerate(d):
            yield from _intervals(v, f"{path}/{i}")


def _agree(fast: dict, slow: dict) -> int:
    a, b = list(_intervals(fast)), list(_intervals(slow))
    assert [p for p, _, _ in a] == [p for p, _, _ in b]
    for (path, va, (alo, ahi)), (_, vb, (blo, bhi)) in zip(a, b):
        assert va == pytest.approx(vb, rel=1e-12, abs=1e-300), path
        assert (alo is None) == (blo is None) and (ahi is None) == (bhi is None), path
        if None in (alo, ahi, blo, bhi):
            continue
        half = max(0.5 * (bhi - blo), 1e-12 * max(abs(vb), 1e-300))
        assert abs(alo - blo) <= HALF_WIDTH_TOL * half, (path, alo, blo, half)
        assert abs(ahi - bhi) <= HALF_WIDTH_TOL * half, (path, ahi, bhi, half)
        # the search stops inside the region: the boundary's ends are not narrower (but for
        # the written digits)
        assert alo <= blo + 1e-3 * half and ahi >= bhi - 1e-3 * half, path
    return len(a)


@pytest.mark.parametrize("sid", ["HPA-2026-021", "HPA-2026-022"])
def test_demo_work_ups_match_the_search(sid):
    report = fit_study(load_study(ROOT / "studies" / sid))
    fast, slow = report.selectivity_section(True), report.selectivity_section(False)
    assert _agree(fast, slow) >= 10
    for name, curve in fast["separation"].items():
        ref = slow["separation"][name]
        assert curve["log_beta"] == ref["log_beta"]
        half = 0.5 * (np.array(ref["hi"]) - np.array(ref["lo"]))
        assert np.all(np.abs(np.array(curve["lo"]) - ref["lo"]) <= HALF_WIDTH_TOL * half)
        assert np.all(np.abs(np.array(curve["hi"]) - ref["hi"]) <= HALF_WIDTH_TOL * half)


def _fit(model, theta, pH, seed):
    runs = simulate_runs(model, theta, pH, sigma=0.04, form="both", rng=seed)
    obs, _ = build_observations(runs)
    return fit_model(obs, MODELS[model])


def test_one_parameter_and_declared_solutes_match_the_search():
    """A neutral analyte (one parameter: the interval's two ends) and an acid impurity with
    declared constants, through extract / wash / back-extract."""
    fit = _fit("neutral", [1.2], np.linspace(3, 9, 12), 5)
    analyte = Solute.fitted("N", fit)
    imp = Solute("I", MODELS["acid"], np.array([2.0, 4.5]), None, "declared for the test", 0.1)
    steps = [Step("extract", 3.0, (50.0,), (10.0, 10.0)), Step("wash", 8.0, (10.0,)),
             Step("back-extract", 8.0, (20.0,))]
    fast = predict_workup(analyte, [imp], steps).to_dict()
    slow = predict_workup(analyte, [imp], steps, fast=False).to_dict()
    assert _agree(fast, slow) >= 5
    # the one-parameter region's ends are the profile interval of log K
    pts = region_points(fit, 0.95)
    assert pts[:, 0] == pytest.approx(list(fit.parameters["logK"].ci95.to_list()), abs=1e-9)
    curve = separation_curve(analyte, imp, 3.0, 9.0)
    ref = separation_curve(analyte, imp, 3.0, 9.0, fast=False)
    assert curve["lo"] == pytest.approx(ref["lo"], abs=1e-5)


def test_boundary_range_is_the_profile_interval_and_refuses_an_inner_extreme():
    fit = _fit("base", [2.0, 8.0], np.linspace(6, 11, 11), 3)
    pts = region_points(fit, 0.95)
    lo, hi = boundary_range(fit.theta, pts, lambda th: th[:, 1])
    ci = fit.parameters["pKa"].ci95
    half = 0.5 * (ci.hi - ci.lo)
    assert abs(lo[0] - ci.lo) <= 1e-3 * half and abs(hi[0] - ci.hi) <= 1e-3 * half
    sol = Solute.fitted("B", fit)
    lo, hi = boundary_range(fit.theta, pts, lambda th: solute_log_d(sol, np.array([7.0]), th))
    ref = fit.log_d_interval(7.0).ci95
    assert lo[0] == pytest.approx(ref.lo, abs=1e-6) and hi[0] == pytest.approx(ref.hi, abs=1e-6)
    # a quantity greatest at the estimate (inside the region): the boundary would miss it
    assert boundary_range(fit.theta, pts,
                          lambda th: -np.sum((th - fit.theta) ** 2, axis=1)) is None
    # at another level the boundary is traced again, inside the 95 % one at a lower level
    inner = region_points(fit, 0.90)
    assert np.ptp(inner[:, 1]) < np.ptp(pts[:, 1])
