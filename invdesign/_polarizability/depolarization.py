"""Static and dynamic depolarization factors of an ellipsoid with semi-axes (a₁, a₂, a₃).

Static (geometric) factors, C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by
Small Particles* (Wiley, 1983), §5.3, eq. (5.33):

    L_i = (a₁a₂a₃/2) ∫₀^∞ dq / ((a_i² + q) f(q)),   f(q) = √((a₁²+q)(a₂²+q)(a₃²+q)),

which in Carlson's notation is L_i = (a₁a₂a₃/3) R_D(a_j², a_k², a_i²) (j, k the other two axes;
DLMF §19.16.i). ΣL_i = 1; a sphere has L = 1/3 on every axis.

Dynamic factors D_i: the O(k²) real part of the depolarization field of a *uniformly* polarised
ellipsoid, normalised so that the long-wavelength correction of the inverse volume polarizability is
k² D_i/(4π a_i) (see ``moroz.py``). Expanding the free dyadic Green's tensor to O(k²) gives the kernel
(1 + (r̂·ê_i)²)/(8π r), so

    k² V D_i / (4π a_i) = (k²/8π) ∫_V (1 + (r̂·ê_i)²)/r dV,
    D_i = (a_i / 4V) ∫ dΩ (1 + n_i²) / Σ_j (n_j²/a_j²)            (V = 4π a₁a₂a₃/3).

With Gaussian integrals the angular integral becomes one-dimensional and closes on Carlson's integrals
(our derivation; checked in the tests against direct quadrature of the angular integral):

    D_i = (3 a_i / 4) [ R_F(a₁², a₂², a₃²) + a_i² L_i / (a₁a₂a₃) ].

For a sphere D = 1 (Meier–Wokaun). For a prolate spheroid along its symmetry axis it equals
D = (3/4)[1 + (1+e²) L/(1−e²)], the closed form given by A. Moroz, "Depolarization field of
spheroidal particles", J. Opt. Soc. Am. B 26, 517–527 (2009) — that closed form is quoted here **from
memory**; ``prolate_dynamic_factor_long`` implements it separately so the tests can compare the two.
For a general (tri-axial) ellipsoid we use the Carlson expression above: it is the same
uniform-polarisation approximation Moroz uses for spheroids, applied without the spheroid restriction.

All functions take semi-axes in any one length unit (results are dimensionless) and are pure jnp.
"""

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .carlson import carlson_rd, carlson_rf


def depolarization_factors(semi_axes):
    """Static depolarization factors L_i of an ellipsoid (B&H 1983 eq. 5.33).

    Args:
      semi_axes: (..., 3) positive semi-axes (a₁, a₂, a₃), float64, any length unit.

    Returns:
      (..., 3) float64, dimensionless, summing to 1 along the last axis.
    """
    s = jnp.asarray(semi_axes, dtype=jnp.float64)
    s = s / jnp.max(s, axis=-1, keepdims=True)  # scale-free; keeps R_D arguments O(1)
    sq = s * s
    abc = jnp.prod(s, axis=-1)
    a2, b2, c2 = sq[..., 0], sq[..., 1], sq[..., 2]
    # one batched R_D call for the three axes (one loop in the compiled graph, not three)
    rd = carlson_rd(jnp.stack([b2, c2, a2], -1), jnp.stack([c2, a2, b2], -1), jnp.stack([a2, b2, c2], -1))
    return (abc / 3.0)[..., None] * rd


def dynamic_depolarization_factors(semi_axes):
    """Dynamic depolarization factors D_i (uniform-polarisation, O(k²) term; see module docstring).

    Args:
      semi_axes: (..., 3) positive semi-axes, float64, any length unit.

    Returns:
      (..., 3) float64, dimensionless; exactly 1 for a sphere.
    """
    s = jnp.asarray(semi_axes, dtype=jnp.float64)
    s = s / jnp.max(s, axis=-1, keepdims=True)
    sq = s * s
    abc = jnp.prod(s, axis=-1, keepdims=True)
    rf = carlson_rf(sq[..., 0], sq[..., 1], sq[..., 2])[..., None]
    lf = depolarization_factors(s)
    return 0.75 * s * (rf + sq * lf / abc)


def prolate_factor_long(aspect_ratio):
    """L along the symmetry axis of a prolate spheroid, closed form (B&H 1983 eq. 5.34).

    L = (1−e²)/e² · (−1 + ln((1+e)/(1−e)) / (2e)),  e² = 1 − 1/R², R = a/b > 1.

    Args:
      aspect_ratio: R = long / short semi-axis, > 1, float64 array.

    Returns:
      float64 array, same shape. (Cancellation limits this form for R → 1; use
      ``depolarization_factors`` there.)
    """
    r = jnp.asarray(aspect_ratio, dtype=jnp.float64)
    e2 = 1.0 - 1.0 / (r * r)
    e = jnp.sqrt(e2)
    return (1.0 - e2) / e2 * (-1.0 + jnp.arctanh(e) / e)


def oblate_factor_long(aspect_ratio):
    """L along each of the two equal (long) axes of an oblate spheroid (B&H 1983 eq. 5.35).

    L = g/(2e²) (π/2 − arctan g) − g²/2,  g = √((1−e²)/e²),  e² = 1 − 1/R², R = a/c > 1.
    The short (symmetry) axis has 1 − 2L.

    Args:
      aspect_ratio: R = long / short semi-axis, > 1, float64 array.

    Returns:
      float64 array, same shape.
    """
    r = jnp.asarray(aspect_ratio, dtype=jnp.float64)
    e2 = 1.0 - 1.0 / (r * r)
    g = jnp.sqrt((1.0 - e2) / e2)
    return g / (2.0 * e2) * (jnp.pi / 2.0 - jnp.arctan(g)) - g * g / 2.0


def prolate_dynamic_factor_long(aspect_ratio):
    """D along the symmetry axis of a prolate spheroid, D = (3/4)[1 + (1+e²) L/(1−e²)].

    Closed form of A. Moroz, J. Opt. Soc. Am. B 26, 517 (2009), recalled **from memory**; it agrees
    with ``dynamic_depolarization_factors`` (our Carlson form) to round-off, which the tests check.

    Args:
      aspect_ratio: R = a/b > 1, float64 array.

    Returns:
      float64 array, same shape.
    """
    r = jnp.asarray(aspect_ratio, dtype=jnp.float64)
    e2 = 1.0 - 1.0 / (r * r)
    return 0.75 * (1.0 + (1.0 + e2) * prolate_factor_long(r) / (1.0 - e2))
