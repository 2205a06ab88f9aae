"""Layout settings (``conf/layout/*.yaml``): what ``invdesign export`` writes and how, parsed and checked.

Every length is in nm unless its key says ``_um`` (µm). ``parse_layout`` turns a plain mapping (a Hydra
group converted with ``OmegaConf.to_container``, or a dict written by hand) into a frozen ``LayoutOptions``
and raises ``LayoutError`` naming the key (``layout.field.cells``) and what would be valid, before any
geometry is built. ``resolve_for`` adds the checks that need the design and the fab deck (every material
has a layer, the dose classes cover the elements, the snap grid is a multiple of the database unit).

Dose classes are GDS datatypes. An element with no class is written on its material's ``[layer, datatype]``
at the base dose (factor 1). An element assigned class ``NAME`` is written on ``[material layer,
classes.NAME.datatype]`` at ``classes.NAME.factor`` × ``dose.base_uC_cm2``. One (layer, datatype) pair
must mean one dose: two classes (or a class and a material's own datatype) that share a pair with
different factors are refused.
"""

import dataclasses
import math

from ._errors import InvdesignError
from ._spec import _Reader, _to_plain

FORMATS = ("gds", "oas")


class LayoutError(InvdesignError):
    """A layout setting is malformed, or a design cannot be written with it."""


@dataclasses.dataclass(frozen=True)
class LayoutOptions:
    """Parsed ``conf/layout`` group. Lengths in nm unless the field name ends in ``_um``."""

    name: str
    label: str
    formats: tuple
    database_nm: float
    user_um: float
    snap_nm: float | None            # None: the fab deck's grid
    field_cells: tuple | None        # (n1, n2) or None
    field_size_um: tuple | None      # (X, Y) or None
    write_field_um: float
    stitching: bool
    round_corners: bool
    corner_radius_nm: float | None   # None: the fab deck's corner radius
    arc_tolerance_nm: float
    disk_vertices: int | None
    disk_tolerance_nm: float
    bias_nm: dict                    # material key or "*" -> nm
    material_layers: dict            # material key or "*" -> (layer, datatype)
    label_layer: tuple
    marks_layer: tuple
    frame_layer: tuple
    marks: bool
    mark_size_um: float
    mark_line_um: float
    mark_margin_um: float
    frame: bool
    frame_line_um: float
    base_dose_uC_cm2: float
    dose_classes: dict               # name -> (datatype, factor)
    dose_elements: tuple | None      # one class name (or None) per element
    beam_current_nA: float
    unit_cell_name: str | None
    top_cell_name: str | None


_KEYS = {
    "name": "a short name for the layout settings",
    "label": "free text describing them",
    "formats": f"a list from {', '.join(FORMATS)}",
    "units": "{database_nm, user_um}",
    "snap_nm": "vertex grid in nm, or null for the fab deck's grid_nm",
    "field": "{cells: [n1, n2]} or {size_um: [X, Y]} (exactly one of them)",
    "write_field": "{size_um, stitching}",
    "rods": "{round_corners, corner_radius_nm, tolerance_nm}",
    "disks": "{vertices, tolerance_nm}",
    "bias_nm": "edge bias per material, nm: {material or '*': nm}",
    "layers": "{materials: {material or '*': [layer, datatype]}, label, marks, frame}",
    "marks": "{enabled, size_um, line_um, margin_um}",
    "frame": "{enabled, line_um}",
    "dose": "{base_uC_cm2, classes: {name: {datatype, factor}}, elements: null or a list of class names}",
    "beam": "{current_nA}",
    "cell_names": "{unit, top}: GDS cell names, or null to derive them from the design's name",
}


def _err(fn, *args, **kw):
    """Run a ``_Reader`` method and re-raise its SpecError as a LayoutError (same message)."""
    try:
        return fn(*args, **kw)
    except InvdesignError as err:
        raise LayoutError(str(err)) from None


def _layer(r: _Reader, k: str) -> tuple:
    v = r.raw(k)
    ok = (isinstance(v, (list, tuple)) and len(v) == 2
          and all(isinstance(x, int) and not isinstance(x, bool) and 0 <= x <= 65535 for x in v))
    if not ok:
        raise LayoutError(f"{r.key(k)} must be [layer, datatype], two whole numbers 0..65535, got {v!r}")
    return int(v[0]), int(v[1])


def _field(r: _Reader):
    f = r.sub("field", {"cells": "[n1, n2] whole numbers of cells along a1 and a2",
                        "size_um": "[X, Y] extent of the field in µm"})
    has_c, has_s = f.has("cells"), f.has("size_um")
    if has_c == has_s:
        raise LayoutError(f"{r.key('field')}: give exactly one of cells: [n1, n2] or size_um: [X, Y] "
                          f"(the other null); got cells={f.raw('cells', None)!r}, "
                          f"size_um={f.raw('size_um', None)!r}")
    if has_c:
        n = f.pair("cells", positive=True)
        if any(x != int(x) for x in n):
            raise LayoutError(f"{f.key('cells')} must be two whole numbers ≥ 1, got {f.raw('cells')!r}")
        return (int(n[0]), int(n[1])), None
    return None, f.pair("size_um", positive=True)


def _mapping(r: _Reader, k: str) -> dict:
    v = r.raw(k, {})
    if not isinstance(v, dict):
        raise LayoutError(f"{r.key(k)} must be a mapping ({_KEYS.get(k, '')}), got {v!r}")
    return {str(name): val for name, val in v.items()}


def _dose(r: _Reader):
    d = r.sub("dose", {"base_uC_cm2": "area dose at factor 1, µC/cm²",
                       "classes": "{name: {datatype, factor}}",
                       "elements": "null, or one class name (or null) per design element"})
    base = d.number("base_uC_cm2", positive=True)
    classes = {}
    for name, entry in _mapping(d, "classes").items():
        c = _Reader(entry, f"{d.key('classes')}.{name}",
                    {"datatype": "GDS datatype 0..65535", "factor": "dose relative to base, > 0"})
        dt = c.number("datatype", integer=True, minimum=0)
        if dt > 65535:
            raise LayoutError(f"{c.key('datatype')} must be 0..65535, got {dt}")
        classes[name] = (dt, c.number("factor", positive=True))
    els = d.raw("elements", None)
    if els is not None:
        if not isinstance(els, (list, tuple)):
            raise LayoutError(f"{d.key('elements')} must be null or a list of class names, got {els!r}")
        for i, name in enumerate(els):
            if name is not None and name not in classes:
                raise LayoutError(f"{d.key('elements')}[{i}] = {name!r} is not a dose class; defined: "
                                  f"{', '.join(classes) or 'none'} (or null for the base dose)")
        els = tuple(els)
    return base, classes, els


def parse_layout(doc, where: str = "layout") -> LayoutOptions:
    """A ``LayoutOptions`` from a mapping; raises ``LayoutError`` naming the key on any mistake."""
    r = _err(_Reader, _to_plain(doc), where, _KEYS)
    return _err(_parse, r)


def _parse(r: _Reader) -> LayoutOptions:
    formats = r.raw("formats", list(FORMATS))
    if (not isinstance(formats, (list, tuple)) or not formats
            or any(f not in FORMATS for f in formats) or len(set(formats)) != len(formats)):
        raise LayoutError(f"{r.key('formats')} must be a non-empty list from {', '.join(FORMATS)} without "
                          f"repeats, got {formats!r}")
    u = r.sub("units", {"database_nm": "database unit in nm", "user_um": "user unit in µm"},
              {"database_nm": 1.0, "user_um": 1.0})
    dbu, uu = u.number("database_nm", 1.0, positive=True), u.number("user_um", 1.0, positive=True)
    if uu * 1000.0 < dbu:
        raise LayoutError(f"{u.key('user_um')} ({uu:g} µm) is smaller than the database unit ({dbu:g} nm)")
    cells, size = _field(r)
    wf = r.sub("write_field", {"size_um": "side of the tool's square write field, µm",
                               "stitching": "true if the field may span several write fields"})
    rods = r.sub("rods", {"round_corners": "true to round rod corners",
                          "corner_radius_nm": "radius, nm; null for the fab deck's corner_radius_nm",
                          "tolerance_nm": "largest distance between an arc and its polygon, nm"})
    disks = r.sub("disks", {"vertices": "fixed vertex count (a multiple of 4, ≥ 8) or null",
                            "tolerance_nm": "largest distance between the circle and its polygon, nm"})
    nv = disks.number("vertices", None, integer=True, minimum=8)
    if nv is not None and nv % 4:
        raise LayoutError(f"{disks.key('vertices')} must be a multiple of 4 (keeps the disk symmetric "
                          f"under x and y mirrors), got {nv}")
    layers = r.sub("layers", {"materials": "{material or '*': [layer, datatype]}",
                              "label": "[layer, datatype] of the text labels",
                              "marks": "[layer, datatype] of the alignment marks",
                              "frame": "[layer, datatype] of the write-field frame"})
    lm = layers.sub("materials", {k: "[layer, datatype]" for k in _mapping(layers, "materials")})
    mat_layers = {k: _layer(lm, k) for k in lm.doc}
    if not mat_layers:
        raise LayoutError(f"{layers.key('materials')} is empty; map at least '*' to [layer, datatype]")
    bias = {}
    for k, v in _mapping(r, "bias_nm").items():
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise LayoutError(f"{r.key('bias_nm')}.{k} must be a number of nm (may be negative), got {v!r}")
        bias[k] = float(v)
    marks = r.sub("marks", {"enabled": "true to draw alignment marks at the field corners",
                            "size_um": "outer size of a mark, µm", "line_um": "line width, µm",
                            "margin_um": "gap between the field's corner and the mark, µm"})
    frame = r.sub("frame", {"enabled": "true to outline every write field", "line_um": "line width, µm"})
    base, classes, els = _dose(r)
    beam = r.sub("beam", {"current_nA": "beam current, nA"})
    names = r.sub("cell_names", {"unit": "unit-cell name or null", "top": "top-cell name or null"},
                  {"unit": None, "top": None})
    opts = LayoutOptions(
        name=r.text("name", "layout"), label=r.text("label", ""), formats=tuple(formats),
        database_nm=dbu, user_um=uu, snap_nm=r.number("snap_nm", None, positive=True),
        field_cells=cells, field_size_um=size,
        write_field_um=wf.number("size_um", positive=True), stitching=wf.flag("stitching"),
        round_corners=rods.flag("round_corners"),
        corner_radius_nm=rods.number("corner_radius_nm", None, minimum=0.0),
        arc_tolerance_nm=rods.number("tolerance_nm", positive=True),
        disk_vertices=nv, disk_tolerance_nm=disks.number("tolerance_nm", positive=True),
        bias_nm=bias, material_layers=mat_layers, label_layer=_layer(layers, "label"),
        marks_layer=_layer(layers, "marks"), frame_layer=_layer(layers, "frame"),
        marks=marks.flag("enabled"), mark_size_um=marks.number("size_um", positive=True),
        mark_line_um=marks.number("line_um", positive=True),
        mark_margin_um=marks.number("margin_um", minimum=0),
        frame=frame.flag("enabled"), frame_line_um=frame.number("line_um", positive=True),
        base_dose_uC_cm2=base, dose_classes=classes, dose_elements=els,
        beam_current_nA=beam.number("current_nA", positive=True),
        unit_cell_name=names.text("unit", None), top_cell_name=names.text("top", None))
    if opts.mark_line_um * 8 > opts.mark_size_um:
        raise LayoutError(f"{marks.key('line_um')} ({opts.mark_line_um:g} µm) must be at most an eighth of "
                          f"{marks.key('size_um')} ({opts.mark_size_um:g} µm) for the mark's pattern to fit")
    return opts
