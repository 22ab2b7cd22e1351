"""The fitting engine against general-purpose reference libraries on the same weighted problem.

References: lmfit (Minimizer.leastsq and conf_interval, whose F-test profile is the same
threshold as ours), scipy.optimize.curve_fit (absolute_sigma=False), statsmodels OLS on a case
where the model is linear.
"""

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
    # log D (two amounts) and one-phase runs deep in the extracted regime where log E ~ 0 and
    # log q ~ -(log D + log r): with the aqueous-only runs and log D runs of a neutral compound,
    # log q + log r = -log D - log10(1 + 1/(rD)) is nearly linear; use log D runs with two
    # different weights instead: duplicate the design as two sub-studies measured differently
    runs_d = simulate_runs("neutral", (2.0,), [7.0], ratios=(1.0,), replicates=8, sigma=0.05,
                           form="both", rng=1)
    obs, _ = build_observations(runs_d)
    ours = fit_model(obs, MODELS["neutral"])
    w = 1.0 / obs.sd_factor ** 2
    wls = sm.WLS(obs.y, np.ones((obs.n, 1)), weights=w).fit()
    assert ours.parameters["logK"].value == pytest.approx(wls.params[0], abs=1e-10)
    assert ours.parameters["logK"].se == pytest.approx(wls.bse[0], rel=1e-8)
