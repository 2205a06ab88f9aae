"""Built-in materials, each with the published source of its parameters.

Every entry of ``LIBRARY`` is a zero-argument function returning a fresh (immutable, hashable) material.
Names carry the first author and year of the source so that a design file states its data provenance;
short aliases (``au``, ``ag``, ``al``, ``sio2``) point to the same functions.

Provenance note for the metals: the Lorentz–Drude parameters below were typed from memory of Table 1
(LD model) of Rakić et al. (1998), not copied from a machine-readable file. They are cross-checked in
``tests/test_materials.py`` by an independently typed copy, by physical features (passivity, the gold
and silver values in the visible, aluminium's interband absorption near 1.5 eV) and by comparison with
a few Johnson & Christy (1972) points. A user with measured data for their own films should prefer a
``table`` material: evaporated or sputtered films differ from these bulk-like fits, particularly below
~20 nm thickness.
"""

import math

from .._units import HC_EV_NM
from .constant import ConstantPermittivity, from_index
from .drude import LorentzDrude
from .sellmeier import Sellmeier
from .size_damping import FERMI_VELOCITY_M_S

#: Fit range of the Rakić et al. (1998) models, photon energy in eV (abstract: "0.1 to 6 eV").
RAKIC1998_RANGE_EV = (0.1, 6.0)
#: The same range as vacuum wavelength in nm, ≈ (206.6, 12398.4).
RAKIC1998_RANGE_NM = (HC_EV_NM / RAKIC1998_RANGE_EV[1], HC_EV_NM / RAKIC1998_RANGE_EV[0])

_RAKIC_CITATION = (
    "A. D. Rakić, A. B. Djurišić, J. M. Elazar and M. L. Majewski, 'Optical properties of metallic "
    "films for vertical-cavity optoelectronic devices', Appl. Opt. 37, 5271-5283 (1998), Table 1 (LD)"
)

#: Rakić et al. (1998) Lorentz–Drude parameters, typed from memory of the paper's Table 1.
#: Per metal: plasma energy ωp (eV), Drude strength f0, Drude damping Γ0 (eV), then oscillators
#: (f_j, ω_j in eV, Γ_j in eV). Note the order inside each triple is (strength, resonance, damping),
#: matching ``LorentzDrude``; the paper's table lists Γ_j before ω_j.
RAKIC1998_LD = {
    "gold": {
        "omega_p_ev": 9.03,
        "f0": 0.760,
        "gamma0_ev": 0.053,
        "oscillators": (
            (0.024, 0.415, 0.241),
            (0.010, 0.830, 0.345),
            (0.071, 2.969, 0.870),
            (0.601, 4.304, 2.494),
            (4.384, 13.32, 2.214),
        ),
    },
    "silver": {
        "omega_p_ev": 9.01,
        "f0": 0.845,
        "gamma0_ev": 0.048,
        "oscillators": (
            (0.065, 0.816, 3.886),
            (0.124, 4.481, 0.452),
            (0.011, 8.185, 0.065),
            (0.840, 9.083, 0.916),
            (5.646, 20.29, 2.419),
        ),
    },
    "aluminium": {
        "omega_p_ev": 14.98,
        "f0": 0.523,
        "gamma0_ev": 0.047,
        "oscillators": (
            (0.227, 0.162, 0.333),
            (0.050, 1.544, 0.312),
            (0.166, 1.808, 1.351),
            (0.030, 3.473, 3.382),
        ),
    },
}


def _rakic(metal: str, name: str) -> LorentzDrude:
    p = RAKIC1998_LD[metal]
    return LorentzDrude(
        eps_inf=1.0,
        omega_p_ev=p["omega_p_ev"],
        gamma_ev=p["gamma0_ev"],
        oscillators=p["oscillators"],
        drude_strength=p["f0"],
        name=name,
        valid_range_nm=RAKIC1998_RANGE_NM,
        fermi_velocity_m_s=FERMI_VELOCITY_M_S[metal],
    )


def gold() -> LorentzDrude:
    """Gold, Lorentz–Drude fit (1 Drude term + 5 oscillators), valid 0.1–6 eV (≈ 207–12398 nm).

    Source: A. D. Rakić, A. B. Djurišić, J. M. Elazar and M. L. Majewski, "Optical properties of
    metallic films for vertical-cavity optoelectronic devices", Appl. Opt. 37, 5271–5283 (1998),
    Table 1, LD model (ε∞ = 1). Parameters typed from memory of that table; see ``RAKIC1998_LD``.
    The paper notes the LD model describes the interband edge of noble metals less well than its
    Brendel–Bormann model, so expect ~10 % deviations from measured data near 2–2.5 eV.
    """
    return _rakic("gold", "gold_rakic1998")


def silver() -> LorentzDrude:
    """Silver, Lorentz–Drude fit (1 Drude term + 5 oscillators), valid 0.1–6 eV (≈ 207–12398 nm).

    Source: Rakić et al., Appl. Opt. 37, 5271–5283 (1998), Table 1, LD model (ε∞ = 1). Parameters
    typed from memory of that table; see ``RAKIC1998_LD``.
    """
    return _rakic("silver", "silver_rakic1998")


def aluminium() -> LorentzDrude:
    """Aluminium, Lorentz–Drude fit (1 Drude term + 4 oscillators), valid 0.1–6 eV (≈ 207–12398 nm).

    Source: Rakić et al., Appl. Opt. 37, 5271–5283 (1998), Table 1, LD model (ε∞ = 1). Parameters
    typed from memory of that table; see ``RAKIC1998_LD``. The oscillators near 1.5–1.8 eV describe
    aluminium's parallel-band interband absorption around 800 nm. Real aluminium carries a few-nm
    native oxide that this bulk model ignores.
    """
    return _rakic("aluminium", "aluminium_rakic1998")


#: Malitson (1965) three-term Sellmeier coefficients for fused silica (λ in µm): B_i and λ_i (µm),
#: C_i = λ_i². Well-known published values (also reproduced in optics handbooks).
MALITSON1965_B = (0.6961663, 0.4079426, 0.8974794)
MALITSON1965_LAMBDA_UM = (0.0684043, 0.1162414, 9.896161)


def fused_silica() -> Sellmeier:
    """Fused silica (amorphous SiO₂) at 20 °C, lossless Sellmeier fit, valid 210–3710 nm.

    Source: I. H. Malitson, "Interspecimen comparison of the refractive index of fused silica",
    J. Opt. Soc. Am. 55, 1205–1209 (1965). n²−1 = Σ B_i λ²/(λ² − λ_i²) with B = (0.6961663, 0.4079426,
    0.8974794) and λ_i = (0.0684043, 0.1162414, 9.896161) µm. Gives n(587.6 nm) ≈ 1.4585.
    """
    return Sellmeier(
        B=MALITSON1965_B,
        C_um2=tuple(l * l for l in MALITSON1965_LAMBDA_UM),
        name="fused_silica_malitson1965",
        valid_range_nm=(210.0, 3710.0),
    )


def glass() -> ConstantPermittivity:
    """Generic glass, non-dispersive n = 1.50, lossless, at all wavelengths.

    Source: none — n = 1.5 is a common-practice round value for soda-lime / borosilicate glass in the
    visible (no citation). Use ``fused_silica`` or a measured table when dispersion matters.
    """
    return from_index(1.5, 0.0, name="glass_n1p50", valid_range_nm=(0.0, math.inf))


#: Registry of built-ins: canonical name -> zero-argument factory. Aliases share the factory.
LIBRARY = {
    "gold_rakic1998": gold,
    "silver_rakic1998": silver,
    "aluminium_rakic1998": aluminium,
    "fused_silica_malitson1965": fused_silica,
    "glass_n1p50": glass,
    "au": gold,
    "ag": silver,
    "al": aluminium,
    "sio2": fused_silica,
}
