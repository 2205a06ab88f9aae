"""Far field of a periodic dipole sheet: diffraction-order amplitudes and zero-order Jones matrices.

A sheet of dipoles p̃_i exp(i k∥·R_n) radiates plane waves only, one per reciprocal vector G, with
in-plane wavevector κ = k∥ + G and k_z = sqrt(k² - |κ|²) (propagating when real). Summing the free
dyadic over the lattice by Poisson's formula gives, above (+) and below (−) the sheet,

    E_±(κ) = (i k² / (2 A k_z)) Σ_i (I - k̂± k̂±ᵀ) p̃_i exp(-i κ·ρ_i ∓ i k_z z_i),  k̂± = (κ, ±k_z)/k,

the amplitude of exp(i κ·ρ ± i k_z z), referenced to the plane z = 0. Light is incident from the
superstrate (z > 0) travelling towards -z: transmission is the '-' side, reflection the '+' side.
The power carried by an order, relative to the incident flux, is |E|² k_z / k_z,inc.
"""

import jax.numpy as jnp


def order_kvectors(k, kpar, lattice, order_indices):
    """In-plane wavevectors κ (n_o, 2), k_z (n_o,) complex, and a propagating mask (n_o,) for orders."""
    kappa = kpar + lattice.reciprocal_points(order_indices)
    kz2 = k**2 - jnp.sum(kappa**2, axis=-1)
    propagating = kz2 > 0
    kz = jnp.sqrt(jnp.where(propagating, kz2, 1.0))
    return kappa, kz, propagating


def order_amplitudes(p, positions, k, kpar, lattice, order_indices):
    """Scattered plane-wave amplitudes of each order, transmitted (−z) and reflected (+z).

    Args:
      p: (n_in, n_d, 3) reduced dipole moments for unit incident amplitude.
      positions: (n_d, 3) metres. k: medium wavenumber (real), 1/m. kpar: (2,) 1/m.
      lattice: ``Lattice``. order_indices: (n_o, 2) static integer (m1, m2).

    Returns:
      (trans, refl, kz, propagating): trans and refl (n_in, n_o, 3) complex field amplitudes (zero for
      evanescent orders); kz (n_o,) real (1 for evanescent ones, masked); propagating (n_o,) bool.
    """
    kappa, kz, prop = order_kvectors(k, kpar, lattice, order_indices)
    pref = 1j * k**2 / (2 * lattice.area() * kz)  # (n_o,)

    def side(sign):
        khat = jnp.concatenate([kappa, sign * kz[:, None]], axis=1) / k  # (n_o, 3)
        proj = jnp.eye(3) - khat[:, :, None] * khat[:, None, :]  # (n_o, 3, 3)
        phase = jnp.exp(-1j * (positions[:, :2] @ kappa.T) - 1j * sign * positions[:, 2:3] * kz)
        field = jnp.einsum("oab,ndb,do->noa", proj, p, phase)
        return jnp.where(prop[None, :, None], pref[None, :, None] * field, 0.0)

    return side(-1.0), side(+1.0), kz, prop
