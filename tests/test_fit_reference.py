"""The fitting engine against general-purpose reference libraries on the same weighted problem.

References: lmfit (Minimizer.leastsq and conf_interval, whose F-test profile is the same
threshold as ours), scipy.optimize.curve_fit (absolute_sigma=False), statsmodels OLS on a case
where the model is linear.
"""

import dataclasses

import lmfit
import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import curve_fit

from extractval.analysis import build_observations
from extractval.fitting import fit_model
from extractval.models import MODELS
from extractval.simulate import simulate_runs
from tests.reference import handbook as ref

PH = [2.5, 3.5, 4.0, 4.5, 5.0, 6.0]


def _obs(form, seed=11, model="acid", theta=(ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID)):
    runs = simulate_runs(model, theta, PH, sigma=0.05, form=form, rng=seed)
    obs, _ = build_observations(runs)
    return obs


def _residual_fn(obs, model):
    def resid(theta):
        y, _ = obs.predict(model.log_d(obs.pH, theta))
        return (y - obs.y) / obs.sd_factor
    return resid


@pytest.mark.parametrize("form", ["both", "recovery", "aqueous"])
def test_same_optimum_and_standard_errors_as_lmfit(form):
    obs = _obs(form)
    model = MODELS["acid"]
    ours = fit_model(obs, model)
    resid = _residual_fn(obs, model)
    params = lmfit.Parameters()
    params.add("logK", value=1.0)
    params.add("pKa", value=5.0)
    mini = lmfit.Minimizer(lambda p: resid(np.array([p["logK"].value, p["pKa"].value])), params)
    res = mini.leastsq(xtol=1e-12, ftol=1e-12)
    # lmfit stops on its own tolerances along flat directions: agree to a thousandth of an SE,
    # and our minimum is at least as low as lmfit's
    assert np.sum(resid(ours.theta) ** 2) <= np.sum(res.residual ** 2) * (1 + 1e-12)
    for name in ("logK", "pKa"):
        se = res.params[name].stderr
        assert ours.parameters[name].value == pytest.approx(res.params[name].value, abs=1e-3 * se)
        assert ours.parameters[name].se == pytest.approx(se, rel=1e-3)
    # lmfit's conf_interval profiles each parameter with an F test (nfix = 1): same threshold
    ci = lmfit.conf_interval(mini, res, sigmas=[0.95])
    for name in ("logK", "pKa"):
        (_, lo), _, (_, hi) = ci[name]
        ours_ci = ours.parameters[name].ci95
        assert ours_ci.lo == pytest.approx(lo, abs=2e-3 * (hi - lo))
        assert ours_ci.hi == pytest.approx(hi, abs=2e-3 * (hi - lo))


def test_same_optimum_and_standard_errors_as_curve_fit():
    obs = _obs("organic", seed=5)
    model = MODELS["acid"]
    ours = fit_model(obs, model)
    code = np.arange(obs.n)

    def f(i, logK, pKa):
        i = i.astype(int)
        y, _ = obs.predict(model.log_d(obs.pH, np.array([logK, pKa])))
        return y[i]

    popt, pcov = curve_fit(f, code, obs.y, p0=[1.0, 5.0], sigma=obs.sd_factor,
                           absolute_sigma=False)
    assert ours.theta == pytest.approx(popt, abs=1e-6)
    assert np.sqrt(np.diag(ours.covariance)) == pytest.approx(np.sqrt(np.diag(pcov)), rel=1e-3)


def test_linear_case_matches_statsmodels_t_interval():
    # neutral model with log D measured in both phases is a constant-mean regression: the
    # profile-likelihood interval with the F(1, n-1) threshold must equal the exact t interval
    obs = _obs("both", seed=3, model="neutral", theta=(ref.LOGP_PHENOL,))
    ours = fit_model(obs, MODELS["neutral"])
    ols = sm.OLS(obs.y, np.ones((obs.n, 1))).fit()
    lo, hi = ols.conf_int(alpha=0.05)[0]
    est = ours.parameters["logK"]
    assert est.value == pytest.approx(ols.params[0], abs=1e-10)
    assert est.se == pytest.approx(ols.bse[0], rel=1e-8)
    assert est.ci95.lo == pytest.approx(lo, abs=1e-6)
    assert est.ci95.hi == pytest.approx(hi, abs=1e-6)
    # residual sd in log units -> relative sd of one amount (sqrt(2)/ln10 per log D)
    assert ours.residual_sd * np.sqrt(2) / np.log(10) == pytest.approx(np.sqrt(ols.scale), rel=1e-8)


def test_weighted_mixture_matches_statsmodels_wls():
    """Runs of two kinds carry different weights: log D runs (two amounts, f = sqrt(2)/ln 10)
    and organic-phase runs (one amount, f = 1/ln 10), so weighted and ordinary least squares
    differ. At the optimum, statsmodels WLS of the model linearised there (Jacobian by central
    differences, weights 1/f^2) must give our estimate and standard errors: the normal
    equations and the covariance s^2 (J' W J)^-1 of weighted nonlinear least squares."""
    theta = (ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID)
    both = simulate_runs("acid", theta, PH, ratios=(1.0,), sigma=0.05, form="both", rng=1)
    # small ratios keep the organic-phase runs away from 100 % extracted, where they carry
    # little weight on D
    one = simulate_runs("acid", theta, PH, ratios=(0.005, 0.05), sigma=0.05, form="organic",
                        rng=2)
    one = tuple(dataclasses.replace(r, run_id="O" + r.run_id) for r in one)
    obs, _ = build_observations(both + one)
    model = MODELS["acid"]
    ours = fit_model(obs, model)
    w = 1.0 / obs.sd_factor ** 2
    assert set(np.round(w / w.max(), 12)) == {0.5, 1.0}          # two kinds, two weights

    def f(theta):
        return obs.predict(model.log_d(obs.pH, np.asarray(theta, dtype=float)))[0]

    est = ours.theta
    h = 1e-6
    jac = np.column_stack([(f(est + h * e) - f(est - h * e)) / (2 * h) for e in np.eye(2)])
    y_lin = obs.y - f(est) + jac @ est
    wls = sm.WLS(y_lin, jac, weights=w).fit()
    se = np.sqrt(np.diag(ours.covariance))
    assert est == pytest.approx(wls.params, abs=1e-6 * se.min())
    assert se == pytest.approx(wls.bse, rel=1e-6)
    for i, name in enumerate(("logK", "pKa")):
        assert ours.parameters[name].se == pytest.approx(wls.bse[i], rel=1e-6)
    # the weights matter here: unweighted least squares of the same linearised model is
    # another estimate, so a fit that ignored them would fail the checks above
    ols = sm.OLS(y_lin, jac).fit()
    assert np.max(np.abs(ols.params - wls.params) / se) > 0.1
