"""Rods and disks as equivalent ellipsoids, and the quasi-static ellipsoid polarizability.

Equivalent-ellipsoid map (our modelling choice): the ellipsoid keeps the element's principal axes,
its aspect ratios and its volume.
  * Rod L × W × T (a rectangular block, V = LWT): semi-axes s·(L/2, W/2, T/2) with s = (6/π)^{1/3}
    ≈ 1.2407, so that (4π/3)·s³·LWT/8 = LWT.
  * Disk of diameter D and thickness T (a cylinder, V = πD²T/4): the oblate spheroid with semi-axes
    s·(D/2, D/2, T/2), s = (3/2)^{1/3} ≈ 1.1447, so that (4π/3)·s³·D²T/8 = πD²T/4.
  * Sphere: its radius on every axis (spheres use the exact Mie dipole term, ``sphere.py``; the map
    is given for completeness).
Keeping aspect ratios keeps the static depolarization factors of the ellipsoid inscribed in the
block; keeping the volume keeps the oscillator strength (α ∝ V). Flat-ended rods resonate somewhat to
the red of ellipsoids of the same aspect ratio; this map does not try to correct for that.

Quasi-static polarizability, C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by
Small Particles* (Wiley, 1983), eq. (5.32), as a volume polarizability in m³:

    α_i = V (ε − ε_m) / (ε_m + L_i (ε − ε_m)),   1/α_i = (ε_m/(ε − ε_m) + L_i) / V.
"""

import math

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._elements import Disk, Rod, Sphere

_ROD_SCALE = (6.0 / math.pi) ** (1.0 / 3.0)
_DISK_SCALE = 1.5 ** (1.0 / 3.0)


def equivalent_semi_axes(element):
    """Semi-axes of the equivalent ellipsoid along the element's principal axes, nm.

    Args:
      element: ``Rod``, ``Disk`` or ``Sphere`` (fields in nm).

    Returns:
      (3,) float64 semi-axes in nm, in the order of ``element.axes()`` columns.
    """
    dims = jnp.asarray(element.dimensions(), dtype=jnp.float64)
    if isinstance(element, Rod):
        return 0.5 * _ROD_SCALE * dims
    if isinstance(element, Disk):
        return 0.5 * _DISK_SCALE * dims
    if isinstance(element, Sphere):
        return 0.5 * dims
    raise TypeError(f"no equivalent ellipsoid for element type {type(element).__name__}")


def static_inverse_polarizability(eps, eps_medium, depol, volume_m3):
    """1/α_static of an ellipsoid (B&H 1983 eq. 5.32), 1/m³.

    Args:
      eps: (n_wl,) complex128 relative permittivity of the particle.
      eps_medium: real scalar relative permittivity of the embedding medium.
      depol: (3,) float64 static depolarization factors L_i.
      volume_m3: particle volume, m³ (float64 scalar).

    Returns:
      (n_wl, 3) complex128; exactly real when ``eps`` is real.
    """
    eps = jnp.asarray(eps, dtype=jnp.complex128)[..., None]
    return (eps_medium / (eps - eps_medium) + depol) / volume_m3


def static_polarizability(eps, eps_medium, depol, volume_m3):
    """α_static = V(ε−ε_m)/(ε_m + L(ε−ε_m)) (B&H 1983 eq. 5.32), m³, shape (n_wl, 3) complex128."""
    eps = jnp.asarray(eps, dtype=jnp.complex128)[..., None]
    return volume_m3 * (eps - eps_medium) / (eps_medium + depol * (eps - eps_medium))
