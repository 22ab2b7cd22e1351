"""extractval.quantiles against scipy.stats (the reference library) over a grid of levels and
degrees of freedom, and two printed table values."""

import numpy as np
import pytest
from scipy import stats

from extractval import quantiles as q

LEVELS = (0.005, 0.025, 0.05, 0.5, 0.9, 0.95, 0.975, 0.995)
DOFS = (1, 2, 3, 5, 8, 13, 27, 46, 120, 1000)


@pytest.mark.parametrize("df", DOFS)
def test_t_and_chi2_quantiles_equal_scipy_stats(df):
    for p in LEVELS:
        assert q.t_ppf(p, df) == pytest.approx(stats.t.ppf(p, df), rel=1e-10, abs=1e-12)
        assert q.t_isf(p, df) == pytest.approx(stats.t.isf(p, df), rel=1e-10, abs=1e-12)
        assert q.chi2_ppf(p, df) == pytest.approx(stats.chi2.ppf(p, df), rel=1e-10)


@pytest.mark.parametrize("dfn", (1, 2, 4, 9))
@pytest.mark.parametrize("dfd", (1, 3, 10, 37, 500))
def test_f_quantile_and_tail_equal_scipy_stats(dfn, dfd):
    for p in LEVELS:
        x = stats.f.ppf(p, dfn, dfd)
        assert q.f_ppf(p, dfn, dfd) == pytest.approx(x, rel=1e-10)
        assert q.f_sf(x, dfn, dfd) == pytest.approx(1.0 - p, rel=1e-8, abs=1e-12)
    for x in np.geomspace(1e-3, 50, 9):
        assert q.f_sf(x, dfn, dfd) == pytest.approx(stats.f.sf(x, dfn, dfd), rel=1e-10,
                                                    abs=1e-300)


def test_printed_table_values():
    # t(0.975, 10) = 2.228 and chi-square(0.95, 1) = 3.841, as in the usual printed tables
    # (from memory)
    assert round(q.t_ppf(0.975, 10), 3) == 2.228
    assert round(q.chi2_ppf(0.95, 1), 3) == 3.841
