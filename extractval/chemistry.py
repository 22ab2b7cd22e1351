"""Published relations of liquid-liquid extraction: D(pH) for each model, q, q^n, split limit.

Pure numpy, no I/O. Every function names the relation it implements and cites it.

Conventions
-----------
* ``D`` is the *distribution ratio*: total analytical concentration in the organic phase over
  that in the aqueous phase, all species counted (IUPAC Gold Book, "distribution ratio",
  doi:10.1351/goldbook.D01817).
* ``K`` is the *partition ratio* of one defined species, here the neutral form (IUPAC Gold Book,
  "partition ratio", doi:10.1351/goldbook.P04440). ``logK`` is its base-10 logarithm.
* pKa of a base is that of its conjugate acid BH+.
* Volumes in mL; any one unit works as long as it is the same for both phases.

References
----------
.. [1] IUPAC Compendium of Chemical Terminology (the "Gold Book"): distribution ratio
       (D01817), partition ratio (P04440), fraction extracted (F02503).
.. [2] OECD Test Guideline 107, Partition Coefficient (n-octanol/water): Shake Flask Method
       (1995).
.. [3] A. Avdeef, Absorption and Drug Development, 2nd ed., Wiley 2012, ch. 4 (log D of
       ionisable compounds, ion-pair partitioning).
"""

from __future__ import annotations

import numpy as np

LN10 = np.log(10.0)
#: the factor of fraction_of_pow10's tanh, made once (0.5 * LN10 * x is this times x)
_HALF_LN10 = 0.5 * LN10


def log10_one_plus_pow10(x):
    r"""Stable :math:`\log_{10}(1 + 10^{x})` for any real ``x`` (no overflow).

    >>> float(log10_one_plus_pow10(0.0))
    0.30103
    >>> float(log10_one_plus_pow10(400.0))
    400.0
    """
    x = np.asarray(x, dtype=float)
    return np.logaddexp(0.0, x * LN10) / LN10


def fraction_of_pow10(x):
    r""":math:`10^x / (1 + 10^x)`, the derivative of :func:`log10_one_plus_pow10`, stably.

    >>> float(fraction_of_pow10(0.0))
    0.5
    """
    x = np.asarray(x, dtype=float)
    return 0.5 * (1.0 + np.tanh(_HALF_LN10 * x))


def log_d_neutral(pH, logK):
    r"""log D of a non-ionisable analyte: :math:`D = K` [1]_.

    Parameters
    ----------
    pH : array_like
        Equilibrium pH of the aqueous phase, [-]; ignored.
    logK : float
        log10 of the partition ratio of the neutral form, [-].

    >>> float(log_d_neutral(7.0, 1.48))
    1.48
    """
    return np.full(np.shape(pH), float(logK)) if np.ndim(pH) else np.float64(logK)


def log_d_acid(pH, logK, pKa):
    r"""log D of a monoprotic acid HA whose neutral form alone partitions [1]_ [3]_.

    .. math:: D = \frac{K}{1 + 10^{\mathrm{pH} - \mathrm{p}K_a}}

    Parameters
    ----------
    pH : array_like
        Equilibrium pH of the aqueous phase, [-].
    logK : float
        log10 partition ratio of HA, [-].
    pKa : float
        Acid dissociation constant of HA, [-].

    At pH = pKa half the acid is ionised, so log D = log K - log10(2):

    >>> round(float(log_d_acid(4.21, 1.88, 4.21)), 4)
    1.579
    """
    return logK - log10_one_plus_pow10(np.asarray(pH, dtype=float) - pKa)


def log_d_base(pH, logK, pKa):
    r"""log D of a monoprotic base B (pKa of BH+) whose neutral form alone partitions [1]_ [3]_.

    .. math:: D = \frac{K}{1 + 10^{\mathrm{p}K_a - \mathrm{pH}}}

    >>> round(float(log_d_base(4.60, 0.90, 4.60)), 4)
    0.599
    """
    return logK - log10_one_plus_pow10(pKa - np.asarray(pH, dtype=float))


def log_d_ampholyte(pH, logK, pKa1, pKa2):
    r"""log D of an ordinary ampholyte (cation, neutral, anion); the neutral form partitions [3]_.

    .. math::
        D = \frac{K}{1 + 10^{\mathrm{p}K_{a1} - \mathrm{pH}}
                     + 10^{\mathrm{pH} - \mathrm{p}K_{a2}}}

    ``pKa1`` belongs to the cation (e.g. ammonium), ``pKa2`` to the neutral form (e.g. phenol).

    >>> round(float(log_d_ampholyte(7.0, 2.0, 4.0, 10.0)), 4)
    1.9991
    """
    pH = np.asarray(pH, dtype=float)
    terms = np.stack(np.broadcast_arrays(np.zeros_like(pH), (pKa1 - pH) * LN10, (pH - pKa2) * LN10))
    return logK - np.logaddexp.reduce(terms, axis=0) / LN10


def log_d_ion_pair(pH, logK, pKa, logK_ion, charge_sign):
    r"""log D when the ionised form also partitions, as an ion pair [3]_ (ch. 4).

    .. math:: D = \frac{K_N + K_I\,10^{x}}{1 + 10^{x}},\quad x = \pm(\mathrm{pH} - \mathrm{p}K_a)

    with ``charge_sign = +1`` for an acid (x = pH - pKa) and ``-1`` for a base
    (x = pKa - pH). ``logK_ion`` is log10 of the ion-pair partition ratio K_I.

    Far on the ionised side D tends to K_I; with K_I -> 0 this is :func:`log_d_acid`:

    >>> round(float(log_d_ion_pair(12.0, 1.88, 4.21, -1.5, +1)), 3)
    -1.5
    """
    x = charge_sign * (np.asarray(pH, dtype=float) - pKa)
    num = np.logaddexp(logK * LN10, (logK_ion + x) * LN10) / LN10
    return num - log10_one_plus_pow10(x)


def remaining_fraction_single(D, aqueous_mL, organic_mL):
    r"""Fraction of the analyte left in the water after one equilibration [1]_.

    .. math:: q = \frac{V_{aq}}{V_{aq} + D\,V_{org}}

    Parameters
    ----------
    D : array_like
        Distribution ratio, [-].
    aqueous_mL, organic_mL : array_like
        Phase volumes, [mL].

    >>> remaining_fraction_single(2.0, 100.0, 50.0)
    0.5
    """
    out = aqueous_mL / (aqueous_mL + np.asarray(D, dtype=float) * organic_mL)
    return float(out) if np.ndim(out) == 0 else out


def remaining_fraction(D, aqueous_mL, organic_portions_mL):
    r"""Fraction left in the water after successive extractions with fresh portions [1]_.

    .. math:: q_n = \prod_i \frac{V_{aq}}{V_{aq} + D\,V_{org,i}}

    ``D`` may be an array; the portions run along the last axis of the result's computation.

    Worked check: D = 2, 100 mL water, four 50 mL portions leave 0.5, 0.25, 0.125, 0.0625:

    >>> [remaining_fraction(2.0, 100.0, [50.0] * n) for n in (1, 2, 3, 4)]
    [0.5, 0.25, 0.125, 0.0625]
    """
    D = np.asarray(D, dtype=float)
    portions = np.asarray(organic_portions_mL, dtype=float)
    # log form keeps very large D (q -> 0) finite and exact to machine precision
    # (np.add.reduce: the call np.sum makes on an ndarray, without its Python wrappers)
    log_q = -np.add.reduce(np.log1p(D[..., None] * portions / aqueous_mL), axis=-1)
    out = np.exp(log_q)
    return float(out) if out.ndim == 0 else out


def fraction_extracted_equal_portions(D, volume_ratio, n):
    r"""IUPAC "fraction extracted" after ``n`` equal portions at phase ratio r = V_org/V_aq [1]_.

    .. math:: E_n = 1 - (r D + 1)^{-n}

    >>> fraction_extracted_equal_portions(2.0, 0.5, 4)
    0.9375
    """
    out = 1.0 - (volume_ratio * np.asarray(D, dtype=float) + 1.0) ** (-n)
    return float(out) if np.ndim(out) == 0 else out


def split_limit_remaining(D, aqueous_mL, total_organic_mL):
    r"""Limit of the remaining fraction when a fixed solvent volume is split ever finer.

    .. math:: \lim_{n\to\infty}\left(1 + \frac{D V_{tot}}{n V_{aq}}\right)^{-n}
              = \exp\!\left(-\frac{D V_{tot}}{V_{aq}}\right)

    No split of the same total volume leaves less than this.

    >>> round(split_limit_remaining(2.0, 100.0, 150.0), 4)
    0.0498
    """
    out = np.exp(-np.asarray(D, dtype=float) * total_organic_mL / aqueous_mL)
    return float(out) if np.ndim(out) == 0 else out
