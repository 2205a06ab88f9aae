"""Element polarizabilities for the coupled-dipole model (volume polarizability α in m³, p = ε0 ε_m α E).

Rods and disks become equivalent ellipsoids with a quasi-static polarizability dressed by a
long-wavelength correction (a small family: ``"radiative"``, ``"kelly"``, ``"moroz"``); spheres use the
exact Mie a₁ dipole term. Every variant returns α⁻¹ = Λ − i k³/(6π) with Λ real for lossless ε.
"""

from .base import LongWavelengthCorrection as LongWavelengthCorrection
from .base import radiative_term as radiative_term
from .carlson import carlson_rd as carlson_rd
from .carlson import carlson_rf as carlson_rf
from .depolarization import depolarization_factors as depolarization_factors
from .depolarization import dynamic_depolarization_factors as dynamic_depolarization_factors
from .depolarization import oblate_factor_long as oblate_factor_long
from .depolarization import prolate_dynamic_factor_long as prolate_dynamic_factor_long
from .depolarization import prolate_factor_long as prolate_factor_long
from .ellipsoid import equivalent_semi_axes as equivalent_semi_axes
from .ellipsoid import static_inverse_polarizability as static_inverse_polarizability
from .ellipsoid import static_polarizability as static_polarizability
from .inverse import inverse_polarizability as inverse_polarizability
from .inverse import polarizability as polarizability
from .kelly import KellyMLWA as KellyMLWA
from .moroz import MorozDynamic as MorozDynamic
from .radiative import RadiativeOnly as RadiativeOnly
from .registry import CORRECTIONS as CORRECTIONS
from .registry import get_correction as get_correction
from .sphere import mie_a1 as mie_a1
from .sphere import sphere_lambda as sphere_lambda
from .sphere import sphere_polarizability as sphere_polarizability
