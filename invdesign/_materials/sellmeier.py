"""Sellmeier dispersion for transparent dielectrics: n²(λ) = 1 + Σ_i B_i λ² / (λ² − C_i), λ in µm.

Lossless: the imaginary part of ε is exactly zero. The formula has poles at λ = √C_i, so use it only
inside the range its coefficients were fitted over.
"""

import dataclasses
import math

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._errors import MaterialError
from .base import AbstractMaterial
from .drude import _check_range_pair, _finite


@dataclasses.dataclass(frozen=True, init=False)
class Sellmeier(AbstractMaterial):
    """Generic Sellmeier medium.

    Args:
      B: dimensionless oscillator weights B_i (sequence of floats).
      C_um2: resonance terms C_i in µm² (same length as ``B``; C_i = λ_i² for resonance wavelength λ_i).
      name: label used in error messages.
      valid_range_nm: closed wavelength interval (lo, hi) in nm over which the coefficients were fitted;
        stored as the field ``valid_range``.
    """

    B: tuple[float, ...]
    C_um2: tuple[float, ...]
    name: str
    valid_range: tuple[float, float]

    def __init__(self, B, C_um2, name="sellmeier", valid_range_nm=(0.0, math.inf)):
        label = str(name)
        object.__setattr__(self, "name", label)
        try:
            b = tuple(_finite(x, f"B[{i}]", label) for i, x in enumerate(B))
            c = tuple(_finite(x, f"C_um2[{i}]", label) for i, x in enumerate(C_um2))
        except TypeError:
            raise MaterialError(f"material '{label}': B and C_um2 must be lists of numbers, "
                                f"got B={B!r}, C_um2={C_um2!r}") from None
        if len(b) == 0 or len(b) != len(c):
            raise MaterialError(f"material '{label}': B and C_um2 must be non-empty and of equal length, "
                                f"got {len(b)} and {len(c)} terms")
        if any(x < 0 for x in c):
            raise MaterialError(f"material '{label}': every C_um2 must be >= 0 (squared resonance "
                                f"wavelength in µm²), got {c}")
        object.__setattr__(self, "B", b)
        object.__setattr__(self, "C_um2", c)
        object.__setattr__(self, "valid_range", _check_range_pair(valid_range_nm, label))

    def index(self, wavelength_nm):
        """Real refractive index n(λ), float64, same shape as ``wavelength_nm`` (nm)."""
        return jnp.sqrt(self.permittivity(wavelength_nm).real)

    def permittivity(self, wavelength_nm):
        """Relative permittivity n², complex128 (zero imaginary part), same shape as ``wavelength_nm``."""
        lam2 = (jnp.asarray(wavelength_nm, dtype=jnp.float64) * 1e-3) ** 2
        n2 = jnp.ones_like(lam2)
        for b, c in zip(self.B, self.C_um2, strict=True):
            n2 = n2 + b * lam2 / (lam2 - c)
        return n2.astype(jnp.complex128)

    def valid_range_nm(self) -> tuple[float, float]:
        """Closed wavelength interval (nm) given at construction."""
        return self.valid_range
