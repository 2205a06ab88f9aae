"""Tests of invdesign._materials against outside references.

Sources of check values (each is also named beside the check):
  [RAKIC]    A. D. Rakić, A. B. Djurišić, J. M. Elazar, M. L. Majewski, Appl. Opt. 37, 5271 (1998),
             Table 1 (Lorentz–Drude). The table is typed a second time below, from memory, in the
             paper's own column order, so a typo in one copy is caught by the comparison.
  [JC]       P. B. Johnson and R. W. Christy, Phys. Rev. B 6, 4370 (1972), Table I (n, k of Au and Ag).
             The n, k values below are FROM MEMORY of that table.
  [MALITSON] I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965): fused-silica indices quoted in optics
             handbooks (n_d = 1.4585 at 587.6 nm; 1.4570 at 632.8 nm; 1.4496 at 1064 nm), from memory.
  [PALIK]    E. D. Palik (ed.), Handbook of Optical Constants of Solids (Academic Press, 1985),
             aluminium chapter (D. Y. Smith, E. Shiles, M. Inokuti); value at 800 nm from memory.
  Exact mathematics (sum rules, limits) needs no source; common-practice values are marked as such.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + float64 before jax is used)

# isort: split
import json
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign._errors import MaterialError
from invdesign._materials import (
    LIBRARY,
    ConstantPermittivity,
    Drude,
    LorentzDrude,
    Sellmeier,
    TabulatedNK,
    aluminium,
    from_index,
    fused_silica,
    glass,
    gold,
    material_from_dict,
    silver,
)

# h·c in eV·nm from CODATA 2018 (h = 4.135667696e-15 eV·s, c exact), computed independently of _units.
# Both this and _units round CODATA to 10 digits (h here, ħ there), so formulas agree to ~1e-9 only.
HC = 4.135667696e-15 * 299_792_458.0 * 1e9
RTOL_HC = 1e-8

# --------------------------------------------------------------------------------------------------
# independent plain-numpy reference of the Rakić LD model
# --------------------------------------------------------------------------------------------------

# [RAKIC] Table 1, typed again FROM MEMORY in the paper's layout: ωp, f0, Γ0, then rows (f_j, Γ_j, ω_j),
# all energies in eV. Deliberately not imported from the library.
RAKIC_TABLE = {
    "Au": (9.03, 0.760, 0.053, [(0.024, 0.241, 0.415), (0.010, 0.345, 0.830), (0.071, 0.870, 2.969),
                                (0.601, 2.494, 4.304), (4.384, 2.214, 13.32)]),
    "Ag": (9.01, 0.845, 0.048, [(0.065, 3.886, 0.816), (0.124, 0.452, 4.481), (0.011, 0.065, 8.185),
                                (0.840, 0.916, 9.083), (5.646, 2.419, 20.29)]),
    "Al": (14.98, 0.523, 0.047, [(0.227, 0.333, 0.162), (0.050, 0.312, 1.544), (0.166, 1.351, 1.808),
                                 (0.030, 3.382, 3.473)]),
}


def rakic_numpy(metal, wavelength_nm):
    """ε of [RAKIC] eq. (3)-(4), written with exp(-iωt) so that Im ε > 0; plain numpy."""
    wp, f0, g0, rows = RAKIC_TABLE[metal]
    w = HC / np.asarray(wavelength_nm, dtype=float)
    eps = 1.0 - f0 * wp**2 / (w * (w + 1j * g0))
    for f, g, w0 in rows:
        eps += f * wp**2 / ((w0**2 - w**2) - 1j * w * g)
    return eps


BUILTIN_METALS = {"Au": gold, "Ag": silver, "Al": aluminium}


def grid(material, n=400):
    lo, hi = material.valid_range_nm()
    hi = min(hi, 20_000.0)
    lo = max(lo, 100.0)
    return np.geomspace(lo, hi, n)


# --------------------------------------------------------------------------------------------------
# formulas
# --------------------------------------------------------------------------------------------------


def test_drude_matches_numpy_formula():
    m = Drude(eps_inf=3.7, omega_p_ev=9.1, gamma_ev=0.07, name="d")
    wl = np.linspace(300.0, 2000.0, 37)
    w = HC / wl
    ref = 3.7 - 9.1**2 / (w**2 + 1j * 0.07 * w)
    got = np.asarray(m.permittivity(wl))
    assert got.dtype == np.complex128 and got.shape == wl.shape
    np.testing.assert_allclose(got, ref, rtol=RTOL_HC)


def test_lorentz_drude_matches_numpy_formula():
    osc = [(0.3, 2.5, 0.8), (1.2, 6.0, 1.5)]
    m = LorentzDrude(2.0, 8.0, 0.05, oscillators=osc, drude_strength=0.7, name="ld")
    wl = np.linspace(250.0, 1800.0, 41)
    w = HC / wl
    ref = 2.0 - 0.7 * 64.0 / (w**2 + 1j * 0.05 * w)
    for f, w0, g in osc:
        ref = ref + f * 64.0 / (w0**2 - w**2 - 1j * w * g)
    np.testing.assert_allclose(np.asarray(m.permittivity(wl)), ref, rtol=RTOL_HC)


def test_scalar_in_scalar_out_and_jit():
    m = gold()
    e = m.permittivity(700.0)
    assert e.shape == () and e.dtype == jnp.complex128
    f = jax.jit(m.permittivity)
    np.testing.assert_allclose(f(jnp.array([600.0, 700.0])), m.permittivity(np.array([600.0, 700.0])))


def test_lorentz_drude_without_oscillators_is_drude():
    a = LorentzDrude(1.0, 9.0, 0.1, oscillators=[], drude_strength=1.0)
    b = Drude(1.0, 9.0, 0.1)
    wl = np.linspace(300, 3000, 11)
    np.testing.assert_allclose(a.permittivity(wl), b.permittivity(wl), rtol=1e-14)


@pytest.mark.parametrize("metal", sorted(BUILTIN_METALS))
def test_builtin_passive_over_valid_range(metal):
    """Passivity, exp(-iωt): Im ε ≥ 0 (exact requirement, no source needed)."""
    m = BUILTIN_METALS[metal]()
    e = np.asarray(m.permittivity(grid(m, 2000)))
    assert np.all(e.imag > 0)


@pytest.mark.parametrize("factory", [fused_silica, glass])
def test_dielectrics_lossless(factory):
    m = factory()
    e = np.asarray(m.permittivity(np.linspace(400.0, 1500.0, 50)))
    assert np.all(e.imag == 0.0) and np.all(e.real > 1.0)


@pytest.mark.parametrize("metal", sorted(BUILTIN_METALS))
def test_high_frequency_limit(metal):
    """ε → ε∞ (= 1 in [RAKIC]) as ω → ∞, with ε − 1 ≈ −ωp²(f0 + Σf_j)/ω² (exact asymptotics)."""
    m = BUILTIN_METALS[metal]()
    wp, f0, _, rows = RAKIC_TABLE[metal]
    wl = 1e-3  # nm, i.e. ~1.2 MeV: far above every resonance
    w = HC / wl
    e = complex(m.permittivity(wl))
    expected = -(wp**2) * (f0 + sum(r[0] for r in rows)) / w**2
    assert abs(e - 1.0) < 1e-9
    assert (e.real - 1.0) == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize("metal", sorted(BUILTIN_METALS))
def test_f_sum_rule(metal):
    """Kramers–Kronig consequence (f-sum rule): ∫₀^∞ ω Im ε(ω) dω = (π/2) ωp² (f0 + Σ f_j).

    Exact for this model class (each Drude or Lorentz term contributes (π/2) f ωp²); checks that the
    implementation keeps consistent real/imaginary parts and signs. Integrated on a log grid in
    u = ln ω from 1e-7 eV to 1e5 eV; the analytic tail beyond the grid ≈ ωp² Σ f γ / ω_max.
    """
    m = BUILTIN_METALS[metal]()
    wp, f0, g0, rows = RAKIC_TABLE[metal]
    u = np.linspace(math.log(1e-7), math.log(1e5), 400_001)
    w = np.exp(u)
    eps = np.asarray(m.permittivity(HC / w))
    integrand = w * eps.imag * w  # dω = ω du
    integral = np.sum(0.5 * (integrand[1:] + integrand[:-1]) * np.diff(u))
    tail = wp**2 * (f0 * g0 + sum(f * g for f, g, _ in rows)) / w[-1]
    expected = 0.5 * math.pi * wp**2 * (f0 + sum(r[0] for r in rows))
    assert integral + tail == pytest.approx(expected, rel=2e-4)


# --------------------------------------------------------------------------------------------------
# built-ins vs their published fits and vs measurements
# --------------------------------------------------------------------------------------------------


@pytest.mark.parametrize("metal", sorted(BUILTIN_METALS))
def test_builtin_matches_independent_rakic_implementation(metal):
    """Library copy of [RAKIC] vs the independently typed table above; any typo shows up here."""
    m = BUILTIN_METALS[metal]()
    wl = np.array([210.0, 300.0, 413.3, 550.0, 632.8, 800.0, 1064.0, 1550.0, 5000.0, 12000.0])
    np.testing.assert_allclose(np.asarray(m.permittivity(wl)), rakic_numpy(metal, wl), rtol=RTOL_HC)


@pytest.mark.parametrize("metal", sorted(BUILTIN_METALS))
def test_builtin_range_is_rakic_fit_range(metal):
    """[RAKIC] abstract: the fits cover 0.1 to 6 eV."""
    lo, hi = BUILTIN_METALS[metal]().valid_range_nm()
    assert lo == pytest.approx(HC / 6.0, rel=1e-6)
    assert hi == pytest.approx(HC / 0.1, rel=1e-6)
    with pytest.raises(MaterialError, match="defined for"):
        BUILTIN_METALS[metal]().check_range(np.array([150.0, 600.0]))


# [JC] Table I, (photon energy eV, n, k) — FROM MEMORY. Visible–near-IR points only.
JC_GOLD = [(0.89, 0.43, 9.519), (1.02, 0.35, 8.145), (1.26, 0.22, 6.350), (1.39, 0.17, 5.663),
           (1.64, 0.14, 4.542), (1.88, 0.14, 3.697), (2.01, 0.21, 3.272), (2.26, 0.43, 2.455)]
JC_SILVER = [(1.02, 0.09, 8.828), (1.26, 0.04, 6.992), (1.51, 0.04, 5.727), (1.64, 0.03, 5.242),
             (2.01, 0.06, 4.152), (2.26, 0.06, 3.586), (2.50, 0.05, 3.093)]

# Tolerances. [RAKIC] fitted the Palik-handbook compilation, not [JC]; bulk-like handbook data for Au and
# Ag have systematically smaller |ε′| than J&C's evaporated films in the red/near-IR (a known spread
# between data sets), and the paper itself says the LD form describes noble-metal interband absorption
# poorly. Measured with these parameters (see report): |ε′| is 9–17 % below [JC] for Au (0.89–2.26 eV)
# and 18–22 % below for Ag (1.0–2.5 eV). The tolerances are set just above that, tight enough that a
# mistyped ωp or f0 (which moves ε′ by tens of percent or more) fails. Normal-incidence reflectance
# R = |(√ε − 1)/(√ε + 1)|² is the quantity a designer feels; the fit reproduces it to ≤ 0.055 (Au) and
# ≤ 0.042 (Ag) here.
JC_TOL = {"Au": (0.20, 0.06), "Ag": (0.25, 0.045)}


def _reflectance(eps):
    n = np.sqrt(eps)
    return np.abs((n - 1) / (n + 1)) ** 2


@pytest.mark.parametrize(("metal", "table"), [("Au", JC_GOLD), ("Ag", JC_SILVER)])
def test_builtin_vs_johnson_christy(metal, table):
    m = BUILTIN_METALS[metal]()
    e_ev, n, k = (np.array(c) for c in zip(*table, strict=True))
    eps_jc = (n + 1j * k) ** 2
    eps = np.asarray(m.permittivity(HC / e_ev))
    rel_tol, r_tol = JC_TOL[metal]
    rel = np.abs(eps.real - eps_jc.real) / np.abs(eps_jc.real)
    assert np.all(eps.real < 0)  # metallic throughout the visible–near-IR [JC]
    assert rel.max() < rel_tol, rel
    assert np.abs(_reflectance(eps) - _reflectance(eps_jc)).max() < r_tol
    # Im ε of the fit is larger than J&C's (more damping, as in the handbook data), but the same order
    ratio = eps.imag / eps_jc.imag
    assert np.all((ratio > 0.5) & (ratio < 6.0)), ratio


def test_gold_near_633nm():
    """Gold near 633 nm: [JC] gives ε ≈ −11 + 1.3i (from memory); the LD fit gives ≈ −9.8 + 2.0i."""
    e = complex(gold().permittivity(632.8))
    assert -12.0 < e.real < -8.5
    assert 1.0 < e.imag < 2.5


def test_silver_eps_real_crosses_minus_two_near_uv():
    """Silver's ε′ = −2 (the small-sphere Fröhlich condition in vacuum) lies near 355 nm in [JC]
    (from memory: n=0.10, k=1.419 at 3.50 eV gives ε′ = −2.0); the LD fit crosses at ≈ 368 nm."""
    wl = np.linspace(320.0, 420.0, 10_001)
    e = np.asarray(silver().permittivity(wl)).real
    crossing = wl[np.nonzero(np.diff(np.sign(e + 2.0)))[0]]
    assert crossing.size == 1
    assert 345.0 < crossing[0] < 375.0


def test_aluminium_interband_feature():
    """Aluminium's parallel-band interband absorption peaks near 1.5 eV (~800 nm) [PALIK]: Im ε has a
    local maximum there, and ε(800 nm) ≈ −64 + 47i (from n = 2.80, k = 8.45 at 800 nm, [PALIK], from
    memory; 10 % tolerance)."""
    e_ev = np.linspace(1.0, 2.5, 3001)
    eps = np.asarray(aluminium().permittivity(HC / e_ev))
    i = np.argmax(eps.imag)
    assert 0 < i < e_ev.size - 1
    assert 1.4 < e_ev[i] < 1.7
    ref = (2.80 + 8.45j) ** 2
    e800 = complex(aluminium().permittivity(800.0))
    assert abs(e800.real - ref.real) < 0.10 * abs(ref.real)
    assert abs(e800.imag - ref.imag) < 0.10 * abs(ref.imag)


@pytest.mark.parametrize(("wl", "n_ref"), [(587.6, 1.4585), (632.8, 1.4570), (1064.0, 1.4496)])
def test_fused_silica_malitson(wl, n_ref):
    """[MALITSON] handbook indices (from memory), within 2e-4."""
    n = float(fused_silica().index(wl))
    assert abs(n - n_ref) < 2e-4


def test_fused_silica_range_and_sellmeier_formula():
    m = fused_silica()
    assert m.valid_range_nm() == (210.0, 3710.0)
    with pytest.raises(MaterialError):
        m.check_range(4000.0)
    s = Sellmeier(B=(1.0,), C_um2=(0.01,))
    lam = 0.5
    assert complex(s.permittivity(lam * 1e3)).real == pytest.approx(1 + lam**2 / (lam**2 - 0.01), rel=1e-14)


def test_glass_common_practice_value():
    """n = 1.50: a common-practice value, no source."""
    e = np.asarray(glass().permittivity(np.array([400.0, 800.0])))
    np.testing.assert_allclose(e, 2.25 + 0j)


def test_from_index_and_constant():
    m = from_index(0.2, 3.4, name="x")
    assert complex(m.permittivity(500.0)) == pytest.approx((0.2 + 3.4j) ** 2)
    assert m.index() == pytest.approx(0.2 + 3.4j)
    c = ConstantPermittivity(-5.0, 0.3)
    assert np.asarray(c.permittivity(np.ones((2, 3)))).shape == (2, 3)
    with pytest.raises(MaterialError, match="eps_imag"):
        ConstantPermittivity(2.0, -0.1)
    with pytest.raises(MaterialError, match="k"):
        from_index(1.5, -0.01)


def test_library_names_and_aliases():
    expected = {"gold_rakic1998", "silver_rakic1998", "aluminium_rakic1998", "fused_silica_malitson1965",
                "glass_n1p50", "au", "ag", "al", "sio2"}
    assert expected <= set(LIBRARY)
    assert LIBRARY["au"]() == LIBRARY["gold_rakic1998"]()
    for key, factory in LIBRARY.items():
        m = factory()
        assert hash(m) == hash(factory())  # hashable & deterministic: usable as a static jit argument
        if "_" in key:
            assert m.name == key
        assert factory.__doc__ and "Source" in factory.__doc__


# --------------------------------------------------------------------------------------------------
# tables
# --------------------------------------------------------------------------------------------------


def _write(tmp_path, text, name="film.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_table_round_trip(tmp_path):
    p = _write(tmp_path, "# my ellipsometry, invented demo numbers\nwavelength_nm,n,k\n"
                         "700,0.20,4.0\n500,0.90,1.9\n600,0.30,3.0\n")
    m = TabulatedNK(p)
    assert m.name == "film.csv"
    assert m.valid_range_nm() == (500.0, 700.0)
    np.testing.assert_allclose(m.wavelength_nm, [500.0, 600.0, 700.0])  # sorted
    for wl, n, k in [(500.0, 0.90, 1.9), (600.0, 0.30, 3.0), (700.0, 0.20, 4.0)]:
        assert complex(m.permittivity(wl)) == pytest.approx((n + 1j * k) ** 2, rel=1e-14)
    # linear interpolation of n and k (not of ε)
    assert complex(m.permittivity(650.0)) == pytest.approx((0.25 + 3.5j) ** 2, rel=1e-14)
    with pytest.raises(MaterialError, match="film.csv"):
        m.check_range(np.array([450.0, 600.0]))
    m.check_range(np.array([500.0, 700.0]))  # closed interval


def test_table_column_order_and_case(tmp_path):
    p = _write(tmp_path, "K, Wavelength_nm , N\n0.1,400,1.5\n0.2,800,1.6\n")
    m = TabulatedNK(p)
    assert complex(m.permittivity(400.0)) == pytest.approx((1.5 + 0.1j) ** 2)


@pytest.mark.parametrize(
    ("text", "needles"),
    [
        ("wavelength_nm,n\n400,1.5\n500,1.5\n", ["lacks column(s) k", "line 1"]),
        ("wavelength_nm,n,k,notes\n400,1.5,0,a\n500,1.5,0,b\n", ["unknown column(s) notes"]),
        ("wavelength_nm,n,k\n400,1.5,0\n", ["only 1 data row"]),
        ("wavelength_nm,n,k\n400,abc,0\n500,1.5,0\n", ["line 2, column n", "'abc' is not a number"]),
        ("wavelength_nm,n,k\n-400,1.5,0\n500,1.5,0\n", ["line 2, column wavelength_nm", "> 0 nm"]),
        ("wavelength_nm,n,k\n400,0,0\n500,1.5,0\n", ["line 2, column n", "> 0"]),
        ("wavelength_nm,n,k\n400,1.5,-0.1\n500,1.5,0\n", ["line 2, column k", ">= 0"]),
        ("wavelength_nm,n,k\n400,1.5,0\n400,1.6,0\n", ["line 3, column wavelength_nm", "repeats line 2"]),
        ("wavelength_nm,n,k\n400,1.5\n500,1.5,0\n", ["line 2: expected 3 values"]),
        ("wavelength_nm,n,k\n400,nan,0\n500,1.5,0\n", ["line 2, column n", "finite"]),
        ("", ["no header"]),
    ],
)
def test_table_errors_name_file_row_column(tmp_path, text, needles):
    p = _write(tmp_path, text, name="bad_nk.csv")
    with pytest.raises(MaterialError) as info:
        TabulatedNK(p)
    msg = str(info.value)
    assert "bad_nk.csv" in msg
    for needle in needles:
        assert needle in msg, msg


def test_table_lists_every_problem(tmp_path):
    p = _write(tmp_path, "wavelength_nm,n,k\n400,-1,0\n500,1.5,-2\n600,x,0\n")
    msg = str(pytest.raises(MaterialError, TabulatedNK, p).value)
    assert "line 2, column n" in msg and "line 3, column k" in msg and "line 4, column n" in msg


def test_table_missing_file(tmp_path):
    with pytest.raises(MaterialError, match="does not exist"):
        TabulatedNK(tmp_path / "nope.csv")


# --------------------------------------------------------------------------------------------------
# design-file factory
# --------------------------------------------------------------------------------------------------


def test_factory_builds_each_model(tmp_path):
    _write(tmp_path, "wavelength_nm,n,k\n400,1.5,0\n900,1.4,0.01\n", name="mine.csv")
    entries = {
        "d": {"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.07},
        "ld": {"model": "lorentz_drude", "eps_inf": 1.0, "omega_p_ev": 9.03, "gamma_ev": 0.053,
               "drude_strength": 0.76, "oscillators": [{"strength": 0.1, "omega_ev": 3.0, "gamma_ev": 0.9}]},
        "c": {"model": "constant", "eps_real": 2.25, "eps_imag": 0.01},
        "cn": {"model": "constant", "n": 1.5},
        "t": {"model": "table", "path": "mine.csv"},
        "lib": {"model": "library", "name": "gold_rakic1998"},
        "alias": {"model": "library", "name": "Au"},
    }
    built = {k: material_from_dict(json.loads(json.dumps(v)), k, tmp_path) for k, v in entries.items()}
    assert isinstance(built["d"], Drude) and built["d"].name == "d"
    assert isinstance(built["ld"], LorentzDrude) and built["ld"].drude_strength == 0.76
    assert complex(built["c"].permittivity(500.0)) == pytest.approx(2.25 + 0.01j)
    assert complex(built["cn"].permittivity(500.0)) == pytest.approx(2.25)
    assert isinstance(built["t"], TabulatedNK) and built["t"].valid_range_nm() == (400.0, 900.0)
    assert built["lib"] == gold() == built["alias"]
    r = material_from_dict({"model": "drude", "eps_inf": 1, "omega_p_ev": 9, "gamma_ev": 0.1,
                            "valid_range_nm": [400, 900]}, "r", None)
    assert r.valid_range_nm() == (400.0, 900.0)


_DRUDE = {"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.07}
_LD = {"model": "lorentz_drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.07,
       "oscillators": [{"strength": 0.1, "omega_ev": 3.0, "gamma_ev": 0.9}]}
_DROP = object()


def _with(base, **changes):
    d = json.loads(json.dumps(base))
    for k, v in changes.items():
        if v is _DROP:
            d.pop(k)
        else:
            d[k] = v
    return d


@pytest.mark.parametrize(
    ("entry", "needles"),
    [
        ("gold", ["expected an object"]),
        ({"eps_inf": 1}, ["'model'", "drude"]),
        ({"model": "plasma"}, ["'model'", "unknown model 'plasma'", "lorentz_drude"]),
        (_with(_DRUDE, gamma_ev=_DROP), ["'gamma_ev'", "missing"]),
        (_with(_DRUDE, colour="gold"), ["'colour'", "does not take"]),
        (_with(_DRUDE, omega_p_ev="9"), ["'omega_p_ev'", "expected a number"]),
        (_with(_DRUDE, omega_p_ev=True), ["'omega_p_ev'", "expected a number"]),
        (_with(_DRUDE, omega_p_ev=0.0), ["'omega_p_ev'", "> 0"]),
        (_with(_DRUDE, omega_p_ev=-9.0), ["'omega_p_ev'", "> 0"]),
        (_with(_DRUDE, gamma_ev=-0.01), ["'gamma_ev'", ">= 0"]),
        (_with(_DRUDE, eps_inf=float("inf")), ["'eps_inf'", "finite"]),
        (_with(_DRUDE, valid_range_nm=[900, 400]), ["'valid_range_nm'", "lo < hi"]),
        (_with(_LD, oscillators={"strength": 1}), ["'oscillators'", "expected a list"]),
        (_with(_LD, oscillators=[[0.1, 3.0, 0.9]]), ["'oscillators[0]'", "expected an object"]),
        (_with(_LD, oscillators=[{"strength": 0.1, "omega_ev": 3.0}]), ["'oscillators[0].gamma_ev'"]),
        (_with(_LD, oscillators=[{"strength": 0.1, "omega_ev": 3.0, "gamma_ev": 0.9, "x": 1}]),
         ["'oscillators[0].x'"]),
        (_with(_LD, oscillators=[{"strength": -0.1, "omega_ev": 3.0, "gamma_ev": 0.9}]),
         ["'oscillators[0].strength'", ">= 0"]),
        (_with(_LD, drude_strength=-1), ["'drude_strength'"]),
        ({"model": "constant", "eps_real": 2.0, "n": 1.4}, ["'n'", "not both"]),
        ({"model": "constant"}, ["'eps_real'"]),
        ({"model": "constant", "eps_real": 2.0, "eps_imag": -1.0}, ["'eps_imag'", ">= 0"]),
        ({"model": "constant", "n": -1.5}, ["'n'", "> 0"]),
        ({"model": "constant", "k": 0.1}, ["'n'"]),
        ({"model": "table"}, ["'path'", "missing"]),
        ({"model": "table", "path": 3}, ["'path'", "file path"]),
        ({"model": "table", "path": "absent.csv"}, ["'path'", "absent.csv", "does not exist"]),
        ({"model": "library", "name": "unobtainium"}, ["'name'", "unobtainium", "gold_rakic1998", "sio2"]),
        ({"model": "library", "name": 5}, ["'name'", "expected a string"]),
    ],
)
def test_factory_errors_name_material_and_field(tmp_path, entry, needles):
    with pytest.raises(MaterialError) as info:
        material_from_dict(entry, "rod_metal", tmp_path)
    msg = str(info.value)
    assert "material 'rod_metal'" in msg
    for needle in needles:
        assert needle in msg, msg


def test_constructor_errors():
    with pytest.raises(MaterialError, match="omega_p_ev"):
        Drude(1.0, -9.0, 0.1)
    with pytest.raises(MaterialError, match=r"oscillators\[1\]"):
        LorentzDrude(1.0, 9.0, 0.1, oscillators=[(0.1, 2.0, 0.5), (0.1, 2.0)])
    with pytest.raises(MaterialError, match="equal length"):
        Sellmeier(B=(1.0, 0.5), C_um2=(0.01,))


# --------------------------------------------------------------------------------------------------
# differentiability
# --------------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "make",
    [
        lambda tmp: Drude(1.0, 9.0, 0.07),
        lambda tmp: gold(),
        lambda tmp: silver(),
        lambda tmp: aluminium(),
        lambda tmp: fused_silica(),
        lambda tmp: TabulatedNK(_write(tmp, "wavelength_nm,n,k\n500,0.9,1.9\n700,0.2,4.0\n")),
    ],
)
def test_grad_matches_finite_difference(tmp_path, make):
    m = make(tmp_path)
    wl0, h = 611.0, 1e-3
    g = jax.grad(lambda x: jnp.real(m.permittivity(x)))(wl0)
    g_im = jax.grad(lambda x: jnp.imag(m.permittivity(x)))(wl0)
    fd = (complex(m.permittivity(wl0 + h)) - complex(m.permittivity(wl0 - h))) / (2 * h)
    assert float(g) == pytest.approx(fd.real, rel=1e-6, abs=1e-12)
    assert float(g_im) == pytest.approx(fd.imag, rel=1e-6, abs=1e-12)


def test_constant_grad_is_zero():
    assert float(jax.grad(lambda x: jnp.real(glass().permittivity(x)))(700.0)) == 0.0
