"""The whole fast model on periodic cells: energy balance, symmetries, Rayleigh anomaly, gradients.

These are property checks that a wrong model breaks (energy conservation, reciprocity/mirror symmetry,
the geometric position of the Rayleigh anomaly λ = n·a from the grating equation), plus gradient checks
against finite differences.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import TOL

import invdesign
from invdesign import Design, ModelOptions, simulate

GOLD = {"model": "library", "name": "gold_rakic1998"}
LOSSLESS_METAL = {"model": "constant", "eps_real": -12.0, "eps_imag": 0.0}


def cell(elements, period=(400.0, 400.0), material=GOLD, n_sup=1.0, n_sub=1.45, a2x=0.0):
    return Design.from_json({
        "lattice": {"a1": [period[0], 0.0], "a2": [a2x, period[1]]},
        "environment": {"superstrate_index": n_sup, "substrate_index": n_sub},
        "materials": {"m": material},
        "elements": [dict(e, material="m") for e in elements],
    })


def rod(x, y, length, angle, width=50.0, thickness=40.0):
    return {"shape": "rod", "center": [x, y], "length": length, "width": width, "thickness": thickness,
            "angle_deg": angle}


PAIR = [rod(-80, 0, 200, 90), rod(70, 10, 160, 45)]
WL = np.linspace(700.0, 1400.0, 15)  # below the diffraction threshold n·a = 1.23·400 = 493 nm


@pytest.mark.parametrize("n_chain", [1, 3])
def test_energy_balance_lossy(n_chain):
    resp = simulate(cell(PAIR), WL, model=ModelOptions(dipoles_per_rod=n_chain))
    balance = resp.transmittance + resp.reflectance + resp.absorbance
    assert np.max(np.abs(balance - 1)) < TOL["energy"]
    assert np.all(resp.absorbance > 0)


@pytest.mark.parametrize("correction", ["radiative", "kelly", "moroz"])
@pytest.mark.parametrize("n_chain", [1, 5])
def test_lossless_material_absorbs_nothing(correction, n_chain):
    resp = simulate(cell(PAIR, material=LOSSLESS_METAL), WL,
                    model=ModelOptions(dipoles_per_rod=n_chain, correction=correction))
    assert np.max(np.abs(resp.absorbance)) < 1e-14
    assert np.max(np.abs(resp.transmittance + resp.reflectance - 1)) < TOL["energy"]


def test_energy_balance_with_diffraction_orders():
    # period 700 nm: first orders propagate below n·a = 1.23·700 ≈ 862 nm
    d = cell([rod(0, 0, 200, 20)], period=(700.0, 650.0), a2x=120.0)
    wl = np.linspace(550.0, 850.0, 9)
    resp = simulate(d, wl)
    assert np.any(resp.orders.propagating.sum(axis=1) > 1)
    balance = resp.transmittance + resp.reflectance + resp.absorbance
    assert np.max(np.abs(balance - 1)) < TOL["energy"]


def test_mirror_symmetric_cell_has_no_cross_polarisation():
    # mirror symmetry y → -y (and x → -x) of the cell forbids x↔y conversion: t_xy = t_yx = 0
    d = cell([rod(0, -70, 220, 0), rod(0, 70, 220, 0), rod(150, 0, 90, 90)])
    resp = simulate(d, WL, model=ModelOptions(dipoles_per_rod=3))
    assert np.max(np.abs(resp.t[:, 0, 1])) < 1e-12
    assert np.max(np.abs(resp.t[:, 1, 0])) < 1e-12
    assert np.max(np.abs(resp.t[:, 0, 0] - 1)) > 1e-2  # the cell does scatter


def test_rotating_the_cell_by_90_degrees_swaps_xx_and_yy():
    a = cell([rod(-60, 20, 200, 0), rod(80, -30, 120, 30)])
    b = cell([rod(-20, -60, 200, 90), rod(30, 80, 120, 120)])  # (x, y) → (−y, x), angles + 90°
    ra, rb = simulate(a, WL), simulate(b, WL)
    assert np.allclose(ra.t[:, 0, 0], rb.t[:, 1, 1], rtol=1e-10, atol=1e-12)
    assert np.allclose(ra.t[:, 1, 1], rb.t[:, 0, 0], rtol=1e-10, atol=1e-12)
    assert np.allclose(ra.t[:, 0, 1], -rb.t[:, 1, 0], rtol=1e-10, atol=1e-12)


def test_rayleigh_anomaly_opens_orders_at_n_times_period():
    # grating equation at normal incidence: order (±1, 0) propagates for λ < n·a (any textbook, e.g.
    # Born & Wolf, Principles of Optics, §8.6); n = sqrt((1 + 1.45²)/2) is the embedding index used
    d = cell([{"shape": "sphere", "center": [0.0, 0.0], "radius": 30.0}], period=(500.0, 500.0))
    n = d.medium_index()
    edge = n * 500.0
    wl = np.array([edge * (1 - 1e-3), edge * (1 + 1e-3)])
    resp = simulate(d, wl)
    idx = [tuple(i) for i in np.asarray(resp.orders.indices)]
    first = [idx.index(o) for o in ((1, 0), (-1, 0), (0, 1), (0, -1))]
    assert resp.orders.propagating[0, first].all() and not resp.orders.propagating[1, first].any()
    assert resp.orders.transmitted_power[0, first, 0].sum() > 0


def test_lattice_sum_diverges_as_inverse_square_root_at_the_anomaly():
    # near λ = n·a the grazing order's 1/γ term dominates, |G_L| ∝ (λ - n a)^(-1/2) (Linton 2010, §4)
    from invdesign._green import lattice_dyadic
    from invdesign._lattice import Lattice, make_ewald_plan

    a = 500.0
    plan = make_ewald_plan([a, 0], [0, a], 2 * np.pi / 480e-9)
    lat = Lattice.from_nm([a, 0], [0, a])
    deltas = np.array([1e-4, 1e-5, 1e-6])
    vals = []
    for d in deltas:
        k = 2 * np.pi / (a * 1e-9 * (1 + d))
        g = lattice_dyadic(jnp.zeros(3), jnp.asarray(True), k, jnp.zeros(2), lat, plan)
        vals.append(abs(complex(g[1, 1])))
    slope = np.polyfit(np.log(deltas), np.log(vals), 1)[0]
    assert abs(slope + 0.5) < 0.02


def test_gradient_matches_finite_differences():
    d = cell(PAIR)
    fn, params = invdesign.forward_function(d, WL[:4], model=ModelOptions(dipoles_per_rod=3))

    def loss(length, angle, period):
        e0, e1 = params.elements
        p = invdesign.CellParams(params.a1.at[0].set(period), params.a2,
                                 (e0.__class__(e0.center, length, e0.width, e0.thickness, e0.angle_deg, "m"),
                                  e1.__class__(e1.center, e1.length, e1.width, e1.thickness, angle, "m")))
        t = fn(p).t
        return jnp.sum(jnp.abs(t[:, 1, 0]) ** 2) + jnp.sum(jnp.real(t[:, 0, 0]))

    x = (200.0, 45.0, 400.0)
    grads = jax.grad(loss, argnums=(0, 1, 2))(*x)
    for i, h in enumerate((1e-3, 1e-3, 1e-3)):
        up = list(x)
        dn = list(x)
        up[i] += h
        dn[i] -= h
        fd = (loss(*up) - loss(*dn)) / (2 * h)
        assert abs(float(grads[i]) - float(fd)) <= TOL["gradient_fd"] * max(abs(float(fd)), 1e-3)


def test_no_retrace_for_new_parameter_values():
    d = cell(PAIR)
    fn, params = invdesign.forward_function(d, WL[:3])
    fn(params)
    size0 = fn._cache_size()
    moved = jax.tree_util.tree_map(lambda v: v * 1.01, params)
    fn(moved)
    assert fn._cache_size() == size0


def test_wavelength_outside_material_data_is_refused_early():
    d = Design.from_json({
        "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.0},
        "materials": {"m": {"model": "library", "name": "fused_silica_malitson1965"}},
        "elements": [{"shape": "sphere", "material": "m", "center": [0.0, 0.0], "radius": 40.0}],
    })
    with pytest.raises(invdesign.MaterialError, match="fused_silica"):
        simulate(d, [150.0, 600.0])


@pytest.mark.parametrize("material", [GOLD, LOSSLESS_METAL])
def test_cross_polarised_transmission_obeys_the_single_sheet_ceiling(rng, material):
    # A single sheet of electric dipoles in a homogeneous medium converts at most 25 % of the power
    # to the crossed polarisation: |t_xy|² ≤ 1/4 (Arbabi & Faraon, Sci. Rep. 7, 43722 (2017);
    # Monticone, Estakhri & Alù, Phys. Rev. Lett. 110, 203903 (2013)). Checked here on random cells of
    # rods of one thickness (one sheet), lossy and lossless; the lossless ones should come close.
    peaks = []
    wl = np.linspace(600.0, 1500.0, 61)
    made = 0
    while made < 4:
        rods = [rod(float(rng.uniform(-150, 150)), float(rng.uniform(-150, 150)),
                    float(rng.uniform(100, 220)), float(rng.uniform(0, 180)),
                    width=float(rng.uniform(30, 70)))
                for _ in range(int(rng.integers(1, 4)))]
        try:
            d = cell(rods, material=material)
        except invdesign.DesignError:
            continue
        made += 1
        resp = simulate(d, wl)
        peaks.append(np.max(np.abs(resp.t[:, 1, 0]) ** 2))
        assert np.max(np.abs(resp.t[:, 1, 0]) ** 2) <= 0.25 + 1e-9
        assert np.max(np.abs(resp.t[:, 0, 1]) ** 2) <= 0.25 + 1e-9
    assert max(peaks) > 0.01  # the cells do convert some light


def test_lossless_rod_at_45_degrees_reaches_the_ceiling():
    # tightness of the same bound: a lossless rod sheet at its lattice-dressed resonance reflects the
    # rod-axis polarisation completely (S_uu = -1), so at 45° t_xy = S_uu/2 and |t_xy|² = 1/4 exactly
    # (same references as above; hand derivation: t = I + S, S = S_uu u uᵀ, u = (1, 1)/√2)
    d = cell([rod(0, 0, 180, 45)], material=LOSSLESS_METAL)
    wl = np.linspace(500.0, 1500.0, 201)
    coarse = np.abs(simulate(d, wl).t[:, 1, 0]) ** 2
    centre = wl[np.argmax(coarse)]
    fine = np.linspace(centre - 6.0, centre + 6.0, 201)
    peak = np.max(np.abs(simulate(d, fine).t[:, 1, 0]) ** 2)
    assert abs(peak - 0.25) < 1e-4
