"""From a design and a fab deck to a layout plan: every shape, layer, count and rule violation, decided
before anything is written (``plan_layout``), and back again (``rebuild_design``).

Contract. ``plan_layout(design, fab, options)`` validates the pairing (only rods and disks are flat; every
material has a layer; the dose classes cover the elements; the snap grid is a multiple of the database
unit), builds each element's written outline (bias, rounding, snapping: ``invdesign._layout_shapes``),
sizes the field and checks the design against the deck with the project's exact rule checks
(``invdesign._penalties.check_rules``; disks get the same checks on their diameter) plus the layout's own
rules: a field larger than one write field when stitching is off, and an edge bias that closes a gap.
Lengths in nm throughout. ``rebuild_design`` turns polygons read back from a written file (by any reader)
into a design again, on the deck's grid and angle step.
"""

import dataclasses
import itertools
import math
import re

import jax.numpy as jnp
import numpy as np

from ._design import CellParams, Design
from ._errors import InvdesignError
from ._geometry import pair_gaps
from ._layout_options import LayoutError, LayoutOptions
from ._layout_shapes import (
    area,
    array_bbox,
    array_origin,
    element_from_outline,
    element_outline,
    field_counts,
    snap,
)
from ._penalties import GRID_TOL, check_rules


@dataclasses.dataclass(frozen=True)
class WrittenElement:
    """One element as written: its outline (snapped, nm), layer, datatype and dose."""

    index: int
    element: object
    layer: int
    datatype: int
    dose_class: str | None
    dose_factor: float
    bias_nm: float
    outline: np.ndarray

    @property
    def area_nm2(self) -> float:
        return abs(area(self.outline))


@dataclasses.dataclass(frozen=True)
class LayoutPlan:
    """Everything ``write_layout`` and the traveller need. Lengths in nm."""

    design: Design
    fab: object
    options: LayoutOptions
    grid_nm: float
    corner_radius_nm: float
    elements: tuple
    a1: np.ndarray
    a2: np.ndarray
    n1: int
    n2: int
    origin: np.ndarray
    bbox: np.ndarray
    violations: tuple
    unit_name: str
    top_name: str

    @property
    def cells(self) -> int:
        return self.n1 * self.n2

    @property
    def field_um(self) -> tuple:
        w = (self.bbox[1] - self.bbox[0]) / 1000.0
        return float(w[0]), float(w[1])


def lookup(mapping: dict, design: Design, material: str, what: str):
    """``mapping[key]`` for a design material: its design key, then its library name, then '*'."""
    entry = design.materials.get(material, {})
    keys = [material] + ([entry["name"]] if isinstance(entry, dict) and "name" in entry else []) + ["*"]
    for k in keys:
        if k in mapping:
            return mapping[k]
    defined = ", ".join(map(repr, mapping)) or "none"
    raise LayoutError(f"{what} has no entry for material '{material}'; add one of "
                      f"{', '.join(repr(k) for k in keys)} (defined: {defined})")


def _cell_name(text: str, suffix: str) -> str:
    base = re.sub(r"[^A-Za-z0-9_]", "_", text or "design").strip("_") or "design"
    return f"{base[: 31 - len(suffix)]}_{suffix}"


def _is_multiple(x: float, step: float) -> bool:
    return abs(x / step - round(x / step)) < 1e-9


def deck_violations(design: Design, fab, gaps=None) -> list:
    """Every rule of the deck the design breaks (``check_rules``' records), element indices as in the file.

    Rods go through ``check_rules`` unchanged; a disk is checked as a feature whose width and length are
    its diameter (deck width minimum, length maximum, thickness, grid) and in every gap it takes part in.
    ``gaps``: ``pair_gaps`` of all elements if already computed.
    """
    els = design.elements
    rods = [i for i, e in enumerate(els) if e.shape == "rod"]
    disks = [i for i, e in enumerate(els) if e.shape == "disk"]
    p = design.params
    out = []
    if rods:
        sub = CellParams(p.a1, p.a2, tuple(els[i] for i in rods))
        for v in check_rules(sub, fab):
            v = dict(v)
            v["where"] = re.sub(r"rods? (\d+)(?: and (\d+))?", lambda m: _rename(m, rods), v["where"])
            out.append(v)
    else:
        out += check_rules(CellParams(p.a1, p.a2, ()), fab)  # the lattice's own rules
    if disks:
        out += _disk_violations(design, fab, disks, gaps)
    return out


def _rename(m, idx):
    if m.group(2) is None:
        return f"rod {idx[int(m.group(1))]}"
    return f"rods {idx[int(m.group(1))]} and {idx[int(m.group(2))]}"


def _all_gaps(design):
    return pair_gaps(design.elements, np.asarray(design.params.a1), np.asarray(design.params.a2))


def _disk_violations(design, fab, disks, gaps=None) -> list:
    out = []

    def bad(rule, where, value, limit):
        out.append({"rule": rule, "where": where, "value": float(value), "limit": float(limit),
                    "miss": float(abs(value - limit)), "unit": "nm"})

    els = design.elements
    for i in disks:
        d, t = float(els[i].diameter), float(els[i].thickness)
        if d < fab.width_min_nm - GRID_TOL:
            bad("width_min", f"disk {i} diameter", d, fab.width_min_nm)
        if d > fab.length_max_nm + GRID_TOL:
            bad("length_max", f"disk {i} diameter", d, fab.length_max_nm)
        if not any(abs(t - x) < 1e-9 for x in fab.thickness_nm):
            bad("thickness", f"disk {i}", t, min(fab.thickness_nm, key=lambda x: abs(x - t)))
        for name, x in (("centre x", els[i].center[0]), ("centre y", els[i].center[1]), ("diameter", d)):
            x = float(x)
            if abs(x / fab.grid_nm - round(x / fab.grid_nm)) * fab.grid_nm > GRID_TOL:
                bad("grid", f"disk {i} {name}", x, round(x / fab.grid_nm) * fab.grid_nm)
    for i, j, gap in gaps if gaps is not None else _all_gaps(design):
        if i not in disks and j not in disks:
            continue
        where = (f"{els[i].shape} {i} and its periodic image" if i == j
                 else f"{els[i].shape} {i} and {els[j].shape} {j}")
        if gap < 0:
            out.append({"rule": "overlap", "where": where, "value": float(gap), "limit": 0.0,
                        "miss": math.inf, "unit": "nm"})
        elif gap < fab.min_gap_nm - GRID_TOL:
            bad("min_gap", where, gap, fab.min_gap_nm)
    return out


def _bias_violations(gaps, biases) -> list:
    out = []
    for i, j, gap in gaps:
        written = gap - biases[i] - biases[j]
        if gap >= 0 and written <= 0:
            where = f"elements {i} and {j}" if i != j else f"element {i} and its periodic image"
            out.append({"rule": "bias_closes_gap", "where": where, "value": float(written), "limit": 0.0,
                        "miss": float(-written), "unit": "nm"})
    return out


def plan_layout(design: Design, fab, options: LayoutOptions) -> LayoutPlan:
    """The full layout plan for ``design`` under ``fab`` and ``options`` (no files written)."""
    o = options
    els = design.elements
    for i, e in enumerate(els):
        if e.shape not in ("rod", "disk"):
            raise LayoutError(f"element {i} is a {e.shape}: a layout holds flat shapes only (rods and disks);"
                              f" remove it or replace it by a disk")
    grid = o.snap_nm if o.snap_nm is not None else fab.grid_nm
    if not _is_multiple(grid, o.database_nm):
        raise LayoutError(f"layout.snap_nm / fab.grid_nm ({grid:g} nm) is not a multiple of "
                          f"layout.units.database_nm ({o.database_nm:g} nm); choose a grid the database "
                          f"unit divides")
    if o.dose_elements is not None and len(o.dose_elements) != len(els):
        raise LayoutError(f"layout.dose.elements has {len(o.dose_elements)} entries but the design has "
                          f"{len(els)} elements; give one class name (or null) per element")
    radius = (o.corner_radius_nm if o.corner_radius_nm is not None else fab.corner_radius_nm) \
        if o.round_corners else 0.0
    written, biases, pairs = [], [], {}
    for i, e in enumerate(els):
        layer, dt0 = lookup(o.material_layers, design, e.material, "layout.layers.materials")
        b = float(lookup(o.bias_nm, design, e.material, "layout.bias_nm")) if o.bias_nm else 0.0
        cls = o.dose_elements[i] if o.dose_elements is not None else None
        dt, factor = (dt0, 1.0) if cls is None else o.dose_classes[cls]
        if pairs.setdefault((layer, dt), factor) != factor:
            raise LayoutError(f"layer {layer}/{dt} would carry two doses ({pairs[(layer, dt)]:g} and "
                              f"{factor:g} × base): give dose class '{cls}' a datatype of its own in "
                              f"layout.dose.classes")
        try:
            pts = element_outline(e, bias=b, radius=radius, arc_tolerance=o.arc_tolerance_nm,
                                  disk_tolerance=o.disk_tolerance_nm, disk_n=o.disk_vertices)
            pts = snap(pts, grid)
        except ValueError as err:
            raise LayoutError(f"element {i}: {err}; check layout.bias_nm and layout.snap_nm") from None
        written.append(WrittenElement(i, e, layer, dt, cls, factor, b, pts))
        biases.append(b)
    a1, a2 = np.asarray(design.params.a1, float), np.asarray(design.params.a2, float)
    for name, v in (("a1", a1), ("a2", a2)):
        if not all(_is_multiple(x, o.database_nm) for x in v):
            raise LayoutError(f"lattice.{name} = {v.tolist()} nm is not on the database unit "
                              f"({o.database_nm:g} nm): an array reference cannot repeat it exactly; snap "
                              f"the design or set layout.units.database_nm finer")
    n1, n2 = field_counts(a1, a2, o.field_cells, o.field_size_um)
    origin = array_origin(a1, a2, n1, n2, grid)
    bbox = array_bbox([w.outline for w in written], a1, a2, n1, n2, origin)
    gaps = _all_gaps(design)
    violations = deck_violations(design, fab, gaps) + _bias_violations(gaps, biases)
    size = bbox[1] - bbox[0]
    if not o.stitching and max(size) > o.write_field_um * 1000.0 + 1e-9:
        violations.append({"rule": "write_field", "where": "field", "value": float(max(size)),
                           "limit": o.write_field_um * 1000.0,
                           "miss": float(max(size) - o.write_field_um * 1000.0), "unit": "nm"})
    name = design.name or "design"
    return LayoutPlan(design=design, fab=fab, options=o, grid_nm=float(grid), corner_radius_nm=float(radius),
                      elements=tuple(written), a1=a1, a2=a2, n1=n1, n2=n2, origin=origin, bbox=bbox,
                      violations=tuple(violations),
                      unit_name=o.unit_cell_name or _cell_name(name, "cell"),
                      top_name=o.top_cell_name or _cell_name(name, "field"))


def format_violation(v: dict) -> str:
    """One line: rule, where, value against limit."""
    unit = f" {v['unit']}" if v["unit"] else ""
    return f"{v['rule']}: {v['where']}: {v['value']:g}{unit} (limit {v['limit']:g}{unit})"


def refuse_unless_forced(plan: LayoutPlan, force: bool) -> None:
    """Raise ``LayoutError`` listing every violation unless ``force``; the traveller records them."""
    if plan.violations and not force:
        lines = "".join(f"\n  - {format_violation(v)}" for v in plan.violations)
        raise LayoutError(f"the design breaks fab deck '{plan.fab.name}' or the layout's rules "
                          f"({len(plan.violations)} violation(s)); nothing was written:{lines}\n"
                          f"fix the design, choose another deck (fab=NAME) or layout, or pass force=true to "
                          f"write it anyway (the traveller then lists every violation)")


# ------------------------------------------------------------------------------------ read back
def rebuild_design(template: Design, polygons: dict, a1, a2, plan_options: LayoutOptions, fab,
                   *, exact: bool = True) -> Design:
    """A design from polygons read back from a layout's unit cell.

    ``polygons``: {(layer, datatype): [(n, 2) arrays in nm]}; ``a1``, ``a2``: the array's lattice vectors
    (nm); ``template``: the environment, materials and film thickness source (one thickness per
    material, taken from the template's first element of that material). Each polygon's material is the
    one whose layer it lies on. With ``exact``, each element is then the one on the deck's grid and angle
    step (within ±1 grid step in position, ±2 in size and ±1 angle step of the fit) whose outline, written
    with the same settings, reproduces the polygon vertex for vertex. ``LayoutError`` is raised if none
    does, or if several do: a sharp rotated rectangle has only four vertices, and on a fine grid
    neighbouring lengths or widths can snap to the same four points (rounded corners, with their many arc
    vertices, or axis-aligned rods make the geometry decide).
    """
    o = plan_options
    grid = o.snap_nm if o.snap_nm is not None else fab.grid_nm
    radius = (o.corner_radius_nm if o.corner_radius_nm is not None else fab.corner_radius_nm) \
        if o.round_corners else 0.0
    by_layer = {}
    for m in {e.material for e in template.elements}:
        layer = lookup(o.material_layers, template, m, "layout.layers.materials")[0]
        if layer in by_layer:
            raise LayoutError(f"materials '{by_layer[layer]}' and '{m}' share layer {layer}; a read-back "
                              f"cannot tell them apart")
        by_layer[layer] = m
    thickness = {}
    for e in template.elements:
        thickness.setdefault(e.material, float(e.thickness))
    elements = []
    for (layer, _dt), polys in sorted(polygons.items()):
        if layer not in by_layer:
            continue
        mat = by_layer[layer]
        b = float(lookup(o.bias_nm, template, mat, "layout.bias_nm")) if o.bias_nm else 0.0
        for pts in polys:
            fit = element_from_outline(pts, mat, thickness[mat], bias=b, grid=grid)
            if exact:
                fit = _exact(fit, pts, b, radius, grid, fab.angle_step_deg, o)
            elements.append(fit)
    elements.sort(key=lambda e: (float(e.center[0]), float(e.center[1])))
    params = CellParams(jnp.asarray(np.asarray(a1, float)), jnp.asarray(np.asarray(a2, float)),
                        tuple(elements))
    try:
        return template.with_params(params)
    except InvdesignError as err:
        raise LayoutError(f"the read-back geometry is not a valid design: {err}") from None


def _vertex_set(pts) -> np.ndarray:
    return np.unique(np.round(np.asarray(pts, float), 6), axis=0)


def _exact(fit, pts, bias, radius, grid, angle_step, o):
    target = _vertex_set(pts)

    def q(x, step):
        return round(x / step) * step

    def writes(e):
        out = snap(element_outline(e, bias=bias, radius=radius, arc_tolerance=o.arc_tolerance_nm,
                                   disk_tolerance=o.disk_tolerance_nm, disk_n=o.disk_vertices), grid)
        s = _vertex_set(out)
        return s.shape == target.shape and np.array_equal(s, target)

    cx, cy = (q(float(v), grid) for v in fit.center)
    near = (0, -1, 1)
    far = (0, -1, 1, -2, 2)
    if fit.shape == "disk":
        d0 = q(float(fit.diameter), grid)
        cands = (dataclasses.replace(fit, center=jnp.asarray([cx + dx * grid, cy + dy * grid]),
                                     diameter=jnp.asarray(d0 + dd * grid))
                 for dx, dy, dd in itertools.product(near, near, far))
    else:
        L0, W0 = q(float(fit.length), grid), q(float(fit.width), grid)
        a0 = q(float(fit.angle_deg), angle_step)
        cands = (dataclasses.replace(fit, center=jnp.asarray([cx + dx * grid, cy + dy * grid]),
                                     length=jnp.asarray(L0 + dl * grid), width=jnp.asarray(W0 + dw * grid),
                                     angle_deg=jnp.asarray((a0 + da * angle_step) % 180.0))
                 for da, dx, dy, dl, dw in itertools.product(near, near, near, far, far))
    found = [e for e in cands if writes(e)]
    where = f"the {fit.shape} read back near {[round(float(v), 2) for v in fit.center]} nm"
    if not found:
        raise LayoutError(f"no {fit.shape} on the {grid:g} nm grid reproduces {where}")
    if len(found) > 1:
        opts = "; ".join(_describe(e) for e in found)
        raise LayoutError(f"{where} is ambiguous: {len(found)} elements on the {grid:g} nm grid write the "
                          f"same polygon ({opts}); round the corners or use a finer snap grid")
    return found[0]


def _describe(e) -> str:
    c = ", ".join(f"{float(v):g}" for v in e.center)
    if e.shape == "disk":
        return f"centre ({c}) diameter {float(e.diameter):g}"
    return (f"centre ({c}) {float(e.length):g} × {float(e.width):g} nm at {float(e.angle_deg):g}°")
