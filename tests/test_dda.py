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
import jax.numpy as jnp
import miepython
import numpy as np
import pytest
from helpers import TOL, check_dda_gradient

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
    kern = lattice_kernel(g.shape, g.spacing_nm * NM, k, jnp.asarray(kpar), lattice, setup.kernel_plan,
                          setup.exclude)
    mv = make_matvec(kern, jnp.asarray(lam - 1j * k**3 / (6 * np.pi)), g.shape, g.occupied)
    p = rng.normal(size=(n_d, 3)) + 1j * rng.normal(size=(n_d, 3))
    want = (np.asarray(dense) @ p.ravel()).reshape(n_d, 3)
    got = np.asarray(mv(jnp.asarray(p)))
    assert np.linalg.norm(got - want) < 1e-10 * np.linalg.norm(want)
    if polar_deg == 0.0:  # the half table mirrored by G_L(−r) = G_L(r) is the same kernel
        half = lattice_kernel(g.shape, g.spacing_nm * NM, k, jnp.asarray(kpar), lattice, setup.kernel_plan,
                              setup.exclude, even=True)
        assert np.max(np.abs(np.asarray(half - kern))) < 1e-12 * np.max(np.abs(np.asarray(kern)))


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
    kern = lattice_kernel(g.shape, g.spacing_nm * NM, k, jnp.zeros(2), lattice, setup.kernel_plan,
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


# ---------------------------------------------------------------------------- (c) spheres vs Mie theory
def _mie(eps, radius_nm, wl, n_env):
    qext, qsca, _, _ = miepython.efficiencies(np.sqrt(eps), 2 * radius_nm, wl, n_env)
    area = np.pi * radius_nm**2
    return qext * area, (qext - qsca) * area


@pytest.mark.slow
def test_dielectric_sphere_within_a_few_percent_of_mie():
    # [MIE] m = 1.5 sphere, x = kR = 0.79; [DF94] |m|kd < 1 gives few-% errors: here |m|kd ≤ 0.30 and
    # the effective-volume rule (N d³ = V); measured errors 0.43 %, 1.1 %, 0.39 % (280, 912, 3112 dipoles)
    radius, wl, eps = 50.0, np.array([400.0]), np.array([2.25 + 0.0j])
    ext_ref, _ = _mie(eps, radius, wl, 1.0)
    for n_per_radius in (4, 6, 9):
        cs, info = dda_cross_sections(Sphere(jnp.zeros(2), jnp.float64(radius), "x"), eps, wl, 1.0,
                                      radius / n_per_radius, options=DdaOptions(volume="exact", tol=1e-8))
        assert np.max(info.mkd_max) < 0.3
        np.testing.assert_allclose(cs.ext, ext_ref, rtol=0.015)
        assert abs(cs.abs[0]) < 1e-12 * cs.ext[0]  # lossless: no absorption (exact mathematics)


@pytest.mark.slow
def test_gold_sphere_converges_to_mie_as_the_grid_is_refined():
    # [MIE] 10 nm gold sphere (the project's Rakić 1998 gold) in water at and just red of its dipole
    # resonance. [DF94] leads one to expect few-% errors once |m|kd ≪ 1 (here ≤ 0.09); metals converge more
    # slowly (staircase surface). Measured ext errors, R/d = 3, 5, 8 (136, 552, 2176 dipoles):
    # 520 nm +17.6 %, +4.9 %, −0.5 %;  540 nm +32 %, +24 %, +10 %; absorption within 0.2 % of those.
    radius, wl, n = 10.0, np.array([520.0, 540.0]), 1.33
    eps = np.asarray(LIBRARY["gold_rakic1998"]().permittivity(jnp.asarray(wl)))
    ext_ref, abs_ref = _mie(eps, radius, wl, n)
    errs = []
    for n_per_radius in (3, 5, 8):
        cs, info = dda_cross_sections(Sphere(jnp.zeros(2), jnp.float64(radius), "au"), eps, wl, n,
                                      radius / n_per_radius, options=DdaOptions(tol=1e-8))
        assert np.max(info.mkd_max) < 0.1
        errs.append(np.abs(cs.ext / ext_ref - 1))
        np.testing.assert_allclose(cs.abs / abs_ref, cs.ext / ext_ref, rtol=0.01)
    errs = np.array(errs)
    assert np.all(np.diff(errs, axis=0) < 0)  # the error falls with d at both wavelengths
    assert errs[-1, 0] < 0.02 and errs[-1, 1] < 0.12


# ---------------------------------------------------------------------------- (d) energy and symmetry
@pytest.mark.parametrize("polar_deg", [0.0, 30.0])
def test_energy_balance_of_a_rod_array(polar_deg):
    d = cell([rod(-40, 0, 60, 0), rod(40, 20, 40, 90)])
    resp, info = dda_response(d, [700.0, 900.0], 10.0, incidence=Incidence(polar_deg, 15.0),
                              options=DdaOptions(tol=1e-11))
    assert info.converged and np.all(resp.absorbance > 0)
    balance = resp.transmittance + resp.reflectance + resp.absorbance
    assert np.max(np.abs(balance - 1)) < TOL["energy"]


def test_lossless_rod_array_absorbs_nothing():
    resp, _ = dda_response(cell([rod(0, 0, 60, 30)], material=LOSSLESS_METAL), [700.0, 900.0], 10.0,
                           options=DdaOptions(tol=1e-11))
    assert np.max(np.abs(resp.absorbance)) < 1e-14
    assert np.max(np.abs(resp.transmittance + resp.reflectance - 1)) < TOL["energy"]


def test_rod_along_x_has_no_cross_polarisation_and_rotation_swaps_xx_yy():
    wl = [800.0, 1000.0]
    a, _ = dda_response(cell([rod(0, 0, 80, 0)]), wl, 10.0, options=DdaOptions(tol=1e-10))
    b, _ = dda_response(cell([rod(0, 0, 80, 90)]), wl, 10.0, options=DdaOptions(tol=1e-10))
    assert np.max(np.abs(a.t[:, 0, 1])) < 1e-12 and np.max(np.abs(a.t[:, 1, 0])) < 1e-12
    assert np.max(np.abs(a.t[:, 0, 0] - 1)) > 1e-2  # the rod does scatter
    np.testing.assert_allclose(a.t[:, 0, 0], b.t[:, 1, 1], rtol=1e-8)
    np.testing.assert_allclose(a.t[:, 1, 1], b.t[:, 0, 0], rtol=1e-8)
    assert a.t.shape == (2, 2, 2) and a.chain_residual.shape == (2,) and not np.any(a.chain_residual)


# ---------------------------------------------------------------------------- (e) against the fast model
@pytest.mark.slow
def test_sphere_array_approaches_the_fast_models_mie_sphere_array():
    # the fast model is exact-ish here: one Mie a1 dipole per 20 nm sphere (multipoles ≲ 1 %, see
    # tests/test_cross_sections.py), 300 nm lattice in water. The DDA's discretisation error is that of the
    # isolated sphere above; measured 1 − T errors at R/d = 5 and 8: 520 nm +0.7 %, −2.8 %; 540 nm +18 %,
    # +6.5 % (absorbance alike). Stated tolerance at R/d = 8: 5 % at 520 nm and 8 % at 540 nm.
    d = Design.from_json({
        "lattice": {"a1": [300.0, 0.0], "a2": [0.0, 300.0]},
        "environment": {"superstrate_index": 1.33, "substrate_index": 1.33},
        "materials": {"m": GOLD}, "elements": [{"shape": "sphere", "center": [0, 0], "radius": 20.0,
                                                 "material": "m"}]})
    wl = np.array([520.0, 540.0])
    fast = simulate(d, wl)
    errs = []
    for n_per_radius in (5, 8):
        resp, _ = dda_response(d, wl, 20.0 / n_per_radius, options=DdaOptions(tol=1e-8))
        ext_err = (1 - resp.transmittance[:, 0]) / (1 - fast.transmittance[:, 0]) - 1
        abs_err = resp.absorbance[:, 0] / fast.absorbance[:, 0] - 1
        np.testing.assert_allclose(abs_err, ext_err, atol=0.005)
        errs.append(np.abs(ext_err))
    assert errs[1][1] < errs[0][1]
    assert errs[1][0] < 0.05 and errs[1][1] < 0.08


# ---------------------------------------------------------------------------- (f) gradients
@pytest.mark.slow
def test_gradient_matches_finite_differences():
    # implicit differentiation of the Krylov solve (custom_linear_solve) against central differences in the
    # permittivity and the period, on an 8-dipole cell
    d = cell([rod(0, 0, 40, 0)], material={"model": "constant", "eps_real": -10.0, "eps_imag": 1.0})
    setup = dda_setup(d, [700.0], 10.0, options=DdaOptions(tol=1e-13))
    check_dda_gradient(wavelength_function(setup))
