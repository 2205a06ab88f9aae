"""verify: grid extrapolation, verdicts, resonance location and option checks (pure parts).

The end-to-end command against the discretised solver is in tests/test_verify_cli.py.
"""

import math

import numpy as np
import pytest

from invdesign._errors import InvdesignError
from invdesign._spec import Goal
from invdesign._verify import (
    VerifyOptions,
    extrapolate,
    parse_verify_options,
    resonance_nm,
    verdict,
)


def _goal(sense, target, tolerance=0.0):
    return Goal(metric="modulation_depth", sense=sense, target=target, weight=1.0, scale=0.1,
                tolerance=tolerance)


def test_extrapolation_recovers_polynomials_exactly():
    # property: a quadratic in d sampled at three spacings extrapolates to its constant term exactly,
    # a linear one at two spacings too; complex values componentwise
    d = np.array([10.0, 7.5, 5.0])
    a = np.array([[1.0 + 2.0j, -0.5j], [0.3, 4.0]])
    b, c = 0.02 - 0.01j, -0.003 + 0.001j
    vals = np.stack([a + b * x + c * x**2 for x in d])
    np.testing.assert_allclose(extrapolate(d, vals), a, rtol=0, atol=1e-12)
    lin = np.stack([a + b * x for x in d[:2]])
    np.testing.assert_allclose(extrapolate(d[:2], lin), a, rtol=0, atol=1e-12)


def test_extrapolation_of_a_linear_trend_with_a_quadratic_fit_is_unbiased():
    # a least-squares quadratic through four exactly-linear samples still returns the intercept
    d = np.array([12.0, 10.0, 7.5, 5.0])
    np.testing.assert_allclose(extrapolate(d, 3.0 - 0.1 * d), 3.0, atol=1e-12)


def test_extrapolation_needs_enough_spacings():
    with pytest.raises(ValueError, match="at least 3"):
        extrapolate([10.0, 5.0], np.zeros(2), degree=2)


@pytest.mark.parametrize("sense,target,value,error,expected", [
    (">=", 0.8, 0.9, 0.05, "met"),
    (">=", 0.8, 0.9, 0.2, "within error bar"),
    (">=", 0.8, 0.7, 0.05, "not met"),
    ("<=", 2.0, 1.0, 0.5, "met"),
    ("<=", 2.0, 2.1, 0.5, "within error bar"),
    ("<=", 2.0, 3.0, 0.5, "not met"),
    ("<=", 2.0, 1.0, math.inf, "within error bar"),
])
def test_verdict_judges_the_whole_interval(sense, target, value, error, expected):
    assert verdict(_goal(sense, target), value, error) == expected


def test_verdict_of_an_equality_goal():
    g = _goal("=", 1.0, tolerance=0.1)
    assert verdict(g, 1.0, 0.05) == "met"
    assert verdict(g, 1.0, 0.2) == "within error bar"
    assert verdict(g, 2.0, 0.1) == "not met"


def test_resonance_refinement_is_exact_for_a_parabola():
    # a parabola's vertex between samples is recovered exactly by the three-point refinement
    wl = np.linspace(800.0, 1200.0, 9)
    peak = 1013.7
    lam, edge = resonance_nm(wl, 1.0 - ((wl - peak) / 300.0) ** 2)
    assert not edge
    assert lam == pytest.approx(peak, abs=1e-9)


def test_resonance_at_the_scan_edge_is_flagged():
    wl = np.linspace(800.0, 1200.0, 9)
    lam, edge = resonance_nm(wl, wl)
    assert edge and lam == 1200.0


@pytest.mark.parametrize("kwargs,match", [
    ({"spacings_nm": (5.0,)}, "at least two"),
    ({"spacings_nm": (5.0, -1.0)}, "positive"),
    ({"spacings_nm": (5.0, 5.0)}, "distinct"),
    ({"tol": 2.0}, "tol"),
    ({"scan": (900.0, 800.0, 10)}, "scan"),
])
def test_bad_options_are_refused(kwargs, match):
    with pytest.raises(InvdesignError, match=match):
        VerifyOptions(**kwargs)


def test_config_block_defaults_and_errors():
    opts = parse_verify_options({}, 1310.0)
    assert opts.spacings_nm == (10.0, 7.5, 5.0)
    assert opts.scan == pytest.approx((0.6 * 1310.0, 1.4 * 1310.0, 15))
    assert parse_verify_options({"resonance_scan": {"count": 0}}, 1310.0).scan is None
    with pytest.raises(InvdesignError, match="unknown key 'spacing'"):
        parse_verify_options({"spacing": [5]}, 1310.0)
    with pytest.raises(InvdesignError, match="spacings_nm must be a list"):
        parse_verify_options({"spacings_nm": 5}, 1310.0)
