"""Front door: principal inverse polarizabilities of one element, ready for the coupled-dipole solver.

Dispatch on the element type:
  * ``Rod``, ``Disk``: equivalent ellipsoid (``ellipsoid.py``) with static depolarization factors
    (``depolarization.py``) and the chosen long-wavelength correction (``"radiative"``, ``"kelly"``,
    ``"moroz"``; see ``base.py``), α_i⁻¹ = 1/α_static,i − Δ_i − i k³/(6π);
  * ``Sphere``: the exact Mie dipole term (``sphere.py``), isotropic; the ``correction`` argument is
    **ignored** for spheres (a₁ already contains every size effect of the dipole mode).
The volume used is the element's true volume (``element.volume()``), equal to the equivalent
ellipsoid's by construction.
"""


import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._elements import Disk, Rod, Sphere
from .._units import NM
from .base import radiative_term
from .depolarization import depolarization_factors
from .ellipsoid import equivalent_semi_axes, static_inverse_polarizability
from .registry import get_correction
from .sphere import sphere_lambda


def inverse_polarizability(element, eps, eps_medium, k, *, correction="kelly"):
    """Non-radiative part Λ and full inverse polarizability α⁻¹ of one element, principal frame.

    Args:
      element: ``Rod``, ``Disk`` or ``Sphere`` (lengths in nm; fields may be traced JAX values).
      eps: (n_wl,) complex relative permittivity of the element's material (Im ε ≥ 0).
      eps_medium: real scalar relative permittivity of the embedding medium (n_medium²).
      k: (n_wl,) wavenumber in the embedding medium, 2π n_medium / λ, in 1/m (float64).
      correction: long-wavelength correction name (``"radiative"``, ``"kelly"``, ``"moroz"``) or a
        ``LongWavelengthCorrection``; ignored for spheres. Must be static under ``jax.jit``.

    Returns:
      ``(lam, alpha_inv)``, each (n_wl, 3) complex128 in 1/m³, ordered like the columns of
      ``element.axes()``; ``alpha_inv = lam − i k³/(6π)`` exactly, and ``lam`` is exactly real when
      ``eps`` is real.

    Raises:
      InvdesignError: unknown correction name. TypeError: unsupported element type.
    """
    eps = jnp.atleast_1d(jnp.asarray(eps, dtype=jnp.complex128))
    k = jnp.atleast_1d(jnp.asarray(k, dtype=jnp.float64))
    rad = radiative_term(k)[:, None]
    if isinstance(element, Sphere):
        lam1 = sphere_lambda(eps, eps_medium, jnp.asarray(element.radius, dtype=jnp.float64) * NM, k)
        lam = jnp.broadcast_to(lam1[:, None], lam1.shape + (3,))
        return lam, lam - rad
    if not isinstance(element, (Rod, Disk)):
        raise TypeError(f"inverse_polarizability: unsupported element type {type(element).__name__}")
    corr = get_correction(correction)
    semi_nm = equivalent_semi_axes(element)
    volume_m3 = jnp.asarray(element.volume(), dtype=jnp.float64) * NM**3
    depol = depolarization_factors(semi_nm)
    lam = static_inverse_polarizability(eps, eps_medium, depol, volume_m3) - corr.shift(semi_nm * NM, k)
    return lam, lam - rad


def polarizability(element, eps, eps_medium, k, *, correction="kelly"):
    """Principal volume polarizabilities α = 1/α⁻¹, (n_wl, 3) complex128 in m³ (same arguments)."""
    _, alpha_inv = inverse_polarizability(element, eps, eps_medium, k, correction=correction)
    return 1.0 / alpha_inv


