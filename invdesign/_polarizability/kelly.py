"""``"kelly"``: the modified long-wavelength approximation with the semi-axis along the field.

K. L. Kelly, E. Coronado, L. L. Zhao and G. C. Schatz, "The optical properties of metal nanoparticles:
the influence of size, shape, and dielectric environment", J. Phys. Chem. B 107, 668–677 (2003),
eq. (5) (Gaussian units, α_G in cm³):

    α_G = α_G,static / (1 − (2/3) i k³ α_G,static − (k²/a) α_G,static).

With the SI volume polarizability α = 4π α_G (p = ε0 ε_m α E) this is

    α⁻¹ = 1/α_static − k²/(4π a_i) − i k³/(6π),  i.e.  Δ_i = k² / (4π a_i),

a_i the equivalent-ellipsoid semi-axis along the field (for a sphere: the radius; this recovers
M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983)). For elongated particles it under-corrects the
longitudinal mode compared with ``"moroz"`` (whose D_i > 1 there).
"""

import math

from .. import _jaxsetup  # noqa: F401
from .base import LongWavelengthCorrection, _k_col


class KellyMLWA(LongWavelengthCorrection):
    """Δ_i = k²/(4π a_i)."""

    name = "kelly"

    def shift(self, semi_axes_m, k):
        """k²/(4π a_i), shape (n_wl, 3), 1/m³ (see ``LongWavelengthCorrection.shift``)."""
        return _k_col(k) ** 2 / (4.0 * math.pi * semi_axes_m)
