"""Write a ``LayoutPlan`` as GDSII and OASIS through gdstk, atomically.

Why gdstk: a maintained, compiled (C++) GDSII/OASIS library with a small Python surface, wheels for every
platform, no GUI or system dependencies, and native array references; it writes both formats from one
in-memory library. (The ``klayout`` package reads our files back in the tests as an independent check; it
is a test dependency only.)

Cells (names from the plan): the unit cell holds one polygon per element on its material's layer and its
dose class's datatype; the top cell holds one array reference of the unit cell (n1 × n2 along a1, a2,
centred on the origin), the label texts, four references of the mark cell at the field's corners and an
array reference of the frame cell over the write-field tiles. Nothing is flattened, so the file size does
not grow with the field.

Oblique lattices in GDSII: GDSII's AREF stores three points (origin, origin + n1·a1, origin + n2·a2) and
so holds any lattice, but gdstk 1.0 writes an AREF only for lattice vectors along x and y and expands any
other lattice into one SREF per cell. For those we let gdstk write an axis-aligned AREF and then rewrite
that record's three points in the stream (``_rewrite_aref``); OASIS needs no such step (gdstk writes its
general regular repetition directly).
"""

import pathlib
import struct
import tempfile

import numpy as np

from ._atomic import atomic_write_bytes
from ._layout import LayoutPlan
from ._layout_shapes import frame_polygons, mark_polygons

_AREF, _SNAME, _XY, _ENDEL = 0x0B, 0x12, 0x10, 0x11


def label_lines(plan: LayoutPlan) -> list:
    """The label texts: the design's identity and key parameters (nm)."""
    d, o = plan.design, plan.options
    a1, a2 = (f"({v[0]:g}, {v[1]:g})" for v in (plan.a1, plan.a2))
    lines = [f"invdesign design {d.name or 'unnamed'}; layout {o.name}; fab deck {plan.fab.name}",
             f"lattice a1 {a1} nm, a2 {a2} nm; {plan.n1} x {plan.n2} cells; grid {plan.grid_nm:g} nm"]
    for w in plan.elements:
        e = w.element
        if e.shape == "rod":
            dims = (f"{float(e.length):g} x {float(e.width):g} x {float(e.thickness):g} nm at "
                    f"{float(e.angle_deg):g} deg")
        else:
            dims = f"diameter {float(e.diameter):g} nm, thickness {float(e.thickness):g} nm"
        c = np.asarray(e.center, float)
        lines.append(f"element {w.index}: {e.shape} {e.material} at ({c[0]:g}, {c[1]:g}) nm, {dims}; "
                     f"layer {w.layer}/{w.datatype}, bias {w.bias_nm:g} nm")
    return lines


def mark_centres(plan: LayoutPlan) -> np.ndarray:
    """(4, 2) centres (nm) of the alignment marks, just outside the field's corners."""
    o = plan.options
    off = (o.mark_margin_um + 0.5 * o.mark_size_um) * 1000.0
    (x0, y0), (x1, y1) = plan.bbox
    return np.array([[x0 - off, y0 - off], [x1 + off, y0 - off], [x1 + off, y1 + off], [x0 - off, y1 + off]])


def frame_tiles(plan: LayoutPlan) -> tuple:
    """(nx, ny, first tile centre (2,) nm): the write fields that cover the field, centred on it."""
    wf = plan.options.write_field_um * 1000.0
    size = plan.bbox[1] - plan.bbox[0]
    nx, ny = (max(1, int(np.ceil(s / wf - 1e-9))) for s in size)
    centre = 0.5 * (plan.bbox[0] + plan.bbox[1])
    first = centre - 0.5 * wf * np.array([nx - 1, ny - 1])
    return nx, ny, np.round(first / plan.grid_nm) * plan.grid_nm


def build_library(plan: LayoutPlan):
    """The gdstk ``Library`` of the plan and the unit cell's array reference (user units)."""
    import gdstk

    o = plan.options
    scale = 1.0 / (o.user_um * 1000.0)  # nm -> user units
    lib = gdstk.Library(name=plan.top_name, unit=o.user_um * 1e-6, precision=o.database_nm * 1e-9)
    unit = lib.new_cell(plan.unit_name)
    for w in plan.elements:
        unit.add(gdstk.Polygon(w.outline * scale, layer=w.layer, datatype=w.datatype))
    top = lib.new_cell(plan.top_name)
    aligned = plan.a1[1] == 0 and plan.a2[0] == 0
    ref = gdstk.Reference(unit, tuple(plan.origin * scale))
    if aligned:
        ref.repetition = gdstk.Repetition(plan.n1, plan.n2, spacing=(plan.a1[0] * scale, plan.a2[1] * scale))
    else:
        ref.repetition = gdstk.Repetition(plan.n1, plan.n2, v1=tuple(plan.a1 * scale),
                                          v2=tuple(plan.a2 * scale))
    top.add(ref)
    layer, texttype = o.label_layer
    (x0, y0) = plan.bbox[0]
    step = max(1000.0, 0.02 * (plan.bbox[1][1] - y0))
    for k, line in enumerate(label_lines(plan)):
        top.add(gdstk.Label(line, ((x0) * scale, (y0 - (k + 1) * step) * scale), anchor="sw",
                            layer=layer, texttype=texttype))
    if o.marks:
        mark = lib.new_cell(f"{plan.top_name[:26]}_mark")
        ml, md = o.marks_layer
        for p in mark_polygons(o.mark_size_um * 1000.0, o.mark_line_um * 1000.0):
            mark.add(gdstk.Polygon(p * scale, layer=ml, datatype=md))
        for c in mark_centres(plan):
            top.add(gdstk.Reference(mark, tuple(c * scale)))
    if o.frame:
        frame = lib.new_cell(f"{plan.top_name[:25]}_frame")
        fl, fd = o.frame_layer
        wf = o.write_field_um * 1000.0
        for p in frame_polygons(wf, o.frame_line_um * 1000.0):
            frame.add(gdstk.Polygon(p * scale, layer=fl, datatype=fd))
        nx, ny, first = frame_tiles(plan)
        fr = gdstk.Reference(frame, tuple(first * scale))
        fr.repetition = gdstk.Repetition(nx, ny, spacing=(wf * scale, wf * scale))
        top.add(fr)
    return lib, ref


def _rewrite_aref(data: bytes, sname: str, points_dbu) -> bytes:
    """GDSII stream with the XY points of the AREF of cell ``sname`` replaced by ``points_dbu`` (3 × 2)."""
    out = bytearray(data)
    pos, in_aref, match, done = 0, False, False, 0
    while pos + 4 <= len(out):
        length, rtype = struct.unpack(">HB", out[pos:pos + 3])
        if length < 4:
            break
        body = bytes(out[pos + 4:pos + length])
        if rtype == _AREF:
            in_aref, match = True, False
        elif in_aref and rtype == _SNAME:
            match = body.rstrip(b"\0").decode("ascii") == sname
        elif in_aref and match and rtype == _XY:
            if length != 4 + 24:
                raise RuntimeError("unexpected AREF XY record length in the GDSII stream")
            out[pos + 4:pos + length] = struct.pack(">6i", *(int(v) for v in np.ravel(points_dbu)))
            done += 1
        elif rtype == _ENDEL:
            in_aref = False
        pos += length
    if done != 1:
        raise RuntimeError(f"expected one AREF of cell {sname} in the GDSII stream, found {done}")
    return bytes(out)


def write_layout(plan: LayoutPlan, out_dir, stem: str = "layout") -> dict:
    """Write ``<stem>.gds`` and/or ``<stem>.oas`` into ``out_dir`` atomically; returns {format: path}."""
    out = pathlib.Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    import gdstk

    lib, ref = build_library(plan)
    oblique = not (plan.a1[1] == 0 and plan.a2[0] == 0)
    paths = {}
    for fmt in plan.options.formats:
        path = out / f"{stem}.{fmt}"
        with tempfile.TemporaryDirectory(dir=out, prefix=".layout-") as tmpdir:
            tmp = pathlib.Path(tmpdir) / path.name
            if fmt == "gds":
                lattice = ref.repetition
                if oblique:  # an axis-aligned placeholder AREF, its points rewritten below
                    ref.repetition = gdstk.Repetition(plan.n1, plan.n2, spacing=(1.0, 1.0))
                lib.write_gds(str(tmp))
                ref.repetition = lattice
            else:
                lib.write_oas(str(tmp))
            data = tmp.read_bytes()
        if fmt == "gds" and oblique:
            d = plan.options.database_nm
            o = plan.origin
            pts = np.round(np.array([o, o + plan.n1 * plan.a1, o + plan.n2 * plan.a2]) / d)
            data = _rewrite_aref(data, plan.unit_name, pts)
        atomic_write_bytes(path, data)
        paths[fmt] = path
    return paths
