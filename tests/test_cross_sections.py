"""Tests of invdesign._cross_sections against outside references.

Sources of check values (each is also named beside its check):
  [MIE]   miepython (registry package, independent Mie code), ``miepython.efficiencies(m, d, λ0, n_env)``
          → (qext, qsca, qback, g); cross section = Q·πr². It takes m = n − iκ for absorbing spheres
          (it conjugates an m with positive imaginary part); efficiencies are unaffected.
  [BH]    C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by Small Particles*
          (Wiley, 1983), §5.2: C_ext = k Im α, C_sca = k⁴|α|²/(6π) for a small particle, and §4.4 for
          the size of the neglected multipoles (b₁ and a₂ ∝ x² relative to a₁).
  [DRUDE] Drude gold with ε∞ = 9.84, ħωp = 9.0 eV, ħγ = 0.067 eV: common-practice round values for gold
          in the visible/near-IR (no single source; FROM MEMORY), used only to exercise the code.
  Exact mathematics (optical theorem for a lossless scatterer, finite differences) needs no source.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import jax
import jax.numpy as jnp
import miepython
import numpy as np
import pytest

from invdesign._cross_sections import CrossSections, cross_sections
from invdesign._elements import Disk, Rod, Sphere
from invdesign._materials.base import AbstractMaterial
from invdesign._units import ev_from_nm


class _DrudeGold(AbstractMaterial):
    """[DRUDE] local test material (keeps these tests independent of the materials package)."""

    name = "test_drude_gold"

    def permittivity(self, wavelength_nm):
        w = ev_from_nm(jnp.asarray(wavelength_nm, dtype=jnp.float64))
        return 9.84 - 9.0**2 / (w * w + 1j * 0.067 * w)


class _Lossless(AbstractMaterial):
    """Real permittivity (a lossless 'metal' below its plasma frequency, or a dielectric)."""

    name = "test_lossless"

    def __init__(self, eps):
        self.eps = float(eps)

    def permittivity(self, wavelength_nm):
        return jnp.full(jnp.shape(wavelength_nm), self.eps, dtype=jnp.complex128)


GOLD = _DrudeGold()


def rod(length=200.0, width=60.0, thickness=30.0):
    return Rod(jnp.zeros(2), jnp.float64(length), jnp.float64(width), jnp.float64(thickness),
               jnp.float64(0.0), "au")


def _mie(radius_nm, wl, n_env):
    eps = np.asarray(GOLD.permittivity(wl))
    qext, qsca, _, _ = miepython.efficiencies(np.sqrt(eps), 2 * radius_nm, wl, n_env)
    area = np.pi * radius_nm**2
    return qext * area, qsca * area


@pytest.mark.parametrize(("radius_nm", "tol"), [(5.0, 0.005), (10.0, 0.015)])
def test_sphere_vs_miepython_dipole_regime(radius_nm, tol):
    # [MIE] total Mie cross sections, 400–800 nm in water. x = k r ≤ 0.21; the neglected b1 and a2 grow
    # as x² [BH §4.4]: measured max deviation 0.41 % (r = 5 nm) and 1.47 % (r = 10 nm, at 800 nm, b1)
    wl = np.array([400.0, 450.0, 500.0, 520.0, 550.0, 600.0, 700.0, 800.0])
    cs = cross_sections(Sphere(jnp.zeros(2), jnp.float64(radius_nm), "au"), GOLD, wl, 1.33)
    ext, sca = _mie(radius_nm, wl, 1.33)
    np.testing.assert_allclose(cs.ext[:, 0], ext, rtol=tol)
    np.testing.assert_allclose(cs.sca[:, 0], sca, rtol=1e-3)
    np.testing.assert_allclose(cs.ext, cs.ext[:, :1] * np.ones(3), rtol=1e-15)  # isotropic


def test_sphere_vs_miepython_20nm_near_resonance():
    # [MIE] r = 20 nm near the dipole resonance (500–600 nm): within 1 %; further into the IR the eddy-
    # current magnetic dipole b1 (not in a point electric dipole) reaches ~3.5 % at 800 nm [BH §4.4]
    wl = np.array([500.0, 520.0, 540.0, 560.0, 580.0, 600.0])
    cs = cross_sections(Sphere(jnp.zeros(2), jnp.float64(20.0), "au"), GOLD, wl, 1.33)
    ext, sca = _mie(20.0, wl, 1.33)
    np.testing.assert_allclose(cs.ext[:, 0], ext, rtol=0.01)
    np.testing.assert_allclose(cs.sca[:, 0], sca, rtol=0.01)


@pytest.mark.parametrize("correction", ["radiative", "kelly", "moroz"])
@pytest.mark.parametrize("element", [rod(), Disk(jnp.zeros(2), jnp.float64(150.0), jnp.float64(40.0), "x"),
                                     Sphere(jnp.zeros(2), jnp.float64(60.0), "x")])
@pytest.mark.parametrize("eps", [-12.0, -3.0, 2.25])
def test_optical_theorem_lossless(element, correction, eps):
    # exact mathematics: a lossless scatterer absorbs nothing, C_ext = C_sca
    wl = np.linspace(400.0, 1500.0, 23)
    cs = cross_sections(element, _Lossless(eps), wl, 1.25, correction=correction)
    np.testing.assert_allclose(cs.ext, cs.sca, rtol=1e-11)
    assert np.all(np.abs(cs.abs) <= 1e-11 * cs.ext)


def test_shapes_dtypes_and_passivity():
    wl = np.linspace(500.0, 1400.0, 10)
    cs = cross_sections(rod(), GOLD, wl, 1.3)
    assert isinstance(cs, CrossSections)
    for a in cs:
        assert a.shape == (10, 3) and a.dtype == jnp.float64
    assert np.all(cs.abs > 0) and np.all(cs.sca > 0)
    np.testing.assert_allclose(cs.ext, cs.sca + cs.abs, rtol=1e-14)
    # longitudinal (length) response dominates the transverse ones near the long-axis resonance
    i = np.argmax(cs.ext[:, 0])
    assert cs.ext[i, 0] > 10 * cs.ext[i, 1] > 0


@pytest.mark.parametrize("correction", ["radiative", "kelly", "moroz"])
def test_gradient_wrt_length_vs_finite_differences(correction):
    # exact mathematics: central differences, step 1e-4 nm (truncation ~ h² ≪ 1e-6)
    wl = jnp.array([650.0, 800.0, 950.0, 1100.0])

    def f(length):
        cs = cross_sections(rod(length=length), GOLD, wl, 1.3, correction=correction)
        return jnp.stack([cs.ext[:, 0], cs.sca[:, 0], cs.abs[:, 0], cs.ext[:, 1]])

    jac = jax.jacfwd(f)(jnp.float64(200.0))
    jac_rev = jax.jacrev(f)(jnp.float64(200.0))
    h = 1e-4
    fd = (f(200.0 + h) - f(200.0 - h)) / (2 * h)
    np.testing.assert_allclose(jac, fd, rtol=1e-6)
    np.testing.assert_allclose(jac_rev, jac, rtol=1e-12)


@pytest.mark.parametrize("which", ["sphere", "disk"])
def test_gradient_sphere_radius_and_disk_diameter(which):
    # exact mathematics: central differences, step 1e-4 nm
    wl = jnp.array([450.0, 530.0, 700.0])

    def f(size):
        el = (Sphere(jnp.zeros(2), size, "au") if which == "sphere"
              else Disk(jnp.zeros(2), 2 * size, jnp.float64(30.0), "au"))
        cs = cross_sections(el, GOLD, wl, 1.3, correction="moroz")
        return jnp.concatenate([cs.ext[:, 0], cs.sca[:, 2]])

    h = 1e-4
    np.testing.assert_allclose(jax.grad(lambda s: jnp.sum(f(s) * jnp.arange(1.0, 7.0)))(jnp.float64(40.0)),
                               jnp.sum((f(40.0 + h) - f(40.0 - h)) / (2 * h) * jnp.arange(1.0, 7.0)),
                               rtol=1e-6)


def test_jit_and_vmap():
    traces = []

    @jax.jit
    def f(element, wl):
        traces.append(1)
        return cross_sections(element, GOLD, wl, 1.3, correction="moroz").ext

    wl = jnp.linspace(600.0, 1200.0, 8)
    a = f(rod(), wl)
    f(rod(180.0, 50.0, 35.0), wl + 1.0)
    assert len(traces) == 1
    np.testing.assert_allclose(a, cross_sections(rod(), GOLD, wl, 1.3, correction="moroz").ext, rtol=1e-13)
    one = jax.vmap(lambda w: cross_sections(rod(), GOLD, w, 1.3, correction="moroz").ext[0])(wl)
    np.testing.assert_allclose(one, a, rtol=1e-13)
    lengths = jnp.array([150.0, 200.0, 250.0])
    many = jax.vmap(lambda L: cross_sections(rod(length=L), GOLD, wl, 1.3).ext)(lengths)
    assert many.shape == (3, 8, 3)
    np.testing.assert_allclose(many[1], cross_sections(rod(), GOLD, wl, 1.3).ext, rtol=1e-13)
