"""Tests of the warm start of the verification solver's Krylov solves (``guess`` in
invdesign._dda_krylov.solve, ``DdaOptions.warm_start``).

Sources of check values:
  [NP]  NumPy's dense LU (``numpy.linalg.solve``) is the reference solution of the small test systems.
  Exact mathematics needs no source: a start changes where the iteration begins, not the system, so a
  warm and a cold solve agree to the solver tolerance; a start that already solves the system needs no
  iterations; derivatives are those of A⁻¹ b whatever the start (finite differences check them). The
  tolerances below are stated beside each check (common practice, no source).
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import check_dda_gradient

from invdesign import Design, InvdesignError
from invdesign._dda import DdaOptions, dda_cross_sections, dda_response, dda_setup, wavelength_function
from invdesign._dda_krylov import METHODS, least_residual_start, solve
from invdesign._elements import Rod

GOLD = {"model": "library", "name": "gold_rakic1998"}


def cell(material=GOLD):
    return Design.from_json({
        "lattice": {"a1": [300.0, 0.0], "a2": [0.0, 300.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": {"m": material},
        "elements": [{"shape": "rod", "material": "m", "center": [-40.0, 0.0], "length": 80.0, "width": 20.0,
                      "thickness": 20.0, "angle_deg": 0.0},
                     {"shape": "rod", "material": "m", "center": [50.0, 20.0], "length": 60.0, "width": 20.0,
                      "thickness": 20.0, "angle_deg": 90.0}],
    })


def _symmetric_system(rng, n=60):
    """A complex symmetric test matrix A = Aᵀ (n, n), well enough conditioned for restarted GMRES(40), and
    a right-hand side (n,)."""
    g = rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))
    a = 0.05 * (g + g.T) + np.diag(np.linspace(0.5, 3.0, n) + 0.6j)
    b = rng.normal(size=n) + 1j * rng.normal(size=n)
    return a, b


# ---------------------------------------------------------------------------- Krylov level
@pytest.mark.parametrize("method", sorted(METHODS))
def test_any_start_gives_the_dense_solution_and_the_exact_start_needs_no_iterations(rng, method):
    a, b = _symmetric_system(rng)
    want = np.linalg.solve(a, b)  # [NP] LU
    am = jnp.asarray(a)

    def mv(v):
        return am @ v

    def pc(v):
        return v

    tol = 1e-10
    _, cold = solve(mv, jnp.asarray(b), pc, method=method, tol=tol, max_iterations=5000)
    assert bool(cold.converged)
    bad = jnp.asarray(rng.normal(size=(2, b.size)) * 50.0 + 0j)  # unrelated vectors: no help, no harm
    x_bad, st_bad = solve(mv, jnp.asarray(b), pc, method=method, tol=tol, max_iterations=5000, guess=bad)
    assert bool(st_bad.converged)
    # ‖x − x*‖ ≤ κ(A)·tol·‖x*‖; κ of this matrix is O(10²), so 1e-7 leaves a wide margin
    assert np.linalg.norm(np.asarray(x_bad) - want) < 1e-7 * np.linalg.norm(want)
    exact = jnp.asarray(np.stack([want, rng.normal(size=b.size) + 0j]))
    x_ex, st_ex = solve(mv, jnp.asarray(b), pc, method=method, tol=tol, max_iterations=5000, guess=exact)
    assert np.linalg.norm(np.asarray(x_ex) - want) < 1e-7 * np.linalg.norm(want)
    # the exact solution lies in the span: only the 2 products of the projection (+ the residual check)
    assert int(st_ex.iterations) <= 4 < int(cold.iterations)


def test_least_residual_start_of_a_zero_basis_is_the_cold_start(rng):
    a, b = _symmetric_system(rng, n=20)
    am = jnp.asarray(a)
    x0, r0 = least_residual_start(lambda v: am @ v, jnp.asarray(b), jnp.zeros((2, 20), complex))
    assert np.all(np.asarray(x0) == 0) and np.allclose(np.asarray(r0), b, rtol=0, atol=0)


def test_least_residual_start_is_the_best_multiple_of_a_previous_solution(rng):
    # exact property of least squares: the residual is orthogonal to A v, and never above ‖b‖
    a, b = _symmetric_system(rng, n=20)
    am = jnp.asarray(a)
    v = rng.normal(size=(1, 20)) + 1j * rng.normal(size=(1, 20))
    x0, r0 = least_residual_start(lambda u: am @ u, jnp.asarray(b), jnp.asarray(v))
    av = a @ v[0]
    assert abs(np.vdot(av, np.asarray(r0))) < 1e-10 * np.linalg.norm(av) * np.linalg.norm(b)
    assert np.linalg.norm(np.asarray(r0)) <= np.linalg.norm(b)
    np.testing.assert_allclose(np.asarray(r0), b - a @ np.asarray(x0), atol=1e-12 * np.linalg.norm(b))


# ---------------------------------------------------------------------------- across wavelengths
def test_warm_start_across_a_smooth_wavelength_step_same_answer_fewer_products():
    # gold rods, 5 nm steps far from any lattice (Rayleigh) wavelength: the previous solutions are close
    d = cell()
    wl = [800.0, 805.0, 810.0, 815.0]
    tol = 1e-9
    cold, info_c = dda_response(d, wl, 10.0, options=DdaOptions(tol=tol, warm_start=0))
    warm, info_w = dda_response(d, wl, 10.0, options=DdaOptions(tol=tol, warm_start=2))
    assert info_c.converged and info_w.converged
    # both solves reach ‖b − A p̃‖ ≤ 1e-9 ‖b‖; amplitudes linear in p̃ agree to κ·tol (κ ~ 10²–10³ here)
    np.testing.assert_allclose(warm.t, cold.t, rtol=0, atol=1e-6)
    np.testing.assert_allclose(warm.absorbance, cold.absorbance, rtol=0, atol=1e-6)
    # the first wavelength has nothing to start from (cold, plus the 2 products of a zero projection)
    np.testing.assert_array_equal(info_w.iterations[0], info_c.iterations[0] + 2)
    # after it every solve starts nearer its answer: fewer products; with two earlier solutions to combine
    # (wavelengths 3 and 4) measured 0.81 of cold at tol 1e-9, so 0.9 is a margin a cold start cannot meet
    assert np.all(info_w.iterations[1:] < info_c.iterations[1:])
    assert info_w.iterations[2:].sum() < 0.9 * info_c.iterations[2:].sum()


def test_unsorted_wavelengths_are_returned_in_the_given_order():
    d = cell()
    a, _ = dda_response(d, [815.0, 800.0, 805.0], 10.0, options=DdaOptions(tol=1e-9))
    b, _ = dda_response(d, [800.0, 805.0, 815.0], 10.0, options=DdaOptions(tol=1e-9))
    np.testing.assert_allclose(a.t, b.t[[2, 0, 1]], rtol=0, atol=1e-6)
    np.testing.assert_array_equal(a.wavelengths_nm, [815.0, 800.0, 805.0])


def test_warm_start_of_isolated_cross_sections_gives_the_cold_answer():
    rod = Rod(center=(0.0, 0.0), length=60.0, width=20.0, thickness=20.0, angle_deg=0.0, material="m")
    eps = np.array([-20.0 + 1.2j, -21.0 + 1.25j, -22.0 + 1.3j])
    wl = [800.0, 810.0, 820.0]
    c, info_c = dda_cross_sections(rod, eps, wl, 1.2, 10.0, options=DdaOptions(tol=1e-10, warm_start=0))
    w, info_w = dda_cross_sections(rod, eps, wl, 1.2, 10.0, options=DdaOptions(tol=1e-10, warm_start=1))
    np.testing.assert_allclose(w.ext, c.ext, rtol=1e-7)  # κ·tol, see above
    np.testing.assert_allclose(w.abs, c.abs, rtol=1e-7)
    # (no product claim here: an isolated rod converges in ~16 products and 5 % steps in ε move the
    # solution too far for the start to help; measured 18–20 warm against 16 cold)


def test_bad_warm_start_is_refused():
    for bad in (-1, 1.5, True):
        with pytest.raises(InvdesignError, match="warm_start"):
            DdaOptions(warm_start=bad)


# ---------------------------------------------------------------------------- gradients
@pytest.mark.slow
def test_gradient_with_a_warm_start_matches_finite_differences():
    # the start is a non-differentiated input: d/dx of the warm-started solve is that of A⁻¹ b. The guess
    # is the solution at 690 nm, so the forward solve really does start elsewhere than zero.
    d = cell(material={"model": "constant", "eps_real": -10.0, "eps_imag": 1.0})
    setup = dda_setup(d, [700.0], 10.0, options=DdaOptions(tol=1e-13))
    fn = wavelength_function(setup)
    a0 = jnp.array([300.0, 0.0]), jnp.array([0.0, 300.0])
    out_prev, _ = fn(jnp.asarray([-10.0 + 1.0j]), jnp.float64(690.0), *a0)
    guess = out_prev[-1][:, None]  # (2, 1, n_d, 3)

    grad = check_dda_gradient(fn, guess)
    grad_cold = check_dda_gradient(fn)
    np.testing.assert_allclose(grad, grad_cold, rtol=1e-8)  # same derivative as the cold solve
    # the guess is used: fewer products than the cold solve
    (_, st_w), (_, st_c) = fn(jnp.asarray([-10.0 + 1.0j]), jnp.float64(700.0), *a0, guess), \
        fn(jnp.asarray([-10.0 + 1.0j]), jnp.float64(700.0), *a0)
    assert int(np.sum(st_w.iterations)) < int(np.sum(st_c.iterations))
