"""``"moroz"``: dynamic depolarization factors of spheroids (and, by extension, general ellipsoids).

A. Moroz, "Depolarization field of spheroidal particles", J. Opt. Soc. Am. B 26, 517–527 (2009),
replaces the sphere's Meier–Wokaun term by an axis-dependent dynamic depolarization factor D_i:

    α_i⁻¹ = 1/α_static,i − k² D_i / (4π a_i) − i k³/(6π),  i.e.  Δ_i = k² D_i / (4π a_i).

D_i comes from ``depolarization.dynamic_depolarization_factors``: a closed form in Carlson's integrals
that reproduces Moroz's prolate-spheroid expression D = (3/4)[1 + (1+e²) L/(1−e²)] along the symmetry
axis (recalled **from memory**, see ``depolarization.py``) and, being the same uniform-polarisation
O(k²) term, extends it to oblate spheroids and tri-axial ellipsoids (our derivation, checked against
direct quadrature in the tests). D = 1 for a sphere, so ``"moroz"`` and ``"kelly"`` coincide there;
D is smooth in the semi-axes (no e → 0 special case).
"""

import math

from .. import _jaxsetup  # noqa: F401
from .base import LongWavelengthCorrection, _k_col
from .depolarization import dynamic_depolarization_factors


class MorozDynamic(LongWavelengthCorrection):
    """Δ_i = k² D_i/(4π a_i)."""

    name = "moroz"

    def shift(self, semi_axes_m, k):
        """k² D_i/(4π a_i), shape (n_wl, 3), 1/m³ (see ``LongWavelengthCorrection.shift``)."""
        d = dynamic_depolarization_factors(semi_axes_m)
        return _k_col(k) ** 2 * d / (4.0 * math.pi * semi_axes_m)
