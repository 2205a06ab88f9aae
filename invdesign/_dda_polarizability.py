"""Polarizabilities of the volume dipoles of the verification solver: Clausius–Mossotti and the LDR.

A dipole standing for a cube of volume d³ of material ε in a medium ε_m (relative permittivity
ε_r = ε/ε_m = m², k the medium wavenumber) has, in invdesign's volume-polarizability units
(p = ε0 ε_m α E, SI; a sphere of the same volume has α = 4π r³ (ε_r − 1)/(ε_r + 2)),

    α_CM = 3 d³ (ε_r − 1)/(ε_r + 2)                       (Clausius–Mossotti)

and the lattice-dispersion-relation polarizability (B. T. Draine and J. Goodman, Astrophys. J. 405,
685 (1993), eq. (2.11)–(2.13) in Gaussian units, where α_G = α/(4π)):

    1/α = 1/α_CM + [(b1 + m² b2 + m² b3 S)(kd)² − (2/3) i (kd)³] / (4π d³),
    b1 = −1.8915316, b2 = 0.1648469, b3 = −1.7700004,  S = Σ_j (â_j ê_j)²,

â the propagation and ê the polarisation direction of the incident wave (S = 0 for normal incidence
with x or y polarisation). The constants are typed from memory of the paper, not re-derived here (the
sphere tests against Mie theory in ``tests/test_dda.py`` are the practical check). The term
−(2/3) i (kd)³/(4π d³) = −i k³/(6π) is exactly the project's radiative reaction, so these functions
return the non-radiative part

    Λ = 1/α + i k³/(6π)   (1/m³),

the same quantity the fast model uses (``invdesign._polarizability``). With "cm" the dipoles get
Clausius–Mossotti plus radiative reaction (Λ = 1/α_CM). Where it stops holding: the LDR is derived for
an infinite lattice; the discretisation is trustworthy for |m| k d ≲ 1 (B. T. Draine and P. J. Flatau,
J. Opt. Soc. Am. A 11, 1491 (1994), from memory), and metals with large |m| need finer grids still.
"""

import math

import jax.numpy as jnp

B1 = -1.8915316
B2 = 0.1648469
B3 = -1.7700004
POLARIZABILITIES = ("ldr", "cm")


def ldr_s(khat, pol):
    """S = Σ_j (â_j ê_j)² for real unit propagation ``khat`` (3,) and polarisation ``pol`` (..., 3)."""
    return jnp.sum((khat * pol) ** 2, axis=-1)


def dipole_lambda(eps, eps_medium, volume_m3, k, s=0.0, *, kind="ldr"):
    """Non-radiative inverse polarizability Λ = 1/α + i k³/(6π) of one volume dipole, 1/m³.

    Args:
      eps: complex permittivity of the material, any shape (broadcast with the others); must differ
        from ``eps_medium``.
      eps_medium: real permittivity of the medium, scalar.
      volume_m3: dipole volume d³ in m³ (the grid cell, or V_e/N_e with volume rescaling).
      k: medium wavenumber, 1/m.
      s: the LDR direction factor S (``ldr_s``), dimensionless; ignored for "cm".
      kind: "ldr" or "cm" (static).

    Returns:
      complex128 Λ with the broadcast shape of the inputs, 1/m³.
    """
    eps_r = jnp.asarray(eps, dtype=complex) / eps_medium
    inv_cm = (eps_r + 2.0) / (3.0 * volume_m3 * (eps_r - 1.0))
    if kind == "cm":
        return inv_cm
    d = volume_m3 ** (1.0 / 3.0)
    return inv_cm + (B1 + eps_r * B2 + eps_r * B3 * s) * (k * d) ** 2 / (4.0 * math.pi * d**3)
