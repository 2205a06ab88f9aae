"""Cell families: an unconstrained parameter vector ↔ ``CellParams`` through smooth bounded transforms.

Each free parameter p with bounds [lo, hi] is reached from an unconstrained variable u by

    p = lo + (hi − lo) · sigmoid(u),

so every value the optimiser can produce lies strictly inside its bounds (no clipping, no projection, a
smooth gradient everywhere). Bounds come from the fab deck (length, width, period with the zero-order
rule) and the cell config (angles); couplings between parameters (gaps, aspect ratio) are left to the
penalties in ``invdesign._penalties``.

Families:

* ``free_rods``: N rods, each with centre (as fractions of the periods, in [−½, ½]), length, width and
  angle free unless listed under ``fixed``; a fixed centre keeps its position as a fraction of the
  periods. The rectangular lattice px × py scales as a whole (``period_scale``) when ``period_free``.
* ``lone_tilt``: one rod at the cell centre; length, width, angle and the lattice scale (4 parameters).
* ``pivot_pair``: an upright rod along y and a swinging rod at an angle, side by side along x at a
  centre distance ``separation_frac`` · px, sharing one width; upright length, swing length, swing angle,
  separation, width and the lattice scale (6 parameters).
"""

import dataclasses

import jax
import jax.numpy as jnp
import numpy as np

from ._design import CellParams, Design
from ._elements import Rod
from ._errors import SpecError
from ._spec import CellSpec, FabDeck, Spec, zero_order_period_limit

#: start fractions are kept this far inside (0, 1) so that the logit stays finite
_EDGE = 1e-3


@dataclasses.dataclass(frozen=True, eq=False)
class Family:
    """A cell family bound to a spec and a deck: free-parameter names, bounds, start and builder."""

    kind: str
    name: str
    names: tuple
    lo: np.ndarray
    hi: np.ndarray
    start: np.ndarray
    fixed: dict
    period0: tuple
    thickness_nm: float
    material: str
    n_rods: int
    period_scale_bounds: tuple

    # -------------------------------------------------------------- transforms
    def values(self, u):
        """Bounded values (n_free,) from unconstrained u (n_free,): lo + (hi − lo)·sigmoid(u)."""
        return jnp.asarray(self.lo) + jnp.asarray(self.hi - self.lo) * jax.nn.sigmoid(u)

    def unconstrained(self, values) -> np.ndarray:
        """Inverse transform of concrete values, with fractions kept inside (_EDGE, 1 − _EDGE)."""
        frac = (np.asarray(values, float) - self.lo) / (self.hi - self.lo)
        frac = np.clip(frac, _EDGE, 1 - _EDGE)
        return np.log(frac) - np.log1p(-frac)

    def all_values(self, u) -> dict:
        v = dict(self.fixed)
        vals = self.values(u)
        for i, k in enumerate(self.names):
            v[k] = vals[i]
        return v

    def params(self, u) -> CellParams:
        """``CellParams`` (nm) from unconstrained u: pure JAX, jit/grad/vmap-safe."""
        return self.build(self.all_values(u))

    def build(self, v: dict) -> CellParams:
        """``CellParams`` from a full dict of named values (free and fixed)."""
        f = lambda x: jnp.asarray(x, dtype=jnp.float64)  # noqa: E731
        s = f(v["period_scale"])
        px, py = self.period0[0] * s, self.period0[1] * s
        t = f(self.thickness_nm)
        rods = []
        if self.kind == "free_rods":
            for i in range(self.n_rods):
                c = jnp.stack([f(v[f"rod{i}.x_frac"]) * px, f(v[f"rod{i}.y_frac"]) * py])
                rods.append(Rod(c, f(v[f"rod{i}.length"]), f(v[f"rod{i}.width"]), t,
                                f(v[f"rod{i}.angle_deg"]), self.material))
        elif self.kind == "lone_tilt":
            rods.append(Rod(jnp.zeros(2), f(v["length"]), f(v["width"]), t, f(v["angle_deg"]), self.material))
        else:  # pivot_pair
            half = 0.5 * f(v["separation_frac"]) * px
            zero = jnp.zeros(())
            w = f(v["width"])
            rods.append(Rod(jnp.stack([-half, zero]), f(v["upright_length"]), w, t, f(90.0), self.material))
            rods.append(Rod(jnp.stack([half, zero]), f(v["swing_length"]), w, t, f(v["swing_angle_deg"]),
                            self.material))
        return CellParams(jnp.stack([px, jnp.zeros(())]), jnp.stack([jnp.zeros(()), py]), tuple(rods))

    def random_starts(self, count: int, rng: np.random.Generator) -> np.ndarray:
        """``count`` unconstrained vectors drawn uniformly in (5 %, 95 %) of each range (seeded)."""
        frac = rng.uniform(0.05, 0.95, size=(count, len(self.names)))
        return np.log(frac) - np.log1p(-frac)

    def describe(self) -> list[dict]:
        """One row per free parameter: name, lo, hi, start."""
        return [{"name": k, "lo": float(a), "hi": float(b), "start": float(c)}
                for k, a, b, c in zip(self.names, self.lo, self.hi, self.start, strict=True)]


def period_scale_bounds(spec: Spec, fab: FabDeck, cell: CellSpec) -> tuple[float, float]:
    """Bounds of the lattice scale s so that s·px and s·py lie within the deck (and the zero-order rule)."""
    px, py = cell.period_nm
    p_hi = fab.period_max_nm if spec.allow_diffraction else min(fab.period_max_nm,
                                                                 zero_order_period_limit(spec) * (1 - 1e-6))
    lo, hi = fab.period_min_nm / min(px, py), p_hi / max(px, py)
    if not lo < hi:
        raise SpecError(f"cell.period_nm {list(cell.period_nm)}: no common scale fits both periods into "
                        f"[{fab.period_min_nm:g}, {p_hi:.4g}] nm; make px and py closer to each other")
    return lo, hi


def make_family(spec: Spec, fab: FabDeck, cell: CellSpec) -> Family:
    """Bind a cell config to a spec and a deck (bounds from the deck, start from the cell)."""
    s_lo, s_hi = period_scale_bounds(spec, fab, cell)
    thickness = cell.thickness_nm if cell.thickness_nm is not None else fab.thickness_nm[0]
    length = (fab.length_min_nm, fab.length_max_nm)
    width = (fab.width_min_nm, fab.width_max_nm)
    angle = tuple(cell.angle_range_deg)
    entries = []  # (name, lo, hi, start, free)
    if cell.family == "free_rods":
        px, py = cell.period_nm
        for i, rd in enumerate(cell.rods):
            c_free = "center" not in rd.fixed
            entries += [
                (f"rod{i}.x_frac", -0.5, 0.5, rd.center[0] / px, c_free),
                (f"rod{i}.y_frac", -0.5, 0.5, rd.center[1] / py, c_free),
                (f"rod{i}.length", *length, rd.length, "length" not in rd.fixed),
                (f"rod{i}.width", *width, rd.width, "width" not in rd.fixed),
                (f"rod{i}.angle_deg", *angle, rd.angle_deg, "angle" not in rd.fixed),
            ]
            if not (-0.5 < rd.center[0] / px < 0.5 and -0.5 < rd.center[1] / py < 0.5):
                raise SpecError(f"cell.rods[{i}].center {list(rd.center)} lies outside the cell "
                                f"(|x| < px/2 = {px / 2:g}, |y| < py/2 = {py / 2:g} nm)")
        n_rods = len(cell.rods)
    else:
        bounds = {"length": length, "upright_length": length, "swing_length": length, "width": width,
                  "angle_deg": angle, "swing_angle_deg": angle, "separation_frac": (0.05, 0.95)}
        for k, v in cell.values.items():
            entries.append((k, *bounds[k], v, k in cell.free))
        n_rods = 1 if cell.family == "lone_tilt" else 2
    entries.append(("period_scale", s_lo, s_hi, 1.0, cell.period_free))
    free = [e for e in entries if e[4]]
    if not free:
        raise SpecError("cell: every parameter is fixed; free at least one (rod 'fixed' lists, 'free', "
                        "'period_free')")
    fixed = {e[0]: float(e[3]) for e in entries if not e[4]}
    return Family(
        kind=cell.family, name=cell.name, names=tuple(e[0] for e in free),
        lo=np.array([e[1] for e in free], float), hi=np.array([e[2] for e in free], float),
        start=np.array([e[3] for e in free], float), fixed=fixed, period0=tuple(cell.period_nm),
        thickness_nm=float(thickness), material=spec.material_key, n_rods=n_rods,
        period_scale_bounds=(s_lo, s_hi))


def design_dict(params: CellParams, spec: Spec, *, name: str = "", notes: str = "",
                provenance: dict | None = None) -> dict:
    """A design-file dictionary for concrete ``CellParams`` in the spec's environment and metal."""
    els = []
    for e in params.elements:
        els.append({"shape": "rod", "material": e.material,
                    "center": [float(x) for x in np.asarray(e.center)], "length": float(e.length),
                    "width": float(e.width), "thickness": float(e.thickness),
                    "angle_deg": float(e.angle_deg)})
    doc = {"format": "invdesign.design", "version": 1, "length_unit": "nm",
           "lattice": {"a1": [float(x) for x in np.asarray(params.a1)],
                       "a2": [float(x) for x in np.asarray(params.a2)]},
           "environment": {"superstrate_index": spec.superstrate_index,
                           "substrate_index": spec.substrate_index},
           "materials": {spec.material_key: dict(spec.material)}, "elements": els}
    if name:
        doc["name"] = name
    if notes:
        doc["notes"] = notes
    if provenance:
        doc["provenance"] = provenance
    return doc


def to_design(params: CellParams, spec: Spec, **kw) -> Design:
    """A validated ``Design`` (raises ``DesignError`` for overlapping rods)."""
    return Design.from_json(design_dict(params, spec, **kw))


def concrete(params: CellParams) -> CellParams:
    """The same parameters as float64 JAX scalars/arrays (one fixed pytree structure for jit caches)."""
    return jax.tree_util.tree_map(lambda x: jnp.asarray(np.asarray(x, dtype=float)), params)
