"""Ewald lattice Green's tensor against a brute-force direct lattice sum, plus its symmetries.

Convergence handling of the direct sum: for real k the direct sum converges only conditionally, so the
comparison uses a slightly lossy medium (Im k > 0), for which the direct sum converges absolutely and
exponentially; it is truncated where exp(-Im k R) < e^-40. The Ewald formulas are analytic in k, so
agreement for complex k checks the same code path used for real k.
"""

import jax.numpy as jnp
import numpy as np
import pytest
from helpers import TOL, direct_lattice_sum

from invdesign._green import free_dyadic, lattice_dyadic
from invdesign._lattice import Lattice, make_ewald_plan

LATTICES = {
    "square": ([320.0, 0.0], [0.0, 320.0]),
    "oblique": ([300.0, 0.0], [70.0, 280.0]),
    "hexagonal": ([400.0, 0.0], [200.0, 346.4101615]),
}


def _ewald(r, is_self, k, kpar, a1, a2):
    plan = make_ewald_plan(a1, a2, abs(k), r_max_nm=400.0, kpar_max_per_m=float(np.linalg.norm(kpar)))
    lat = Lattice.from_nm(a1, a2)
    return np.asarray(lattice_dyadic(jnp.asarray(r), jnp.asarray(is_self), k, jnp.asarray(kpar), lat, plan))


@pytest.mark.parametrize("name", list(LATTICES))
@pytest.mark.parametrize("wavelength_nm", [450.0, 800.0, 1500.0])
@pytest.mark.parametrize("r_nm, is_self", [((0, 0, 0), True), ((60, -35, 0), False), ((130, 20, 15), False)])
def test_ewald_matches_direct_sum(name, wavelength_nm, r_nm, is_self):
    a1, a2 = LATTICES[name]
    k = 2 * np.pi * 1.3 / (wavelength_nm * 1e-9) * (1 + 0.06j)
    kpar = np.array([0.17, -0.08]) * np.real(k)
    r = np.asarray(r_nm, float) * 1e-9
    got = _ewald(r, is_self, k, kpar, a1, a2)
    ref = direct_lattice_sum(r, k, kpar, a1, a2, exclude_origin=is_self)
    assert np.max(np.abs(got - ref)) / np.max(np.abs(ref)) < TOL["ewald_vs_direct"]


def test_reciprocity_at_normal_incidence():
    # reciprocity: with k_par = 0, G_L(r) = G_L(-r) and G_L is a symmetric tensor
    a1, a2 = LATTICES["oblique"]
    k = 2 * np.pi / 700e-9
    r = np.array([80e-9, 33e-9, 10e-9])
    g1 = _ewald(r, False, k, np.zeros(2), a1, a2)
    g2 = _ewald(-r, False, k, np.zeros(2), a1, a2)
    assert np.allclose(g1, g2, rtol=1e-12, atol=1e-12 * np.abs(g1).max())
    assert np.allclose(g1, g1.T, rtol=1e-12, atol=1e-12 * np.abs(g1).max())


def test_bloch_reversal_transposes():
    # reciprocity with Bloch phase: G_L(r; k_par) = G_L(-r; -k_par)^T
    a1, a2 = LATTICES["hexagonal"]
    k = 2 * np.pi / 900e-9
    kpar = np.array([0.3, 0.1]) * k
    r = np.array([80e-9, 33e-9, 0.0])
    g1 = _ewald(r, False, k, kpar, a1, a2)
    g2 = _ewald(-r, False, k, -kpar, a1, a2)
    assert np.allclose(g1, g2.T, rtol=1e-11, atol=1e-11 * np.abs(g1).max())


def test_far_from_lattice_the_origin_term_dominates_near_field():
    # close to a dipole the lattice tensor is its own free-space tensor plus a smooth remainder
    a1, a2 = LATTICES["square"]
    k = 2 * np.pi / 800e-9
    reg = _ewald(np.zeros(3), True, k, np.zeros(2), a1, a2)
    for d in (1e-9, 0.5e-9):
        r = np.array([d, 0.0, 0.0])
        full = _ewald(r, False, k, np.zeros(2), a1, a2)
        remainder = full - np.asarray(free_dyadic(jnp.asarray(r), k))
        assert np.max(np.abs(remainder - reg)) < 1e-3 * np.max(np.abs(reg)) * (d / 1e-9)


def test_truncation_error_falls_as_the_plan_widens():
    # convergence: shrinking the real-space/spectral index sets raises the error monotonically
    from invdesign._lattice import EwaldPlan

    a1, a2 = LATTICES["square"]
    k = 2 * np.pi * 1.3 / 800e-9 * (1 + 0.06j)
    r = np.array([60e-9, -35e-9, 0.0])
    ref = direct_lattice_sum(r, k, np.zeros(2), a1, a2, exclude_origin=False)
    full = make_ewald_plan(a1, a2, abs(k), r_max_nm=400.0)
    lat = Lattice.from_nm(a1, a2)
    errors = []
    for keep in (0.15, 0.3, 0.6, 1.0):
        plan = EwaldPlan(full.direct[: max(1, int(keep * len(full.direct)))],
                         full.reciprocal[: max(1, int(keep * len(full.reciprocal)))])
        got = np.asarray(lattice_dyadic(jnp.asarray(r), jnp.asarray(False), k, jnp.zeros(2), lat, plan))
        errors.append(np.max(np.abs(got - ref)) / np.max(np.abs(ref)))
    assert all(e1 > e2 for e1, e2 in zip(errors, errors[1:], strict=False))
    assert errors[-1] < 1e-10
