"""``"radiative"``: the quasi-static polarizability plus radiative reaction only (Δ = 0).

α_i⁻¹ = 1/α_static,i − i k³/(6π). The smallest correction that conserves energy (C_ext = C_sca for a
lossless particle); it has no dynamic depolarization, so it underestimates the red shift of large
particles. Radiative-reaction form: e.g. B. T. Draine, Astrophys. J. 333, 848–872 (1988), §II.
"""

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .base import LongWavelengthCorrection, _k_col


class RadiativeOnly(LongWavelengthCorrection):
    """Δ_i = 0."""

    name = "radiative"

    def shift(self, semi_axes_m, k):
        """Zeros of shape (n_wl, 3), 1/m³ (see ``LongWavelengthCorrection.shift``)."""
        return jnp.zeros(jnp.shape(_k_col(k))[:-1] + (3,), dtype=jnp.float64)
