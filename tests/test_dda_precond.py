"""Tests of the verification solver's preconditioners (invdesign._dda_precond) inside the Krylov solves.

Sources of check values:
  [NP]  NumPy's dense LU (``numpy.linalg.solve``) on the fast model's own dense interaction matrix
        (``invdesign._solve.interaction_matrix``, pairwise Ewald sums, a second code path) is the reference
        for the polarisations.
  Exact mathematics needs no source: with a complete coarse space (one aggregate per dipole) or one local
  block per element, the preconditioner is A⁻¹ itself and a solve takes at most three products;
  finite differences check the implicit gradient.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import check_dda_gradient

from invdesign import Design, InvdesignError
from invdesign._dda import (
    DdaOptions,
    _incident,
    _lambdas,
    _solve_polarisations,
    dda_response,
    dda_setup,
    wavelength_function,
)
from invdesign._dda_operator import lattice_kernel
from invdesign._dda_precond import aggregates
from invdesign._green import lattice_dyadic
from invdesign._lattice import Lattice
from invdesign._simulate import Incidence
from invdesign._solve import interaction_matrix, plane_wave_at
from invdesign._units import NM, k0_per_m

GOLD = {"model": "library", "name": "gold_rakic1998"}


def cell(elements, material=GOLD):
    return Design.from_json({
        "lattice": {"a1": [300.0, 0.0], "a2": [0.0, 300.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": {"m": material},
        "elements": [dict(e, material="m") for e in elements],
    })


def rod(x, y, length, angle, width=20.0, thickness=20.0):
    return {"shape": "rod", "center": [x, y], "length": length, "width": width, "thickness": thickness,
            "angle_deg": angle}


TWO_RODS = [rod(-40, 0, 60, 0), rod(40, 20, 40, 90)]


def test_segments_of_an_axis_aligned_rod():
    # 100 × 40 × 20 nm rod at d = 10 nm (80 dipoles) cut into 20 nm boxes: 5 × 2 × 1 boxes of 8 dipoles each
    d = cell([rod(0, 0, 100, 0, width=40)])
    s = dda_setup(d, [800.0], 10.0, options=DdaOptions(preconditioner="two-level", segment_nm=20.0))
    assert s.coarse.n_agg == 10
    np.testing.assert_array_equal(np.bincount(s.coarse.labels), 8)
    lab = aggregates(s.grid.positions_nm(), s.grid.owner, d.elements, 1e3)  # a box bigger than the rod
    assert np.all(lab == 0)


def _dense_case(wl=900.0, polar_deg=0.0):
    d = cell(TWO_RODS)
    setup = dda_setup(d, [wl], 10.0, incidence=Incidence(polar_deg, 20.0))
    g = setup.grid
    n_d = int(g.counts.sum())
    k = k0_per_m(wl) * d.medium_index()
    khat, pols, _, _ = _incident(setup.problem)
    kvec = k * jnp.asarray(khat)
    lattice = Lattice.from_nm(d.params.a1, d.params.a2)
    lam = _lambdas(setup, jnp.asarray([setup.problem.eps["m"][0]]), k, khat, pols)  # (2, n_d)
    pos = jnp.asarray(g.positions_nm() * NM)
    rhs = plane_wave_at(pos, kvec, jnp.asarray(pols).astype(complex))  # (2, n_d, 3)
    want = []
    for i in range(2):
        dense = interaction_matrix(pos, jnp.broadcast_to(lam[i][:, None], (n_d, 3)),
                                   jnp.broadcast_to(jnp.eye(3), (n_d, 3, 3)), k, kvec[:2], lattice,
                                   setup.problem.plan)
        want.append(np.linalg.solve(np.asarray(dense), np.asarray(rhs[i]).ravel()).reshape(n_d, 3))  # [NP]
    kern = lattice_kernel(g.shape, g.spacing_nm * NM, k, kvec[:2], lattice, setup.kernel_plan, setup.exclude)
    g_self = lattice_dyadic(jnp.zeros(3), jnp.asarray(True), k, kvec[:2], lattice, setup.problem.plan)
    return d, setup, kern, lam - 1j * k**3 / (6 * np.pi), rhs, g_self, k, np.stack(want)


@pytest.mark.parametrize("method,preconditioner,segment_nm,polar_deg", [
    ("cocg", "two-level", 20.0, 0.0), ("gmres", "two-level", 20.0, 0.0), ("gmres", "two-level", 20.0, 30.0),
    ("cocg", "additive", 20.0, 0.0), ("cocg", "local", 20.0, 0.0), ("gmres", "local", 30.0, 30.0),
])
def test_preconditioned_solve_matches_dense_direct_solve(method, preconditioner, segment_nm, polar_deg):
    # [NP] dense LU reference; gold at 900 nm (ε ≈ −33 + 2i, Rakić 1998 via the library), 48 dipoles
    d, setup, kern, a_inv, rhs, g_self, k, want = _dense_case(polar_deg=polar_deg)
    opts = DdaOptions(tol=1e-10, method=method, preconditioner=preconditioner, segment_nm=segment_nm)
    coarse = dda_setup(d, [900.0], 10.0, options=opts).coarse
    p, stats = _solve_polarisations(kern, setup.grid, coarse, a_inv, rhs, g_self, k, opts, method)
    assert bool(np.all(stats.converged))
    err = np.linalg.norm(np.asarray(p) - want) / np.linalg.norm(want)
    assert err < 1e-8, f"relative error {err:.2e} against the dense solve"


@pytest.mark.parametrize("method,polar_deg", [("cocg", 0.0), ("gmres", 0.0), ("gmres", 30.0)])
def test_a_complete_coarse_space_solves_in_a_few_products(method, polar_deg):
    # exact mathematics: one aggregate per dipole makes Q = A⁻¹, so the two-level M is A⁻¹ (a wrong E,
    # sign or transpose in the correction breaks this); block Jacobi's count is printed for comparison
    d, setup, kern, a_inv, rhs, g_self, k, want = _dense_case(polar_deg=polar_deg)
    opts = DdaOptions(tol=1e-10, method=method, preconditioner="two-level", segment_nm=0.1)
    coarse = dda_setup(d, [900.0], 10.0, options=opts).coarse
    assert coarse.n_agg == int(setup.grid.counts.sum())
    _, st_j = _solve_polarisations(kern, setup.grid, coarse, a_inv, rhs, g_self, k,
                                   DdaOptions(tol=1e-10, method=method), method)
    p, st = _solve_polarisations(kern, setup.grid, coarse, a_inv, rhs, g_self, k, opts, method)
    counts = f"two-level: {np.asarray(st.iterations)}, block Jacobi: {np.asarray(st_j.iterations)}"
    assert bool(np.all(st.converged)) and int(np.max(st.iterations)) <= 3, counts
    assert np.linalg.norm(np.asarray(p) - want) < 1e-8 * np.linalg.norm(want)


def test_one_local_block_per_isolated_element_is_exact():
    # exact mathematics: a single rod in one block makes M = A⁻¹. Cold start: the warm start (default
    # since this test was written) forms its guess with warm_start more products, counted in iterations
    # even when no earlier solution exists, and this test is about the preconditioner alone
    d = cell([rod(0, 0, 60, 0)])
    for method in ("cocg", "gmres"):
        _, info = dda_response(d, [900.0], 10.0, options=DdaOptions(tol=1e-10, method=method, warm_start=0,
                                                                    preconditioner="local", segment_nm=1e3))
        assert info.converged and int(info.iterations.max()) <= 3, info.iterations


def test_bad_preconditioner_options_are_refused():
    with pytest.raises(InvdesignError, match="preconditioner"):
        DdaOptions(preconditioner="multigrid")
    for bad in (0.0, -5.0, float("nan"), "20"):
        with pytest.raises(InvdesignError, match="segment_nm"):
            DdaOptions(segment_nm=bad)


@pytest.mark.slow
@pytest.mark.parametrize("preconditioner,polar_deg",
                         [("two-level", 0.0), ("two-level", 25.0), ("local", 25.0)])
def test_gradient_through_a_preconditioned_solve_matches_finite_differences(preconditioner, polar_deg):
    # implicit differentiation (custom_linear_solve; the adjoint solve uses Mᵀ) against central differences
    # in the permittivity and the period, on an 8-dipole cell cut into two segments
    d = cell([rod(0, 0, 40, 0)], material={"model": "constant", "eps_real": -10.0, "eps_imag": 1.0})
    setup = dda_setup(d, [700.0], 10.0, incidence=Incidence(polar_deg, 10.0),
                      options=DdaOptions(tol=1e-13, preconditioner=preconditioner, segment_nm=20.0))
    assert setup.coarse.n_agg == 2
    check_dda_gradient(wavelength_function(setup))
