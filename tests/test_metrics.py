"""Coherent-modulation metrics (_metrics) against hand derivations, independent NumPy routes and FD.

Sources of check values:
* hand derivations written beside each check (Jones calculus with explicit 2×2 matrices);
* the four-step phase-shifting relation for a sinusoidal fringe I(φ) = A + B cos(φ + θ): with samples
  at φ = 0, π/2, π, 3π/2, B = ½·sqrt((I₀ − I_π)² + (I_{3π/2} − I_{π/2})²). This is standard in
  phase-shifting interferometry (e.g. Malacara, *Optical Shop Testing*, 3rd ed., chapter on phase
  shifting interferometry; cited from memory). The relation is also re-derived where it is used;
* NumPy (``np.vdot``, ``np.unwrap``) as an independent general-purpose implementation;
* central finite differences for gradients.

Tolerances are kept in this file (``TOL``) rather than in helpers.py, because this module's owner only
edits this file. Each tolerance gives its reason.
"""

import invdesign._jaxsetup  # noqa: F401  (CPU + x64 before anything else touches jax)

# isort: split
import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign import _metrics as mt

TOL = {
    "exact": 1e-12,       # closed forms vs hand values / identities; float64 rounding only
    "phase_grid": 1e-7,   # I(φ) on a 200 001-point grid: extremum error ≤ B·(Δφ)²/8 ≈ 1e-10·B
    "gradient_fd": 1e-7,  # central FD, step 1e-6: truncation ~h², round-off ~eps/h ~ 1e-10
    "interp_nm": 2e-4,    # linear interpolation of a smooth curve on a 0.01 nm grid: ~h²·|f''|/(8|f'|)
}


def _rand_complex(rng, shape):
    return rng.standard_normal(shape) + 1j * rng.standard_normal(shape)


# ------------------------------------------------------------------------ hand-derived examples
J1 = np.array([[0.6, 0.2j], [0.3, 0.5]])


def test_hand_example_x_analyzer():
    # J1 = [[0.6, 0.2i], [0.3, 0.5]], signal x, control y, analyzer x, ρ = 1:
    #   a = J_xx = 0.6, b = J_xy = 0.2i  →  |a| = 0.6, |b| = 0.2
    #   I_s = 0.36, I_c = 0.04, I_max = 0.8² = 0.64, I_min = 0.4² = 0.16
    #   M = (0.64 − 0.16)/0.36 = 4/3; L = 0.04/0.36 = 1/9, 4√L = 4/3
    #   ER = 10·log10(0.64/0.16) = 10·log10 4;  IL = −10·log10 0.36;  |b|/|a| = 1/3
    #   φ* = arg(a b*) = arg(0.6·(−0.2i)) = −π/2; check: I(−π/2) = |0.6 + (−i)(0.2i)|² = 0.8² ✓
    #   I(0) = |0.6 + 0.2i|² = 0.40 = I(π) = |0.6 − 0.2i|²  →  fixed-phase depth (I(π) − I(0))/I_s = 0
    #   ρ² for M = 1: (1·0.6/(4·0.2))² = 0.75² = 0.5625;  dark state ρ² = 0.36/0.04 = 9
    #   cross-pol: |J_yx|² = 0.09, |J_xy|² = 0.04
    m = mt.all_metrics(jnp.asarray(J1), rho=1.0, phi=0.0)
    expect = {
        "a": 0.6, "b": 0.2j, "signal_intensity": 0.36, "control_intensity": 0.04,
        "i_max": 0.64, "i_min": 0.16, "modulation_depth": 4 / 3, "leakage": 1 / 9,
        "insertion_loss_db": -10 * np.log10(0.36),
        "cross_coupling_ratio": 1 / 3, "optimal_phase": -np.pi / 2, "fixed_phase_depth": 0.0,
        "intensity": 0.40, "control_leakage_fraction": 0.04, "cross_pol_yx": 0.09, "cross_pol_xy": 0.04,
        "phase_drift_deg": 0.0,
    }
    for name, val in expect.items():
        np.testing.assert_allclose(np.asarray(getattr(m, name)), val, rtol=TOL["exact"], atol=1e-14,
                                   err_msg=name)
    # ER carries the documented floor bias: 10·log10((I_max + f)/(I_min + f)) differs from the floorless
    # value by ≈ (10/ln 10)·f/I_min ≈ 3e-11 dB for f = 1e-12, I_min = 0.16.
    np.testing.assert_allclose(m.extinction_ratio_db, 10 * np.log10(4.0), rtol=1e-10)
    a, b = m.a, m.b
    np.testing.assert_allclose(mt.control_power_ratio_for_depth(a, b, 1.0), 0.5625, rtol=TOL["exact"])
    np.testing.assert_allclose(mt.dark_state_power_ratio(a, b), 9.0, rtol=TOL["exact"])


def test_hand_example_y_analyzer_both_regimes():
    # Same J1, analyzer y: a = J_yx = 0.3, b = J_yy = 0.5 (both real, φ* = 0).
    # ρ = 0.5 (ρ|b| = 0.25 < |a|): I_max = 0.55² = 0.3025, I_min = 0.05² = 0.0025, I_s = 0.09
    #   M = 0.3/0.09 = 10/3 = 4·0.25/0.3;  ER = 10·log10(121);  (I(π) − I(0))/I_s = −10/3
    # ρ = 2 (ρ|b| = 1 > |a|): I_max = 1.3² = 1.69, I_min = (1 − 0.3)² = 0.49
    #   M = 1.2/0.09 = 40/3 = 4·1/0.3, so M = 4ρ|b|/|a| still holds past the dark state;
    #   ER = 10·log10(1.69/0.49)
    a, b = mt.channel_amplitudes(jnp.asarray(J1), analyzer=(0.0, 1.0))
    np.testing.assert_allclose([a, b], [0.3, 0.5], rtol=TOL["exact"])
    for rho, imax, imin, M, er, dfix in [
        (0.5, 0.3025, 0.0025, 10 / 3, 10 * np.log10(121.0), -10 / 3),
        (2.0, 1.69, 0.49, 40 / 3, 10 * np.log10(1.69 / 0.49), -40 / 3),
    ]:
        i_max, i_min = mt.intensity_extrema(a, b, rho)
        np.testing.assert_allclose([i_max, i_min], [imax, imin], rtol=TOL["exact"])
        np.testing.assert_allclose(mt.modulation_depth(a, b, rho), M, rtol=TOL["exact"])
        np.testing.assert_allclose(4 * np.sqrt(mt.leakage(a, b, rho)), M, rtol=TOL["exact"])
        np.testing.assert_allclose(mt.extinction_ratio_db(a, b, rho), er, rtol=1e-9)  # floor bias ~1e-10
        np.testing.assert_allclose(mt.fixed_phase_depth(a, b, rho), dfix, rtol=TOL["exact"])
    np.testing.assert_allclose(mt.optimal_phase(a, b), 0.0, atol=1e-15)


def test_analyzer_is_conjugated():
    # An ideal polariser that passes the state e is the projector P = e eᴴ (P² = P, Pᴴ = P). The field
    # passed is ⟨e|E⟩ = eᴴE. With J = identity and e = signal = (1, i)/√2:
    #   conjugated: eᴴ s = (1·1 + (−i)(i))/2 = 1   (the pass state is fully passed)
    #   unconjugated: eᵀ s = (1 + i·i)/2 = 0      (this would be wrong)
    # The orthogonal state c = (1, −i)/√2 is blocked: eᴴ c = (1 + (−i)(−i))/2 = 0.
    # The vectors are also normalised internally, so (1, i) without the 1/√2 gives the same result.
    a, b = mt.channel_amplitudes(jnp.eye(2, dtype=complex), signal=(1.0, 1j), control=(1.0, -1j),
                                 analyzer=(1.0, 1j))
    np.testing.assert_allclose(a, 1.0, atol=1e-15)
    np.testing.assert_allclose(b, 0.0, atol=1e-15)


def test_intensity_on_phase_grid_matches_closed_form(rng):
    # Sample I(φ) densely and compare max, min and (max − min)/I_s with the closed forms. Also check
    # I(φ) against an independent NumPy expression |a + ρ e^{iφ} b|² with a = np.vdot(e, J s).
    phi = np.linspace(-np.pi, np.pi, 200_001)
    for _ in range(5):
        J = _rand_complex(rng, (2, 2))
        s, c, e = (_rand_complex(rng, 2) for _ in range(3))
        rho = float(10 ** rng.uniform(-1, 1))
        a, b = mt.channel_amplitudes(jnp.asarray(J), s, c, e)
        an = np.vdot(e, J @ s) / (np.linalg.norm(e) * np.linalg.norm(s))
        bn = np.vdot(e, J @ c) / (np.linalg.norm(e) * np.linalg.norm(c))
        np.testing.assert_allclose([a, b], [an, bn], rtol=TOL["exact"])
        I = np.asarray(mt.intensity(a, b, rho, jnp.asarray(phi)))
        np.testing.assert_allclose(I, np.abs(an + rho * np.exp(1j * phi) * bn) ** 2, rtol=1e-11)
        i_max, i_min = mt.intensity_extrema(a, b, rho)
        scale = float(i_max)
        np.testing.assert_allclose(I.max(), i_max, rtol=TOL["phase_grid"])
        np.testing.assert_allclose(I.min(), i_min, atol=TOL["phase_grid"] * scale)
        np.testing.assert_allclose((I.max() - I.min()) / abs(an) ** 2, mt.modulation_depth(a, b, rho),
                                   atol=2 * TOL["phase_grid"] * scale / abs(an) ** 2)
        # the maximiser of the grid sits at φ* (within one grid step Δφ·, plus the flatness of the peak)
        phi_best = phi[np.argmax(I)]
        dphi = np.angle(np.exp(1j * (phi_best - float(mt.optimal_phase(a, b)))))
        assert abs(dphi) < 1e-3


# ----------------------------------------------------------------------------- the identity
def test_identity_M_equals_4_sqrt_L_random(rng):
    # Property over 2000 random cases: complex Gaussian J, random complex Jones vectors, and ρ
    # log-uniform in [1e-2, 10^1.5], which covers both regimes ρ|b| ≶ |a|.
    # (i) library M vs 4·sqrt(library L), relative 1e-12;
    # (ii) library M vs an independent four-step estimate from four NumPy-evaluated intensities.
    #      I(φ) = A + B cos(φ + θ) gives I₀ − I_π = 2B cos θ and I_{3π/2} − I_{π/2} = 2B sin θ, so
    #      I_max − I_min = 2B = sqrt((I₀ − I_π)² + (I_{3π/2} − I_{π/2})²). Its subtraction loses
    #      ~eps·I_max/(I_max − I_min) relatively, so that check's tolerance scales with it.
    n = 2000
    J = _rand_complex(rng, (n, 2, 2))
    s, c, e = (_rand_complex(rng, (n, 2)) for _ in range(3))
    rho = 10 ** rng.uniform(-2, 1.5, n)
    a, b = mt.channel_amplitudes(jnp.asarray(J), jnp.asarray(s), jnp.asarray(c), jnp.asarray(e))
    M = np.asarray(mt.modulation_depth(a, b, rho))
    L = np.asarray(mt.leakage(a, b, rho))
    np.testing.assert_allclose(M, 4 * np.sqrt(L), rtol=TOL["exact"])
    assert np.any(M > 4) and np.any(M < 4)  # both regimes are exercised

    def unit(v):
        return v / np.linalg.norm(v, axis=-1, keepdims=True)

    an = np.einsum("no,noi,ni->n", np.conj(unit(e)), J, unit(s))
    bn = np.einsum("no,noi,ni->n", np.conj(unit(e)), J, unit(c))
    I = {k: np.abs(an + rho * np.exp(1j * k * np.pi / 2) * bn) ** 2 for k in range(4)}
    span = np.hypot(I[0] - I[2], I[3] - I[1])
    M4 = span / np.abs(an) ** 2
    i_max = (np.abs(an) + rho * np.abs(bn)) ** 2
    tol = TOL["exact"] + 20 * np.finfo(float).eps * i_max / span
    assert np.all(np.abs(M4 - M) <= tol * M)
    # (iii) the extrema themselves: I_max − I_min from intensity_extrema, same cancellation allowance
    i_max_l, i_min_l = (np.asarray(x) for x in mt.intensity_extrema(a, b, rho))
    assert np.all(np.abs((i_max_l - i_min_l) / np.abs(an) ** 2 - M) <= tol * M)


def test_power_ratio_for_target_depth_round_trip(rng):
    # ρ² from the inverse formula, then M(√ρ²) must give the target back, across both regimes.
    n = 500
    a = jnp.asarray(_rand_complex(rng, n))
    b = jnp.asarray(_rand_complex(rng, n))
    target = 10 ** rng.uniform(-3, 1.3, n)  # 0.1 % … ~2000 %, including M > 4
    rho2 = mt.control_power_ratio_for_depth(a, b, target)
    np.testing.assert_allclose(mt.modulation_depth(a, b, jnp.sqrt(rho2)), target, rtol=TOL["exact"])
    # M = 4 is the dark state: I_min = 0 there (hand: ρ|b| = |a| ⇔ M = 4ρ|b|/|a| = 4)
    rho_dark = jnp.sqrt(mt.control_power_ratio_for_depth(a, b, 4.0))
    np.testing.assert_allclose(rho2 * 0 + mt.control_power_ratio_for_depth(a, b, 4.0),
                               mt.dark_state_power_ratio(a, b), rtol=TOL["exact"])
    i_max, i_min = mt.intensity_extrema(a, b, rho_dark)
    assert np.all(np.asarray(i_min) <= 1e-24 + 1e-13 * np.asarray(i_max))
    # unreachable / degenerate cases
    assert np.isinf(mt.control_power_ratio_for_depth(1.0 + 0j, 0j, 0.5))  # control never reaches channel
    assert float(mt.control_power_ratio_for_depth(1.0 + 0j, 0j, 0.0)) == 0.0
    assert np.isnan(mt.control_power_ratio_for_depth(1.0 + 0j, 0.3 + 0j, -0.1))


# ------------------------------------------------------------------------------ feasibility
def test_identity_floor_and_feasibility_check():
    # Hand: L_floor = (M/4)²; M = 1 → 1/16 = 0.0625, M = 0.5 → 0.015625, M = 2 → 0.25
    np.testing.assert_allclose(mt.identity_floor_leakage(jnp.array([1.0, 0.5, 2.0])),
                               [0.0625, 0.015625, 0.25], rtol=TOL["exact"])
    bad = mt.check_spec_feasible(1.0, 0.05)
    assert not bad.feasible
    assert bad.leakage_floor == pytest.approx(0.0625, rel=1e-15)
    assert "0.0625" in bad.message and "0.05" in bad.message and "infeasible" in bad.message
    # The largest depth the 5 % ceiling allows is 4·sqrt(0.05) = 0.894427... (hand)
    assert "0.894427" in bad.message
    # 8 % ceiling at 100 % depth (common-practice figure, no source) is just above the floor: feasible
    ok = mt.check_spec_feasible(1.0, 0.08)
    assert ok.feasible and "0.0625" in ok.message and "0.08" in ok.message
    assert mt.check_spec_feasible(1.0, 0.0625).feasible  # exactly at the floor
    with pytest.raises(ValueError):
        mt.check_spec_feasible(0.0, 0.1)
    with pytest.raises(ValueError):
        mt.check_spec_feasible(1.0, -0.1)


# -------------------------------------------------------------------------------- gradients
def _fd_grad(f, x, h=1e-6):
    g = np.zeros_like(x)
    for idx in np.ndindex(x.shape):
        xp, xm = x.copy(), x.copy()
        xp[idx] += h
        xm[idx] -= h
        g[idx] = (f(xp) - f(xm)) / (2 * h)
    return g


@pytest.mark.parametrize("which", ["modulation_depth", "insertion_loss_db", "extinction_ratio_db"])
def test_gradients_vs_finite_differences(rng, which):
    # f(Re J, Im J) for a random J and random Jones vectors; jax.grad vs central differences.
    s, c, e = (jnp.asarray(_rand_complex(rng, 2)) for _ in range(3))
    rho = 0.7

    def f(x):
        J = x[0] + 1j * x[1]
        m = mt.all_metrics(J, signal=s, control=c, analyzer=e, rho=rho, phi=0.3)
        return getattr(m, which)

    x0 = np.stack([rng.standard_normal((2, 2)), rng.standard_normal((2, 2))])
    g = np.asarray(jax.grad(f)(jnp.asarray(x0)))
    g_fd = _fd_grad(lambda x: float(f(jnp.asarray(x))), x0)
    np.testing.assert_allclose(g, g_fd, rtol=TOL["gradient_fd"], atol=TOL["gradient_fd"] * np.abs(g_fd).max())


def test_gradient_finite_when_control_does_not_reach_channel():
    # An untilted mirror-symmetric rod has J_xy = 0 exactly, so b = 0 with the default x/y/x set-up.
    # |b| has a cone point there; the gradient-safe modulus must return a finite (zero) subgradient.
    def f(x):
        return mt.modulation_depth(*mt.channel_amplitudes(x[0] + 1j * x[1]), 1.0)

    x0 = jnp.asarray(np.stack([np.diag([0.8, 0.3]), np.zeros((2, 2))]))
    g = np.asarray(jax.grad(f)(x0))
    assert np.all(np.isfinite(g))
    # extinction ratio at the dark state (I_min = 0) stays finite too, thanks to the floor
    a, b = 0.5 + 0j, 0.5 + 0j
    assert np.isfinite(jax.grad(lambda r: mt.extinction_ratio_db(a, b, r))(1.0))


def test_jit_and_vmap_agree_with_eager(rng):
    J = jnp.asarray(_rand_complex(rng, (3, 7, 2, 2)))  # (batch, n_wl, 2, 2)
    eager = mt.all_metrics(J, rho=0.4, phi=1.1)
    jitted = jax.jit(lambda J: mt.all_metrics(J, rho=0.4, phi=1.1))(J)
    mapped = jax.vmap(lambda J: mt.all_metrics(J, rho=0.4, phi=1.1))(J)
    for f_e, f_j, f_v in zip(eager, jitted, mapped, strict=True):
        np.testing.assert_allclose(f_j, f_e, rtol=1e-13)
        np.testing.assert_allclose(f_v, f_e, rtol=1e-13)
    assert eager.modulation_depth.shape == (3, 7) and eager.phase_drift_deg.shape == (3,)


# ------------------------------------------------------------------------------ phase drift
def test_phase_drift_linear_slope():
    # Synthetic spectrum: J_xx = 0.7·exp(iα(λ − λ₀)), J_xy = 0.2 (real), J_yx = J_yy = 0, with α = 3°/nm
    # over 700–900 nm. φ* = arg J_xx − arg J_xy = α(λ − λ₀), so the unwrapped φ* is that line, and the
    # drift over 200 nm is 600° (hand). Wrapped, φ* passes through ±180° twice; unwrapping must undo that.
    wl = np.linspace(700.0, 900.0, 201)  # 1 nm steps → 3° per step, far below the 180° unwrap limit
    alpha = np.deg2rad(3.0)
    J = np.zeros((wl.size, 2, 2), complex)
    J[:, 0, 0] = 0.7 * np.exp(1j * alpha * (wl - 800.0))
    J[:, 0, 1] = 0.2
    m = mt.all_metrics(jnp.asarray(J), rho=1.0)
    np.testing.assert_allclose(m.phase_drift_deg, 600.0, rtol=TOL["exact"])
    u = np.asarray(mt.optimal_phase_unwrapped_deg(m.optimal_phase))
    np.testing.assert_allclose(np.diff(u), 3.0, rtol=1e-11)
    np.testing.assert_allclose(u, np.rad2deg(np.unwrap(np.angle(J[:, 0, 0] * 0.2))), rtol=1e-12)  # NumPy
    # Holding the phase at the operating point's optimum + π, the signed fixed-phase depth follows
    # M·cos(φ*(λ) − φ*(λ₀)) (hand: (I(φ_ref + π) − I(φ_ref))/I_s = M cos(φ_ref − φ* + π)). Here M is
    # constant, 4·0.2/0.7.
    i0 = 100
    d = mt.fixed_phase_depth(m.a, m.b, 1.0, m.optimal_phase[i0] + np.pi)
    np.testing.assert_allclose(d, 4 * 0.2 / 0.7 * np.cos(alpha * (wl - 800.0)), rtol=1e-11, atol=1e-14)
    # A single wavelength has zero drift.
    assert float(mt.optimal_phase_drift_deg(jnp.asarray(0.4))) == 0.0


# ------------------------------------------------------------------------------- bandwidth
def test_bandwidth_lorentzian_depth():
    # The control coupling has a Lorentzian magnitude, |b(λ)| = b₀/(1 + ((λ − λc)/γ)²), with a constant
    # signal a. M(λ) = 4ρ|b|/|a| = M₀/(1 + x²), with M₀ = 4ρ b₀/|a| and x = (λ − λc)/γ.
    # M ≥ T ⇔ x² ≤ M₀/T − 1, so the edges are λc ± γ·sqrt(M₀/T − 1) (hand). At T = M₀/2 the width is
    # 2γ, the Lorentzian FWHM.
    lam_c, gamma, b0, a0, rho = 810.0, 12.0, 0.15, 0.6, 1.5
    wl = np.arange(700.0, 920.0 + 1e-9, 0.01)
    x = (wl - lam_c) / gamma
    J = np.zeros((wl.size, 2, 2), complex)
    J[:, 0, 0] = a0
    J[:, 0, 1] = b0 / (1 + x**2) * np.exp(1j * 0.3 * x)  # arbitrary phase does not affect M
    M = np.asarray(mt.all_metrics(jnp.asarray(J), rho=rho).modulation_depth)
    M0 = 4 * rho * b0 / a0
    np.testing.assert_allclose(M, M0 / (1 + x**2), rtol=TOL["exact"])
    for T in [M0 / 2, 0.8 * M0, 0.1 * M0]:
        half = gamma * np.sqrt(M0 / T - 1)
        band = mt.band_above_threshold(wl, M, 805.003, T)  # operating point off-grid, off-centre
        np.testing.assert_allclose([band.lower_nm, band.upper_nm], [lam_c - half, lam_c + half],
                                   atol=TOL["interp_nm"])
        np.testing.assert_allclose(band.width_nm, 2 * half, atol=2 * TOL["interp_nm"])
        assert not band.lower_open and not band.upper_open
    np.testing.assert_allclose(mt.band_above_threshold(wl, M, lam_c, M0 / 2).width_nm, 2 * gamma,
                               atol=2 * TOL["interp_nm"])


def _same_band(got, lower, upper, lower_open, upper_open):
    np.testing.assert_allclose([got.lower_nm, got.upper_nm, got.width_nm], [lower, upper, upper - lower],
                               rtol=TOL["exact"])
    assert (got.lower_open, got.upper_open) == (lower_open, upper_open)


def test_bandwidth_piecewise_linear_exact_and_edge_cases():
    # On a piecewise-linear curve, linear interpolation is exact. The tent 0 → 1 → 0 over [0, 10] nm with
    # threshold 0.25 crosses where 0.2·x = 0.25 and 0.2·(10 − x) = 0.25, i.e. at 1.25 and 8.75 nm (hand).
    wl = np.array([0.0, 5.0, 10.0])
    v = np.array([0.0, 1.0, 0.0])
    _same_band(mt.band_above_threshold(wl, v, 4.0, 0.25), 1.25, 8.75, False, False)
    # operating point below threshold → zero width
    assert mt.band_above_threshold(wl, v, 0.5, 0.25).width_nm == 0.0
    # a second lobe beyond a dip does not count (the region is contiguous around the operating point)
    wl2 = np.arange(0.0, 11.0)
    v2 = np.array([0, 1, 1, 1, 0, 0, 1, 1, 1, 1, 0], float)
    _same_band(mt.band_above_threshold(wl2, v2, 2.0, 0.5), 0.5, 3.5, False, False)
    # region reaching the end of the data is flagged open (width is a lower bound); the right edge of
    # 1 → 0 over 5…10 nm at 0.5 is 7.5 nm (hand)
    _same_band(mt.band_above_threshold(wl, np.array([1.0, 1.0, 0.0]), 1.0, 0.5), 0.0, 7.5, True, False)
    with pytest.raises(ValueError):
        mt.band_above_threshold(wl, v, 11.0, 0.25)
    with pytest.raises(ValueError):
        mt.band_above_threshold(wl[::-1], v, 4.0, 0.25)


def test_cross_polarised_power_indexing():
    # [output, input]: J[1, 0] is x in → y out (t_yx), J[0, 1] is y in → x out (t_xy). Hand: with
    # J = [[0, 0.1], [0.4i, 0]], |t_yx|² = 0.16, |t_xy|² = 0.01.
    p_yx, p_xy = mt.cross_polarised_power(jnp.array([[0.0, 0.1], [0.4j, 0.0]]))
    np.testing.assert_allclose([p_yx, p_xy], [0.16, 0.01], rtol=TOL["exact"])
