"""Binomial confidence intervals of the yield, against scipy.stats and closed forms evaluated by hand.

References: ``scipy.stats.binomtest(k, n).proportion_ci`` (an independent implementation of both the
Clopper–Pearson "exact" and the Wilson score interval); closed forms below derived by hand from the
definitions (Clopper & Pearson, Biometrika 26, 404 (1934); Wilson, J. Am. Stat. Assoc. 22, 209 (1927)).
"""

import math

import pytest
from scipy import stats

from invdesign._tolerance import binomial_interval

CASES = [(0, 10), (1, 10), (5, 10), (10, 10), (992, 1000), (37, 40), (0, 1), (1, 1), (13, 400)]


@pytest.mark.parametrize("method, scipy_name", [("clopper_pearson", "exact"), ("wilson", "wilson")])
@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
@pytest.mark.parametrize("k, n", CASES)
def test_interval_matches_scipy(k, n, level, method, scipy_name):
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=level, method=scipy_name)
    lo, hi = binomial_interval(k, n, level, method)
    assert lo == pytest.approx(ref.low, abs=1e-12)
    assert hi == pytest.approx(ref.high, abs=1e-12)
    assert 0.0 <= lo <= k / n <= hi <= 1.0


def test_clopper_pearson_closed_forms():
    # k = 0: the upper limit solves (1 - p)^n = α/2, so p = 1 - (α/2)^(1/n) (hand-derived from the
    # definition); n = 10, 95 %: 1 - 0.025^0.1 = 0.3084971078...
    lo, hi = binomial_interval(0, 10, 0.95, "clopper_pearson")
    assert lo == 0.0
    assert hi == pytest.approx(1 - 0.025 ** 0.1, rel=1e-12)
    assert hi == pytest.approx(0.30849710781876, rel=1e-12)
    # k = n: the lower limit solves p^n = α/2 (by the same symmetry)
    lo, hi = binomial_interval(20, 20, 0.95, "clopper_pearson")
    assert (lo, hi) == (pytest.approx(0.025 ** (1 / 20), rel=1e-12), 1.0)


def test_wilson_closed_form():
    # k = 5, n = 10, z = 1.959963985 (Φ⁻¹(0.975)): centre 1/2, half-width z·sqrt(1/40 + z²/400)/(1 + z²/10)
    # = 0.2634069..., evaluated by hand from Wilson's formula.
    z = 1.959963984540054
    half = z * math.sqrt(0.25 / 10 + z * z / 400) / (1 + z * z / 10)
    lo, hi = binomial_interval(5, 10, 0.95, "wilson")
    assert (lo, hi) == (pytest.approx(0.5 - half, rel=1e-12), pytest.approx(0.5 + half, rel=1e-12))
    assert lo == pytest.approx(0.2365930905, abs=1e-9)


def test_clopper_pearson_is_the_wider_here():
    # The exact interval is conservative: at 992/1000 it is wider than the score interval.
    cp = binomial_interval(992, 1000, 0.95, "clopper_pearson")
    wi = binomial_interval(992, 1000, 0.95, "wilson")
    assert cp[1] - cp[0] > wi[1] - wi[0]


@pytest.mark.parametrize("k, n, level, method, match", [
    (11, 10, 0.95, "wilson", "0 <= k <= n"), (0, 0, 0.95, "wilson", "n >= 1"),
    (1, 10, 1.0, "wilson", "level"), (1, 10, 0.95, "agresti", "clopper_pearson, wilson")])
def test_bad_arguments(k, n, level, method, match):
    with pytest.raises(ValueError, match=match):
        binomial_interval(k, n, level, method)
