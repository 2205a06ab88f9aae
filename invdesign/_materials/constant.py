"""A non-dispersive medium: the same complex permittivity at every wavelength.

Useful for substrates and superstrates quoted by a single refractive index, and for tests.
"""

import cmath
import dataclasses
import math

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._errors import MaterialError
from .base import AbstractMaterial
from .drude import _check_range_pair, _finite


@dataclasses.dataclass(frozen=True, init=False)
class ConstantPermittivity(AbstractMaterial):
    """ε = eps_real + i·eps_imag at all wavelengths.

    Args:
      eps_real: real part of the relative permittivity (dimensionless, any sign).
      eps_imag: imaginary part, ≥ 0 (passive medium, exp(-iωt) convention).
      name: label used in error messages.
      valid_range_nm: closed wavelength interval (lo, hi) in nm where the value is meant to be used;
        stored as the field ``valid_range``.
    """

    eps_real: float
    eps_imag: float
    name: str
    valid_range: tuple[float, float]

    def __init__(self, eps_real, eps_imag=0.0, name="constant", valid_range_nm=(0.0, math.inf)):
        n = str(name)
        object.__setattr__(self, "name", n)
        object.__setattr__(self, "eps_real", _finite(eps_real, "eps_real", n))
        object.__setattr__(self, "eps_imag", _finite(eps_imag, "eps_imag", n))
        if self.eps_imag < 0:
            raise MaterialError(f"material '{n}': eps_imag must be >= 0 for a passive medium "
                                f"(exp(-iωt) convention), got {self.eps_imag:g}")
        object.__setattr__(self, "valid_range", _check_range_pair(valid_range_nm, n))

    def permittivity(self, wavelength_nm):
        """Relative permittivity, complex128, same shape as ``wavelength_nm`` (nm, float64).

        The result depends on the wavelength only through its shape, so its derivative is zero.
        """
        wl = jnp.asarray(wavelength_nm, dtype=jnp.float64)
        return jnp.zeros_like(wl) * wl + (self.eps_real + 1j * self.eps_imag)

    def valid_range_nm(self) -> tuple[float, float]:
        """Closed wavelength interval (nm) given at construction (default: everything)."""
        return self.valid_range

    def index(self) -> complex:
        """Complex refractive index n + ik = √ε on the principal branch (n ≥ 0, k ≥ 0 when passive)."""
        return cmath.sqrt(complex(self.eps_real, self.eps_imag))


def from_index(n, k=0.0, name="constant", valid_range_nm=(0.0, math.inf)) -> ConstantPermittivity:
    """Constant medium of complex refractive index n + ik, so ε = (n + ik)² = n² − k² + 2nki.

    Args:
      n: real refractive index, > 0.
      k: extinction coefficient, ≥ 0.
      name: label used in error messages.
      valid_range_nm: closed wavelength interval (lo, hi) in nm.

    Returns:
      ConstantPermittivity with eps_real = n² − k², eps_imag = 2nk.
    """
    label = str(name)
    n = _finite(n, "n", label)
    k = _finite(k, "k", label)
    if n <= 0:
        raise MaterialError(f"material '{label}': refractive index n must be > 0, got {n:g}")
    if k < 0:
        raise MaterialError(f"material '{label}': extinction coefficient k must be >= 0 for a passive "
                            f"medium, got {k:g}")
    return ConstantPermittivity(n * n - k * k, 2.0 * n * k, name=label, valid_range_nm=valid_range_nm)
