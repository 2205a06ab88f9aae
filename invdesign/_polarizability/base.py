"""The long-wavelength correction family: how a quasi-static ellipsoid polarizability is dressed for size.

Every correction writes the inverse volume polarizability of an ellipsoid (principal axis i) as

    α_i⁻¹ = Λ_i − i k³/(6π),      Λ_i = 1/α_static,i − Δ_i(k, a),

with α_static from ``ellipsoid.py`` (B&H 1983 eq. 5.32), k the wavenumber in the embedding medium
(1/m), a the semi-axes (m) and Δ_i a **real** dynamic-depolarization shift (1/m³). The radiative
reaction −i k³/(6π) is the same exact term in every variant (it is what keeps the lattice energy
balance right), and Δ real keeps Λ real for a lossless (real-ε) material. A correction therefore only
supplies Δ; ``inverse_polarizability`` adds the rest.

Corrections are looked up by name with ``get_correction`` (registry ``CORRECTIONS``) or passed as an
instance of a subclass of ``LongWavelengthCorrection``.
"""

import abc
import math

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401


def radiative_term(k):
    """Radiative-reaction term R = i k³/(6π), 1/m³, so that α⁻¹ = Λ − R (complex128, shape of k; k in 1/m).

    Source: the O(k³) imaginary part of a point dipole's self-field (radiative reaction), as added
    to the Clausius–Mossotti polarizability by B. T. Draine, Astrophys. J. 333, 848–872 (1988), §II
    (Gaussian units, (2/3) i k³); in our SI volume-polarizability units (p = ε0 ε_m α E) the factor
    4π turns it into k³/(6π).
    """
    k = jnp.asarray(k, dtype=jnp.float64)
    return 1j * k**3 / (6.0 * math.pi)


class LongWavelengthCorrection(abc.ABC):
    """A real O(k²) shift Δ of the inverse static polarizability (see module docstring)."""

    #: registry key, also used in messages
    name: str = "correction"

    @abc.abstractmethod
    def shift(self, semi_axes_m, k):
        """Real shift Δ subtracted from 1/α_static.

        Args:
          semi_axes_m: (3,) equivalent-ellipsoid semi-axes in metres, float64.
          k: (n_wl,) wavenumber in the embedding medium, 1/m, float64.

        Returns:
          (n_wl, 3) float64 in 1/m³.
        """

    def __repr__(self) -> str:
        return f"{type(self).__name__}()"

    def __eq__(self, other) -> bool:  # stateless: equal by type (so it can be static jit metadata)
        return type(self) is type(other)

    def __hash__(self) -> int:
        return hash(type(self))


def _k_col(k):
    return jnp.asarray(k, dtype=jnp.float64)[..., None]
