"""The quadratic-form engine against Davies (1980) and against itself in closed form."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from lagsight.stats import imhof_cdf
from lagsight.stats.quadform import SpectralForm


@pytest.mark.parametrize(
    "weights,df,x,expected",
    [
        # Davies (1980, Applied Statistics 29, algorithm AS 155), published test set
        ((6, 3, 1), 1, 1, 0.054213),
        ((6, 3, 1), 1, 7, 0.493555),
        ((6, 3, 1), 1, 20, 0.876027),
        ((6, 3, 1), 2, 20, 0.600208),
    ],
)
def test_davies_test_set(weights, df, x, expected):
    assert abs(imhof_cdf(weights, x, df=df) - expected) < 1e-4


def test_single_weight_is_a_scaled_chi_square():
    # closed form: P(3 chi2_4 <= x) from scipy.stats
    for x in (0.5, 4.0, 20.0):
        assert abs(imhof_cdf([3.0], x, df=4) - stats.chi2.cdf(x / 3.0, 4)) < 1e-10


def test_noncentral_single_weight():
    # closed form: scipy.stats.ncx2
    for x in (1.0, 5.0, 12.0):
        assert abs(imhof_cdf([1.0], x, df=3, nc=2.5) - stats.ncx2.cdf(x, 3, 2.5)) < 1e-9


def test_spectral_form_without_design_matches_imhof():
    # a form with explicit eigenvalues: the trapezoid-in-log-t engine against
    # the Imhof/QUADPACK engine
    nu = np.linspace(0.1, 3.9, 40)
    form = SpectralForm(nu)
    for c in (0.8, 2.0, 3.1):
        p, err, _ = form.cdf_at_zero(c)
        assert abs(p - imhof_cdf(nu - c, 0.0)) < 1e-10
        assert err < 1e-10


def test_support_edges_are_exact():
    form = SpectralForm(np.linspace(0.5, 3.5, 10))
    assert form.cdf_at_zero(0.4)[0] == 0.0
    assert form.cdf_at_zero(3.6)[0] == 1.0


def test_bad_weights():
    with pytest.raises(ValueError, match="'weights'"):
        imhof_cdf([np.nan, 1.0], 1.0)
    with pytest.raises(ValueError, match="'df'"):
        imhof_cdf([1.0], 1.0, df=0)
