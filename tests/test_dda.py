"""Tests of the verification solver (volume DDA: invdesign._dda, _dda_grid, _dda_operator, _dda_krylov,
_dda_polarizability).

Sources of check values (each is also named beside its check):
  [MIE]  miepython (registry package, independent Mie code), ``miepython.efficiencies(m, d, λ0, n_env)``
         → (qext, qsca, qback, g); cross section = Q·πr² (efficiencies do not depend on the sign
         convention of Im m).
  [DF94] B. T. Draine and P. J. Flatau, J. Opt. Soc. Am. A 11, 1491 (1994): with |m| k d < 1 the DDA
         cross sections of spheres are accurate to a few per cent (FROM MEMORY; their figures are for
         |m| ≤ 2 dielectrics and absorbers); errors fall as the grid is refined.
  [NP]   NumPy / SciPy as the independent reference for dense linear algebra and the free dyadic
         (written out here from its textbook form, J. D. Jackson, Classical Electrodynamics 3rd ed., eq.
         (9.18)).
  Exact mathematics (energy conservation, mirror and rotation symmetry, finite differences, the fast
  model's own dense solver as a second code path) needs no source.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import jax
import jax.numpy as jnp
import miepython
import numpy as np
import pytest
from helpers import TOL

from invdesign import LIBRARY, Design, InvdesignError, Sphere, simulate
from invdesign._dda import (
    DdaConvergenceError,
    DdaOptions,
    dda_cross_sections,
    dda_response,
    dda_setup,
    wavelength_function,
)
from invdesign._dda_grid import discretise
from invdesign._dda_krylov import solve
from invdesign._dda_operator import free_kernel, lattice_kernel, make_matvec
from invdesign._dda_polarizability import dipole_lambda
from invdesign._lattice import Lattice
from invdesign._simulate import Incidence
from invdesign._solve import interaction_matrix
from invdesign._units import NM, k0_per_m

GOLD = {"model": "library", "name": "gold_rakic1998"}
LOSSLESS_METAL = {"model": "constant", "eps_real": -12.0, "eps_imag": 0.0}


def cell(elements, period=(300.0, 300.0), material=GOLD, n_sup=1.0, n_sub=1.45):
    return Design.from_json({
        "lattice": {"a1": [period[0], 0.0], "a2": [0.0, period[1]]},
        "environment": {"superstrate_index": n_sup, "substrate_index": n_sub},
        "materials": {"m": material},
        "elements": [dict(e, material="m") for e in elements],
    })


def rod(x, y, length, angle, width=20.0, thickness=20.0):
    return {"shape": "rod", "center": [x, y], "length": length, "width": width, "thickness": thickness,
            "angle_deg": angle}


def free_dyadic_np(r, k):
    """[NP] textbook free dyadic (I + ∇∇/k²) e^{ikr}/(4πr) at one nonzero displacement (3,), 1/m."""
    rr = np.linalg.norm(r)
    rh = r / rr
    kr = k * rr
    g = np.exp(1j * kr) / (4 * np.pi * rr)
    return g * ((1 + (1j * kr - 1) / kr**2) * np.eye(3) + (3 - 3j * kr - kr**2) / kr**2 * np.outer(rh, rh))


# ---------------------------------------------------------------------------- discretisation
def test_axis_aligned_rod_is_filled_exactly():
    d = cell([rod(0, 0, 100, 0, width=40, thickness=20)])
    g = discretise(d.elements, 10.0)
    assert g.spacing_nm == 10.0 and g.counts[0] == 10 * 4 * 2
    np.testing.assert_allclose(g.volume_ratio, 1.0, rtol=1e-12)
    pos = g.positions_nm()
    np.testing.assert_allclose(np.sort(np.unique(pos[:, 2])), [5.0, 15.0])  # layers at (j + 1/2) d
    np.testing.assert_allclose(pos.mean(axis=0)[:2], [0.0, 0.0], atol=1e-12)  # symmetric about the centre


def test_spacing_adjusted_to_the_film_and_sphere_volume_converges():
    d = cell([rod(0, 0, 100, 0, width=40, thickness=35)])
    assert discretise(d.elements, 4.0).spacing_nm == pytest.approx(35.0 / 9)
    sphere = [Sphere(jnp.zeros(2), jnp.float64(10.0), "au")]
    errs = [abs(discretise(sphere, 20.0 / n).volume_ratio[0] - 1) for n in (6, 12, 24)]
    assert errs[2] < errs[0] and errs[2] < 0.02  # N d³ → V (geometry only)


def test_bad_spacing_and_coarse_grid_are_refused():
    d = cell([rod(0, 0, 100, 0)])
    for bad in (0.0, -1.0, float("nan"), "5"):
        with pytest.raises(InvdesignError, match="spacing"):
            discretise(d.elements, bad)
    with pytest.raises(InvdesignError, match="no dipole"):
        discretise(cell([rod(0, 0, 100, 0, width=4.0)]).elements, 10.0)
    with pytest.raises(InvdesignError, match="max_points"):
        discretise(d.elements, 1.0, max_points=1000)


# ---------------------------------------------------------------------------- (a) FFT product = dense product
def _two_rod_grid():
    # two small rods leave empty grid points between them, so the masking is exercised
    d = cell([rod(-40, 0, 60, 0), rod(40, 20, 40, 90)])
    return d, discretise(d.elements, 10.0)


def test_fft_product_equals_dense_product_free_space(rng):
    _, g = _two_rod_grid()
    pos = g.positions_nm() * NM
    n_d = len(pos)
    k = 2 * np.pi / 700e-9
    alpha_inv = rng.normal(size=n_d) + 1j * rng.normal(size=n_d)
    mv = make_matvec(free_kernel(g.shape, g.spacing_nm * NM, k), jnp.asarray(alpha_inv), g.shape, g.occupied)
    dense = np.zeros((n_d, 3, n_d, 3), complex)  # [NP] dense assembly, pair by pair
    for i in range(n_d):
        dense[i, :, i, :] = alpha_inv[i] * np.eye(3)
        for j in range(n_d):
            if i != j:
                dense[i, :, j, :] = -(k**2) * free_dyadic_np(pos[i] - pos[j], k)
    p = rng.normal(size=(n_d, 3)) + 1j * rng.normal(size=(n_d, 3))
    want = (dense.reshape(3 * n_d, 3 * n_d) @ p.ravel()).reshape(n_d, 3)
    got = np.asarray(mv(jnp.asarray(p)))
    assert np.linalg.norm(got - want) < 1e-10 * np.linalg.norm(want)


@pytest.mark.parametrize("polar_deg", [0.0, 35.0])
def test_fft_product_equals_dense_product_periodic(rng, polar_deg):
    # the fast model's dense interaction matrix (pairwise lattice_dyadic_pair) is the second code path;
    # oblique incidence makes G_L(r) ≠ G_L(−r), which checks the sign of every displacement
    d, g = _two_rod_grid()
    setup = dda_setup(d, [700.0], 10.0, incidence=Incidence(polar_deg, 20.0))
    pos = g.positions_nm() * NM
    n_d = len(pos)
    k = k0_per_m(700.0) * d.medium_index()
    th, ph = np.radians(polar_deg), np.radians(20.0)
    kpar = k * np.sin(th) * np.array([np.cos(ph), np.sin(ph)])
    lattice = Lattice.from_nm(d.params.a1, d.params.a2)
    lam = rng.normal(size=n_d) + 1j * rng.normal(size=n_d)
    dense = interaction_matrix(jnp.asarray(pos), jnp.asarray(np.repeat(lam[:, None], 3, 1)),
                               jnp.broadcast_to(jnp.eye(3), (n_d, 3, 3)), k, jnp.asarray(kpar), lattice,
                               setup.problem.plan)
    kern = lattice_kernel(g.shape, g.spacing_nm * NM, k, jnp.asarray(kpar), lattice, setup.problem.plan,
                          setup.exclude)
    mv = make_matvec(kern, jnp.asarray(lam - 1j * k**3 / (6 * np.pi)), g.shape, g.occupied)
    p = rng.normal(size=(n_d, 3)) + 1j * rng.normal(size=(n_d, 3))
    want = (np.asarray(dense) @ p.ravel()).reshape(n_d, 3)
    got = np.asarray(mv(jnp.asarray(p)))
    assert np.linalg.norm(got - want) < 1e-10 * np.linalg.norm(want)


# ---------------------------------------------------------------------------- (b) iterative = direct
@pytest.mark.parametrize("method", ["cocg", "gmres", "bicgstab"])
def test_iterative_solve_matches_dense_direct_solve(method):
    d, g = _two_rod_grid()
    setup = dda_setup(d, [800.0], 10.0)
    n_d = int(g.counts.sum())
    k = k0_per_m(800.0) * d.medium_index()
    lattice = Lattice.from_nm(d.params.a1, d.params.a2)
    eps = setup.problem.eps["m"][0]
    lam = dipole_lambda(eps, d.medium_index() ** 2, (g.spacing_nm * NM) ** 3, k)
    lam_v = jnp.full(n_d, lam)
    dense = interaction_matrix(jnp.asarray(g.positions_nm() * NM), jnp.broadcast_to(lam_v[:, None], (n_d, 3)),
                               jnp.broadcast_to(jnp.eye(3), (n_d, 3, 3)), k, jnp.zeros(2), lattice,
                               setup.problem.plan)
    b = np.zeros((n_d, 3), complex)
    b[:, 0] = np.exp(-1j * k * g.positions_nm()[:, 2] * NM)
    want = np.linalg.solve(np.asarray(dense), b.ravel())  # [NP] LU
    kern = lattice_kernel(g.shape, g.spacing_nm * NM, k, jnp.zeros(2), lattice, setup.problem.plan,
                          setup.exclude)
    mv = make_matvec(kern, lam_v - 1j * k**3 / (6 * np.pi), g.shape, g.occupied)
    x, stats = solve(lambda v: mv(v.reshape(n_d, 3)).reshape(-1), jnp.asarray(b.ravel()),
                     lambda v: v / (lam - 1j * k**3 / (6 * np.pi)), method=method, tol=1e-10)
    assert bool(stats.converged) and float(stats.residual) <= 1e-10
    assert np.linalg.norm(np.asarray(x) - want) < 1e-8 * np.linalg.norm(want)


def test_non_convergence_is_refused_or_flagged():
    d = cell([rod(0, 0, 60, 0)])
    with pytest.raises(DdaConvergenceError, match="max_iterations"):
        dda_response(d, [800.0], 10.0, options=DdaOptions(max_iterations=2))
    _, info = dda_response(d, [800.0], 10.0, options=DdaOptions(max_iterations=2), strict=False)
    assert not info.converged and np.all(info.residual > 1e-6)


def test_bad_options_are_refused():
    with pytest.raises(InvdesignError, match="polarizability"):
        DdaOptions(polarizability="exact")
    with pytest.raises(InvdesignError, match="method"):
        DdaOptions(method="lu")
    with pytest.raises(InvdesignError, match="cocg"):
        dda_response(cell([rod(0, 0, 60, 0)]), [800.0], 10.0, incidence=Incidence(20.0),
                     options=DdaOptions(method="cocg"))
