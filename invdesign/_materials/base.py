"""The material interface: a relative permittivity ε(λ) as a pure JAX function.

Convention: time dependence exp(-iωt), so a passive (absorbing) material has Im ε ≥ 0.
"""

import abc
import math

import numpy as np

from .._errors import MaterialError


class AbstractMaterial(abc.ABC):
    """A dispersive, isotropic, local material.

    Subclasses implement ``permittivity``; they may override ``valid_range_nm``.
    """

    #: human-readable name used in error messages
    name: str = "material"

    @abc.abstractmethod
    def permittivity(self, wavelength_nm):
        """Relative permittivity ε at vacuum wavelength(s).

        Args:
          wavelength_nm: vacuum wavelength in nm, float64 array of any shape (or a scalar).

        Returns:
          complex128 array of the same shape; Im ε ≥ 0 for a passive material (exp(-iωt)).
        """

    def valid_range_nm(self) -> tuple[float, float]:
        """Closed wavelength interval (nm) where the model or data is meant to be used."""
        return (0.0, math.inf)

    def check_range(self, wavelength_nm, where: str = "") -> None:
        """Raise MaterialError, naming the material, if any wavelength lies outside the valid range."""
        lo, hi = self.valid_range_nm()
        wl = np.asarray(wavelength_nm, dtype=float)
        if wl.size and (wl.min() < lo or wl.max() > hi):
            at = f" (used by {where})" if where else ""
            raise MaterialError(
                f"material '{self.name}'{at} is defined for {lo:g}–{hi:g} nm, but wavelengths "
                f"{wl.min():g}–{wl.max():g} nm were requested; narrow the band or choose a material "
                f"model whose data cover it"
            )
