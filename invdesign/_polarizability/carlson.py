"""Carlson's symmetric elliptic integrals R_F and R_D, in JAX (differentiable, fixed iteration count).

Definitions (B. C. Carlson, "Numerical computation of real or complex elliptic integrals", Numer.
Algorithms 10, 13–26 (1995), eqs. (2.1) and (4.5); also NIST DLMF §19.16.i):

    R_F(x, y, z) = ½ ∫₀^∞ dt / √((t+x)(t+y)(t+z)),
    R_D(x, y, z) = (3/2) ∫₀^∞ dt / (√((t+x)(t+y)) (t+z)^{3/2}).

Algorithm: Carlson's duplication theorem (same paper, §2 and §4), iterated a *fixed* number of times so
that the function is a plain straight-line JAX graph (jit/grad/vmap friendly), followed by the
fifth-order Taylor series of the paper (eq. (2.2) for R_F, eq. (4.6) for R_D). Each duplication step
shrinks the relative spread of the arguments by 4, so after ``_STEPS`` = 14 steps the series
variables are below 4⁻¹⁴ ≈ 4e-9 for any non-negative arguments (at most one zero) and the truncation
error (sixth order) is far below float64 round-off.

Inputs: real, non-negative, float64, any broadcastable shapes (only one argument of R_F/the first two
of R_D may be zero; R_D's third argument must be positive). Both functions are homogeneous:
R_F(λx, λy, λz) = λ^{-1/2} R_F and R_D(λ·) = λ^{-3/2} R_D, so any consistent length² unit works.
"""

import jax
import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401

_STEPS = 14


def carlson_rf(x, y, z):
    """Carlson's R_F(x, y, z), float64, broadcast shape of the inputs (units: length⁻¹ if x is length²)."""
    x, y, z = (jnp.asarray(v, dtype=jnp.float64) for v in (x, y, z))
    a0 = (x + y + z) / 3.0

    def step(_, carry):
        xm, ym, zm, a = carry
        sx, sy, sz = jnp.sqrt(xm), jnp.sqrt(ym), jnp.sqrt(zm)
        lam = sx * sy + sy * sz + sz * sx
        return (xm + lam) / 4.0, (ym + lam) / 4.0, (zm + lam) / 4.0, (a + lam) / 4.0

    x, y, z, a0 = jnp.broadcast_arrays(x, y, z, a0)
    _, _, _, a = jax.lax.fori_loop(0, _STEPS, step, (x, y, z, a0))
    scale = 4.0**-_STEPS
    X = (a0 - x) * scale / a
    Y = (a0 - y) * scale / a
    Z = -(X + Y)
    e2 = X * Y - Z * Z
    e3 = X * Y * Z
    series = 1.0 - e2 / 10.0 + e3 / 14.0 + e2 * e2 / 24.0 - 3.0 * e2 * e3 / 44.0
    return series / jnp.sqrt(a)


def carlson_rd(x, y, z):
    """Carlson's R_D(x, y, z), float64, broadcast shape of the inputs (length⁻³ if x is length²)."""
    x, y, z = (jnp.asarray(v, dtype=jnp.float64) for v in (x, y, z))
    a0 = (x + y + 3.0 * z) / 5.0

    def step(i, carry):
        xm, ym, zm, a, tail = carry
        sx, sy, sz = jnp.sqrt(xm), jnp.sqrt(ym), jnp.sqrt(zm)
        lam = sx * sy + sy * sz + sz * sx
        tail = tail + 4.0 ** (-i.astype(jnp.float64)) / (sz * (zm + lam))
        return (xm + lam) / 4.0, (ym + lam) / 4.0, (zm + lam) / 4.0, (a + lam) / 4.0, tail

    x, y, z, a0 = jnp.broadcast_arrays(x, y, z, a0)
    *_, a, tail = jax.lax.fori_loop(0, _STEPS, step, (x, y, z, a0, jnp.zeros_like(a0)))
    scale = 4.0**-_STEPS
    X = (a0 - x) * scale / a
    Y = (a0 - y) * scale / a
    Z = -(X + Y) / 3.0
    xy, z2 = X * Y, Z * Z
    e2 = xy - 6.0 * z2
    e3 = (3.0 * xy - 8.0 * z2) * Z
    e4 = 3.0 * (xy - z2) * z2
    e5 = xy * z2 * Z
    series = (1.0 - 3.0 * e2 / 14.0 + e3 / 6.0 + 9.0 * e2 * e2 / 88.0 - 3.0 * e4 / 22.0
              - 9.0 * e2 * e3 / 52.0 + 3.0 * e5 / 26.0)
    return scale * series / (a * jnp.sqrt(a)) + 3.0 * tail
