"""Tests of invdesign._polarizability against outside references.

Sources of check values (each is also named beside its check):
  [SCIPY]  scipy.special.elliprf / elliprd — Carlson's symmetric integrals (general-purpose library).
  [BH]     C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by Small Particles*
           (Wiley, 1983): eq. (5.33) (L as an integral), eq. (5.34) prolate and (5.35) oblate spheroid
           closed forms, eq. (5.32) ellipsoid polarizability, §12.1 Fröhlich condition ε = −ε_m(1−L)/L.
  [KELLY]  K. L. Kelly, E. Coronado, L. L. Zhao, G. C. Schatz, J. Phys. Chem. B 107, 668 (2003),
           eq. (5): the modified long-wavelength approximation in Gaussian units (recalled FROM MEMORY).
  [MW]     M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983): sphere dynamic depolarization (ka)²/3.
  [MOROZ]  A. Moroz, J. Opt. Soc. Am. B 26, 517 (2009): prolate dynamic factor D = (3/4)[1 + (1+e²)L/(1−e²)]
           (recalled FROM MEMORY).
  [MIE]    miepython (registry package, independent Mie code): ``miepython.coefficients``. Note its
           convention: it takes m = n − iκ for absorbing spheres and silently conjugates an m with
           positive imaginary part; its a_n agree with B&H's (and ours) for absorbing spheres.
  [LINK]   S. Link, M. B. Mohamed, M. A. El-Sayed, J. Phys. Chem. B 103, 3073 (1999): Gans-theory
           longitudinal peak of gold rods, linear in aspect ratio R and in ε_m (abstract); in water
           λ_max ≈ 95 R + 420 nm (recalled FROM MEMORY), see ``test_gans_peak_vs_link_relation_in_water``.
  [RAKIC]  A. D. Rakić et al., Appl. Opt. 37, 5271 (1998), Table 1 Lorentz–Drude gold, typed FROM MEMORY
           below (independent of the copy in invdesign._materials).
  Exact mathematics (sum rules, limits, quadrature of the defining integral) needs no source.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import math

import jax
import jax.numpy as jnp
import miepython
import numpy as np
import pytest
import scipy.integrate
import scipy.special

from invdesign._elements import Disk, Rod, Sphere
from invdesign._errors import InvdesignError
from invdesign._polarizability import (
    CORRECTIONS,
    carlson_rd,
    carlson_rf,
    depolarization_factors,
    dynamic_depolarization_factors,
    equivalent_semi_axes,
    get_correction,
    inverse_polarizability,
    mie_a1,
    oblate_factor_long,
    polarizability,
    prolate_dynamic_factor_long,
    prolate_factor_long,
    sphere_lambda,
    sphere_polarizability,
)
from invdesign._units import NM, ev_from_nm, k0_per_m

# [RAKIC] Au Lorentz–Drude, from memory: ωp, f0, Γ0 (eV); oscillators (f, Γ, ω) in the paper's column order.
_AU_WP, _AU_F0, _AU_G0 = 9.03, 0.760, 0.053
_AU_OSC = ((0.024, 0.241, 0.415), (0.010, 0.345, 0.830), (0.071, 0.870, 2.969),
           (0.601, 2.494, 4.304), (4.384, 2.214, 13.32))


def gold_ld(wl_nm):
    """[RAKIC] Lorentz–Drude gold, local copy (ε∞ = 1), complex ndarray, exp(−iωt)."""
    w = ev_from_nm(np.asarray(wl_nm, float))
    eps = 1.0 - _AU_F0 * _AU_WP**2 / (w * (w + 1j * _AU_G0))
    for f, g, w0 in _AU_OSC:
        eps = eps + f * _AU_WP**2 / (w0**2 - w**2 - 1j * w * g)
    return eps


def rod(length=200.0, width=60.0, thickness=30.0, angle=0.0):
    return Rod(jnp.zeros(2), jnp.float64(length), jnp.float64(width), jnp.float64(thickness),
               jnp.float64(angle), "au")


# ----------------------------------------------------------------------------- Carlson / depolarization


def test_carlson_vs_scipy(rng):
    # [SCIPY] elliprf / elliprd over six decades of argument ratio, incl. one zero argument
    x, y, z = (10.0 ** rng.uniform(-3, 3, 200) for _ in range(3))
    x[:10] = 0.0
    np.testing.assert_allclose(carlson_rf(x, y, z), scipy.special.elliprf(x, y, z), rtol=2e-15)
    np.testing.assert_allclose(carlson_rd(x, y, z), scipy.special.elliprd(x, y, z), rtol=2e-15)


def test_depolarization_sum_and_sphere(rng):
    s = 10.0 ** rng.uniform(-1.5, 1.5, (100, 3))
    np.testing.assert_allclose(jnp.sum(depolarization_factors(s), axis=-1), 1.0, rtol=1e-14)  # [BH] ΣL = 1
    np.testing.assert_allclose(depolarization_factors(jnp.array([7.0, 7.0, 7.0])), 1.0 / 3.0, rtol=1e-15)


def test_depolarization_vs_integral():
    # [BH] eq. (5.33) by direct quadrature
    a = np.array([3.0, 1.7, 0.6])
    f = lambda q: np.sqrt(np.prod(a**2 + q))  # noqa: E731
    for i in range(3):
        ref = a.prod() / 2 * scipy.integrate.quad(lambda q, i=i: 1 / ((a[i] ** 2 + q) * f(q)), 0, np.inf,
                                                   epsabs=0, epsrel=1e-13, limit=200)[0]
        np.testing.assert_allclose(depolarization_factors(a)[i], ref, rtol=1e-10)


@pytest.mark.parametrize("ratio", [1.01, 1.3, 2.0, 3.0, 5.0, 10.0, 100.0])
def test_spheroid_closed_forms(ratio):
    # [BH] eq. (5.34) prolate (a > b = c) and eq. (5.35) oblate (a = b > c), to 1e-12
    lp = depolarization_factors(jnp.array([ratio, 1.0, 1.0]))
    np.testing.assert_allclose(lp[0], prolate_factor_long(ratio), rtol=1e-12 if ratio > 1.05 else 1e-9)
    np.testing.assert_allclose(lp[1:], (1 - prolate_factor_long(ratio)) / 2, rtol=1e-12)
    lo = depolarization_factors(jnp.array([ratio, ratio, 1.0]))
    np.testing.assert_allclose(lo[:2], oblate_factor_long(ratio), rtol=1e-12 if ratio > 1.05 else 1e-9)
    np.testing.assert_allclose(lo[2], 1 - 2 * oblate_factor_long(ratio), rtol=1e-12)


def test_prolate_reference_values():
    # [BH] eq. (5.34) evaluated independently with NumPy at R = 3: L = 0.10870946505...
    e = math.sqrt(1 - 1 / 9)
    ref = (1 - e * e) / (e * e) * (-1 + math.log((1 + e) / (1 - e)) / (2 * e))
    np.testing.assert_allclose(prolate_factor_long(3.0), ref, rtol=1e-14)


def test_dynamic_factor_vs_quadrature():
    # definition D_i = (a_i/4V) ∫ dΩ (1 + n_i²)/Σ n_j²/a_j² (module docstring), by direct 2-D quadrature
    a = np.array([3.0, 1.7, 1.0])
    vol = 4 * np.pi * a.prod() / 3
    d = dynamic_depolarization_factors(a)
    for i in range(3):
        def f(th, ph, i=i):
            n = np.array([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)])
            return np.sin(th) * (1 + n[i] ** 2) / np.sum(n**2 / a**2)
        val = scipy.integrate.dblquad(f, 0, 2 * np.pi, 0, np.pi, epsabs=1e-13, epsrel=1e-13)[0]
        np.testing.assert_allclose(d[i], a[i] / (4 * vol) * val, rtol=1e-9)


@pytest.mark.parametrize("ratio", [1.2, 2.0, 3.33, 8.0])
def test_dynamic_factor_prolate_closed_form(ratio):
    # [MOROZ] prolate long-axis closed form (from memory) vs our Carlson form
    np.testing.assert_allclose(dynamic_depolarization_factors(jnp.array([ratio, 1.0, 1.0]))[0],
                               prolate_dynamic_factor_long(ratio), rtol=1e-12)


def test_dynamic_factor_sphere_and_continuity():
    # [MW] D = 1 for a sphere; continuity as e → 0 from the prolate and the oblate side
    np.testing.assert_allclose(dynamic_depolarization_factors(jnp.array([2.0, 2.0, 2.0])), 1.0, rtol=1e-15)
    for delta in (1e-3, 1e-5, 1e-7):
        for s in ([1 + delta, 1.0, 1.0], [1.0, 1.0, 1 - delta], [1 + delta, 1.0, 1 - delta]):
            np.testing.assert_allclose(dynamic_depolarization_factors(jnp.array(s)), 1.0, atol=2 * delta)
            np.testing.assert_allclose(depolarization_factors(jnp.array(s)), 1 / 3, atol=delta)


def test_depolarization_gradients_finite():
    g = jax.grad(lambda s: jnp.sum(dynamic_depolarization_factors(s) * jnp.array([1.0, 2.0, 3.0])))
    assert np.all(np.isfinite(g(jnp.array([2.0, 2.0, 2.0]))))  # sphere: no 0/0 in the gradient


# ----------------------------------------------------------------------------- equivalent ellipsoid


def test_equivalent_semi_axes_volume_and_ratios():
    r = rod(200.0, 60.0, 30.0)
    s = equivalent_semi_axes(r)
    np.testing.assert_allclose(4 * np.pi / 3 * np.prod(s), r.volume(), rtol=1e-14)  # same volume
    np.testing.assert_allclose(s / s[2], [200 / 30, 2.0, 1.0], rtol=1e-14)  # same aspect ratios
    d = Disk(jnp.zeros(2), jnp.float64(120.0), jnp.float64(40.0), "au")
    s = equivalent_semi_axes(d)
    np.testing.assert_allclose(4 * np.pi / 3 * np.prod(s), math.pi / 4 * 120**2 * 40, rtol=1e-14)
    np.testing.assert_allclose(s / s[2], [3.0, 3.0, 1.0], rtol=1e-14)
    np.testing.assert_allclose(equivalent_semi_axes(Sphere(jnp.zeros(2), jnp.float64(25.0), "au")), 25.0)


# ----------------------------------------------------------------------------- corrections


def _cube(side):  # a cube maps to a sphere of equal volume: radius (6/π)^{1/3} side/2
    return rod(side, side, side)


def test_kelly_equals_gaussian_mlwa_for_sphere():
    # [KELLY] eq. (5) in Gaussian units, α_G = α_s/(1 − (2/3)ik³α_s − (k²/a)α_s), α_SI = 4π α_G;
    # [MW] its real O(k²) part is the Meier–Wokaun term
    wl = np.array([450.0, 550.0, 700.0])
    eps, em = gold_ld(wl), 1.5**2
    k = k0_per_m(wl) * 1.5
    c = _cube(60.0)
    a = float(equivalent_semi_axes(c)[0]) * NM
    als = a**3 * (eps - em) / (eps + 2 * em)
    ref = 4 * np.pi * als / (1 - 2j / 3 * k**3 * als - k**2 / a * als)
    np.testing.assert_allclose(polarizability(c, eps, em, k, correction="kelly")[:, 0], ref, rtol=1e-12)
    np.testing.assert_allclose(polarizability(c, eps, em, k, correction="moroz"), ref[:, None] * np.ones(3),
                               rtol=1e-12)  # D = 1 for a sphere: moroz ≡ kelly


def test_radiative_variant_is_static_plus_reaction():
    # [BH] eq. (5.32), with the radiative term i k³/(6π)
    wl = np.array([600.0, 900.0])
    eps, em = gold_ld(wl), 1.0
    k = k0_per_m(wl)
    r = rod()
    s = np.asarray(equivalent_semi_axes(r))
    L = np.asarray(depolarization_factors(s))
    vol = 200 * 60 * 30 * NM**3
    ref = vol * (eps[:, None] - em) / (em + L * (eps[:, None] - em))
    lam, ainv = inverse_polarizability(r, eps, em, k, correction="radiative")
    np.testing.assert_allclose(lam, 1 / ref, rtol=1e-13)
    np.testing.assert_allclose(ainv, 1 / ref - 1j * k[:, None] ** 3 / (6 * np.pi), rtol=1e-13)


def test_froehlich_condition_lossless_drude():
    # [BH] §12.1: the quasi-static resonance of a lossless Drude ellipsoid, ε∞ − ωp²/ω² = −ε_m(1/L − 1),
    # is where Λ crosses zero (radiative variant); ε∞ = 1, ħωp = 9 eV are common-practice demo values
    em, wp = 1.7, 9.0
    r = rod(150.0, 50.0, 25.0)
    L = np.asarray(depolarization_factors(equivalent_semi_axes(r)))
    w_res = wp / np.sqrt(1.0 + em * (1 / L - 1))
    for i in range(3):
        lam_at = lambda w, i=i: float(jnp.real(inverse_polarizability(  # noqa: E731
            r, jnp.array([1.0 - wp**2 / w**2 + 0j]), em, jnp.array([1.0]), correction="radiative")[0][0, i]))
        assert lam_at(w_res[i] * (1 - 1e-6)) * lam_at(w_res[i] * (1 + 1e-6)) < 0


def test_unknown_correction_raises():
    with pytest.raises(InvdesignError, match="radiative"):
        get_correction("bogus")
    with pytest.raises(InvdesignError):
        inverse_polarizability(rod(), jnp.array([-10 + 1j]), 1.0, jnp.array([1e7]), correction="bogus")


# ----------------------------------------------------------------------------- lossless: exact realness


@pytest.mark.parametrize("correction", list(CORRECTIONS))
@pytest.mark.parametrize("element", [rod(), Disk(jnp.zeros(2), jnp.float64(120.0), jnp.float64(40.0), "x"),
                                     Sphere(jnp.zeros(2), jnp.float64(40.0), "x")])
def test_lossless_lambda_exactly_real(element, correction):
    # energy conservation (exact mathematics): real ε ⇒ real Λ, and α⁻¹ − Λ = −i k³/(6π) exactly
    eps = jnp.array([-20.0, -4.0, -1.0, 2.25, 12.0]) + 0j
    k = k0_per_m(jnp.array([900.0, 700.0, 500.0, 600.0, 1500.0])) * 1.3
    lam, ainv = inverse_polarizability(element, eps, 1.69, k, correction=correction)
    assert lam.shape == ainv.shape == (5, 3) and lam.dtype == jnp.complex128
    assert np.all(np.imag(lam) == 0.0)
    # k³ as k·k·k, the two roundings the model's k**3 makes under XLA; NumPy's own ``k ** 3`` (libm pow,
    # NumPy 2.4) can differ from that by one ulp, which says nothing about the model
    kk = np.asarray(k)[:, None]
    np.testing.assert_array_equal(ainv - lam, -1j * (kk * kk * kk) / (6 * np.pi) + 0 * lam)


# ----------------------------------------------------------------------------- spheres: Mie a1


def _mie_a1_ref(eps, em, r_m, k):
    # [MIE] miepython's first electric coefficient; it wants m = n − iκ (it conjugates otherwise)
    return np.array([miepython.coefficients(np.conj(np.sqrt(e / em)), kk * r_m)[0][0]
                     for e, kk in zip(eps, k, strict=True)])


@pytest.mark.parametrize("radius_nm", [5.0, 20.0, 60.0, 150.0])
def test_mie_a1_vs_miepython(radius_nm):
    wl = np.linspace(400.0, 1200.0, 9)
    eps, em = gold_ld(wl), 1.33**2
    k = k0_per_m(wl) * 1.33
    ours = np.asarray(mie_a1(eps, em, radius_nm * NM, k))
    np.testing.assert_allclose(ours, _mie_a1_ref(eps, em, radius_nm * NM, k), rtol=1e-11)
    assert np.all(np.real(ours) > 0)  # passive: Re a1 > 0 (extinction positive)


def test_mie_a1_dielectric_vs_miepython():
    eps = np.array([2.25, 4.0, 12.0 + 0.1j])
    k = k0_per_m(np.array([500.0, 600.0, 800.0]))
    np.testing.assert_allclose(mie_a1(eps, 1.0, 90 * NM, k), _mie_a1_ref(eps, 1.0, 90 * NM, k), rtol=1e-11)


def test_sphere_small_size_limit():
    # [BH] eq. (5.32) with L = 1/3 (Clausius–Mossotti): α → 4π r³ (ε−ε_m)/(ε+2ε_m) as x → 0
    eps = np.array([-10 + 1.2j, 2.25 + 0j, -4 + 0.3j])
    k = k0_per_m(np.array([600.0, 500.0, 400.0])) * 1.3
    r = 1e-3 * NM
    ref = 4 * np.pi * r**3 * (eps - 1.69) / (eps + 2 * 1.69)
    # the first size correction is O(|m x|²) ≈ 4e-9 here (x ≈ 2e-5), hence the tolerance
    np.testing.assert_allclose(sphere_polarizability(eps, 1.69, r, k), ref, rtol=1e-8)


def test_sphere_lambda_consistent_and_real():
    eps = np.array([-10 + 1.2j, -4 + 0j, 2.25 + 0j])
    k = k0_per_m(np.array([600.0, 400.0, 500.0])) * 1.3
    r = 50 * NM
    lam = sphere_lambda(eps, 1.69, r, k)
    np.testing.assert_allclose(1 / (lam - 1j * k**3 / (6 * np.pi)), sphere_polarizability(eps, 1.69, r, k),
                               rtol=1e-12)
    assert np.all(np.imag(lam[1:]) == 0.0)


def test_sphere_lossless_unitarity_and_continuity():
    # exact mathematics: for real m, |a1 − 1/2| = 1/2; and a1 is continuous as Im ε → 0⁺
    # (miepython ≥ 3 returns a different, wrong branch for a purely imaginary m, so compare the limit)
    a0 = complex(mie_a1(np.array([-4.0 + 0j]), 1.7, 20 * NM, np.array([k0_per_m(400.0) * math.sqrt(1.7)]))[0])
    assert abs(abs(a0 - 0.5) - 0.5) < 1e-14
    ref = _mie_a1_ref([-4.0 + 1e-9j], 1.7, 20 * NM, [k0_per_m(400.0) * math.sqrt(1.7)])[0]
    assert abs(a0 - ref) < 1e-8


def test_sphere_ignores_correction():
    s = Sphere(jnp.zeros(2), jnp.float64(30.0), "au")
    wl = np.array([500.0, 650.0])
    out = [inverse_polarizability(s, gold_ld(wl), 1.0, k0_per_m(wl), correction=c)[0] for c in CORRECTIONS]
    for o in out[1:]:
        np.testing.assert_array_equal(o, out[0])


# ----------------------------------------------------------------------------- gold rods: resonances


_WL_PEAK = np.linspace(500.0, 1600.0, 11001)


def _peak(element, n_med, correction, wl=_WL_PEAK):
    k = k0_per_m(wl) * n_med
    a = polarizability(element, gold_ld(wl), n_med**2, k, correction=correction)
    return float(wl[np.argmax(k * np.imag(a[:, 0]))])


def test_rod_longitudinal_red_shift_ordering():
    # 200 × 60 × 30 nm gold rod in n = sqrt((1 + 1.5²)/2) (air/glass average, the model's medium).
    # Independent estimate (an independent coupled-dipole implementation, quoted in the issue tracker;
    # Rakić-type gold, medium not recorded):
    # ≈ 864, 942, 1057 nm for radiative, kelly, moroz. Our map keeps the rod's volume, which makes the
    # corrections somewhat stronger; the check is the ordering and a ±15 % ballpark.
    n = math.sqrt((1 + 1.5**2) / 2)
    peaks = [_peak(rod(), n, c) for c in ("radiative", "kelly", "moroz")]
    assert peaks[0] < peaks[1] < peaks[2]
    np.testing.assert_allclose(peaks, [864.0, 942.0, 1057.0], rtol=0.15)


def test_rod_resonance_linear_in_aspect_ratio_and_medium():
    # [LINK] abstract: the Gans longitudinal absorption maximum is linear in R (fixed ε_m) and linear in
    # ε_m (fixed R). Quasi-static prolate spheroids (tiny volume, "radiative"), R = 2…5.
    wl = np.linspace(450.0, 2000.0, 15501)
    eps = gold_ld(wl)

    def peak(ratio, em):
        el = Rod(jnp.zeros(2), jnp.float64(ratio), jnp.float64(1.0), jnp.float64(1.0), jnp.float64(0.0), "x")
        k = k0_per_m(wl) * math.sqrt(em)
        a = polarizability(el, eps, em, k, correction="radiative")
        return wl[np.argmax(np.imag(a[:, 0]))]

    ratios, media = np.array([2.0, 2.5, 3.0, 3.5, 4.0, 4.5, 5.0]), np.array([1.77, 2.25, 3.0, 4.0])
    table = np.array([[peak(r, em) for r in ratios] for em in media])
    for row in table:  # linear in R: residual of a straight-line fit below 2 % of the span (tolerance ours)
        res = row - np.polyval(np.polyfit(ratios, row, 1), ratios)
        assert np.max(np.abs(res)) < 0.02 * (row[-1] - row[0])
    for col in table.T:  # linear in ε_m
        res = col - np.polyval(np.polyfit(media, col, 1), media)
        assert np.max(np.abs(res)) < 0.03 * (col[-1] - col[0])
    slopes = np.polyfit(ratios, table.T, 1)[0]
    assert np.all(np.diff(slopes) > 0)  # the R-slope grows with ε_m (sign of the 33.34 ε_m term)


def test_gans_peak_vs_link_relation_in_water():
    # [LINK] gold nanorods in water (ε_m = 1.77): λ_max ≈ 95 R + 420 nm, the linear relation that paper
    # reports (recalled FROM MEMORY; a fuller two-parameter fit in ε_m is also in the paper but our
    # recollection of its coefficients could not be confirmed, so it is not used). Gans theory here =
    # quasi-static prolate spheroid, B&H eq. (5.32)/(5.34), with the Rakić gold typed above; tolerance 6 %
    # (the paper used a different gold data set; ours).
    wl = np.linspace(450.0, 2000.0, 15501)
    eps = gold_ld(wl)
    em = 1.77
    for ratio in (2.0, 3.0, 4.0, 5.0):
        L = float(prolate_factor_long(ratio))
        lmax = wl[np.argmax(np.imag((eps - em) / (em + L * (eps - em))))]
        np.testing.assert_allclose(lmax, 95.0 * ratio + 420.0, rtol=0.06)


# ----------------------------------------------------------------------------- JAX: grad, vmap, jit


def test_vmap_over_wavelengths_matches_batch():
    wl = jnp.linspace(500.0, 1200.0, 7)
    eps = jnp.asarray(gold_ld(np.asarray(wl)))
    k = k0_per_m(wl) * 1.3
    r = rod()
    batch = inverse_polarizability(r, eps, 1.69, k, correction="moroz")[1]
    one = jax.vmap(lambda e, kk: inverse_polarizability(r, e, 1.69, kk, correction="moroz")[1][0])(eps, k)
    np.testing.assert_allclose(one, batch, rtol=1e-14)


def test_jit_no_recompile():
    traces = []

    @jax.jit
    def f(element, eps, k):
        traces.append(1)
        return inverse_polarizability(element, eps, 1.69, k, correction="kelly")[0]

    wl = jnp.linspace(500.0, 900.0, 5)
    k = k0_per_m(wl) * 1.3
    eps = jnp.asarray(gold_ld(np.asarray(wl)))
    a = f(rod(), eps, k)
    b = f(rod(210.0, 55.0, 32.0, 10.0), eps * 1.01, k * 1.01)
    assert len(traces) == 1
    np.testing.assert_allclose(a, inverse_polarizability(rod(), eps, 1.69, k)[0], rtol=1e-13)
    assert not np.allclose(a, b)
