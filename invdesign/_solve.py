"""The coupled-dipole system of one unit cell in a 2D lattice, at one wavelength.

Unknowns: the reduced dipole moments p̃_i = p_i / (ε0 ε_m) (V·m) of the n_d dipoles of the cell. Each
dipole i sits at r_i with principal axes R_i (columns) and principal inverse polarizabilities
α_i⁻¹ = Λ_i - i k³/(6π) (1/m³, see ``invdesign._polarizability``). Bloch periodicity p̃ at r_i + R_n is
p̃_i exp(i k∥·R_n). The system is

    Σ_j [δ_ij R_i diag(α_i⁻¹) R_iᵀ - k² G_L(r_i - r_j)] p̃_j = E_inc(r_i),

with G_L the Ewald lattice dyadic (the i = j block is the regularised self term). The matrix is
complex symmetric when k∥ = 0 (reciprocity); it is solved densely by LU (it is small: 3 n_d ≤ a few
hundred). Gradients flow through ``jnp.linalg.solve`` (implicit, not unrolled).

Where it stops holding: point dipoles ignore multipoles, so dipoles closer than about their own size
are unreliable (resolve elements into chains, ``invdesign._chain``); a near-singular matrix (a lattice
resonance exactly at a lossless pole) is reported through ``condition`` rather than raised.
"""

import jax.numpy as jnp
import numpy as np

from ._green import lattice_dyadic, lattice_dyadic_pair


def interaction_matrix(positions, lam, axes, k, kpar, lattice, plan):
    """The (3 n_d, 3 n_d) coupled-dipole matrix at one wavelength.

    Args:
      positions: (n_d, 3) dipole positions, metres.
      lam: (n_d, 3) complex non-radiative inverse polarizabilities Λ in the principal frames, 1/m³.
      axes: (n_d, 3, 3) principal axes as columns (lab frame).
      k: medium wavenumber, 1/m, scalar.
      kpar: (2,) in-plane Bloch wavevector, 1/m.
      lattice, plan: ``Lattice`` and ``EwaldPlan``.

    Returns:
      complex128 (3 n_d, 3 n_d) matrix, in 1/m³.
    """
    n_d = positions.shape[0]
    alpha_inv = lam - 1j * k**3 / (6 * jnp.pi)
    own = jnp.einsum("dab,db,dcb->dac", axes, alpha_inv, axes)  # R diag(α⁻¹) Rᵀ, (n_d, 3, 3)
    # every site has the same self term; each pair i < j is evaluated once for both directions
    g_self = lattice_dyadic(jnp.zeros(3), jnp.asarray(True), k, kpar, lattice, plan)
    coupling = jnp.broadcast_to(g_self, (n_d, n_d, 3, 3))
    if n_d > 1:
        iu, ju = np.triu_indices(n_d, 1)
        g_plus, g_minus = lattice_dyadic_pair(positions[iu] - positions[ju], k, kpar, lattice, plan)
        coupling = coupling.at[iu, ju].set(g_plus).at[ju, iu].set(g_minus)
    blocks = jnp.eye(n_d)[:, :, None, None] * own[:, None] - k**2 * coupling
    return blocks.transpose(0, 2, 1, 3).reshape(3 * n_d, 3 * n_d)


def plane_wave_at(positions, kvec, polarizations):
    """Incident plane-wave fields exp(i k·r) ê at each dipole, for several polarisations.

    Args:
      positions: (n_d, 3) metres; kvec: (3,) incident wavevector, 1/m;
      polarizations: (n_in, 3) complex unit Jones vectors in the lab frame (transverse to kvec).

    Returns:
      (n_in, n_d, 3) complex field amplitudes for unit incident amplitude.
    """
    phase = jnp.exp(1j * positions @ kvec)
    return polarizations[:, None, :] * phase[None, :, None]


def solve_dipoles(matrix, incident):
    """Dipole moments p̃ (n_in, n_d, 3) for incident fields (n_in, n_d, 3), by a dense LU solve."""
    n_in, n_d, _ = incident.shape
    rhs = incident.reshape(n_in, 3 * n_d).T
    p = jnp.linalg.solve(matrix, rhs)
    return p.T.reshape(n_in, n_d, 3)


def absorbed_fraction(p, lam, axes, k, area):
    """Fraction of the incident power absorbed per cell, for unit incident amplitude.

    A = -(k / A_cell) Σ_i Σ_m Im(Λ_im) |(R_iᵀ p̃_i)_m|², the work of the local field on each dipole minus
    its own radiation (the radiative part -i k³/6π of α⁻¹ is exactly cancelled, so a lossless
    material absorbs exactly nothing). Shapes: p (n_in, n_d, 3); returns (n_in,) float.
    """
    p_local = jnp.einsum("dab,nda->ndb", axes, p)
    return -(k / area) * jnp.sum(jnp.imag(lam)[None] * jnp.abs(p_local) ** 2, axis=(1, 2))
