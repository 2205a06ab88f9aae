"""Size-dependent free-electron damping: γ = γ_bulk + A·v_F/L_eff with L_eff = 4V/S.

Check values and their sources:
  * ħ = 6.582119569e-16 eV·s (CODATA 2018), typed here independently of ``invdesign._units``.
  * v_F(Au) = 1.40e6 m/s, Ashcroft & Mermin, *Solid State Physics* (1976), Table 2.1 (from memory).
  * L_eff = 4V/S, so 4R/3 for a sphere: Coronado & Schatz, J. Chem. Phys. 119, 3926 (2003).
  * A quasi-static Drude sphere (ε∞ = 1, in vacuum) has a Lorentzian Im α around ωp/√3 whose full width
    at half maximum in ħω equals the Drude damping ħγ when γ ≪ ω (textbook property of the Fröhlich
    resonance, e.g. Kreibig & Vollmer 1995, ch. 2); with surface scattering the width is γ_bulk + Δγ.
  * Passivity: Im ε ≥ 0 with exp(−iωt) (physical property).
"""

import math
import pathlib

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from helpers import TOL

import invdesign
from invdesign import Design, ModelOptions, simulate
from invdesign._elements import Disk, Rod, Sphere, effective_length
from invdesign._errors import InvdesignError, MaterialError
from invdesign._materials import Drude, aluminium, gold, material_from_dict, silver
from invdesign._materials.size_damping import (
    collision_increase_ev,
    drude_size_correction,
    free_electron_parameters,
    size_damped_permittivity,
)
from invdesign._polarizability import inverse_polarizability
from invdesign._simulate import _dipoles, prepare
from invdesign._units import k0_per_m

HBAR_EV_S = 6.582119569e-16  # CODATA 2018
VF_GOLD = 1.40e6  # Ashcroft & Mermin Table 2.1, from memory
WL = jnp.array([500.0, 650.0, 800.0])
ROD_WL = np.array([650.0, 800.0, 950.0])


def _sphere(r):
    return Sphere(jnp.zeros(2), jnp.float64(r), "m")


def test_sphere_hand_formula():
    r = 10.0
    l_eff = float(effective_length(_sphere(r)))
    assert l_eff == pytest.approx(4.0 * r / 3.0, rel=1e-14)
    expected = 1.0 * HBAR_EV_S * VF_GOLD / (4.0 * r / 3.0 * 1e-9)  # ≈ 0.0691 eV
    assert float(collision_increase_ev(l_eff, VF_GOLD, 1.0)) == pytest.approx(expected, rel=1e-12)
    assert float(collision_increase_ev(l_eff, VF_GOLD, 0.5)) == pytest.approx(0.5 * expected, rel=1e-12)


def test_rod_box_and_disk_hand_formula():
    rod = Rod(jnp.zeros(2), jnp.float64(100.0), jnp.float64(40.0), jnp.float64(30.0), jnp.float64(0.0), "m")
    v, s = 100.0 * 40.0 * 30.0, 2.0 * (100.0 * 40.0 + 100.0 * 30.0 + 40.0 * 30.0)
    assert float(effective_length(rod)) == pytest.approx(4.0 * v / s, rel=1e-14)  # ≈ 29.27 nm
    disk = Disk(jnp.zeros(2), jnp.float64(80.0), jnp.float64(30.0), "m")
    v_d, s_d = math.pi * 40.0**2 * 30.0, 2.0 * math.pi * 40.0**2 + 2.0 * math.pi * 40.0 * 30.0
    assert float(effective_length(disk)) == pytest.approx(4.0 * v_d / s_d, rel=1e-14)
    dg = HBAR_EV_S * VF_GOLD / (4.0 * v / s * 1e-9)
    assert float(collision_increase_ev(effective_length(rod), VF_GOLD)) == pytest.approx(dg, rel=1e-12)


def test_lorentz_drude_changes_only_the_drude_part():
    # Rakić LD gold with Γ0 → Γ0 + Δγ, rebuilt independently from the paper's form
    au = gold()
    dg = 0.07
    e = 1239.8419843320026 / np.asarray(WL)  # hc in eV·nm (CODATA 2018 h, c)
    f0, wp, g0 = au.drude_strength, au.omega_p_ev, au.gamma_ev
    d_bulk = -f0 * wp**2 / (e**2 + 1j * g0 * e)
    d_small = -f0 * wp**2 / (e**2 + 1j * (g0 + dg) * e)
    np.testing.assert_allclose(np.asarray(drude_size_correction(e, f0 * wp**2, g0, dg)), d_small - d_bulk,
                               rtol=1e-12)
    l_eff = HBAR_EV_S * VF_GOLD / (dg * 1e-9)  # the L_eff that gives Δγ = 0.07 eV
    got = size_damped_permittivity(au, WL, l_eff)
    expected = np.asarray(au.permittivity(WL)) + d_small - d_bulk
    # rtol 1e-9: the package's hc comes from a rounded ħ and differs from h·c here at ~1e-11
    np.testing.assert_allclose(np.asarray(got), expected, rtol=1e-9)


def test_unchanged_when_off_or_large():
    for mat in (gold(), silver(), aluminium()):
        bulk = np.asarray(mat.permittivity(WL))
        np.testing.assert_array_equal(np.asarray(size_damped_permittivity(mat, WL, jnp.inf)), bulk)
        np.testing.assert_allclose(np.asarray(size_damped_permittivity(mat, WL, 1e9)), bulk, rtol=1e-7)
    d = _rod_cell(120.0)
    off = _rod_lambda(d, ModelOptions(), 120.0)
    off2 = _rod_lambda(d, ModelOptions(size_damping=False, size_damping_coefficient=3.0), 120.0)
    zero = _rod_lambda(d, ModelOptions(size_damping=True, size_damping_coefficient=0.0), 120.0)
    on = _rod_lambda(d, ModelOptions(size_damping=True), 120.0)
    np.testing.assert_array_equal(off, off2)
    np.testing.assert_allclose(zero, off, rtol=1e-13)
    assert np.all(on.imag < off.imag)  # Im Λ = Im(1/α_static) more negative: more absorption
    assert np.max(np.abs(on - off) / np.abs(off)) > 1e-3  # switching it on does change the answer


def test_energy_balance_with_size_damping():
    # R + T + A = 1 is a physical identity for the model; it must survive the per-element ε
    resp = simulate(_rod_cell(120.0), [800.0], model=ModelOptions(size_damping=True))
    assert np.max(np.abs(resp.transmittance + resp.reflectance + resp.absorbance - 1)) < TOL["energy"]
    assert np.all(resp.absorbance > 0)


def test_passive_and_more_absorbing():
    wl = jnp.linspace(300.0, 1500.0, 7)
    for mat in (gold(), silver(), aluminium()):
        bulk = np.asarray(mat.permittivity(wl))
        for l_eff in (2.0, 10.0, 50.0, 1000.0):
            eps = np.asarray(size_damped_permittivity(mat, wl, l_eff))
            assert np.all(eps.imag > 0)
            assert np.all(eps.imag > bulk.imag)
        small, big = (np.asarray(size_damped_permittivity(mat, wl, l)) for l in (4.0 * 10 / 3, 4.0 * 50 / 3))
        assert np.all(small.imag > big.imag)


def _im_alpha(radius_nm, eps, energy_ev, eps_m=1.0):
    k = energy_ev / (HBAR_EV_S * 299_792_458.0)  # ω/c in 1/m (vacuum medium)
    return np.asarray(jnp.imag(1.0 / inverse_polarizability(_sphere(radius_nm), eps, eps_m, k)[1][:, 0]))


def _fwhm(x, y):
    half = y.max() / 2.0
    above = x[y >= half]
    return above.max() - above.min()


def test_resonance_broadens_for_small_sphere():
    # silver (Rakić LD): 10 nm vs 50 nm radius, Im α peak relative to the bulk-ε particle of the same size
    ag = silver()
    energy = np.linspace(2.6, 4.0, 1401)  # eV, around the dipole resonance near 3.4 eV
    wl = jnp.asarray(1239.8419843320026 / energy)
    ratios = {}
    for r in (10.0, 50.0):
        bulk = _im_alpha(r, ag.permittivity(wl), energy)
        small = _im_alpha(r, size_damped_permittivity(ag, wl, 4.0 * r / 3.0), energy)
        ratios[r] = small.max() / bulk.max()
        assert _fwhm(energy, small) > _fwhm(energy, bulk)
    assert ratios[10.0] < ratios[50.0] < 1.0


def test_drude_sphere_width_equals_total_damping():
    # ε∞ = 1 Drude metal, ħωp = 9 eV, ħγ = 0.05 eV (illustrative values, common practice for a noble
    # metal's free electrons); 3 nm sphere, where radiative damping is negligible next to Δγ
    metal = Drude(1.0, 9.0, 0.05, name="m", fermi_velocity_m_s=VF_GOLD)
    r = 3.0
    energy = np.linspace(4.6, 5.8, 24001)
    wl = jnp.asarray(1239.8419843320026 / energy)
    im = _im_alpha(r, size_damped_permittivity(metal, wl, 4.0 * r / 3.0), energy)
    total = 0.05 + HBAR_EV_S * VF_GOLD / (4.0 * r / 3.0 * 1e-9)  # ≈ 0.28 eV
    # peak at the Fröhlich energy ωp/√3; the exact Mie a1 term red-shifts it by O((kR)²) ≈ 0.3 % here
    assert energy[np.argmax(im)] == pytest.approx(9.0 / math.sqrt(3.0), rel=1e-2)
    assert _fwhm(energy, im) == pytest.approx(total, rel=0.02)


def _rod_cell(length):
    return Design.from_json({
        "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": {"m": {"model": "library", "name": "gold_rakic1998"}},
        "elements": [{"shape": "rod", "center": [0.0, 0.0], "length": length, "width": 40.0,
                      "thickness": 30.0, "angle_deg": 0.0, "material": "m"}],
    })


def _rod_lambda(design, model, length):
    """Λ (n_wl, 3) of the cell's rod of the given length (nm), through the simulation's per-element ε."""
    pb = prepare(design, ROD_WL, model=model)
    e = design.params.elements[0]
    rod = e.__class__(e.center, length, e.width, e.thickness, e.angle_deg, "m")
    params = invdesign.CellParams(design.params.a1, design.params.a2, (rod,))
    k = k0_per_m(jnp.asarray(ROD_WL)) * pb.medium_index
    return _dipoles(params, pb, k)[1][:, 0]


def test_gradient_wrt_rod_length_matches_finite_differences():
    # the size damping's own dependence on L (through L_eff = 4V/S) is inside Λ; the rest of the pipeline's
    # gradients are checked in test_simulate.py
    d = _rod_cell(120.0)
    model = ModelOptions(size_damping=True)

    def loss(length):
        lam = _rod_lambda(d, model, length)
        return jnp.sum(jnp.imag(lam) + 0.1 * jnp.real(lam)) / 1e20

    x, h = 120.0, 1e-3
    g = float(jax.grad(loss)(x))
    fd = float((loss(x + h) - loss(x - h)) / (2 * h))
    assert math.isfinite(g)
    assert abs(g - fd) <= TOL["gradient_fd"] * max(abs(fd), 1e-3)
    # and the size-damping part alone: d(ħΔγ)/dL for the rod box, by hand: Δγ ∝ S/(4V)
    w, t = 40.0, 30.0
    dg = jax.grad(lambda length: collision_increase_ev(effective_length(
        Rod(jnp.zeros(2), length, w, t, 0.0, "m")), VF_GOLD))(x)
    s_over_v = lambda length: 2.0 * (length * w + length * t + w * t) / (length * w * t)  # noqa: E731
    hand = HBAR_EV_S * VF_GOLD / 4e-9 * (s_over_v(x + h) - s_over_v(x - h)) / (2 * h)
    assert float(dg) == pytest.approx(hand, rel=1e-6)


def test_errors_name_the_key():
    with pytest.raises(InvdesignError, match="model.size_damping "):
        ModelOptions(size_damping="yes")
    with pytest.raises(InvdesignError, match="size_damping_coefficient"):
        ModelOptions(size_damping=True, size_damping_coefficient=-1.0)
    with pytest.raises(MaterialError, match="fermi_velocity_m_s"):
        free_electron_parameters(Drude(1.0, 9.0, 0.05, name="bare"))
    with pytest.raises(MaterialError, match="fermi_velocity_m_s"):
        material_from_dict({"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.05,
                            "fermi_velocity_m_s": -1.0}, "x")
    ok = material_from_dict({"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.05,
                             "fermi_velocity_m_s": 1.4e6}, "x")
    assert ok.fermi_velocity_m_s == 1.4e6
    assert free_electron_parameters(material_from_dict({"model": "constant", "n": 1.5}, "glass")) is None
    d = Design.from_json({
        "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": {"m": {"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.05}},
        "elements": [{"shape": "sphere", "center": [0.0, 0.0], "radius": 20.0, "material": "m"}],
    })
    with pytest.raises(MaterialError, match="material 'm', field 'fermi_velocity_m_s'"):
        simulate(d, [700.0], model=ModelOptions(size_damping=True))


def test_optimiser_runs_carry_size_damping_instead_of_ignoring_it():
    """optimize / tradeoff build every model of the run from RunOptions: asking them for size damping must
    reach each model (never a silent bulk-metal run), and a malformed value is an error naming the key.
    (These commands refused the option until they carried it; the forward-model check is in
    tests/test_optimize.py::test_size_damping_reaches_every_model_of_the_run.)"""
    from omegaconf import OmegaConf

    from invdesign import _optimize as opt
    from invdesign._errors import SpecError
    from invdesign._spec import parse_fab

    deck = pathlib.Path(__file__).resolve().parent.parent / "conf" / "fab" / "ebl_fine.yaml"
    fab = parse_fab(OmegaConf.to_container(OmegaConf.load(deck)))
    on = opt.parse_run_options({}, fab, {"correction": "kelly", "size_damping": True,
                                         "size_damping_coefficient": 0.5})
    models = [on.model(n, c) for n, c in on.models]
    assert len(models) > 1 and all(m.size_damping and m.size_damping_coefficient == 0.5 for m in models)
    off = opt.parse_run_options({}, fab, {"correction": "kelly", "size_damping": False})
    assert not any(off.model(n, c).size_damping for n, c in off.models)
    with pytest.raises(SpecError, match="model.size_damping "):
        opt.parse_run_options({}, fab, {"correction": "kelly", "size_damping": "yes"})
