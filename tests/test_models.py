"""Every registered model: analytic Jacobian equals the numeric one (STYLE.md habit)."""

import numpy as np
import pytest

from extractval.models import MODELS

THETA = {"neutral": [1.5], "acid": [1.88, 4.21], "base": [0.9, 4.6],
         "ampholyte": [2.0, 3.5, 9.5], "acid+ion_pair": [1.88, 4.21, -1.2],
         "base+ion_pair": [2.6, 8.3, -0.4]}


@pytest.mark.parametrize("name", sorted(MODELS))
def test_jacobian_matches_central_differences(name):
    model = MODELS[name]
    theta = np.array(THETA[name])
    pH = np.linspace(0.5, 13.5, 27)
    J = model.jacobian(pH, theta)
    eps = 1e-6
    for k in range(model.n_params):
        d = np.zeros_like(theta)
        d[k] = eps
        numeric = (model.log_d(pH, theta + d) - model.log_d(pH, theta - d)) / (2 * eps)
        assert np.allclose(J[:, k], numeric, atol=1e-7), (name, model.params[k])


@pytest.mark.parametrize("name", [n for n in sorted(MODELS) if MODELS[n].h is not None])
def test_additive_form_matches_log_d(name):
    model = MODELS[name]
    theta = np.array(THETA[name])
    pH = np.linspace(1, 13, 13)
    assert np.allclose(model.log_d(pH, theta), theta[0] + model.h(pH, *theta[1:]))
    dh = model.dh(pH, *theta[1:])
    assert np.allclose(dh, model.jacobian(pH, theta)[:, 1:])


@pytest.mark.parametrize("name", [n for n in sorted(MODELS) if MODELS[n].h_dh is not None])
def test_one_pass_h_and_dh_equal_the_separate_ones(name):
    # the fit's inner loop uses the one-pass form; the profile and the reports use h and dh
    model = MODELS[name]
    theta = np.array(THETA[name])
    pH = np.linspace(0.5, 13.5, 27)
    h, dh = model.h_dh(pH, *theta[1:])
    assert np.array_equal(h, model.h(pH, *theta[1:]))
    assert np.array_equal(dh, model.dh(pH, *theta[1:]))
    value, jac = model.value_and_jacobian(pH, theta)
    assert np.array_equal(value, model.log_d(pH, theta))
    assert np.array_equal(jac, model.jacobian(pH, theta))
