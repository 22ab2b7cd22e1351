"""Log D intervals from the traced boundary of the joint region, against the profile at each pH.

The profile interval of a quantity g(theta) with the F(1, n - p) threshold is the range of g
over {theta : S(theta) <= S_crit} (Bates & Watts, Nonlinear Regression Analysis and Its
Applications, Wiley 1988, ch. 6: the profile t statistic), so the boundary traced once must give
the same ends as profiling log D pH by pH. References: lmfit's conf_interval (an F-test profile
with the same threshold) on log D re-parametrised at one pH; this package's pH-by-pH profile
(`FitResult.profile_log_d_interval`, itself checked against lmfit in test_fit_reference.py) on
the demo studies and on simulated ones.
"""

from pathlib import Path

import lmfit
import numpy as np
import pytest
from scipy import stats

from extractval.analysis import build_observations, fit_study
from extractval.fitting import INTERVAL_METHOD, _batch_ss, fit_model
from extractval.models import MODELS
from extractval.procedures import log_d_band
from extractval.simulate import simulate_runs, simulated_study
from extractval.study import Procedure, Targets, load_study
from tests.reference import handbook as ref

ROOT = Path(__file__).resolve().parent.parent
PH = [2.5, 3.5, 4.2, 5.0, 6.0]
BENZOIC = (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID)
#: stated agreement of a traced end with the profiled one, as a share of the interval's
#: half-width: the profile's own ends are exact to ~1e-6 of their distance from the estimate
#: (DEVELOPERS.md), and the trace's parabola leaves ~1e-8; 7e-7 was the largest seen
REL_TOL = 1e-5
PROCS = (Procedure("P1", "three portions", 3.0, 25.0, (10.0, 10.0, 10.0)),
         Procedure("P2", "one portion", 4.5, 25.0, (20.0,)))


def simulated(i: int):
    """Studies of both simple models in every measured form, truth and design varied by i."""
    rng = np.random.default_rng([2026, i])
    model = ("acid", "base")[i % 2]
    form = ("both", "organic", "aqueous", "recovery")[(i // 2) % 4]
    log_k, pka = rng.uniform(1.0, 3.5), rng.uniform(4.0, 9.0)
    pH = [round(pka + d, 2) for d in (-2.0, -1.0, 0.0, 1.0, 2.0)]
    ratios = (0.5, 1.0, 2.0) if form == "both" else tuple(
        float(f"{r * 10 ** -log_k:.3g}") for r in (0.5, 1.0, 2.0))
    procs = (Procedure("P1", "three portions", round(pka, 1), 25.0, (10.0, 10.0, 10.0)),)
    return simulated_study(f"SIM-{i:02d}", model, (log_k, pka), pH, procs,
                           targets=Targets(recovery_pct=95), sigma=rng.uniform(0.02, 0.06),
                           form=form, ratios=ratios, rng=rng)


def assert_band_matches_profile(fit):
    assert fit.boundary is not None, "the trace was not used: this check would be vacuous"
    for x in log_d_band(fit).pH:
        traced, profiled = fit.log_d_interval(float(x)), fit.profile_log_d_interval(float(x))
        assert traced.ci95.method == profiled.ci95.method == INTERVAL_METHOD
        assert traced.value == profiled.value
        half = 0.5 * (profiled.ci95.hi - profiled.ci95.lo)
        assert traced.ci95.lo == pytest.approx(profiled.ci95.lo, abs=REL_TOL * half), x
        assert traced.ci95.hi == pytest.approx(profiled.ci95.hi, abs=REL_TOL * half), x


@pytest.mark.parametrize("name", ["HPA-2026-014", "HPA-2026-015"])
def test_demo_study_band_matches_the_pH_by_pH_profile(name):
    report = fit_study(load_study(ROOT / "studies" / name))
    assert_band_matches_profile(report.fit)


@pytest.mark.parametrize("i", range(16))
def test_simulated_band_matches_the_pH_by_pH_profile(i):
    assert_band_matches_profile(fit_study(simulated(i)).fit)


def test_procedure_recoveries_match_the_profile():
    study = simulated_study("BZ", "acid", BENZOIC, PH, PROCS, sigma=0.05, form="both", rng=3)
    report = fit_study(study)
    fit = report.fit
    assert fit.boundary is not None
    for pred in report.predictions:
        profiled = fit.profile_log_d_interval(pred.procedure.pH)
        half = 0.5 * (profiled.ci95.hi - profiled.ci95.lo)
        assert pred.log_d.ci95.lo == pytest.approx(profiled.ci95.lo, abs=REL_TOL * half)
        assert pred.log_d.ci95.hi == pytest.approx(profiled.ci95.hi, abs=REL_TOL * half)
        # and the lower end alone (what worst case and pH window use) is the same number
        assert fit.log_d_lower(pred.procedure.pH + 0.013) == pytest.approx(
            fit.profile_log_d_interval(pred.procedure.pH + 0.013).ci95.lo, abs=REL_TOL * half)


@pytest.mark.parametrize("form, pH0", [("both", 3.0), ("both", 5.5), ("recovery", 4.2)])
def test_traced_log_d_interval_matches_lmfit_profile(form, pH0):
    ratios = (0.5, 1.0, 2.0) if form == "both" else (0.05, 0.1, 0.2)
    obs, _ = build_observations(simulate_runs("acid", BENZOIC, PH, ratios, sigma=0.05,
                                              form=form, rng=11))
    model = MODELS["acid"]
    ours = fit_model(obs, model)
    assert ours.boundary is not None
    est = ours.log_d_interval(pH0)

    def theta_of(p):      # log D at pH0 as the parameter in place of log K
        pka = p["pKa"].value
        return np.array([p["logD0"].value - float(model.h(np.array([pH0]), pka)[0]), pka])

    def resid(p):
        y, _ = obs.predict(model.log_d(obs.pH, theta_of(p)))
        return (y - obs.y) / obs.sd_factor

    params = lmfit.Parameters()
    params.add("logD0", value=est.value + 0.1)
    params.add("pKa", value=ours.theta[1] - 0.1)
    mini = lmfit.Minimizer(resid, params)
    res = mini.leastsq(xtol=1e-12, ftol=1e-12)
    ci = lmfit.conf_interval(mini, res, sigmas=[0.95])
    (_, lo), _, (_, hi) = ci["logD0"]
    # lmfit's own search stops at ~1e-3 of the width (test_fit_reference.py uses the same)
    assert est.ci95.lo == pytest.approx(lo, abs=2e-3 * (hi - lo))
    assert est.ci95.hi == pytest.approx(hi, abs=2e-3 * (hi - lo))


def test_boundary_points_lie_on_the_profile_threshold():
    obs, _ = build_observations(simulate_runs("acid", BENZOIC, PH, sigma=0.05, rng=5))
    fit = fit_model(obs, MODELS["acid"])
    # the F(1, n - p) threshold, from scipy's F quantile rather than the package's own
    s_crit = fit.rss * (1 + stats.f.ppf(0.95, 1, fit.n - 2) / (fit.n - 2))
    # on the rays, S is S_crit to the root's precision; between them (the interpolated
    # radius) to ~1e-8 of S_crit - S_min
    for points, rel in ((fit.boundary.rays, 1e-9), (fit.boundary.points, 1e-7)):
        s = _batch_ss(fit, points)
        assert s - fit.rss == pytest.approx(np.full(len(s), s_crit - fit.rss), rel=rel)


def test_regions_that_cannot_be_traced_are_profiled():
    # three parameters: not traced, every pH profiled as before
    amph = fit_study(simulated_study("AMPH", "ampholyte", (2.0, 4.0, 8.5),
                                     [3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0], rng=1)).fit
    assert amph.boundary is None
    assert amph.log_d_interval(6.0).ci95.method == INTERVAL_METHOD
    # an acid measured only far below its pKa: pKa is not bounded above, the region is open
    acid = fit_study(simulated_study("LOW", "acid", (2.0, 8.0), [2.0, 2.5, 3.0],
                                     form="both", rng=2)).fit
    assert acid.parameters["pKa"].ci95.hi is None or acid.parameters["pKa"].at_bound
    assert acid.boundary is None
    est = acid.log_d_interval(9.0)
    ref_est = acid.profile_log_d_interval(9.0)
    assert (est.ci95.lo, est.ci95.hi) == (ref_est.ci95.lo, ref_est.ci95.hi)
