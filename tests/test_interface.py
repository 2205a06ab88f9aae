"""The planar-interface environment: Fresnel limits, energy balance, reciprocity, truncation, image limit.

Outside references:
  * Born & Wolf, Principles of Optics (7th ed.), §1.5.2, eqs. (20)–(21): Fresnel coefficients in the angle
    form r_⊥ = -sin(θ1-θ2)/sin(θ1+θ2), t_⊥ = 2 sinθ2 cosθ1/sin(θ1+θ2), r_∥ = tan(θ1-θ2)/tan(θ1+θ2),
    t_∥ = 2 sinθ2 cosθ1/(sin(θ1+θ2) cos(θ1-θ2)) (typed from memory). Their r_∥ takes the reflected
    parallel reference vector reversed with respect to ours (we use p_r = ŝ × k̂_r, so that r_xx = r_yy at
    normal incidence), hence r_pp = -r_∥.
  * Novotny & Hecht, Principles of Nano-Optics (2nd ed.), ch. 10 (dipoles near planar interfaces): in
    the quasi-static limit a dipole at height h above a dielectric sees an image dipole β(-p_x, -p_y, p_z)
    at -h, β = (ε2 - ε1)/(ε2 + ε1), i.e. a reflected self-field k1² G_R,zz = β/(16π h³) and
    k1² G_R,xx = β/(32π h³) (reduced moments p̃ = p/ε0ε1; from the electrostatic image, from memory).
  * Physical properties a wrong model breaks: energy conservation, reciprocity (complex-symmetric
    interaction matrix at normal incidence), the homogeneous limit n1 = n2, convergence in the truncation.
"""

import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import TOL

import invdesign
from invdesign import Design, ModelOptions, simulate
from invdesign._interface import make_interface_plan, reflected_coupling
from invdesign._lattice import Lattice, make_ewald_plan
from invdesign._simulate import Incidence

GOLD = {"model": "library", "name": "gold_rakic1998"}
LOSSLESS_METAL = {"model": "constant", "eps_real": -12.0, "eps_imag": 0.0}
IFACE = ModelOptions(environment="interface")


def cell(elements, period=(400.0, 400.0), material=GOLD, n_sup=1.0, n_sub=1.45):
    return Design.from_json({
        "lattice": {"a1": [period[0], 0.0], "a2": [0.0, period[1]]},
        "environment": {"superstrate_index": n_sup, "substrate_index": n_sub},
        "materials": {"m": material},
        "elements": [dict(e, material="m") for e in elements],
    })


def rod(x, y, length, angle, width=50.0, thickness=20.0):
    return {"shape": "rod", "center": [x, y], "length": length, "width": width, "thickness": thickness,
            "angle_deg": angle}


PAIR = [rod(-90, 0, 160, 90), rod(80, 20, 140, 40)]
WL = np.linspace(700.0, 1100.0, 4)  # below the substrate diffraction threshold 1.45 · 400 = 580 nm


def born_wolf(n1, n2, theta1):
    """(r_⊥, t_⊥, r_∥, t_∥) in Born & Wolf's angle form (§1.5.2; theta1 > 0)."""
    theta2 = math.asin(n1 * math.sin(theta1) / n2)
    sp, sm = math.sin(theta1 + theta2), math.sin(theta1 - theta2)
    r_perp = -sm / sp
    t_perp = 2 * math.sin(theta2) * math.cos(theta1) / sp
    r_par = math.tan(theta1 - theta2) / math.tan(theta1 + theta2)
    t_par = 2 * math.sin(theta2) * math.cos(theta1) / (sp * math.cos(theta1 - theta2))
    return r_perp, t_perp, r_par, t_par, math.cos(theta2)


# a rod whose permittivity is within 1e-9 of the superstrate's: scatters ~1e-9 of a real rod
NEAR_INDEX_MATCHED = {"model": "constant", "eps_real": 1.0 + 1e-9, "eps_imag": 0.0}


@pytest.mark.parametrize("n1,n2,polar", [(1.0, 1.45, 0.0), (1.0, 1.45, 35.0), (1.5, 1.0, 25.0)])
def test_bare_interface_gives_the_fresnel_coefficients(n1, n2, polar):
    material = dict(NEAR_INDEX_MATCHED, eps_real=n1**2 * (1 + 1e-9))
    d = cell([rod(0, 0, 100, 0)], material=material, n_sup=n1, n_sub=n2)
    resp = simulate(d, [800.0], model=IFACE, incidence=Incidence(polar, 20.0))
    theta1 = math.radians(polar) if polar else 1e-9  # the angle form needs θ1 > 0; 1e-9 rad is normal
    r_perp, t_perp, r_par, t_par, cos2 = born_wolf(n1, n2, theta1)
    flux = math.sqrt(n2 * cos2 / (n1 * math.cos(theta1)))  # t is flux-normalised (Response.t)
    t, r = resp.t[0], resp.r[0]
    expected_t = np.array([[t_par * flux, 0], [0, t_perp * flux]])
    expected_r = np.array([[-r_par, 0], [0, r_perp]])
    assert np.max(np.abs(t - expected_t)) < 1e-7
    assert np.max(np.abs(r - expected_r)) < 1e-7
    # power: |t|² and |r|² are the power fractions, R + T = 1 (lossless interface)
    assert np.allclose(resp.transmittance[0], np.abs(np.diag(expected_t)) ** 2, atol=1e-7)
    assert np.allclose(resp.reflectance[0] + resp.transmittance[0], 1.0, atol=1e-12)


@pytest.mark.parametrize("n_chain", [1, 3])
def test_energy_balance_lossy_gold(n_chain):
    resp = simulate(cell(PAIR), WL, model=ModelOptions(environment="interface", dipoles_per_rod=n_chain))
    balance = resp.transmittance + resp.reflectance + resp.absorbance
    assert np.max(np.abs(balance - 1)) < 1e-10  # brief's requirement (stricter than TOL["energy"])
    assert np.all(resp.absorbance > 0)


def test_lossless_design_conserves_energy_with_substrate_orders_open():
    # period 500 nm at 600–700 nm: first orders propagate in the glass (λ/1.45 < 500) but not in air
    d = cell(PAIR, period=(500.0, 450.0), material=LOSSLESS_METAL)
    resp = simulate(d, [600.0, 650.0, 700.0], model=ModelOptions(environment="interface", dipoles_per_rod=3),
                    incidence=Incidence(10.0, 30.0))
    assert np.max(np.abs(resp.absorbance)) < 1e-14
    assert np.max(np.abs(resp.transmittance + resp.reflectance - 1)) < 1e-10
    higher = resp.orders.transmitted_power[:, 1:].sum(axis=(1, 2))
    assert np.all(higher > 1e-6)  # the check has power in the substrate-only orders to account for


@pytest.mark.parametrize("environment", ["averaged", "interface"])
def test_energy_balance_at_oblique_incidence(environment):
    # the absorbed power is referred to the incident flux through one cell, A cos θ
    resp = simulate(cell(PAIR), WL[:2], model=ModelOptions(environment=environment),
                    incidence=Incidence(30.0, 15.0))
    balance = resp.transmittance + resp.reflectance + resp.absorbance
    assert np.max(np.abs(balance - 1)) < 1e-10


def test_equal_indices_reproduce_the_homogeneous_model():
    d = cell(PAIR, material=GOLD, n_sup=1.33, n_sub=1.33)
    for inc, n in ((Incidence(), 3), (Incidence(20.0, 10.0), 1)):
        a = simulate(d, WL[:3], model=ModelOptions(dipoles_per_rod=n), incidence=inc)
        b = simulate(d, WL[:3], model=ModelOptions(dipoles_per_rod=n, environment="interface"),
                     incidence=inc)
        for name in ("t", "r", "transmittance", "reflectance", "absorbance"):
            assert np.max(np.abs(getattr(a, name) - getattr(b, name))) < 1e-10, name


def _setup(period_nm, heights_nm, wl_nm=900.0, n1=1.0, n2=1.5, cutoff=None, xy=None):
    k0 = 2 * math.pi / (wl_nm * 1e-9)
    a1, a2 = [period_nm, 0.0], [0.0, period_nm]
    lat = Lattice.from_nm(a1, a2)
    ep = make_ewald_plan(a1, a2, k0 * n1, r_max_nm=period_nm)
    ip = make_interface_plan(a1, a2, n1, n2, k0, min(heights_nm), cutoff_per_m=cutoff)
    xy = np.zeros((len(heights_nm), 2)) if xy is None else np.asarray(xy)
    pos = jnp.asarray(np.column_stack([xy * 1e-9, np.asarray(heights_nm) * 1e-9]))
    return pos, k0, lat, ep, ip


def test_reflected_coupling_is_complex_symmetric_at_normal_incidence(rng):
    xy = rng.uniform(-150, 150, (4, 2))
    heights = rng.uniform(10, 40, 4)
    pos, k0, lat, ep, ip = _setup(400.0, heights, xy=xy)
    g = np.asarray(reflected_coupling(pos, k0, jnp.zeros(2), lat, ep, ip, jnp.array([1.0, 0.0])))
    assert np.max(np.abs(g - g.T)) < 1e-12 * np.max(np.abs(g))
    # and the whole interface system matrix, rods as chains of 3 (reciprocity of the full model)
    from invdesign._simulate import _dipoles
    from invdesign._solve import interaction_matrix

    d = cell(PAIR)
    problem = invdesign.prepare(d, [800.0], model=ModelOptions(environment="interface", dipoles_per_rod=3))

    @jax.jit
    def system(params):
        k1 = jnp.asarray([2 * math.pi / 800e-9])
        positions, lam, axes, _ = _dipoles(params, problem, k1)
        lattice = Lattice.from_nm(params.a1, params.a2)
        mat = interaction_matrix(positions, lam[0], axes, k1[0], jnp.zeros(2), lattice, problem.plan)
        return mat - reflected_coupling(positions, k1[0], jnp.zeros(2), lattice, problem.plan,
                                        problem.interface, jnp.array([1.0, 0.0]))

    mat = np.asarray(system(d.params))
    assert np.max(np.abs(mat - mat.T)) < 1e-12 * np.max(np.abs(mat))


@pytest.mark.parametrize("height_nm", [10.0, 20.0])  # 10 nm: mid-height of a 20 nm film
def test_truncation_meets_its_tolerance_when_doubled(height_nm):
    pos, k0, lat, ep, ip = _setup(400.0, [height_nm, height_nm + 15.0], xy=[[0, 0], [120, 60]])
    pos2, *_, ip2 = _setup(400.0, [height_nm, height_nm + 15.0], xy=[[0, 0], [120, 60]],
                           cutoff=2 * ip.cutoff_per_m)
    fb = jnp.array([1.0, 0.0])
    g1 = np.asarray(reflected_coupling(pos, k0, jnp.zeros(2), lat, ep, ip, fb))
    g2 = np.asarray(reflected_coupling(pos2, k0, jnp.zeros(2), lat, ep, ip2, fb))
    beta = (1.5**2 - 1) / (1.5**2 + 1)
    image_self = beta / (16 * math.pi * (height_nm * 1e-9) ** 3)  # the scale the tolerance refers to
    assert len(ip2.reciprocal) > 3 * len(ip.reciprocal)
    assert np.max(np.abs(g1 - g2)) / image_self < ip.tolerance


@pytest.mark.slow  # > 20 s on the shared 2-core machine (mostly compile)
def test_spectra_converge_in_the_truncation():
    # the spectral change is the matrix change amplified by the resonance (measured ≈ 13× at 1e-6 for
    # this pair near its resonance); it must fall with the tolerance, about proportionally
    d = cell(PAIR)
    wl = [833.0]
    ref, loose, default = (simulate(d, wl, model=ModelOptions(environment="interface",
                                                              interface_tolerance=tol))
                           for tol in (1e-9, 1e-4, 1e-6))
    err_loose = np.max(np.abs(loose.t - ref.t))
    err_default = np.max(np.abs(default.t - ref.t))
    assert err_default < 100 * 1e-6
    assert err_default < 0.05 * err_loose  # two decades of tolerance, well over one decade of error


def test_self_field_tends_to_the_quasi_static_image():
    # λ = 1130 nm, period 400 nm: no Rayleigh anomaly near; k1 h ≤ 0.045
    errors = []
    for h in (8.0, 4.0):
        pos, k0, lat, ep, ip = _setup(400.0, [h], wl_nm=1130.0, n1=1.0, n2=1.5)
        g = np.asarray(reflected_coupling(pos, k0, jnp.zeros(2), lat, ep, ip, jnp.array([1.0, 0.0])))
        beta = (1.5**2 - 1) / (1.5**2 + 1)
        hm = h * 1e-9
        zz, xx = beta / (16 * math.pi * hm**3), beta / (32 * math.pi * hm**3)  # Novotny & Hecht ch. 10
        err = max(abs(g[2, 2] - zz) / zz, abs(g[0, 0] - xx) / xx, abs(g[1, 1] - xx) / xx)
        assert abs(g[0, 2]) < 1e-9 * zz  # no xz coupling for a dipole above its own image
        errors.append(err)
        assert err < 3 * (k0 * hm) ** 2 + 1e-3  # retardation O((k h)²), lattice images O((2h/P)³)
    assert errors[1] < 0.5 * errors[0]  # the limit is approached as h shrinks


@pytest.mark.slow  # > 20 s on the shared 2-core machine (mostly compile)
def test_gradient_through_the_interface_model_matches_finite_differences():
    d = cell(PAIR)
    fn, params = invdesign.forward_function(d, WL[1:2], model=ModelOptions(environment="interface"))

    def loss(length, angle, period):
        e0, e1 = params.elements
        p = invdesign.CellParams(params.a1.at[0].set(period), params.a2,
                                 (e0.__class__(e0.center, length, e0.width, e0.thickness, e0.angle_deg, "m"),
                                  e1.__class__(e1.center, e1.length, e1.width, e1.thickness, angle, "m")))
        resp = fn(p)
        return jnp.sum(jnp.abs(resp.t[:, 1, 0]) ** 2) + jnp.sum(jnp.real(resp.r[:, 0, 0]))

    x = (160.0, 40.0, 400.0)
    grads = jax.grad(loss, argnums=(0, 1, 2))(*x)
    for i in range(3):
        up, dn = list(x), list(x)
        up[i] += 1e-3
        dn[i] -= 1e-3
        fd = (loss(*up) - loss(*dn)) / 2e-3
        assert abs(float(grads[i]) - float(fd)) <= TOL["gradient_fd"] * max(abs(float(fd)), 1e-3)


def test_bad_environment_is_refused_naming_the_key():
    with pytest.raises(invdesign.InvdesignError, match="model.environment"):
        ModelOptions(environment="substrate")
    with pytest.raises(invdesign.InvdesignError, match="model.interface_tolerance"):
        ModelOptions(environment="interface", interface_tolerance=2.0)


def test_far_orders_interpolated_across_the_band_match_the_direct_sum():
    # 21 wavelengths 700–1300 nm: the far orders are summed at 6 Chebyshev nodes and interpolated
    from invdesign._interface import far_nodes, far_sums, remainder_sum

    wl = np.linspace(700.0, 1300.0, 21)
    pos, _, lat, _, ip = _setup(420.0, [10.0, 10.0], wl_nm=700.0, n1=1.0, n2=1.45, xy=[[0, 0], [120, 60]])
    nodes, weights = far_nodes(wl)
    assert len(nodes) == 6
    fb = jnp.array([1.0, 0.0])
    at_nodes = np.asarray(far_sums(pos, nodes, jnp.zeros(2), lat, ip, fb))
    far = ip.reciprocal[~ip.near]
    beta = (1.45**2 - 1) / (1.45**2 + 1)
    image_self = beta / (16 * math.pi * (10e-9) ** 3)
    for i in (0, 5, 13, 20):
        k0 = 2 * math.pi / (wl[i] * 1e-9)
        exact = np.asarray(remainder_sum(pos, k0, jnp.zeros(2), lat, far, ip, fb))
        interp = np.einsum("c,cij->ij", weights[i], at_nodes)
        assert np.max(np.abs(interp - exact)) / image_self < 1e-8  # far below the 1e-6 truncation
