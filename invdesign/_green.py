"""Dyadic Green's tensors of a homogeneous medium: free space, and a 2D-periodic lattice by Ewald summation.

Conventions: exp(-iωt); outgoing waves exp(+ikr); SI units (r in m, k in 1/m, G in 1/m). The scalar
Green's function is g(r) = exp(ikr)/(4πr) and the dyadic one G = (I + ∇∇/k²) g, so that a point dipole
p radiates E = k² G p / (ε0 ε_m).

The lattice Green's tensor of dipoles p_n = p exp(i k∥·R_n) at r_0 + R_n (R_n = n1 a1 + n2 a2) is

    G_L(r) = Σ_n exp(i k∥·R_n) G(r - R_n),

split by Ewald's method into a real-space and a spectral sum (Jordan, Richter & Sheng, J. Comput.
Phys. 63, 222 (1986); C. M. Linton, SIAM Rev. 52, 630 (2010), §4):

    g_real = Σ_n exp(i k∥·R_n) / (8π R) [e^{ikR} erfc(RE + ik/2E) + e^{-ikR} erfc(RE - ik/2E)],
    g_spec = (1/4A) Σ_G exp(i κ·ρ) / γ [e^{γz} erfc(γ/2E + zE) + e^{-γz} erfc(γ/2E - zE)],

with κ = k∥ + G, γ = sqrt(|κ|² - k²) (Re γ ≥ 0; -i sqrt(k² - |κ|²) for propagating orders), A the cell
area and E the splitting parameter. Both sums converge like Gaussians. The dyadic is obtained from
closed-form first and second derivatives of each term (no automatic differentiation of the sum).

Self term: at r = 0 the n = 0 free-space singularity is removed analytically; ``lattice_dyadic`` with
``self_term=True`` returns lim_{r→0} [G_L(r) - G(r)], which is diagonal-regular and finite.
Where it stops holding: at a Rayleigh anomaly (|κ| = k for some order) γ = 0 and the sum is
singular — physically real; results within ~1e-6 relative of that wavelength are not meaningful.
"""

import math

import jax
import jax.numpy as jnp

from ._faddeeva import erfc_times_exp

_SQRT_PI = math.sqrt(math.pi)


def free_dyadic(r, k):
    """Free-space dyadic Green's tensor G(r) = (I + ∇∇/k²) e^{ikr}/(4πr).

    Args:
      r: displacement(s), shape (..., 3), metres; must be nonzero.
      k: medium wavenumber, 1/m (complex allowed, Im k ≥ 0), broadcastable with r[..., 0].

    Returns:
      complex128 array of shape (..., 3, 3), in 1/m.
    """
    rr = jnp.linalg.norm(r, axis=-1)
    rhat = r / rr[..., None]
    kr = k * rr
    g = jnp.exp(1j * kr) / (4 * jnp.pi * rr)
    a = 1 + (1j * kr - 1) / kr**2
    b = (3 - 3j * kr - kr**2) / kr**2
    outer = rhat[..., :, None] * rhat[..., None, :]
    return g[..., None, None] * (a[..., None, None] * jnp.eye(3) + b[..., None, None] * outer)


def _radial_dyadic(s, ds, d2s, rvec, rr, k):
    """Dyadic (I + ∇∇/k²) f for a radial f with values s, s', s'' at |r| = rr."""
    rhat = rvec / rr[..., None]
    outer = rhat[..., :, None] * rhat[..., None, :]
    eye = jnp.eye(3)
    hess = d2s[..., None, None] * outer + (ds / rr)[..., None, None] * (eye - outer)
    return s[..., None, None] * eye + hess / k**2


def _real_space_terms(rvec, k, e):
    """Real-space Ewald term per lattice point: s(R), s'(R), s''(R) of the radial function.

    s(R) = q(R)/(8πR), q = e^{ikR} erfc(RE + ik/2E) + e^{-ikR} erfc(RE - ik/2E). Derivatives use
    q' = ik p - (4E/√π) Γ and q'' = -k² q + (8E³R/√π) Γ with p = e^{ikR} erfc(·) - e^{-ikR} erfc(·)
    and Γ = exp(-R²E² + k²/4E²).
    """
    rr = jnp.linalg.norm(rvec, axis=-1)
    u_plus = rr * e + 1j * k / (2 * e)
    u_minus = rr * e - 1j * k / (2 * e)
    t_plus = erfc_times_exp(u_plus, 1j * k * rr)
    t_minus = erfc_times_exp(u_minus, -1j * k * rr)
    q = t_plus + t_minus
    p = t_plus - t_minus
    gam = jnp.exp(-(rr**2) * e**2 + k**2 / (4 * e**2))
    dq = 1j * k * p - (4 * e / _SQRT_PI) * gam
    d2q = -(k**2) * q + (8 * e**3 * rr / _SQRT_PI) * gam
    c = 1.0 / (8 * jnp.pi * rr)
    s = c * q
    ds = c * (dq - q / rr)
    d2s = c * (d2q - 2 * dq / rr + 2 * q / rr**2)
    return rr, s, ds, d2s


def _self_real_space(k, e):
    """lim_{R→0} of the n = 0 real-space term minus the free-space term, as a dyadic (scalar × I).

    The difference h(R) = [φ(R) - φ(-R)]/(8πR) with φ(R) = e^{-ikR} erfc(RE - ik/2E) is even and
    analytic; (I + ∇∇/k²) h at 0 equals (h(0) + 2h₂/k²) I with h(0) = φ'(0)/4π and h₂ = φ'''(0)/24π,
    which simplifies to φ'(0)/(6π) + E³ e^{k²/4E²} / (3 π^{3/2} k²).
    """
    e0 = jnp.exp(k**2 / (4 * e**2))
    c = erfc_times_exp(-1j * k / (2 * e), 0.0)
    dphi0 = -1j * k * c - (2 * e / _SQRT_PI) * e0
    return dphi0 / (6 * jnp.pi) + e**3 * e0 / (3 * jnp.pi**1.5 * k**2)


def _spectral_profiles(z, kappa, k, e, area):
    """z-profiles f, f', f'' of each spectral term (..., n_g); f and f'' are even in z, f' is odd.

    f(z) = (1/4Aγ)[e^{γz} erfc(γ/2E + zE) + e^{-γz} erfc(γ/2E - zE)], f' = (1/4A)[first - second]
    (the Gaussian parts cancel), f'' = γ² f - (E/(A√π)) exp(-γ²/4E² - z²E²).
    """
    gam = -1j * jnp.sqrt(k**2 - jnp.sum(kappa**2, axis=-1) + 0j)  # (n_g,)
    zz = z[..., None]
    t_plus = erfc_times_exp(gam / (2 * e) + zz * e, gam * zz)
    t_minus = erfc_times_exp(gam / (2 * e) - zz * e, -gam * zz)
    gauss = jnp.exp(-(gam**2) / (4 * e**2) - zz**2 * e**2)
    f = (t_plus + t_minus) / (4 * area * gam)
    df = (t_plus - t_minus) / (4 * area)
    d2f = gam**2 * f - (e / (area * _SQRT_PI)) * gauss
    return f, df, d2f


def _spectral_sum(phase, f, df, d2f, kappa, k):
    """Σ_G phase · (f I + H/k²) with H the Hessian of e^{iκ·ρ} f(z); all inputs (..., n_g)."""
    kx, ky = kappa[:, 0], kappa[:, 1]
    pf, pdf = phase * f, phase * df
    hxx = jnp.sum(-kx * kx * pf, axis=-1)
    hyy = jnp.sum(-ky * ky * pf, axis=-1)
    hxy = jnp.sum(-kx * ky * pf, axis=-1)
    hxz = jnp.sum(1j * kx * pdf, axis=-1)
    hyz = jnp.sum(1j * ky * pdf, axis=-1)
    hzz = jnp.sum(phase * d2f, axis=-1)
    hess = jnp.stack([jnp.stack([hxx, hxy, hxz], -1), jnp.stack([hxy, hyy, hyz], -1),
                      jnp.stack([hxz, hyz, hzz], -1)], axis=-2)
    return jnp.sum(pf, axis=-1)[..., None, None] * jnp.eye(3) + hess / k**2


def _wrap(rvec, lattice):
    """Shift in-plane displacements by a lattice vector into the cell around the origin.

    Returns (r_wrapped (..., 3), R (..., 2)) with r = r_wrapped + R. The integer shift carries no
    gradient (it is piecewise constant); G_L(r_w + R) = exp(i k∥·R) G_L(r_w) restores the value.
    """
    m = lattice.matrix()
    frac = rvec[..., :2] @ jnp.linalg.inv(m).T
    shift = jax.lax.stop_gradient(jnp.round(frac))
    big_r = shift @ m.T
    return rvec.at[..., :2].add(-big_r), big_r


def _real_space_dyadics(rvec, self_term, k, lattice, plan, e):
    """Per-lattice-point real-space dyadics (..., n_s, 3, 3), singular origin of self sites zeroed."""
    pts = lattice.points(plan.direct)  # (n_s, 2)
    pts3 = jnp.concatenate([pts, jnp.zeros((pts.shape[0], 1))], axis=1)
    is_origin = jnp.asarray((plan.direct == 0).all(axis=1))
    rn = rvec[..., None, :] - pts3
    singular = self_term[..., None] & is_origin
    rn_safe = jnp.where(singular[..., None], jnp.array([1.0, 0.0, 0.0]) / jnp.real(e), rn)
    rr, s, ds, d2s = _real_space_terms(rn_safe, k, e)
    terms = _radial_dyadic(s, ds, d2s, rn_safe, rr, k)
    return jnp.where(singular[..., None, None], 0.0, terms), pts


def lattice_dyadic(rvec, self_term, k, kpar, lattice, plan):
    """Periodic dyadic Green's tensor of a 2D lattice, by Ewald summation.

    Args:
      rvec: displacement(s) r_obs - r_src, shape (..., 3), metres (wrapped into the cell internally).
      self_term: bool array, shape (...): True where the displacement is the dipole's own site
        (rvec must then be 0); the n = 0 free-space singularity is removed there.
      k: medium wavenumber, 1/m, scalar (complex allowed with Im k ≥ 0; Re k > 0).
      kpar: in-plane Bloch wavevector, shape (2,), 1/m.
      lattice: ``Lattice`` (metres).
      plan: ``EwaldPlan`` with static index sets.

    Returns:
      complex128 array (..., 3, 3): G_L(r), or lim [G_L(r) - G(r)] where ``self_term``.
    """
    e = lattice.ewald_parameter(k, plan.e_scale)
    rw, big_r = _wrap(rvec, lattice)
    terms, pts = _real_space_dyadics(rw, self_term, k, lattice, plan, e)
    real = jnp.einsum("...nab,n->...ab", terms, jnp.exp(1j * pts @ kpar))
    real = real + jnp.where(self_term[..., None, None], _self_real_space(k, e) * jnp.eye(3), 0.0)
    kappa = kpar + lattice.reciprocal_points(plan.reciprocal)
    f, df, d2f = _spectral_profiles(rw[..., 2], kappa, k, e, lattice.area())
    phase = jnp.exp(1j * jnp.einsum("...c,gc->...g", rw[..., :2], kappa))
    spec = _spectral_sum(phase, f, df, d2f, kappa, k)
    return (real + spec) * jnp.exp(1j * big_r @ kpar)[..., None, None]


def lattice_dyadic_pair(rvec, k, kpar, lattice, plan):
    """G_L(r) and G_L(-r) for non-self displacements, sharing every special-function evaluation.

    Reciprocity of the terms: G_L(-r; k∥) uses the same free-space terms G(r - R_n) with the Bloch
    phases conjugated (G is even), and the same spectral profiles with f' odd in z and the in-plane
    phase reversed. Halves the cost of filling the coupled-dipole matrix.

    Args:
      rvec: (..., 3) nonzero displacements, metres. Other arguments as ``lattice_dyadic``.

    Returns:
      (g_plus, g_minus), each (..., 3, 3) complex128.
    """
    e = lattice.ewald_parameter(k, plan.e_scale)
    rw, big_r = _wrap(rvec, lattice)
    no_self = jnp.zeros(rw.shape[:-1], dtype=bool)
    terms, pts = _real_space_dyadics(rw, no_self, k, lattice, plan, e)
    bloch = jnp.exp(1j * pts @ kpar)
    real_plus = jnp.einsum("...nab,n->...ab", terms, bloch)
    real_minus = jnp.einsum("...nab,n->...ab", terms, 1.0 / bloch)
    kappa = kpar + lattice.reciprocal_points(plan.reciprocal)
    f, df, d2f = _spectral_profiles(rw[..., 2], kappa, k, e, lattice.area())
    arg = jnp.einsum("...c,gc->...g", rw[..., :2], kappa)
    spec_plus = _spectral_sum(jnp.exp(1j * arg), f, df, d2f, kappa, k)
    spec_minus = _spectral_sum(jnp.exp(-1j * arg), f, -df, d2f, kappa, k)
    shift = jnp.exp(1j * big_r @ kpar)[..., None, None]
    return (real_plus + spec_plus) * shift, (real_minus + spec_minus) / shift
