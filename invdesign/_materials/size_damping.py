"""Size-dependent (surface-scattering) damping of the free electrons in small metal particles.

Contract: pure JAX functions, differentiable in the particle's effective length. When the particle is
small compared with the electrons' bulk mean free path, conduction electrons also scatter off the
surface, which raises the collision rate of the free-electron (Drude) term:

    γ(L_eff) = γ_bulk + A · v_F / L_eff,        ħΔγ [eV] = A · ħ[eV·s] · v_F[m/s] / L_eff[m]

(U. Kreibig and M. Vollmer, *Optical Properties of Metal Clusters*, Springer 1995, ch. 2). ``A`` is a
dimensionless factor of order one that depends on how electrons scatter at the surface; ``v_F`` the
Fermi velocity; ``L_eff`` the mean free path allowed by the geometry, taken as L_eff = 4V/S (volume over
surface area) following E. A. Coronado and G. C. Schatz, J. Chem. Phys. 119, 3926 (2003), who derive it
for convex particles by a geometric-probability argument (sphere: L_eff = 4R/3). With that choice of
L_eff their diffuse-scattering result is A = 1 (stated from memory), which is the default here; fits to
measured spectra in the literature spread over roughly 0.1–2, so treat A as an uncertain parameter.

Only the free-electron term changes; interband (Lorentz) terms do not:
  * Drude  ε = ε∞ − ωp²/(ω² + iγω): γ → γ + Δγ.
  * Lorentz–Drude (Rakić et al. 1998 form) ε = ε∞ − f0 ωp²/(ω² + iΓ0 ω) + Σ_j …: Γ0 → Γ0 + Δγ in the
    Drude part f0 ωp² only.
The change is returned as Δε so it can be added to a precomputed bulk ε(λ); it is written in closed form,
Δε = w · iωΔγ / ((ω² + iωγ)(ω² + iω(γ + Δγ))) with w the Drude weight, so there is no cancellation when
Δγ is small, and Im Δε ≥ 0 for Δγ ≥ 0 keeps the material passive. Time dependence exp(−iωt).
"""

import jax.numpy as jnp

from .. import _jaxsetup  # noqa: F401
from .._errors import MaterialError
from .._units import HBAR_EV_S, NM, ev_from_nm

#: Free-electron Fermi velocities in m/s, from Ashcroft & Mermin, *Solid State Physics* (1976), Table 2.1
#: (values stated from memory, not re-checked against the printed table): Au 1.40e6, Ag 1.39e6, Al 2.03e6.
FERMI_VELOCITY_M_S = {"gold": 1.40e6, "silver": 1.39e6, "aluminium": 2.03e6}

#: Default surface-scattering factor A (dimensionless); see the module docstring.
DEFAULT_COEFFICIENT = 1.0


def collision_increase_ev(l_eff_nm, fermi_velocity_m_s, coefficient=DEFAULT_COEFFICIENT):
    """Extra damping energy ħΔγ = A ħ v_F / L_eff in eV.

    Args:
      l_eff_nm: effective length L_eff in nm, > 0 (float64 scalar or array; may be traced).
      fermi_velocity_m_s: Fermi velocity v_F in m/s, ≥ 0.
      coefficient: dimensionless factor A ≥ 0.

    Returns:
      float64 array broadcast from the inputs, eV.
    """
    l_m = jnp.asarray(l_eff_nm, dtype=jnp.float64) * NM
    return coefficient * HBAR_EV_S * fermi_velocity_m_s / l_m


def drude_size_correction(energy_ev, weight_ev2, gamma_ev, delta_gamma_ev):
    """Δε of a Drude term w/(ω² + iγω) when its damping rises from γ to γ + Δγ.

    Args:
      energy_ev: photon energy ħω in eV, float64 array (n_wl,) or scalar, > 0.
      weight_ev2: Drude weight w = f0 (ħωp)² in eV² (ωp² for a plain Drude metal), ≥ 0.
      gamma_ev: bulk damping ħγ in eV, ≥ 0.
      delta_gamma_ev: extra damping ħΔγ in eV, ≥ 0 (scalar; may be traced).

    Returns:
      complex128 Δε, same shape as ``energy_ev``; ε_small = ε_bulk + Δε.
    """
    w = jnp.asarray(energy_ev, dtype=jnp.float64)
    bulk = w * w + 1j * gamma_ev * w
    small = bulk + 1j * delta_gamma_ev * w
    return weight_ev2 * 1j * w * delta_gamma_ev / (bulk * small)


def free_electron_parameters(material) -> tuple[float, float, float] | None:
    """``(weight_ev2, gamma_ev, fermi_velocity_m_s)`` of a material's Drude term, or None if it has none.

    Drude and Lorentz–Drude materials must carry a Fermi velocity (the built-in metals do); constant and
    Sellmeier materials have no free electrons and return None; a tabulated material cannot be split
    into free-electron and interband parts and is refused.

    Raises:
      MaterialError naming the material and what to change.
    """
    from .drude import Drude, LorentzDrude
    from .table import TabulatedNK

    if isinstance(material, (Drude, LorentzDrude)):
        if material.fermi_velocity_m_s is None:
            raise MaterialError(
                f"material '{material.name}', field 'fermi_velocity_m_s': size-dependent damping needs the "
                f"metal's Fermi velocity; add it (m/s, e.g. 1.40e6 for gold) or turn model.size_damping off")
        weight, gamma = material.free_electron()
        return (weight, gamma, material.fermi_velocity_m_s)
    if isinstance(material, TabulatedNK):
        raise MaterialError(
            f"material '{material.name}': size-dependent damping cannot be applied to a tabulated n, k "
            f"material (its free-electron part is unknown); use a drude or lorentz_drude model with "
            f"fermi_velocity_m_s, or turn model.size_damping off")
    return None


def size_damped_permittivity(material, wavelength_nm, l_eff_nm, coefficient=DEFAULT_COEFFICIENT):
    """ε(λ) of a small particle of effective length L_eff made of ``material``.

    Args:
      material: an ``AbstractMaterial`` (see ``free_electron_parameters`` for which kinds are accepted).
      wavelength_nm: vacuum wavelength(s) in nm, float64.
      l_eff_nm: effective length L_eff = 4V/S in nm (``invdesign._elements.effective_length``); may be
        traced, and ``inf`` gives the bulk ε.
      coefficient: surface-scattering factor A, dimensionless.

    Returns:
      complex128 ε, same shape as ``wavelength_nm``; Im ε ≥ the bulk value.
    """
    wl = jnp.asarray(wavelength_nm, dtype=jnp.float64)
    eps = material.permittivity(wl)
    params = free_electron_parameters(material)
    if params is None:
        return eps
    weight, gamma, v_f = params
    dg = collision_increase_ev(l_eff_nm, v_f, coefficient)
    return eps + drude_size_correction(ev_from_nm(wl), weight, gamma, dg)
