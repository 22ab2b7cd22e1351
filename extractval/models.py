"""The D(pH) models as fit-ready objects: parameter names, log D, its Jacobian, start grid, bounds.

To add a model: write its log D in :mod:`extractval.chemistry` with a citation, then register a
:class:`LogDModel` in :data:`MODELS` with its analytic Jacobian (``tests/test_models.py`` checks
every registered Jacobian against numeric derivatives). If log D = logK + h(pH; rest), build it
with :func:`_simple` so predictions get profile-likelihood intervals.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from . import chemistry as chem

#: Search limits for log K (and log K of an ion pair). Wide on purpose: hitting them means the
#: data do not bound the parameter, which the fit reports as an open interval end.
LOGK_LIMITS = (-6.0, 12.0)
#: How far outside the measured pH range a pKa may be searched for.
PKA_MARGIN = 3.0


@dataclass(frozen=True)
class LogDModel:
    """A log D(pH) model with its Jacobian.

    For the simple models log D = logK + h(pH; rest); ``h`` is then given, which lets the fit
    profile log D itself at any pH (substituting logK = logD0 - h(pH0; rest)). Models without
    that form (ion pair) leave ``h`` as None and predictions fall back to the delta method.
    """

    name: str
    params: tuple[str, ...]                    # "logK" first
    log_d_fn: Callable[..., np.ndarray]        # log_d_fn(pH, *theta)
    jac_fn: Callable[..., np.ndarray]          # d log D / d theta, shape (n, p)
    start_grid: Callable[[np.ndarray], np.ndarray]   # pH -> candidate rest values (m, p - 1)
    description: str
    h: Callable[..., np.ndarray] | None = None  # h(pH, *rest) when log D = logK + h
    dh: Callable[..., np.ndarray] | None = None  # d h / d rest, shape (n, p - 1)
    ion_pair: bool = False
    h_dh: Callable[..., tuple] | None = None    # (h, dh) in one pass, sharing their terms

    @property
    def n_params(self) -> int:
        return len(self.params)

    def log_d(self, pH, theta) -> np.ndarray:
        return self.log_d_fn(np.asarray(pH, dtype=float), *theta)

    def jacobian(self, pH, theta) -> np.ndarray:
        """d log D / d theta, shape (n, p)."""
        return self.jac_fn(np.atleast_1d(np.asarray(pH, dtype=float)), *theta)

    def value_and_jacobian(self, pH: np.ndarray, theta) -> tuple[np.ndarray, np.ndarray]:
        """log D and d log D / d theta at a 1-d float array of pH (the fit's inner loop)."""
        if self.h_dh is None:
            return self.log_d_fn(pH, *theta), self.jac_fn(pH, *theta)
        logK, *rest = theta
        h, dh = self.h_dh(pH, *rest)
        jac = np.empty((pH.size, len(theta)))
        jac[:, 0] = 1.0
        jac[:, 1:] = dh
        return logK + h, jac

    def bounds(self, pH) -> tuple[np.ndarray, np.ndarray]:
        lo, hi = [LOGK_LIMITS[0]], [LOGK_LIMITS[1]]
        pH = np.asarray(pH)       # its min and max methods: np.min's wrappers spared
        for name in self.params[1:]:
            if name.startswith("pKa"):
                lo.append(float(pH.min()) - PKA_MARGIN)
                hi.append(float(pH.max()) + PKA_MARGIN)
            else:
                lo.append(LOGK_LIMITS[0])
                hi.append(LOGK_LIMITS[1])
        return np.array(lo), np.array(hi)


def _additive(h, dh):
    """log D and Jacobian functions for a model of the form log D = logK + h(pH; rest)."""

    def log_d_fn(pH, logK, *rest):
        return logK + h(pH, *rest)

    def jac_fn(pH, logK, *rest):
        out = np.empty((pH.size, 1 + len(rest)))
        out[:, 0] = 1.0
        out[:, 1:] = dh(pH, *rest)
        return out

    return log_d_fn, jac_fn


def _pka_grid(pH: np.ndarray, step: float = 0.25) -> np.ndarray:
    pH = np.asarray(pH)       # its min and max methods: np.min's wrappers spared
    return np.arange(pH.min() - PKA_MARGIN + 0.5, pH.max() + PKA_MARGIN - 0.5 + 1e-9, step)


def _h_neutral(pH):
    return np.zeros(np.shape(pH))


def _dh_neutral(pH):
    return np.zeros((np.size(pH), 0))


def _h_acid(pH, pKa):
    return -chem.log10_one_plus_pow10(np.asarray(pH, dtype=float) - pKa)


def _dh_acid(pH, pKa):
    return chem.fraction_of_pow10(np.atleast_1d(pH) - pKa)[:, None]


def _h_base(pH, pKa):
    return -chem.log10_one_plus_pow10(pKa - np.asarray(pH, dtype=float))


def _dh_base(pH, pKa):
    return -chem.fraction_of_pow10(pKa - np.atleast_1d(pH))[:, None]


def _h_ampholyte(pH, pKa1, pKa2):
    return chem.log_d_ampholyte(pH, 0.0, pKa1, pKa2)


def _h_dh_acid(pH, pKa):
    x = pH - pKa
    return -chem.log10_one_plus_pow10(x), chem.fraction_of_pow10(x)[:, None]


def _h_dh_base(pH, pKa):
    x = pKa - pH
    return -chem.log10_one_plus_pow10(x), -chem.fraction_of_pow10(x)[:, None]


def _h_dh_ampholyte(pH, pKa1, pKa2):
    # the terms of _h_ampholyte and _dh_ampholyte, computed once
    ln_a = (pKa1 - pH) * chem.LN10
    ln_b = (pH - pKa2) * chem.LN10
    ln_t = np.logaddexp.reduce(np.stack([np.zeros_like(pH), ln_a, ln_b]), axis=0)
    return 0.0 - ln_t / chem.LN10, np.column_stack([-np.exp(ln_a - ln_t), np.exp(ln_b - ln_t)])


def _dh_ampholyte(pH, pKa1, pKa2):
    pH = np.atleast_1d(np.asarray(pH, dtype=float))
    ln_a = (pKa1 - pH) * chem.LN10
    ln_b = (pH - pKa2) * chem.LN10
    ln_t = np.logaddexp.reduce(np.stack([np.zeros_like(pH), ln_a, ln_b]), axis=0)
    return np.column_stack([-np.exp(ln_a - ln_t), np.exp(ln_b - ln_t)])


def _grid_ampholyte(pH):
    g = _pka_grid(pH, 0.5)
    a, b = np.meshgrid(g, g, indexing="ij")
    keep = b > a + 0.5
    return np.column_stack([a[keep], b[keep]])


def _ion_pair(sign: int):
    # log D = log10(10^logK + 10^(logK_ion + x)) - log10(1 + 10^x), x = sign (pH - pKa)
    def log_d_fn(pH, logK, pKa, logK_ion):
        return chem.log_d_ion_pair(pH, logK, pKa, logK_ion, sign)

    def jac_fn(pH, logK, pKa, logK_ion):
        x = sign * (pH - pKa)
        w = chem.fraction_of_pow10(logK - logK_ion - x)   # share of D carried by the neutral form
        return np.column_stack([w, -sign * ((1.0 - w) - chem.fraction_of_pow10(x)), 1.0 - w])

    return log_d_fn, jac_fn


def _grid_ion_pair(pH):
    g = _pka_grid(pH, 0.5)
    d = np.arange(-6.0, 0.01, 0.5)          # logK_ion - logK: the fit adds logK to column 1
    a, b = np.meshgrid(g, d, indexing="ij")
    return np.column_stack([a.ravel(), b.ravel()])


def _simple(name, params, h, dh, grid, description, h_dh=None):
    log_d_fn, jac_fn = _additive(h, dh)
    return LogDModel(name, params, log_d_fn, jac_fn, grid, description, h=h, dh=dh, h_dh=h_dh)


MODELS: dict[str, LogDModel] = {
    "neutral": _simple("neutral", ("logK",), _h_neutral, _dh_neutral,
                       lambda pH: np.zeros((1, 0)),
                       "D = K (IUPAC Gold Book D01817)"),
    "acid": _simple("acid", ("logK", "pKa"), _h_acid, _dh_acid,
                    lambda pH: _pka_grid(pH)[:, None],
                    "D = K / (1 + 10^(pH - pKa)) (monoprotic acid)", _h_dh_acid),
    "base": _simple("base", ("logK", "pKa"), _h_base, _dh_base,
                    lambda pH: _pka_grid(pH)[:, None],
                    "D = K / (1 + 10^(pKa - pH)) (monoprotic base, pKa of BH+)", _h_dh_base),
    "ampholyte": _simple("ampholyte", ("logK", "pKa1", "pKa2"), _h_ampholyte, _dh_ampholyte,
                         _grid_ampholyte,
                         "D = K / (1 + 10^(pKa1 - pH) + 10^(pH - pKa2)) (ampholyte)",
                         _h_dh_ampholyte),
    "acid+ion_pair": LogDModel("acid+ion_pair", ("logK", "pKa", "logK_ion"), *_ion_pair(+1),
                               _grid_ion_pair,
                               "D = (K_N + K_I 10^(pH - pKa)) / (1 + 10^(pH - pKa)) "
                               "(acid with ion-pair partitioning; Avdeef 2012, ch. 4)",
                               ion_pair=True),
    "base+ion_pair": LogDModel("base+ion_pair", ("logK", "pKa", "logK_ion"), *_ion_pair(-1),
                               _grid_ion_pair,
                               "D = (K_N + K_I 10^(pKa - pH)) / (1 + 10^(pKa - pH)) "
                               "(base with ion-pair partitioning; Avdeef 2012, ch. 4)",
                               ion_pair=True),
}


def get_model(name: str, ion_pair: bool = False) -> LogDModel:
    key = f"{name}+ion_pair" if ion_pair else name
    if key not in MODELS:
        raise KeyError(f"no model {key!r}; known: {', '.join(MODELS)}")
    return MODELS[key]
