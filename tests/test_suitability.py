"""System suitability: pharmacopoeial formulas against a worked check and a Gaussian peak,
default limits, sequence verdicts, and located errors for malformed suitability tables."""

from __future__ import annotations

import numpy as np
import pytest

from extractval import suitability as su
from extractval.tables import Location
from tests.reference import chromatography as ref

LOC = Location("suitability.csv", line=2)


def test_factors_are_the_pharmacopoeial_ones():
    # USP <621> / Ph. Eur. 2.2.46, from memory (tests/reference/chromatography.py)
    assert su.RS_HALF_HEIGHT_FACTOR == ref.RS_HALF_HEIGHT_FACTOR
    assert su.N_HALF_HEIGHT_FACTOR == ref.N_HALF_HEIGHT_FACTOR
    assert su.N_BASE_FACTOR == ref.N_BASE_FACTOR


def test_worked_check():
    # worked by hand from the published formulas (tests/reference/chromatography.py)
    q = su.Injection("S1", LOC, **ref.WORKED).quantities()
    assert round(q["retention_factor"], 2) == ref.WORKED_K
    assert round(q["retention_factor_neighbour"], 2) == ref.WORKED_K_NEIGHBOUR
    assert round(q["selectivity"], 4) == ref.WORKED_ALPHA
    assert round(q["resolution"], 4) == ref.WORKED_RS_BASE          # base widths preferred
    assert q["resolution_method"] == "base widths"
    assert round(q["plate_number"], 1) == ref.WORKED_N_HALF
    assert q["tailing_factor"] == pytest.approx(ref.WORKED_TAILING, abs=5e-4)
    half = dict(ref.WORKED, width_base=None, width_base_neighbour=None)
    q = su.Injection("S1", LOC, **half).quantities()
    assert round(q["resolution"], 4) == ref.WORKED_RS_HALF
    assert q["resolution_method"] == "half-height widths"


def _measured_half_width(t, y):
    """Width at half height of a sampled peak, by linear interpolation of both flanks."""
    half = y.max() / 2
    above = np.nonzero(y >= half)[0]
    i, j = above[0], above[-1]
    left = np.interp(half, [y[i - 1], y[i]], [t[i - 1], t[i]])
    right = np.interp(half, [y[j + 1], y[j]], [t[j + 1], t[j]])
    return right - left


def test_gaussian_peaks_agree_with_plate_theory():
    # a Gaussian peak (plate theory, from memory): w0.5 = 2.3548 sigma, Wb = 4 sigma,
    # N = (tR / sigma)^2, T = 1
    sigma, t1, t2 = 0.04, 5.0, 5.3
    t = np.linspace(4.0, 6.5, 250001)
    w_half = _measured_half_width(t, np.exp(-0.5 * ((t - t1) / sigma) ** 2))
    assert w_half / sigma == pytest.approx(ref.GAUSS_HALF_WIDTH_PER_SIGMA, abs=1e-4)
    n = su.plate_number_half_height(t1, w_half)
    assert n == pytest.approx((t1 / sigma) ** 2, rel=2e-3)       # 5.54 is 8 ln 2 rounded
    base = ref.GAUSS_BASE_WIDTH_PER_SIGMA * sigma
    assert su.plate_number_base(t1, base) == pytest.approx((t1 / sigma) ** 2, rel=1e-12)
    rs_base = su.resolution_base(t1, t2, base, base)
    rs_half = su.resolution_half_height(t1, t2, w_half, w_half)
    assert rs_half == pytest.approx(rs_base, rel=3e-3)
    # symmetric peak: W0.05 is twice its front half
    w5 = 2 * sigma * np.sqrt(2 * np.log(20))
    assert su.tailing_factor(w5, w5 / 2) == 1.0


def _inj(seq, response=None, **kw):
    base = dict(tR=6.2, tR_neighbour=5.4, tM=1.0, width_half=0.19, width_half_neighbour=0.17,
                width_5pct=0.44, front_5pct=0.16)
    base.update(kw)
    return su.Injection(seq, LOC, response=response, **base)


def test_default_limits_are_common_practice():
    lim = su.SuitabilityLimits()
    assert (lim.resolution_min, lim.tailing_max, lim.injection_rsd_max_pct,
            lim.injections_min) == (ref.DEFAULT_RS_MIN, ref.DEFAULT_TAILING_MAX,
                                    ref.DEFAULT_INJECTION_RSD_MAX_PCT,
                                    ref.DEFAULT_INJECTIONS_MIN)
    assert lim.to_dict()["resolution_min"]["source"] == "default (common practice)"


def test_sequence_passes_and_fails_on_its_worst_injection():
    responses = [1000.0, 1004.0, 998.0, 1001.0, 997.0]
    good = [_inj("S1", r) for r in responses]
    rep = su.judge_sequence("S1", good, su.SuitabilityLimits())
    assert rep.status == "pass"
    assert rep.injection_rsd_pct == pytest.approx(100 * np.std(responses, ddof=1)
                                                  / np.mean(responses))
    # one chromatogram with a close neighbour: Rs = 1.18 * 0.3 / 0.36 = 0.983 fails
    bad = good[:4] + [_inj("S1", 999.0, tR_neighbour=5.9)]
    rep = su.judge_sequence("S1", bad, su.SuitabilityLimits())
    assert rep.status == "fail"
    v = {x.criterion: x for x in rep.verdicts}["suitability_resolution_min"]
    assert v.status == "fail" and v.value == pytest.approx(1.18 * 0.3 / 0.36)
    assert rep.mean["resolution"] > rep.worst["resolution"]


def test_injection_rsd_and_count():
    lim = su.SuitabilityLimits()
    spread = [_inj("S2", r) for r in (1000, 1050, 960, 1020, 990)]   # RSD 3.3 %
    rep = su.judge_sequence("S2", spread, lim)
    v = {x.criterion: x for x in rep.verdicts}["suitability_injection_rsd_max_pct"]
    assert v.status == "fail" and v.value == pytest.approx(su.rsd_pct([1000, 1050, 960, 1020,
                                                                      990]))
    few = [_inj("S3", r) for r in (1000, 1001, 999)]
    v = {x.criterion: x for x in su.judge_sequence("S3", few, lim).verdicts}[
        "suitability_injection_rsd_max_pct"]
    assert v.status == "fail" and "at least 5" in v.detail
    none = [_inj("S4")]
    v = {x.criterion: x for x in su.judge_sequence("S4", none, lim).verdicts}[
        "suitability_injection_rsd_max_pct"]
    assert v.status == "not judged"          # "not assessed" is read as "not judged"


def test_study_limits_replace_the_defaults():
    lim = su.SuitabilityLimits(resolution_min=3.0, plates_min=8000, from_study=("resolution_min",
                                                                               "plates_min"))
    rep = su.judge_sequence("S1", [_inj("S1", r) for r in (1, 1.01, 0.99, 1, 1)], lim)
    by = {x.criterion: x for x in rep.verdicts}
    assert by["suitability_resolution_min"].status == "fail"        # 2.62 < 3
    assert by["suitability_plates_min"].status == "fail"            # 5899 < 8000
    assert "study.yaml" in by["suitability_plates_min"].detail
    assert rep.status == "fail"
    report = su.judge_suitability([_inj("A", r) for r in (1, 1, 1, 1, 1.01)]
                                  + [_inj("B", 1.0, tR_neighbour=6.1)], lim)
    assert report.failed().keys() == {"A", "B"}
