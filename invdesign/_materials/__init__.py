"""Optical materials: permittivity models, measured tables, the built-in library and the design-file factory.

Design-file material entries (one JSON object per material; ``name`` is the key it is stored under):

    {"model": "drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.07}
    {"model": "lorentz_drude", "eps_inf": 1.0, "omega_p_ev": 9.0, "gamma_ev": 0.05,
     "drude_strength": 0.8, "oscillators": [{"strength": 0.1, "omega_ev": 3.0, "gamma_ev": 0.9}]}
    {"model": "constant", "eps_real": 2.25, "eps_imag": 0.0}    or    {"model": "constant", "n": 1.5, "k": 0}
    {"model": "table", "path": "my_film_nk.csv"}                (relative to the design file's folder)
    {"model": "library", "name": "gold_rakic1998"}

The analytic models (drude, lorentz_drude, constant) also accept an optional
``"valid_range_nm": [lo, hi]``; drude and lorentz_drude also accept an optional
``"fermi_velocity_m_s"`` (Fermi velocity in m/s, used only by size-dependent damping).
Every mistake raises MaterialError naming the material and the field.
"""

import math
import pathlib

from .._errors import MaterialError
from .base import AbstractMaterial as AbstractMaterial
from .constant import ConstantPermittivity as ConstantPermittivity
from .constant import from_index as from_index
from .drude import Drude as Drude
from .drude import LorentzDrude as LorentzDrude
from .library import LIBRARY as LIBRARY
from .library import aluminium as aluminium
from .library import fused_silica as fused_silica
from .library import glass as glass
from .library import gold as gold
from .library import silver as silver
from .sellmeier import Sellmeier as Sellmeier
from .table import TabulatedNK as TabulatedNK

_RANGE = "valid_range_nm"
_VF = "fermi_velocity_m_s"

#: per model: (required keys, optional keys), excluding "model"
_SCHEMA = {
    "drude": ({"eps_inf", "omega_p_ev", "gamma_ev"}, {_RANGE, _VF}),
    "lorentz_drude": ({"eps_inf", "omega_p_ev", "gamma_ev", "oscillators"}, {"drude_strength", _RANGE, _VF}),
    "constant": (set(), {"eps_real", "eps_imag", "n", "k", _RANGE}),
    "table": ({"path"}, set()),
    "library": ({"name"}, set()),
}
_OSC_KEYS = ("strength", "omega_ev", "gamma_ev")

#: what each numeric field means, for error messages
_HINT = {
    "eps_inf": "background permittivity ε∞ (dimensionless, usually 1–10)",
    "omega_p_ev": "plasma energy ħωp in eV (> 0, ~9 eV for gold)",
    "gamma_ev": "damping energy ħγ in eV (>= 0, ~0.05 eV for gold)",
    "drude_strength": "weight f0 of the Drude term (>= 0, default 1)",
    "eps_real": "real part of ε (dimensionless)",
    "eps_imag": "imaginary part of ε (>= 0 for a passive medium)",
    "n": "refractive index (> 0)",
    "k": "extinction coefficient (>= 0)",
    "strength": "oscillator strength f_j (>= 0)",
    "omega_ev": "oscillator resonance energy in eV (>= 0)",
    _VF: "Fermi velocity in m/s (> 0, ~1.4e6 for gold)",
}


def _err(name: str, field: str, problem: str, fix: str) -> MaterialError:
    where = f"material '{name}'" + (f", field '{field}'" if field else "")
    return MaterialError(f"{where}: {problem}; {fix}")


def _number(d: dict, key: str, name: str, where: str = "") -> float:
    """Fetch a finite real number (int or float, not bool) from ``d[key]``."""
    field = f"{where}{key}"
    v = d[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise _err(name, field, f"expected a number, got {type(v).__name__} {v!r}",
                   f"give the {_HINT.get(key, key)} as a plain number")
    v = float(v)
    if not math.isfinite(v):
        raise _err(name, field, f"expected a finite number, got {v!r}", f"give the {_HINT.get(key, key)}")
    return v


def _check_keys(d: dict, required: set, optional: set, name: str, what: str, where: str = "") -> None:
    missing = sorted(required - d.keys())
    extra = sorted(set(d) - required - optional)
    allowed = ", ".join(sorted(required | optional)) or "(none)"
    if missing:
        raise _err(name, where + missing[0], f"{what} needs key(s) {', '.join(missing)}, which are missing",
                   f"add them; allowed keys are: {allowed}")
    if extra:
        raise _err(name, where + extra[0], f"{what} does not take key(s) {', '.join(map(repr, extra))}",
                   f"remove them or fix the spelling; allowed keys are: {allowed}")


def _range(d: dict, name: str) -> tuple[float, float]:
    if _RANGE not in d:
        return (0.0, math.inf)
    r = d[_RANGE]
    ok = (isinstance(r, (list, tuple)) and len(r) == 2
          and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in r))
    if not ok or not (0 <= r[0] < r[1]):
        raise _err(name, _RANGE, f"expected [lo, hi] in nm with 0 <= lo < hi, got {r!r}",
                   "give two numbers, e.g. [400, 900]")
    return (float(r[0]), float(r[1]))


def _positive(v: float, name: str, field: str) -> None:
    if v <= 0:
        raise _err(name, field, f"must be > 0, got {v:g}", f"give the {_HINT[field.split('.')[-1]]}")


def _nonnegative(v: float, name: str, field: str) -> None:
    if v < 0:
        raise _err(name, field, f"must be >= 0 (a negative value would make the material amplify light), "
                                f"got {v:g}", f"give the {_HINT[field.split('.')[-1]]}")


def _oscillators(d: dict, name: str) -> list[tuple[float, float, float]]:
    raw = d["oscillators"]
    if not isinstance(raw, list):
        raise _err(name, "oscillators", f"expected a list, got {type(raw).__name__}",
                   'give a list of {"strength": ..., "omega_ev": ..., "gamma_ev": ...} objects (may be [])')
    out = []
    for j, osc in enumerate(raw):
        where = f"oscillators[{j}]."
        if not isinstance(osc, dict):
            raise _err(name, f"oscillators[{j}]", f"expected an object, got {type(osc).__name__} {osc!r}",
                       'write it as {"strength": ..., "omega_ev": ..., "gamma_ev": ...}')
        _check_keys(osc, set(_OSC_KEYS), set(), name, "an oscillator", where)
        vals = tuple(_number(osc, key, name, where) for key in _OSC_KEYS)
        for key, v in zip(_OSC_KEYS, vals, strict=True):
            _nonnegative(v, name, where + key)
        out.append(vals)
    return out


def _constant(d: dict, name: str) -> ConstantPermittivity:
    has_eps = {"eps_real", "eps_imag"} & d.keys()
    has_nk = {"n", "k"} & d.keys()
    if has_eps and has_nk:
        field = sorted(has_nk)[0]
        raise _err(name, field, "a constant material is given either by eps_real/eps_imag or by n/k, "
                   "not both", "keep one pair")
    if not has_eps and not has_nk:
        raise _err(name, "eps_real", "a constant material needs eps_real (and optionally eps_imag) or n "
                   "(and optionally k)", 'add e.g. "n": 1.5')
    if has_nk:
        if "n" not in d:
            raise _err(name, "n", "k was given without n", 'add the refractive index, e.g. "n": 1.5')
        n = _number(d, "n", name)
        k = _number(d, "k", name) if "k" in d else 0.0
        _positive(n, name, "n")
        _nonnegative(k, name, "k")
        return from_index(n, k, name=name, valid_range_nm=_range(d, name))
    if "eps_real" not in d:
        raise _err(name, "eps_real", "eps_imag was given without eps_real", 'add e.g. "eps_real": 2.25')
    er = _number(d, "eps_real", name)
    ei = _number(d, "eps_imag", name) if "eps_imag" in d else 0.0
    _nonnegative(ei, name, "eps_imag")
    return ConstantPermittivity(er, ei, name=name, valid_range_nm=_range(d, name))


def _library(d: dict, name: str) -> AbstractMaterial:
    key = d["name"]
    known = ", ".join(sorted(LIBRARY))
    if not isinstance(key, str):
        raise _err(name, "name", f"expected a string, got {type(key).__name__} {key!r}",
                   f"use one of: {known}")
    factory = LIBRARY.get(key.strip().lower())
    if factory is None:
        close = [k for k in sorted(LIBRARY) if k.startswith(key.strip().lower()[:2])] if key.strip() else []
        hint = f" (did you mean {' or '.join(repr(c) for c in close)}?)" if close else ""
        raise _err(name, "name", f"'{key}' is not a built-in material{hint}", f"use one of: {known}")
    return factory()


def _table(d: dict, name: str, base_dir: pathlib.Path | None) -> TabulatedNK:
    p = d["path"]
    if not isinstance(p, str) or not p.strip():
        raise _err(name, "path", f"expected a file path string, got {p!r}",
                   'give the CSV file name, e.g. "my_film_nk.csv"')
    path = pathlib.Path(p)
    if not path.is_absolute() and base_dir is not None:
        path = pathlib.Path(base_dir) / path
    try:
        return TabulatedNK(path, name=name)
    except MaterialError as exc:
        raise MaterialError(f"material '{name}', field 'path': {exc}") from None


def material_from_dict(d: dict, name: str, base_dir: pathlib.Path | None = None) -> AbstractMaterial:
    """Build a material from one design-file entry.

    Args:
      d: the entry, a dict with a ``"model"`` key (see the module docstring for each model's keys).
      name: the material's name in the design file; used as the material's ``name`` and in messages.
      base_dir: folder that a relative ``table`` path is taken from (normally the design file's
        folder); None means the current working directory.

    Returns:
      An AbstractMaterial.

    Raises:
      MaterialError naming the material and the offending field, with how to fix it.
    """
    name = str(name)
    models = ", ".join(sorted(_SCHEMA))
    if not isinstance(d, dict):
        raise _err(name, "", f"expected an object with a 'model' key, got {type(d).__name__} {d!r}",
                   f'write e.g. {{"model": "library", "name": "gold_rakic1998"}}; models: {models}')
    if "model" not in d:
        raise _err(name, "model", "the entry has no 'model' key", f"add one of: {models}")
    model = d["model"]
    if not isinstance(model, str) or model not in _SCHEMA:
        raise _err(name, "model", f"unknown model {model!r}", f"use one of: {models}")
    body = {k: v for k, v in d.items() if k != "model"}
    required, optional = _SCHEMA[model]
    _check_keys(body, required, optional, name, f"model '{model}'")

    if model == "library":
        return _library(body, name)
    if model == "table":
        return _table(body, name, base_dir)
    if model == "constant":
        return _constant(body, name)

    eps_inf = _number(body, "eps_inf", name)
    omega_p = _number(body, "omega_p_ev", name)
    gamma = _number(body, "gamma_ev", name)
    _positive(omega_p, name, "omega_p_ev")
    _nonnegative(gamma, name, "gamma_ev")
    vrange = _range(body, name)
    v_f = _number(body, _VF, name) if _VF in body else None
    if v_f is not None:
        _positive(v_f, name, _VF)
    if model == "drude":
        return Drude(eps_inf, omega_p, gamma, name=name, valid_range_nm=vrange, fermi_velocity_m_s=v_f)
    f0 = _number(body, "drude_strength", name) if "drude_strength" in body else 1.0
    _nonnegative(f0, name, "drude_strength")
    return LorentzDrude(eps_inf, omega_p, gamma, oscillators=_oscillators(body, name), drude_strength=f0,
                        name=name, valid_range_nm=vrange, fermi_velocity_m_s=v_f)


__all__ = [
    "LIBRARY",
    "AbstractMaterial",
    "ConstantPermittivity",
    "Drude",
    "LorentzDrude",
    "Sellmeier",
    "TabulatedNK",
    "aluminium",
    "from_index",
    "fused_silica",
    "glass",
    "gold",
    "material_from_dict",
    "silver",
]
