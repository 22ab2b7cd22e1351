"""The published relations of extraction, checked against worked numbers."""

import math

import numpy as np
import pytest

from extractval import chemistry as chem
from tests.reference import handbook as ref


def test_worked_successive_portions():
    # this project's own arithmetic of the Gold Book F02503 formula, not a published example
    # (tests/reference/handbook.py)
    for n, expected in enumerate(ref.WORKED_REMAINING, start=1):
        q = chem.remaining_fraction(ref.WORKED_D, ref.WORKED_V_AQ, [ref.WORKED_V_ORG] * n)
        assert q == pytest.approx(expected, rel=1e-12)


def test_gold_book_fraction_extracted_matches_product_of_q():
    # IUPAC Gold Book F02503: E_n = 1 - (rD + 1)^-n (from memory)
    r = ref.WORKED_V_ORG / ref.WORKED_V_AQ
    for n in range(1, 6):
        e = chem.fraction_extracted_equal_portions(ref.WORKED_D, r, n)
        q = chem.remaining_fraction(ref.WORKED_D, ref.WORKED_V_AQ, [ref.WORKED_V_ORG] * n)
        assert e == pytest.approx(1 - q, rel=1e-12)


def test_ten_way_split_and_split_limit():
    q10 = chem.remaining_fraction(ref.WORKED_D, ref.WORKED_V_AQ, [15.0] * 10)
    assert round(q10, 4) == ref.WORKED_TEN_WAY_REMAINING
    limit = chem.split_limit_remaining(ref.WORKED_D, ref.WORKED_V_AQ, 150.0)
    assert round(limit, 4) == ref.WORKED_SPLIT_LIMIT
    assert limit == pytest.approx(math.exp(-3.0), rel=1e-12)


def test_split_approaches_limit_from_above():
    # the limit is the infimum: more portions of the same total always leave more than it
    limit = chem.split_limit_remaining(3.0, 40.0, 30.0)
    previous = 1.0
    for n in (1, 2, 5, 20, 200, 5000):
        q = chem.remaining_fraction(3.0, 40.0, [30.0 / n] * n)
        assert limit < q < previous
        previous = q
    assert q == pytest.approx(limit, rel=1e-3)


def test_single_equilibration_definition():
    # q = V_aq / (V_aq + D V_org), from D = c_org / c_aq (IUPAC Gold Book D01817, from memory)
    assert chem.remaining_fraction_single(2.0, 100.0, 50.0) == 0.5
    assert chem.remaining_fraction_single(0.0, 10.0, 10.0) == 1.0


@pytest.mark.parametrize("fn, pKa", [(chem.log_d_acid, ref.PKA_BENZOIC_ACID),
                                     (chem.log_d_base, ref.PKA_ANILINIUM)])
def test_half_ionised_at_pKa(fn, pKa):
    # at pH = pKa the neutral fraction is 1/2, so log D = log K - log10(2) (Henderson-Hasselbalch)
    assert fn(pKa, 1.88, pKa) == pytest.approx(1.88 - math.log10(2.0), abs=1e-12)


def test_acid_and_base_limits():
    # far on the neutral side D -> K; one pH unit into the ionised side per decade, slope 1
    # (Avdeef 2012, ch. 4, from memory)
    assert chem.log_d_acid(0.0, ref.LOGP_BENZOIC_ACID, ref.PKA_BENZOIC_ACID) == pytest.approx(
        ref.LOGP_BENZOIC_ACID, abs=1e-4)
    slope = chem.log_d_acid(11.0, 1.88, 4.21) - chem.log_d_acid(10.0, 1.88, 4.21)
    assert slope == pytest.approx(-1.0, abs=1e-6)
    slope = chem.log_d_base(1.0, 0.90, 4.601) - chem.log_d_base(0.0, 0.90, 4.601)
    assert slope == pytest.approx(1.0, abs=1e-3)


def test_ampholyte_reduces_to_base_and_acid():
    pH = np.linspace(0, 14, 29)
    amph = chem.log_d_ampholyte(pH, 1.0, 3.0, 40.0)   # pKa2 unreachable: a base
    assert np.allclose(amph, chem.log_d_base(pH, 1.0, 3.0))
    amph = chem.log_d_ampholyte(pH, 1.0, -30.0, 9.0)  # pKa1 unreachable: an acid
    assert np.allclose(amph, chem.log_d_acid(pH, 1.0, 9.0))


def test_ion_pair_reduces_to_simple_model_without_ion_partitioning():
    pH = np.linspace(0, 14, 15)
    assert np.allclose(chem.log_d_ion_pair(pH, 1.88, 4.21, -40.0, +1),
                       chem.log_d_acid(pH, 1.88, 4.21))
    assert np.allclose(chem.log_d_ion_pair(pH, 0.9, 4.6, -40.0, -1),
                       chem.log_d_base(pH, 0.9, 4.6))


def test_extreme_d_stays_finite():
    q = chem.remaining_fraction(1e300, 10.0, [10.0, 10.0])
    assert q == 0.0 or q < 1e-300
    assert chem.log10_one_plus_pow10(1000.0) == pytest.approx(1000.0)
