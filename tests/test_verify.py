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
    assert opts.scan == pytest.approx((0.6 * 1310.0, 1.4 * 1310.0, 9))
    assert parse_verify_options({"resonance_scan": {"count": 0}}, 1310.0).scan is None
    with pytest.raises(InvdesignError, match="unknown key 'spacing'"):
        parse_verify_options({"spacing": [5]}, 1310.0)
    with pytest.raises(InvdesignError, match="spacings_nm must be a list"):
        parse_verify_options({"spacings_nm": 5}, 1310.0)


def _fake_response(T, t_xx):
    """A minimal Response with (n_wl,) transmittance T for both inputs, no reflection, A = 1 − T."""
    from invdesign._simulate import Response

    n = len(T)
    t = np.zeros((n, 2, 2), complex)
    t[:, 0, 0] = t[:, 1, 1] = t_xx
    T2 = np.stack([T, T], axis=1)
    return Response(wavelengths_nm=np.linspace(1000, 1100, n), t=t, r=np.zeros((n, 2, 2), complex),
                    transmittance=T2, reflectance=np.zeros((n, 2)), absorbance=1 - T2, orders=None,
                    chain_residual=np.zeros(n))


def test_physical_extrapolation_is_used_and_unphysical_one_falls_back_to_the_finest_grid():
    from invdesign._verify import PHYSICAL_SLACK, best_estimate, physical_violation

    d = [10.0, 7.5, 5.0]
    # a gentle trend towards T = 0.8 at d = 0: the extrapolation stays physical and is used
    gentle = [_fake_response(np.full(3, 0.8 - 0.004 * x), np.full(3, np.sqrt(0.8 - 0.004 * x))) for x in d]
    est = best_estimate(d, gentle)
    assert est["physical"] and physical_violation(est["response"]) <= PHYSICAL_SLACK
    np.testing.assert_allclose(est["response"].transmittance, 0.8, atol=1e-12)
    # a steep trend that carries T above 1 at d = 0: the finest grid is the estimate
    steep = [_fake_response(np.full(3, 1.05 - 0.03 * x), np.full(3, np.sqrt(1.05 - 0.03 * x))) for x in d]
    est = best_estimate(d, steep)
    assert not est["physical"] and physical_violation(est["extrapolated"]) > PHYSICAL_SLACK
    np.testing.assert_allclose(est["response"].transmittance, 1.05 - 0.03 * 5.0, atol=1e-12)
    # its error companion is the straight line through the two finest grids, at d = 0
    np.testing.assert_allclose(est["companions"][0].transmittance, 1.05, atol=1e-12)


def test_substrate_row_resolves_rods_to_about_their_thickness():
    # the rule (smallest odd N with L/N <= thickness, capped at 13, never below the checked model's N)
    from test_verify_cli import DESIGN

    from invdesign._design import Design
    from invdesign._simulate import ModelOptions
    from invdesign._verify import substrate_chain_length

    design = Design.from_json(DESIGN)  # rods 200 and 260 nm long, 30 nm thick: 260/30 = 8.7 -> 9
    assert substrate_chain_length(design, ModelOptions()) == 9
    assert substrate_chain_length(design, ModelOptions(dipoles_per_rod=13)) == 13
    long = {**DESIGN, "elements": [{**DESIGN["elements"][0], "length": 450.0}]}  # 450/30 = 15 -> capped at 13
    assert substrate_chain_length(Design.from_json(long), ModelOptions()) == 13
