"""Free-electron (Drude) and Lorentz–Drude permittivity models.

Both models are written in photon energy ħω (eV); the wavelength at the API is converted with
``ev_from_nm``. Time dependence exp(-iωt), so the damping terms carry ``+iγω`` and Im ε ≥ 0 whenever
all strengths and dampings are non-negative.

Drude:          ε(ω) = ε∞ − ωp² / (ω² + iγω)
Lorentz–Drude:  ε(ω) = ε∞ − f0 ωp² / (ω² + iΓ0 ω) + Σ_j f_j ωp² / (ω_j² − ω² − iωΓ_j)

The Lorentz–Drude form (a Drude term for the intraband response plus damped harmonic oscillators for
interband transitions, all sharing one plasma energy ωp and weighted by oscillator strengths f) is the
one used by A. D. Rakić, A. B. Djurišić, J. M. Elazar and M. L. Majewski, "Optical properties of metallic
films for vertical-cavity optoelectronic devices", Appl. Opt. 37, 5271–5283 (1998), eq. (3)–(4), with
ε∞ = 1 there.
"""

import dataclasses
import math

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._errors import MaterialError
from .._units import ev_from_nm
from .base import AbstractMaterial


def _finite(value, what: str, name: str) -> float:
    """Return ``value`` as a float, or raise MaterialError naming the material and the parameter."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise MaterialError(f"material '{name}': {what} must be a number, got {value!r}") from None
    if not math.isfinite(v):
        raise MaterialError(f"material '{name}': {what} must be finite, got {value!r}")
    return v


def _check_range_pair(valid_range_nm, name: str) -> tuple[float, float]:
    """Validate a (lo, hi) wavelength interval in nm with 0 ≤ lo < hi ≤ inf."""
    try:
        lo, hi = (float(x) for x in valid_range_nm)
    except (TypeError, ValueError):
        raise MaterialError(
            f"material '{name}': valid_range_nm must be two numbers [lo, hi] in nm, got {valid_range_nm!r}"
        ) from None
    if not (0.0 <= lo < hi) or math.isnan(hi):
        raise MaterialError(
            f"material '{name}': valid_range_nm must satisfy 0 <= lo < hi (nm), got [{lo:g}, {hi:g}]"
        )
    return (lo, hi)


def _fermi(value, name: str):
    """Validate an optional Fermi velocity (m/s, > 0) or return None."""
    if value is None:
        return None
    v = _finite(value, "fermi_velocity_m_s", name)
    if v <= 0:
        raise MaterialError(f"material '{name}': fermi_velocity_m_s (Fermi velocity, m/s) must be > 0, "
                            f"got {v:g}")
    return v


def drude_term(energy_ev, omega_p_ev, gamma_ev):
    """Drude susceptibility −ωp²/(ω² + iγω), complex128, same shape as ``energy_ev`` (eV)."""
    w = jnp.asarray(energy_ev, dtype=jnp.float64)
    return -(omega_p_ev**2) / (w * w + 1j * gamma_ev * w)


def lorentz_term(energy_ev, strength, omega_p_ev, omega0_ev, gamma_ev):
    """One Lorentz oscillator f ωp²/(ω0² − ω² − iωγ), complex128, same shape as ``energy_ev`` (eV)."""
    w = jnp.asarray(energy_ev, dtype=jnp.float64)
    return strength * omega_p_ev**2 / (omega0_ev**2 - w * w - 1j * gamma_ev * w)


@dataclasses.dataclass(frozen=True, init=False)
class Drude(AbstractMaterial):
    """Free-electron metal: ε = ε∞ − ωp²/(ω² + iγω).

    Args:
      eps_inf: background permittivity ε∞ (real, dimensionless).
      omega_p_ev: plasma energy ħωp in eV, > 0.
      gamma_ev: damping energy ħγ in eV, ≥ 0.
      name: label used in error messages.
      valid_range_nm: closed wavelength interval (lo, hi) in nm where the parameters are meant to be
        used; stored as the field ``valid_range`` (the name ``valid_range_nm`` is the method).
      fermi_velocity_m_s: optional Fermi velocity v_F in m/s (> 0), needed only for size-dependent
        damping (``invdesign._materials.size_damping``); None when unknown.
    """

    eps_inf: float
    omega_p_ev: float
    gamma_ev: float
    name: str
    valid_range: tuple[float, float]
    fermi_velocity_m_s: float | None

    def __init__(self, eps_inf, omega_p_ev, gamma_ev, name="drude", valid_range_nm=(0.0, math.inf),
                 fermi_velocity_m_s=None):
        n = str(name)
        object.__setattr__(self, "fermi_velocity_m_s", _fermi(fermi_velocity_m_s, n))
        object.__setattr__(self, "name", n)
        object.__setattr__(self, "eps_inf", _finite(eps_inf, "eps_inf", n))
        object.__setattr__(self, "omega_p_ev", _finite(omega_p_ev, "omega_p_ev", n))
        object.__setattr__(self, "gamma_ev", _finite(gamma_ev, "gamma_ev", n))
        if self.omega_p_ev <= 0:
            raise MaterialError(f"material '{n}': omega_p_ev (plasma energy, eV) must be > 0, "
                                f"got {self.omega_p_ev:g}")
        if self.gamma_ev < 0:
            raise MaterialError(f"material '{n}': gamma_ev (damping, eV) must be >= 0 for a passive "
                                f"material, got {self.gamma_ev:g}")
        object.__setattr__(self, "valid_range", _check_range_pair(valid_range_nm, n))

    def permittivity(self, wavelength_nm):
        """Relative permittivity, complex128, same shape as ``wavelength_nm`` (nm, float64)."""
        w = ev_from_nm(jnp.asarray(wavelength_nm, dtype=jnp.float64))
        return self.eps_inf + drude_term(w, self.omega_p_ev, self.gamma_ev)

    def free_electron(self) -> tuple[float, float]:
        """Drude weight ωp² in eV² and damping ħγ in eV of the free-electron term."""
        return (self.omega_p_ev**2, self.gamma_ev)

    def valid_range_nm(self) -> tuple[float, float]:
        """Closed wavelength interval (nm) given at construction (default: everything)."""
        return self.valid_range


@dataclasses.dataclass(frozen=True, init=False)
class LorentzDrude(AbstractMaterial):
    """Drude term plus damped Lorentz oscillators sharing one plasma energy.

    ε = ε∞ − f0 ωp²/(ω² + iΓ0 ω) + Σ_j f_j ωp²/(ω_j² − ω² − iωΓ_j), as in Rakić et al.,
    Appl. Opt. 37, 5271 (1998), eq. (3)–(4) (there ε∞ = 1).

    Args:
      eps_inf: background permittivity ε∞ (real, dimensionless).
      omega_p_ev: plasma energy ħωp in eV, > 0.
      gamma_ev: Drude damping ħΓ0 in eV, ≥ 0.
      oscillators: sequence of ``(strength, omega_ev, gamma_ev)`` triples: dimensionless strength
        f_j ≥ 0, resonance energy ħω_j ≥ 0 in eV and damping ħΓ_j ≥ 0 in eV. Stored as a tuple of
        tuples of floats (so the material stays hashable).
      drude_strength: dimensionless weight f0 ≥ 0 of the Drude term.
      name: label used in error messages.
      valid_range_nm: closed wavelength interval (lo, hi) in nm where the parameters are meant to be
        used; stored as the field ``valid_range`` (the name ``valid_range_nm`` is the method).
      fermi_velocity_m_s: optional Fermi velocity v_F in m/s (> 0), needed only for size-dependent
        damping of the Drude part (``invdesign._materials.size_damping``); None when unknown.
    """

    eps_inf: float
    omega_p_ev: float
    gamma_ev: float
    oscillators: tuple[tuple[float, float, float], ...]
    drude_strength: float
    name: str
    valid_range: tuple[float, float]
    fermi_velocity_m_s: float | None

    def __init__(self, eps_inf, omega_p_ev, gamma_ev, oscillators=(), drude_strength=1.0,
                 name="lorentz_drude", valid_range_nm=(0.0, math.inf), fermi_velocity_m_s=None):
        n = str(name)
        object.__setattr__(self, "fermi_velocity_m_s", _fermi(fermi_velocity_m_s, n))
        object.__setattr__(self, "name", n)
        for field, value in (("eps_inf", eps_inf), ("omega_p_ev", omega_p_ev), ("gamma_ev", gamma_ev),
                             ("drude_strength", drude_strength)):
            object.__setattr__(self, field, _finite(value, field, n))
        if self.omega_p_ev <= 0:
            raise MaterialError(f"material '{n}': omega_p_ev (plasma energy, eV) must be > 0, "
                                f"got {self.omega_p_ev:g}")
        if self.gamma_ev < 0:
            raise MaterialError(f"material '{n}': gamma_ev (Drude damping, eV) must be >= 0 for a "
                                f"passive material, got {self.gamma_ev:g}")
        if self.drude_strength < 0:
            raise MaterialError(f"material '{n}': drude_strength must be >= 0, got {self.drude_strength:g}")
        try:
            raw = list(oscillators)
        except TypeError:
            raise MaterialError(f"material '{n}': oscillators must be a list of (strength, omega_ev, "
                                f"gamma_ev) triples, got {oscillators!r}") from None
        oscs = []
        for j, osc in enumerate(raw):
            try:
                f, w0, g = osc
            except (TypeError, ValueError):
                raise MaterialError(f"material '{n}': oscillators[{j}] must be a (strength, omega_ev, "
                                    f"gamma_ev) triple, got {osc!r}") from None
            f = _finite(f, f"oscillators[{j}].strength", n)
            w0 = _finite(w0, f"oscillators[{j}].omega_ev", n)
            g = _finite(g, f"oscillators[{j}].gamma_ev", n)
            for label, v in (("strength", f), ("omega_ev", w0), ("gamma_ev", g)):
                if v < 0:
                    raise MaterialError(f"material '{n}': oscillators[{j}].{label} must be >= 0 for a "
                                        f"passive material, got {v:g}")
            oscs.append((f, w0, g))
        object.__setattr__(self, "oscillators", tuple(oscs))
        object.__setattr__(self, "valid_range", _check_range_pair(valid_range_nm, n))

    def permittivity(self, wavelength_nm):
        """Relative permittivity, complex128, same shape as ``wavelength_nm`` (nm, float64)."""
        w = ev_from_nm(jnp.asarray(wavelength_nm, dtype=jnp.float64))
        eps = self.eps_inf + self.drude_strength * drude_term(w, self.omega_p_ev, self.gamma_ev)
        for f, w0, g in self.oscillators:
            eps = eps + lorentz_term(w, f, self.omega_p_ev, w0, g)
        return eps

    def free_electron(self) -> tuple[float, float]:
        """Drude weight f0 ωp² in eV² and Drude damping ħΓ0 in eV (the interband terms excluded)."""
        return (self.drude_strength * self.omega_p_ev**2, self.gamma_ev)

    def valid_range_nm(self) -> tuple[float, float]:
        """Closed wavelength interval (nm) given at construction (default: everything)."""
        return self.valid_range
