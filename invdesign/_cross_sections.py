"""Extinction, scattering and absorption cross sections of one isolated element in a uniform medium.

For a field along principal axis i the element is the dipole p = ε0 ε_m α_i E, so (B&H 1983 §5.2, in
volume-polarizability units; k the wavenumber in the medium)

    C_ext = k Im α_i,   C_sca = k⁴ |α_i|² / (6π),   C_abs = C_ext − C_sca.

α comes from ``invdesign._polarizability`` (ellipsoid-equivalent for rods/disks, exact Mie a₁ for
spheres). These are single-particle quantities (no lattice, no substrate); for a sphere they are the
dipole (n = 1, electric) part of the Mie result, so they miss magnetic-dipole and higher multipoles.
"""

from typing import NamedTuple

import jax
import jax.numpy as jnp

from . import _jaxsetup  # noqa: F401
from ._polarizability import polarizability
from ._units import NM, k0_per_m


class CrossSections(NamedTuple):
    """Cross sections in nm², each (n_wl, 3) float64: column i for the field along principal axis i."""

    ext: jax.Array
    sca: jax.Array
    abs: jax.Array


def cross_sections_from_alpha(alpha, k) -> CrossSections:
    """Cross sections (nm²) from principal polarizabilities α (n_wl, 3) m³ and medium k (n_wl,) 1/m."""
    kk = jnp.asarray(k, dtype=jnp.float64)[:, None]
    ext = kk * jnp.imag(alpha)
    sca = kk**4 * jnp.abs(alpha) ** 2 / (6.0 * jnp.pi)
    return CrossSections(ext / NM**2, sca / NM**2, (ext - sca) / NM**2)


def cross_sections(element, material, wavelengths_nm, medium_index, *, correction="kelly") -> CrossSections:
    """Single-element cross sections for light polarised along each principal axis.

    Args:
      element: ``Rod``, ``Disk`` or ``Sphere`` (nm).
      material: an ``AbstractMaterial`` (its ``permittivity(λ_nm)`` is used).
      wavelengths_nm: (n_wl,) vacuum wavelengths, nm.
      medium_index: real refractive index of the embedding medium (scalar).
      correction: long-wavelength correction for rods/disks (``"radiative"``, ``"kelly"``,
        ``"moroz"``); ignored for spheres. Static under ``jax.jit``.

    Returns:
      ``CrossSections`` with ext, sca, abs, each (n_wl, 3) float64 in nm².
    """
    wl = jnp.atleast_1d(jnp.asarray(wavelengths_nm, dtype=jnp.float64))
    eps = material.permittivity(wl)
    k = k0_per_m(wl) * medium_index
    alpha = polarizability(element, eps, medium_index**2, k, correction=correction)
    return cross_sections_from_alpha(alpha, k)
