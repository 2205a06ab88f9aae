"""invdesign: inverse design of coherent-control plasmonic metasurface unit cells.

Importing invdesign configures JAX for the CPU with 64-bit floats (see ``invdesign._jaxsetup``).
Units at this API: lengths in nm, photon energies in eV, wavelengths in vacuum nm; time convention
exp(-iωt). The public names below are the stable interface; modules starting with ``_`` are private.
"""

from . import _jaxsetup  # noqa: F401  (must run before jax is used)
from ._cross_sections import CrossSections as CrossSections
from ._cross_sections import cross_sections as cross_sections
from ._design import CellParams as CellParams
from ._design import Design as Design
from ._elements import Disk as Disk
from ._elements import Rod as Rod
from ._elements import Sphere as Sphere
from ._errors import DesignError as DesignError
from ._errors import InvdesignError as InvdesignError
from ._errors import MaterialError as MaterialError
from ._errors import SpecError as SpecError
from ._lattice import Lattice as Lattice
from ._materials import LIBRARY as LIBRARY
from ._materials import material_from_dict as material_from_dict
from ._simulate import Incidence as Incidence
from ._simulate import ModelOptions as ModelOptions
from ._simulate import Orders as Orders
from ._simulate import Problem as Problem
from ._simulate import Response as Response
from ._simulate import forward_function as forward_function
from ._simulate import prepare as prepare
from ._simulate import response_from_params as response_from_params
from ._simulate import simulate as simulate

__version__ = "0.1.0"
