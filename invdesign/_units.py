"""The one place for physical constants and unit conversions.

Conventions, everywhere in invdesign:
  * Inside the physics: SI (lengths in metres, angular frequency in rad/s, wavenumbers in 1/m).
  * At the edges (design files, configs, CLI, outputs): lengths in nm, photon energies in eV.
  * Time dependence exp(-i ω t); an outgoing spherical wave is exp(+i k r)/r; passive media have
    Im ε > 0.
  * Polarizabilities are *volume* polarizabilities α in m³ with p = ε0 ε_m α E_loc, so that the
    scattered field of a dipole is E = k² G p / (ε0 ε_m) with G the free dyadic Green's tensor in 1/m.
"""

import math

#: metres per nanometre
NM = 1e-9
#: speed of light in vacuum, m/s (exact, SI 2019)
C0 = 299_792_458.0
#: reduced Planck constant in eV·s (CODATA 2018)
HBAR_EV_S = 6.582_119_569e-16
#: h·c in eV·nm, so that E[eV] = HC_EV_NM / λ[nm]
HC_EV_NM = 2.0 * math.pi * HBAR_EV_S * C0 / NM


def ev_from_nm(wavelength_nm):
    """Photon energy in eV for a vacuum wavelength in nm (array-friendly)."""
    return HC_EV_NM / wavelength_nm


def nm_from_ev(energy_ev):
    """Vacuum wavelength in nm for a photon energy in eV (array-friendly)."""
    return HC_EV_NM / energy_ev


def k0_per_m(wavelength_nm):
    """Vacuum wavenumber 2π/λ in 1/m for a vacuum wavelength in nm (array-friendly)."""
    return 2.0 * math.pi / (wavelength_nm * NM)
