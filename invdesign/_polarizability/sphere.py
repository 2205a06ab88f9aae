"""Exact electric-dipole polarizability of a sphere from the Mie coefficient a₁.

Mie coefficient, C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by Small
Particles* (Wiley, 1983), eqs. (4.53) and (4.88) (time dependence exp(−iωt), as in invdesign):

    a₁ = [g ψ₁(x) − ψ₀(x)] / [g ξ₁(x) − ξ₀(x)],   g = D₁(mx)/m + 1/x,

with x = k r (k the wavenumber in the medium), m = √(ε/ε_m), D₁ = ψ₁'/ψ₁ the logarithmic derivative and
the Riccati–Bessel functions of order 0 and 1 in closed form (B&H §4.4):

    ψ₀ = sin x, ψ₁ = sin x/x − cos x,  χ₀ = cos x, χ₁ = cos x/x + sin x,  ξ_n = ψ_n − i χ_n,
    D₁(z) = 1/(1/z − cot z) − 1/z   (complex z = m x allowed).

Dipole polarizability. The n = 1 term of the Mie extinction, C_ext = (6π/k²) Re a₁ (B&H eq. 4.62),
equals the dipole's k Im α when

    α = 6π i a₁ / k³   (m³, volume polarizability, p = ε0 ε_m α E).

Small x: a₁ → −(2i/3) x³ (m²−1)/(m²+2) (B&H eq. 5.5 region), so α → 4π r³ (ε−ε_m)/(ε+2ε_m), the
Clausius–Mossotti sphere — the sign is right for exp(−iωt). Writing the denominator as
num − i M (num = g ψ₁ − ψ₀, M = g χ₁ − χ₀) gives the non-radiative part in closed form,

    Λ = α⁻¹ + i k³/(6π) = −(k³/6π) · M / num,

which is exactly real when g is real, i.e. for a lossless sphere (real ε of either sign), because then
a₁ = num/(num − iM) with num, M real. Cancellations at small argument are avoided with power series
(1/z − cot z for |z| < 0.5, ψ₁(x) for x < 0.5); cot z = cos z / sin z is used up to |Im z| = 20
(exactly real on the real axis, exactly imaginary on the imaginary axis, so Λ stays exactly real for
any real ε), and beyond that the exp(2iz) form, so nothing overflows.
"""

import math
from fractions import Fraction

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401

_SERIES_RADIUS = 0.5
_FAR_IMAG = 20.0


def _bernoulli_even(n_max: int) -> list[Fraction]:
    """|B_2|, |B_4|, ..., |B_{2 n_max}| exactly (Akiyama–Tanigawa algorithm)."""
    m_max = 2 * n_max
    a = [Fraction(0)] * (m_max + 1)
    out = []
    for m in range(m_max + 1):
        a[m] = Fraction(1, m + 1)
        for j in range(m, 0, -1):
            a[j - 1] = j * (a[j - 1] - a[j])
        if m >= 2 and m % 2 == 0:
            out.append(abs(a[0]))
    return out


#: coefficients c_n of 1/z − cot z = Σ_{n≥1} c_n z^{2n−1}, c_n = 2^{2n} |B_{2n}| / (2n)!
#: (Laurent series of cot, e.g. Abramowitz & Stegun 4.3.70)
_COT_SERIES = [float(Fraction(4**n) * b / math.factorial(2 * n))
               for n, b in enumerate(_bernoulli_even(11), start=1)]
#: coefficients of ψ₁(x) = x j₁(x) = Σ_k (−1)^k x^{2k+2} / (k! 2^k (2k+3)!!)  (A&S 10.1.2)
_PSI1_SERIES = [(-1) ** k / (math.factorial(k) * 2**k * math.prod(range(1, 2 * k + 4, 2)))
                for k in range(9)]


def _poly(coeffs, w):
    acc = jnp.zeros_like(w)
    for c in reversed(coeffs):
        acc = acc * w + c
    return acc


def _inv_minus_cot(z):
    """1/z − cot z for complex z, accurate near 0 and for large |Im z| (complex128)."""
    sign = jnp.where(jnp.imag(z) < 0, -1.0, 1.0)
    zp = sign * z  # Im zp ≥ 0; the function is odd
    small = jnp.abs(zp) < _SERIES_RADIUS
    series = zp * _poly(_COT_SERIES, zp * zp)
    far = jnp.imag(zp) > _FAR_IMAG
    zs = jnp.where(small, 1.0 + 0.0j, zp)  # keep unused branches finite (and their gradients)
    zn = jnp.where(far, 1.0 + 0.0j, zs)
    zf = jnp.where(far, zs, 1.0j * _FAR_IMAG)
    near = 1.0 / zn - jnp.cos(zn) / jnp.sin(zn)  # exactly real (imaginary) on the real (imaginary) axis
    w = jnp.exp(2j * zf)  # |w| < e^{-40}: no overflow for large Im z
    away = 1.0 / zf - 1j * (w + 1.0) / (w - 1.0)
    return sign * jnp.where(small, series, jnp.where(far, away, near))


def _psi1(x):
    """Riccati–Bessel ψ₁(x) = sin x / x − cos x for real x > 0 (float64)."""
    small = x < _SERIES_RADIUS
    xs = jnp.where(small, 1.0, x)
    direct = jnp.sin(xs) / xs - jnp.cos(xs)
    return jnp.where(small, x * x * _poly(_PSI1_SERIES, x * x), direct)


def _num_and_m(eps, eps_medium, radius_m, k):
    """(num, M) of the module docstring; shapes of ``eps`` (complex128)."""
    eps = jnp.asarray(eps, dtype=jnp.complex128)
    x = jnp.asarray(k, dtype=jnp.float64) * radius_m
    m = jnp.sqrt(eps / eps_medium)
    h = _inv_minus_cot(m * x)
    g = 1.0 / (m * h) - 1.0 / (m * m * x) + 1.0 / x
    num = g * _psi1(x) - jnp.sin(x)
    big_m = g * (jnp.cos(x) / x + jnp.sin(x)) - jnp.cos(x)
    return num, big_m


def mie_a1(eps, eps_medium, radius_m, k):
    """Mie coefficient a₁ (B&H 1983 eq. 4.88, exp(−iωt) convention).

    Args:
      eps: (n_wl,) complex128 permittivity of the sphere (Im ε ≥ 0 passive).
      eps_medium: real scalar permittivity of the medium.
      radius_m: sphere radius in metres, float64 scalar.
      k: (n_wl,) wavenumber in the medium, 1/m.

    Returns:
      (n_wl,) complex128 a₁ (Re a₁ ≥ 0 for a passive sphere).
    """
    num, big_m = _num_and_m(eps, eps_medium, radius_m, k)
    return num / (num - 1j * big_m)


def sphere_lambda(eps, eps_medium, radius_m, k):
    """Non-radiative inverse polarizability Λ = α⁻¹ + i k³/(6π) of a sphere, 1/m³.

    Args: as ``mie_a1``.

    Returns:
      (n_wl,) complex128; exactly real for real ε.
    """
    num, big_m = _num_and_m(eps, eps_medium, radius_m, k)
    k = jnp.asarray(k, dtype=jnp.float64)
    return -(k**3 / (6.0 * math.pi)) * big_m / num


def sphere_polarizability(eps, eps_medium, radius_m, k):
    """Dipole volume polarizability α = 6π i a₁ / k³ in m³, (n_wl,) complex128."""
    k = jnp.asarray(k, dtype=jnp.float64)
    return 6.0 * math.pi * 1j * mie_a1(eps, eps_medium, radius_m, k) / k**3
