"""Resolving a rod into a chain of N collinear point dipoles, renormalised to the rod's own response.

A single point dipole cannot see a gap that is smaller than the rod: the near field of a real rod is
spread along its length. A chain of N dipoles at spacing d = L/N along the length axis u, centred on the
rod, spreads it. Each chain dipole gets the same principal inverse polarizability α_c⁻¹ = Λ_c - i k³/6π
(per principal axis), chosen so that the *isolated* chain reproduces the rod's single-dipole response.

A chain resolves the charge distribution *along* the rod only. Across the rod (width and thickness
axes) the whole cross-section responds together, so the *reactive* (real) near-field coupling between
members of one chain across the axis is removed from the lattice system (``intra_chain_correction``):
point dipoles closer than the rod's width would otherwise couple like separate particles and give
spurious chain modes (measured: spectra that diverged as N grew past 9 at 40 nm gaps). The radiative
(imaginary) coupling is kept, so the energy balance is untouched (only Im of the symmetric system
matrix enters it).

Renormalisation (our derivation). Write the rod's inverse polarizability per axis as
α⁻¹ = Λ - i k³/(6π). Let K be the real part of the free-space coupling between chain members along that
axis, K_ij = k² Re G_uu(r_i - r_j) (i ≠ j, K_ii = 0) for the length axis u, and K = 0 across it.
Λ_c is the root of

    1ᵀ (Λ_c I - K)⁻¹ 1 = 1/Λ,

i.e. the chain's total non-radiative dipole response to a uniform field equals the rod's. The radiative
parts are then consistent to leading order: for a chain short against the wavelength, Im(k² G_ij) →
k³/(6π) for all i, j, and the Sherman–Morrison formula gives 1ᵀ(Λ_c I - K - i(k³/6π) 11ᵀ)⁻¹1 =
1/(Λ - i k³/6π), the rod's α, with an O((kL)²) error from the chain's finite length. Because K is real,
a real Λ (lossless material) gives a real Λ_c: a lossless rod stays exactly lossless.
The root is found by Newton's method on f(λ) = 1/s(λ) - Λ, started from the mean-field value
N Λ + 1ᵀK1/N; f'(λ) = xᵀx / s² with x = (λI - K)⁻¹1 (K symmetric). Iterations run without gradient and
a final Newton step carries the implicit-function gradient, which is exact at convergence.

Where it stops holding: the chain still has no thickness or width resolution; for N large the dipoles
come closer than the rod width and the renormalised Λ_c absorbs that inconsistency.
"""

import jax
import jax.numpy as jnp

_NEWTON_STEPS = 40


def chain_offsets(n: int, length_m):
    """Positions of N chain dipoles along the rod axis, relative to its centre: (n,) metres."""
    return (jnp.arange(n) - 0.5 * (n - 1)) * (length_m / n)


def chain_coupling(n: int, length_m, k):
    """Real coupling matrices K between chain members, per principal axis.

    Args:
      n: dipoles per chain (static). length_m: rod length, metres. k: (n_wl,) medium wavenumber, 1/m.

    Returns:
      (n_wl, 3, n, n) real: axis 0 the length (longitudinal coupling); axes 1 and 2 (transverse) are
      zero, the reactive transverse coupling inside a chain being removed (module docstring).
    """
    off = chain_offsets(n, length_m)
    sep = jnp.abs(off[:, None] - off[None, :])
    same = jnp.eye(n, dtype=bool)
    r = jnp.where(same, 1.0, sep)[None]  # (1, n, n) with a placeholder on the diagonal
    kr = k[:, None, None] * r
    g = jnp.exp(1j * kr) / (4 * jnp.pi * r)
    a = 1 + (1j * kr - 1) / kr**2
    b = (3 - 3j * kr - kr**2) / kr**2
    k2 = k[:, None, None] ** 2
    longitudinal = jnp.where(same, 0.0, jnp.real(k2 * g * (a + b)))
    transverse = jnp.zeros_like(longitudinal)
    return jnp.stack([longitudinal, transverse, transverse], axis=1)


def intra_chain_correction(positions, axes, pair_i, pair_j, k):
    """The reactive transverse coupling between members of one chain, to be *added* to the system matrix.

    Args:
      positions: (n_d, 3) metres; axes: (n_d, 3, 3) principal axes (column 0 = chain axis u).
      pair_i, pair_j: static int arrays (n_p,) of same-chain member pairs, i < j.
      k: medium wavenumber, 1/m, scalar.

    Returns:
      (n_p, 3, 3) real blocks k² P Re G(r_ij) P with P = I - u uᵀ: adding them to blocks (i, j) and
      (j, i) of the matrix Σ δ α⁻¹ - k² G_L cancels the transverse near-field coupling inside chains.
    """
    from ._green import free_dyadic

    r = positions[pair_i] - positions[pair_j]
    u = axes[pair_i][:, :, 0]
    proj = jnp.eye(3) - u[:, :, None] * u[:, None, :]
    g = jnp.real(free_dyadic(r, k))
    return k**2 * jnp.einsum("pab,pbc,pcd->pad", proj, g, proj)


def _total_response(lam_c, coupling):
    """s = 1ᵀ(λI - K)⁻¹1 and xᵀx for batched λ (...,) and K (..., n, n)."""
    n = coupling.shape[-1]
    mat = lam_c[..., None, None] * jnp.eye(n) - coupling
    x = jnp.linalg.solve(mat, jnp.ones(coupling.shape[:-1], dtype=mat.dtype)[..., None])[..., 0]
    return jnp.sum(x, axis=-1), jnp.sum(x * x, axis=-1)


def _newton_step(lam_c, lam_rod, coupling):
    s, xx = _total_response(lam_c, coupling)
    f = 1.0 / s - lam_rod
    return lam_c - f * s**2 / xx


def renormalise(lam_rod, coupling):
    """Chain-member Λ_c such that the isolated chain reproduces the rod's response (see module doc).

    Args:
      lam_rod: (n_wl, 3) complex rod Λ per principal axis, 1/m³.
      coupling: (n_wl, 3, n, n) real, from ``chain_coupling``.

    Returns:
      (lam_c, residual): lam_c (n_wl, 3) complex, 1/m³; residual (n_wl, 3) = |1/s(Λ_c) - Λ| / |Λ|,
      a convergence diagnostic (≲ 1e-12 when converged).
    """
    n = coupling.shape[-1]
    coupling = coupling.astype(jnp.complex128)
    if n == 1:
        return lam_rod, jnp.zeros(lam_rod.shape)
    start = n * lam_rod + jnp.sum(coupling, axis=(-1, -2)) / n
    fixed = jax.lax.stop_gradient((start, lam_rod, coupling))

    def body(_, lam_c):
        return _newton_step(lam_c, fixed[1], fixed[2])

    lam_c = jax.lax.fori_loop(0, _NEWTON_STEPS, body, fixed[0])
    lam_c = _newton_step(jax.lax.stop_gradient(lam_c), lam_rod, coupling)
    s, _ = _total_response(lam_c, coupling)
    residual = jnp.abs(1.0 / s - lam_rod) / jnp.abs(lam_rod)
    return lam_c, jax.lax.stop_gradient(residual)
