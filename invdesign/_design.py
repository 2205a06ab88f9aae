"""The design file (format ``invdesign.design``, version 1): a unit cell a user writes by hand, the optimiser
writes out and the layout step reads. JSON, lengths in nm.

    {"format": "invdesign.design", "version": 1, "length_unit": "nm",
     "lattice": {"a1": [x, y], "a2": [x, y]},
     "environment": {"superstrate_index": n, "substrate_index": n},
     "materials": {NAME: {"model": ..., ...}},
     "elements": [{"shape": "rod" | "disk" | "sphere", "material": NAME, "center": [x, y], ...}],
     "name": optional text, "notes": optional text}

Rod keys: length, width, thickness, angle_deg (default 0). Disk: diameter, thickness. Sphere: radius.
Loading validates everything and raises ``DesignError`` listing every problem, each naming the element
and the field. Element centres outside the primitive cell are wrapped into it (periodicity makes this
an identity); overlaps are checked against all periodic images.
"""

import copy
import dataclasses
import json
import math
import pathlib
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np

from ._atomic import atomic_write_text
from ._elements import Disk, Rod, Sphere
from ._errors import DesignError, MaterialError
from ._geometry import pair_gaps, wrap_into_cell
from ._materials import material_from_dict

FORMAT = "invdesign.design"
VERSION = 1
_TOP_KEYS = {"format", "version", "length_unit", "lattice", "environment", "materials", "elements",
             "name", "notes", "provenance"}
_SHAPE_KEYS = {
    "rod": ({"length", "width", "thickness"}, {"angle_deg": 0.0}),
    "disk": ({"diameter", "thickness"}, {}),
    "sphere": ({"radius"}, {}),
}


@partial(jax.tree_util.register_dataclass, data_fields=["a1", "a2", "elements"], meta_fields=[])
@dataclasses.dataclass(frozen=True)
class CellParams:
    """The differentiable parameters of a cell: lattice vectors (2,) in nm and a tuple of elements."""

    a1: jax.Array
    a2: jax.Array
    elements: tuple


@dataclasses.dataclass(frozen=True)
class Design:
    """A validated unit-cell design. Build with ``Design.from_json``; lengths in nm.

    Attributes:
      params: ``CellParams`` pytree (lattice vectors and elements, nm).
      superstrate_index, substrate_index: real refractive indices of the media above and below.
      materials: dict name -> the design-file material entry (kept verbatim for writing back).
      name, notes: free text; provenance: dict recorded by tools that wrote the file.
    """

    params: CellParams
    superstrate_index: float
    substrate_index: float
    materials: dict
    name: str = ""
    notes: str = ""
    provenance: dict = dataclasses.field(default_factory=dict)
    base_dir: str = "."

    # ------------------------------------------------------------------ loading
    @classmethod
    def from_json(cls, source) -> "Design":
        """Load and validate a design from a path (str or Path) or an already-parsed dict."""
        if isinstance(source, dict):
            doc, base = copy.deepcopy(source), pathlib.Path(".")
        else:
            path = pathlib.Path(source)
            if not path.is_file():
                raise DesignError(f"design file '{path}' not found; give the path to a .json design file")
            try:
                doc = json.loads(path.read_text())
            except json.JSONDecodeError as err:
                raise DesignError(f"design file '{path}' is not valid JSON: {err}") from None
            base = path.parent
        return _parse(doc, base)

    def to_dict(self) -> dict:
        """The design as a design-file dictionary (format version 1)."""
        p = self.params
        doc = {
            "format": FORMAT, "version": VERSION, "length_unit": "nm",
            "lattice": {"a1": _floats(p.a1), "a2": _floats(p.a2)},
            "environment": {"superstrate_index": self.superstrate_index,
                            "substrate_index": self.substrate_index},
            "materials": copy.deepcopy(self.materials),
            "elements": [_element_dict(e) for e in p.elements],
        }
        if self.name:
            doc["name"] = self.name
        if self.notes:
            doc["notes"] = self.notes
        if self.provenance:
            doc["provenance"] = copy.deepcopy(self.provenance)
        return doc

    def to_json(self, path) -> None:
        """Write the design file atomically (a crash never leaves a half-written file)."""
        atomic_write_text(path, json.dumps(self.to_dict(), indent=2) + "\n")

    # ------------------------------------------------------------------ helpers
    def with_params(self, params: CellParams, **changes) -> "Design":
        """A copy with new parameters (e.g. from the optimiser), re-validated."""
        new = dataclasses.replace(self, params=params, **changes)
        doc = new.to_dict()
        return _parse(doc, pathlib.Path(self.base_dir))

    def material(self, name: str):
        """The ``AbstractMaterial`` for a material name."""
        return material_from_dict(self.materials[name], name, pathlib.Path(self.base_dir))

    def medium_index(self) -> float:
        """Index of the homogeneous medium the fast model embeds the cell in.

        Rule: the index of the mean permittivity, n = sqrt((n_sup² + n_sub²)/2) — the standard
        effective-medium choice for particles on an interface; exact when both are equal. A rigorous
        substrate replaces it in a later model.
        """
        return math.sqrt(0.5 * (self.superstrate_index**2 + self.substrate_index**2))

    @property
    def elements(self):
        return self.params.elements


def _floats(a):
    return [float(v) for v in np.asarray(a)]


def _element_dict(e) -> dict:
    d = {"shape": e.shape, "material": e.material, "center": _floats(e.center)}
    if e.shape == "rod":
        d.update(length=float(e.length), width=float(e.width), thickness=float(e.thickness),
                 angle_deg=float(e.angle_deg))
    elif e.shape == "disk":
        d.update(diameter=float(e.diameter), thickness=float(e.thickness))
    else:
        d.update(radius=float(e.radius))
    return d


# ---------------------------------------------------------------------------- parsing & validation
def _number(value, where: str, problems: list, *, positive=False, minimum=None):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        problems.append(f"{where} must be a finite number, got {value!r}")
        return None
    if positive and value <= 0:
        problems.append(f"{where} must be positive (nm), got {value}")
        return None
    if minimum is not None and value < minimum:
        problems.append(f"{where} must be at least {minimum}, got {value}")
        return None
    return float(value)


def _vector2(value, where: str, problems: list):
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        problems.append(f"{where} must be a list of two numbers [x, y] in nm, got {value!r}")
        return None
    xs = [_number(v, f"{where}[{i}]", problems) for i, v in enumerate(value)]
    return None if None in xs else xs


def _parse(doc, base: pathlib.Path) -> Design:
    if not isinstance(doc, dict):
        raise DesignError("a design must be a JSON object with keys 'lattice', 'materials', 'elements', ...")
    problems: list[str] = []
    if doc.get("format", FORMAT) != FORMAT:
        problems.append(f"'format' must be \"{FORMAT}\", got {doc.get('format')!r}")
    if doc.get("version", VERSION) != VERSION:
        problems.append(f"'version' {doc.get('version')!r} is not supported; this invdesign reads version "
                        f"{VERSION}")
    if doc.get("length_unit", "nm") != "nm":
        problems.append(f"'length_unit' must be \"nm\", got {doc.get('length_unit')!r}")
    for key in sorted(set(doc) - _TOP_KEYS):
        problems.append(f"unknown top-level key '{key}' (known: {', '.join(sorted(_TOP_KEYS))})")
    for key in ("lattice", "environment", "materials", "elements"):
        if key not in doc:
            problems.append(f"missing required key '{key}'")
    if problems:
        raise DesignError(_report(problems))

    lat = doc["lattice"] if isinstance(doc["lattice"], dict) else {}
    if not isinstance(doc["lattice"], dict):
        problems.append("'lattice' must be an object {\"a1\": [x, y], \"a2\": [x, y]}")
    a1 = _vector2(lat.get("a1"), "lattice.a1", problems)
    a2 = _vector2(lat.get("a2"), "lattice.a2", problems)
    if a1 and a2:
        area = a1[0] * a2[1] - a1[1] * a2[0]
        if abs(area) < 1e-6 * (math.hypot(*a1) * math.hypot(*a2) + 1e-300):
            problems.append("lattice.a1 and lattice.a2 are parallel (zero cell area); give two independent "
                            "vectors")

    env = doc["environment"] if isinstance(doc["environment"], dict) else {}
    n_sup = _number(env.get("superstrate_index"), "environment.superstrate_index", problems, minimum=1.0)
    n_sub = _number(env.get("substrate_index"), "environment.substrate_index", problems, minimum=1.0)

    mats = doc["materials"]
    if not isinstance(mats, dict) or not mats:
        problems.append("'materials' must be a non-empty object {name: {\"model\": ...}}")
        mats = {}
    for name, entry in mats.items():
        try:
            material_from_dict(entry, name, base)
        except MaterialError as err:
            problems.append(str(err))

    elements = []
    raw = doc["elements"]
    if not isinstance(raw, list) or not raw:
        problems.append("'elements' must be a non-empty list of element objects")
        raw = []
    for i, el in enumerate(raw):
        e = _parse_element(el, i, mats, problems)
        if e is not None:
            elements.append(e)

    if not problems and a1 and a2:
        elements = [dataclasses.replace(e, center=jnp.asarray(wrap_into_cell(e.center, a1, a2)))
                    for e in elements]
        for i, j, gap in pair_gaps(elements, a1, a2):
            if gap < 0:
                what = (f"element {i} ({elements[i].shape}) overlaps its own periodic image: it does not fit "
                        f"in the cell; shrink it or enlarge the lattice") if i == j else (
                        f"elements {i} ({elements[i].shape}) and {j} ({elements[j].shape}) overlap (directly "
                        f"or across the periodic boundary); move them apart or shrink them")
                problems.append(what)
    if problems:
        raise DesignError(_report(problems))
    params = CellParams(jnp.asarray(a1), jnp.asarray(a2), tuple(elements))
    return Design(params=params, superstrate_index=n_sup, substrate_index=n_sub,
                  materials=copy.deepcopy(mats), name=str(doc.get("name", "")),
                  notes=str(doc.get("notes", "")), provenance=dict(doc.get("provenance", {}) or {}),
                  base_dir=str(base))


def _parse_element(el, i: int, mats: dict, problems: list):
    where = f"elements[{i}]"
    if not isinstance(el, dict):
        problems.append(f"{where} must be an object, got {el!r}")
        return None
    shape = el.get("shape")
    if shape not in _SHAPE_KEYS:
        problems.append(f"{where}.shape must be one of {', '.join(_SHAPE_KEYS)}, got {shape!r}")
        return None
    required, optional = _SHAPE_KEYS[shape]
    allowed = required | set(optional) | {"shape", "material", "center"}
    for key in sorted(set(el) - allowed):
        problems.append(f"{where} ({shape}): unknown key '{key}' (allowed: {', '.join(sorted(allowed))})")
    for key in sorted(required - set(el)):
        problems.append(f"{where} ({shape}): missing '{key}' (nm)")
    mat = el.get("material")
    if mat not in mats:
        problems.append(f"{where}.material {mat!r} is not defined under 'materials' "
                        f"(defined: {', '.join(map(str, mats)) or 'none'})")
    center = _vector2(el.get("center"), f"{where}.center", problems)
    vals = {k: _number(el[k], f"{where}.{k}", problems, positive=True) for k in required if k in el}
    for k, default in optional.items():
        vals[k] = _number(el.get(k, default), f"{where}.{k}", problems)
    if center is None or None in vals.values() or set(required) - set(vals) or mat not in mats:
        return None
    c = jnp.asarray(center)
    if shape == "rod":
        return Rod(c, vals["length"], vals["width"], vals["thickness"], vals["angle_deg"], mat)
    if shape == "disk":
        return Disk(c, vals["diameter"], vals["thickness"], mat)
    return Sphere(c, vals["radius"], mat)


def _report(problems: list) -> str:
    head = "the design is invalid:" if len(problems) > 1 else "the design is invalid: "
    if len(problems) == 1:
        return head + problems[0]
    return head + "".join(f"\n  - {p}" for p in problems)
