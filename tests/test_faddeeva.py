"""Faddeeva function and complex erfc against scipy.special (an independent reference implementation)."""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import TOL
from scipy.special import erfc as scipy_erfc
from scipy.special import wofz as scipy_wofz

from invdesign._faddeeva import erfc, erfc_times_exp, wofz


@pytest.mark.parametrize("scale", [1e-3, 0.3, 1.0, 4.0, 30.0, 1e4])
def test_wofz_upper_half_plane_matches_scipy(rng, scale):
    # reference: scipy.special.wofz (Faddeeva package of S. G. Johnson)
    z = (rng.normal(size=4000) + 1j * np.abs(rng.normal(size=4000))) * scale
    z = np.concatenate([z, rng.normal(size=300) * scale + 0j, 1j * np.abs(rng.normal(size=300)) * scale])
    got = np.asarray(jax.jit(wofz)(z))
    ref = scipy_wofz(z)
    assert np.max(np.abs(got - ref) / np.abs(ref)) < TOL["faddeeva"]


def test_wofz_lower_half_plane_moderate(rng):
    z = rng.normal(size=2000) * 2 - 1j * np.abs(rng.normal(size=2000)) * 2
    ref = scipy_wofz(z)
    assert np.max(np.abs(np.asarray(wofz(z)) - ref) / np.abs(ref)) < 1e-12


def test_erfc_complex_matches_scipy(rng):
    # scipy.special.erfc accepts complex input: an independent reference
    u = rng.normal(size=3000) * 3 + 1j * rng.normal(size=3000) * 3
    ref = scipy_erfc(u)
    got = np.asarray(erfc(u))
    assert np.max(np.abs(got - ref) / np.maximum(np.abs(ref), 1e-300)) < 1e-12


def test_erfc_times_exp_avoids_overflow():
    # exp(+600) * erfc(30): each factor overflows/underflows alone, the product is finite
    u, shift = 30.0 + 0j, 600.0 + 0j
    got = complex(erfc_times_exp(u, shift))
    ref = scipy_wofz(1j * u) * np.exp(shift - u**2)  # erfc(u) = exp(-u^2) w(iu)
    assert np.isfinite(got) and abs(got - ref) / abs(ref) < 1e-13


def test_wofz_derivative_is_exact_identity(rng):
    # property: w'(z) = -2 z w(z) + 2i/sqrt(pi) (Abramowitz & Stegun 7.1.20); compare with
    # central differences of scipy's wofz
    z = rng.normal(size=20) + 1j * np.abs(rng.normal(size=20)) + 0.1j
    h = 1e-6
    fd = (scipy_wofz(z + h) - scipy_wofz(z - h)) / (2 * h)
    jvp = np.array([jax.jvp(wofz, (jnp.asarray(zi),), (jnp.asarray(1.0 + 0j),))[1] for zi in z])
    assert np.max(np.abs(jvp - fd) / np.abs(fd)) < 1e-8
