"""Layout export, read back by an independent reader.

Every written file is opened with the ``klayout`` package (KLayout's general-purpose layout database,
https://www.klayout.de; it shares no code with gdstk, our writer) and checked against the design: shapes
per cell, each rectangle's size and position within the grid, the array's pitch and counts, layers and
datatypes, a width/space check against the fab deck, file size against the field, and a round trip back to
a design that simulates to the same spectra.
"""

import copy
import functools
import json
import math
import pathlib

import numpy as np
import pytest
import yaml

klayout_db = pytest.importorskip("klayout.db")

from invdesign import Design, ModelOptions  # noqa: E402
from invdesign._geometry import pair_gaps  # noqa: E402
from invdesign._layout import plan_layout, rebuild_design  # noqa: E402
from invdesign._layout_options import LayoutError, parse_layout  # noqa: E402
from invdesign._layout_write import write_layout  # noqa: E402
from invdesign._spec import parse_fab  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parent.parent

#: a design written by ``invdesign optimize spec=heron_1310 fab=ebl_fine cell=pivot_pair`` for the project's
#: own invented demo scenario (examples/heron_bay_1310.md); demo data only
HERON = {
    "format": "invdesign.design", "version": 1, "length_unit": "nm", "name": "heron_1310",
    "lattice": {"a1": [517.0, 0.0], "a2": [0.0, 517.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"gold_rakic1998": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "gold_rakic1998", "center": [-123.0, 0.0], "length": 190.0,
         "width": 93.0, "thickness": 30.0, "angle_deg": 90.0},
        {"shape": "rod", "material": "gold_rakic1998", "center": [123.0, 0.0], "length": 328.0,
         "width": 93.0, "thickness": 30.0, "angle_deg": 55.0},
    ],
}

#: invented test cell: a hexagonal (oblique) lattice with a rod and a disk
OBLIQUE = {
    "format": "invdesign.design", "version": 1, "length_unit": "nm", "name": "oblique_test",
    "lattice": {"a1": [500.0, 0.0], "a2": [250.0, 433.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "au", "center": [-90.0, 0.0], "length": 180.0, "width": 60.0,
         "thickness": 30.0, "angle_deg": 30.0},
        {"shape": "disk", "material": "au", "center": [120.0, 40.0], "diameter": 90.0, "thickness": 30.0},
    ],
}

#: the oblique cell with a second rod in place of the disk (disk gaps are slow to check in pure Python)
OBLIQUE_RODS = copy.deepcopy(OBLIQUE)
OBLIQUE_RODS["elements"][1] = {"shape": "rod", "material": "au", "center": [120.0, 40.0], "length": 150.0,
                               "width": 50.0, "thickness": 30.0, "angle_deg": 120.0}

#: invented test cell that breaks ebl_fine twice: rod 1 is 30 nm wide (< 40) and 10 nm from rod 0 (< 20)
BROKEN = {
    "format": "invdesign.design", "version": 1, "length_unit": "nm", "name": "broken_test",
    "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "au", "center": [-60.0, 0.0], "length": 200.0, "width": 60.0,
         "thickness": 30.0, "angle_deg": 90.0},
        {"shape": "rod", "material": "au", "center": [-5.0, 0.0], "length": 200.0, "width": 30.0,
         "thickness": 30.0, "angle_deg": 90.0},
    ],
}


def fab(name="ebl_fine"):
    return parse_fab(yaml.safe_load((ROOT / "conf/fab" / f"{name}.yaml").read_text()))


def layout_options(**changes):
    """conf/layout/field100.yaml with nested changes given as dotted keys: ``**{"field.cells": [3, 2]}``."""
    doc = yaml.safe_load((ROOT / "conf/layout/field100.yaml").read_text())
    for dotted, value in changes.items():
        node = doc
        *path, last = dotted.split(".")
        for k in path:
            node = node[k]
        node[last] = value
    return parse_layout(doc)


def export(tmp_path, design_doc, deck="ebl_fine", **changes):
    changes.setdefault("field.size_um", None)
    changes.setdefault("field.cells", [6, 5])
    d = Design.from_json(copy.deepcopy(design_doc))
    plan = plan_layout(d, fab(deck), layout_options(**changes))
    return d, plan, write_layout(plan, tmp_path)


def read(path):
    ly = klayout_db.Layout()
    ly.read(str(path))
    return ly


def polygons(ly, cell_name, layer, datatype):
    """Polygons (nm) of one cell on one layer/datatype, as read by klayout."""
    cell = ly.cell(cell_name)
    li = ly.find_layer(layer, datatype)
    if li is None:
        return []
    scale = ly.dbu * 1000.0  # database units -> nm (klayout reports the dbu in µm)
    return [np.array([[p.x * scale, p.y * scale] for p in s.polygon.each_point_hull()])
            for s in cell.shapes(li).each() if s.is_polygon() or s.is_box()]


def rect_corners(e):
    """The four corners (nm) of a design rod, computed here from its numbers alone."""
    th = math.radians(e["angle_deg"])
    u, v = np.array([math.cos(th), math.sin(th)]), np.array([-math.sin(th), math.cos(th)])
    c = np.array(e["center"])
    return np.array([c + a * e["length"] / 2 * u + b * e["width"] / 2 * v for a in (-1, 1) for b in (-1, 1)])


def arrays(ly, cell_name, of=None):
    """{(na, a), (nb, b)} of every regular array instance in a cell (of cell ``of`` if given), vectors in
    nm, as read by klayout."""
    out = []
    s = ly.dbu * 1000.0
    for inst in ly.cell(cell_name).each_inst():
        if inst.is_regular_array() and (of is None or inst.cell.name == of):
            out.append({(inst.na, (inst.a.x * s, inst.a.y * s)), (inst.nb, (inst.b.x * s, inst.b.y * s))})
    return out


# ------------------------------------------------------------------------------------ shapes per cell
@pytest.mark.parametrize("fmt", ["gds", "oas"])
def test_rectangles_match_the_design_within_the_grid(tmp_path, fmt):
    d, plan, paths = export(tmp_path, HERON, **{"rods.round_corners": False})
    ly = read(paths[fmt])
    polys = polygons(ly, plan.unit_name, 1, 0)
    assert len(polys) == 2  # one polygon per element
    assert sum(ly.cell(plan.unit_name).shapes(li).size() for li in ly.layer_indexes()) == 2
    grid = 1.0  # ebl_fine grid_nm; a snapped vertex lies within grid/√2 of the exact corner
    for e in HERON["elements"]:
        ideal = rect_corners(e)
        got = min(polys, key=lambda p: np.linalg.norm(p.mean(axis=0) - np.array(e["center"])))
        assert len(got) == 4
        dist = [np.min(np.linalg.norm(got - c, axis=1)) for c in ideal]
        assert max(dist) <= grid / math.sqrt(2) + 1e-9, (e, got)
        assert np.all(got % grid == 0)
    # the 90° rod is axis-aligned: its size is exact; its edges fall on half-grid points (93 nm wide about
    # x = -123), so it sits half a grid step off its centre
    upright = min(polys, key=lambda p: p[:, 0].mean())
    assert np.ptp(upright[:, 0]) == 93.0 and np.ptp(upright[:, 1]) == 190.0
    assert abs(upright[:, 0].mean() - (-123.0)) <= grid / 2 and upright[:, 1].mean() == 0.0


def test_axis_aligned_rod_and_bias_exact(tmp_path):
    doc = copy.deepcopy(BROKEN)
    doc["elements"][1]["width"] = 60.0
    doc["elements"][1]["center"] = [90.0, 0.0]
    for bias in (0.0, 3.0, -2.0):
        _, plan, paths = export(tmp_path / str(bias), doc, **{"rods.round_corners": False,
                                                             "bias_nm": {"*": bias}})
        polys = polygons(read(paths["gds"]), plan.unit_name, 1, 0)
        for e in doc["elements"]:
            p = min(polys, key=lambda q: abs(q[:, 0].mean() - e["center"][0]))
            # angle 90°: the length runs along y; every edge moves out by the bias
            assert np.ptp(p[:, 0]) == e["width"] + 2 * bias
            assert np.ptp(p[:, 1]) == e["length"] + 2 * bias
            assert p[:, 0].mean() == e["center"][0] and p[:, 1].mean() == e["center"][1]


def test_rounded_corners_keep_extents_and_area(tmp_path):
    doc = copy.deepcopy(BROKEN)
    doc["elements"][1]["width"] = 60.0
    doc["elements"][1]["center"] = [90.0, 0.0]
    _, plan, paths = export(tmp_path, doc)  # field100: rounded corners, radius = deck's 10 nm
    r = 10.0
    for p in polygons(read(paths["oas"]), plan.unit_name, 1, 0):
        assert len(p) > 4 and np.ptp(p[:, 0]) == 60.0 and np.ptp(p[:, 1]) == 200.0
        # area of a rounded rectangle: L·W − (4 − π) r² (elementary geometry); the inscribed arc polygon
        # on a 1 nm grid stays within perimeter × (arc tolerance + grid) of it
        exact = 60 * 200 - (4 - math.pi) * r**2
        a = 0.5 * abs(np.dot(p[:, 0], np.roll(p[:, 1], -1)) - np.dot(np.roll(p[:, 0], -1), p[:, 1]))
        assert abs(a - exact) <= 2 * math.pi * r * (0.5 + 1.0)


def test_coarse_snap_grid_puts_every_vertex_on_it(tmp_path):
    _, plan, paths = export(tmp_path, HERON, **{"snap_nm": 5.0})
    for fmt in ("gds", "oas"):
        polys = polygons(read(paths[fmt]), plan.unit_name, 1, 0)
        assert len(polys) == 2
        for p in polys:
            assert np.all(np.abs(p / 5.0 - np.round(p / 5.0)) < 1e-9)


# ------------------------------------------------------------------------------------------ arrays
@pytest.mark.parametrize("fmt", ["gds", "oas"])
@pytest.mark.parametrize("doc", [HERON, OBLIQUE_RODS], ids=["rectangular", "oblique"])
def test_array_reference_pitch_and_counts(tmp_path, fmt, doc):
    _, plan, paths = export(tmp_path, doc, **{"field.cells": [7, 4]})
    ly = read(paths[fmt])
    a1, a2 = (tuple(float(x) for x in doc["lattice"][k]) for k in ("a1", "a2"))
    assert arrays(ly, plan.top_name, of=plan.unit_name) == [{(7, a1), (4, a2)}]
    unit_refs = [i for i in ly.cell(plan.top_name).each_inst() if i.cell.name == plan.unit_name]
    assert len(unit_refs) == 1  # one array reference, not 28 copies
    assert ly.cell(plan.top_name).shapes(ly.find_layer(1, 0)).size() == 0 if ly.find_layer(1, 0) else True
    # the array is centred on the origin (within the grid)
    o = unit_refs[0].trans.disp
    centre = np.array([o.x, o.y]) * ly.dbu * 1000 + 0.5 * (6 * np.array(a1) + 3 * np.array(a2))
    assert np.all(np.abs(centre) <= 1.0)


def test_oblique_design_with_disk_polygon(tmp_path):
    _, plan, paths = export(tmp_path, OBLIQUE)
    polys = polygons(read(paths["gds"]), plan.unit_name, 1, 0)
    disk = max(polys, key=len)
    # a disk: ≥ 8 vertices, all within a grid step of one radius; area of the 90 nm disk (π d²/4) kept to
    # the snapping error (perimeter × grid)
    c = disk.mean(axis=0)
    radii = np.linalg.norm(disk - c, axis=1)
    assert len(disk) >= 8 and len(disk) % 4 == 0 and np.ptp(radii) <= 2.0
    a = 0.5 * abs(np.dot(disk[:, 0], np.roll(disk[:, 1], -1)) - np.dot(np.roll(disk[:, 0], -1), disk[:, 1]))
    assert abs(a - math.pi * 45**2) <= math.pi * 90 * 1.0
    assert np.allclose(c, [120, 40], atol=1.0)


# ---------------------------------------------------------------------------- layers and datatypes
def test_layers_datatypes_labels_marks_and_frame(tmp_path):
    changes = {"layers.materials": {"*": [5, 2]}, "dose.classes": {"edge": {"datatype": 3, "factor": 1.1}},
               "dose.elements": [None, "edge"], "field.cells": [20, 20]}
    _, plan, paths = export(tmp_path, HERON, **changes)
    for fmt in ("gds", "oas"):
        ly = read(paths[fmt])
        assert len(polygons(ly, plan.unit_name, 5, 2)) == 1
        assert len(polygons(ly, plan.unit_name, 5, 3)) == 1
        assert not polygons(ly, plan.unit_name, 1, 0)
        top = ly.cell(plan.top_name)
        texts = [s.text.string for s in top.shapes(ly.find_layer(90, 0)).each() if s.is_text()]
        assert any("heron_1310" in t for t in texts) and any("517" in t for t in texts)
        assert len(texts) == 2 + 2  # two header lines and one line per element
        mark = ly.cell(f"{plan.top_name}_mark")
        assert mark.shapes(ly.find_layer(91, 0)).size() == 6  # 4 brackets, centre, orientation square
        refs = [i for i in top.each_inst() if i.cell.name == mark.name]
        assert len(refs) == 4
        # marks outside the field, one beyond each corner
        (x0, y0), (x1, y1) = plan.bbox
        for i in refs:
            x, y = i.trans.disp.x * ly.dbu * 1000, i.trans.disp.y * ly.dbu * 1000
            assert (x < x0 or x > x1) and (y < y0 or y > y1)
        frame = ly.cell(f"{plan.top_name}_frame")
        assert frame.shapes(ly.find_layer(92, 0)).size() == 4
        assert frame.bbox().width() * ly.dbu == pytest.approx(100.0)  # the 100 µm write field


def test_two_doses_on_one_datatype_are_refused():
    d = Design.from_json(copy.deepcopy(HERON))
    opts = layout_options(**{"dose.classes": {"edge": {"datatype": 0, "factor": 1.2}},
                             "dose.elements": [None, "edge"]})
    with pytest.raises(LayoutError, match="two doses"):
        plan_layout(d, fab(), opts)


# ----------------------------------------------------------------------------------- width / space
def _region(ly, top, layer=1, datatype=0):
    return klayout_db.Region(ly.cell(top).begin_shapes_rec(ly.find_layer(layer, datatype)))


#: Edge pairs meeting at 80° or more are not measured (klayout's default is 90°): snapping a rotated
#: rectangle to the grid leaves corner angles of 89.9° or so, and the two sides of a convex corner are not
#: a width. Opposite sides of a rod (0°) and facing sides of neighbours are still all measured.
IGNORE_ANGLE_DEG = 80


def width_violations(region, d_dbu) -> int:
    return region.width_check(d_dbu, ignore_angle=IGNORE_ANGLE_DEG).count()


def space_violations(region, d_dbu) -> int:
    return region.space_check(d_dbu, ignore_angle=IGNORE_ANGLE_DEG).count()


@pytest.mark.parametrize("doc", [HERON, json.loads((ROOT / "examples/kestrel_cross_pair.json").read_text())],
                         ids=["heron", "kestrel"])
def test_width_space_check_finds_nothing_for_a_compliant_design(tmp_path, doc):
    deck = fab()
    d, plan, paths = export(tmp_path, doc)  # rounded corners
    assert plan.violations == ()
    gap = min(g for _, _, g in pair_gaps(d.elements, np.asarray(d.params.a1), np.asarray(d.params.a2)))
    for fmt in ("gds", "oas"):
        ly = read(paths[fmt])
        region = _region(ly, plan.top_name)
        assert region.count() == 2 * 30
        dbu_nm = ly.dbu * 1000
        assert width_violations(region, round(deck.width_min_nm / dbu_nm)) == 0
        assert space_violations(region, round(deck.min_gap_nm / dbu_nm)) == 0
        # and the check is live: a threshold above the design's smallest gap plus the corner radius (by
        # which rounding can at most widen a corner-to-edge gap) is breached
        assert space_violations(region, math.ceil((gap + deck.corner_radius_nm) / dbu_nm) + 1) > 0


def test_width_space_check_finds_the_broken_design_s_violations(tmp_path):
    deck = fab()
    _, plan, paths = export(tmp_path, BROKEN, **{"rods.round_corners": False, "field.cells": [4, 3]})
    rules = sorted((v["rule"], v["where"]) for v in plan.violations)
    assert rules == [("min_gap", "rods 0 and 1"), ("width_min", "rod 1")]
    for fmt in ("gds", "oas"):
        ly = read(paths[fmt])
        region = _region(ly, plan.top_name)
        # one narrow rod and one close pair per cell, 12 cells: 12 width and 12 space violations
        assert width_violations(region, round(deck.width_min_nm)) == 12
        assert space_violations(region, round(deck.min_gap_nm)) == 12


def test_field_larger_than_the_write_field_is_a_violation_unless_stitching():
    d = Design.from_json(copy.deepcopy(HERON))
    plan = plan_layout(d, fab(), layout_options(**{"field.size_um": [150.0, 150.0]}))
    assert [v["rule"] for v in plan.violations] == ["write_field"]
    plan = plan_layout(d, fab(), layout_options(**{"field.size_um": [150.0, 150.0],
                                                   "write_field.stitching": True}))
    assert plan.violations == ()


# --------------------------------------------------------------------------------------- file size
@pytest.mark.parametrize("doc", [HERON, OBLIQUE_RODS], ids=["rectangular", "oblique"])
def test_file_size_stays_near_constant_as_the_field_grows(tmp_path, doc):
    sizes = {"gds": [], "oas": []}
    for n in (10, 100, 1000, 10000):
        _, plan, paths = export(tmp_path / str(n), doc, **{"field.cells": [n, n],
                                                          "write_field.stitching": True})
        for fmt, p in paths.items():
            sizes[fmt].append(p.stat().st_size)
        if n == 10000:
            ly = read(paths["gds"])
            assert {c for s in arrays(ly, plan.top_name) for c, _ in s} >= {10000}
    for fmt, s in sizes.items():
        # 10⁸ cells vs 10²: only the digits in the label texts and the frame-tile counts change
        assert max(s) - min(s) <= 64, (fmt, s)


# -------------------------------------------------------------------------------------- round trip
def _read_back(path, plan):
    ly = read(path)
    found = {}
    for li in ly.layer_indexes():
        info = ly.get_info(li)
        polys = polygons(ly, plan.unit_name, info.layer, info.datatype)
        if polys:
            found[(info.layer, info.datatype)] = polys
    (arr,) = arrays(ly, plan.top_name, of=plan.unit_name)
    return found, sorted(arr)


def _lattice(vecs, n1, n2, a1):
    """Assign the read-back array vectors to a1 and a2 by the counts written (n1 along a1)."""
    by_count = {}
    for c, v in vecs:
        by_count.setdefault(c, []).append(np.array(v))
    if n1 == n2:
        v = by_count[n1]
        return (v[0], v[1]) if np.allclose(v[0], a1) else (v[1], v[0])
    return by_count[n1][0], by_count[n2][0]


#: invented test cell: two upright rods, compliant with ebl_fine
UPRIGHT = copy.deepcopy(BROKEN)
UPRIGHT["name"] = "upright_test"
UPRIGHT["elements"][1].update(width=60.0, center=[91.0, 3.0])


def _strong(params):
    """The same parameters as plain float64 arrays (one jit trace for the original and the rebuilt)."""
    import jax

    return jax.tree_util.tree_map(lambda x: np.asarray(x, dtype=np.float64), params)


@functools.cache
def _forward(name):
    """One compiled model=fast forward function per original design (5 wavelengths, 1200–1400 nm)."""
    from invdesign import forward_function

    doc = {"heron_1310": HERON, "oblique_test": OBLIQUE, "upright_test": UPRIGHT}[name]
    fn, p0 = forward_function(Design.from_json(copy.deepcopy(doc)), np.linspace(1200.0, 1400.0, 5),
                              model=ModelOptions(dipoles_per_rod=1))  # model=fast
    return fn, fn(_strong(p0))


@pytest.mark.parametrize("doc,changes", [(HERON, {}), (OBLIQUE, {"bias_nm": {"*": 2.0}}),
                                         (HERON, {"bias_nm": {"*": -3.0}}),
                                         (UPRIGHT, {"rods.round_corners": False, "bias_nm": {"*": -3.0}})],
                         ids=["heron-rounded", "oblique-disk-bias", "heron-negative-bias", "upright-sharp"])
def test_round_trip_design_layout_design_same_spectra(tmp_path, doc, changes):
    d, plan, paths = export(tmp_path, doc, **{"field.cells": [9, 8], **changes})
    rebuilt = []
    for fmt in ("gds", "oas"):
        polys, vecs = _read_back(paths[fmt], plan)
        a1, a2 = _lattice(vecs, 9, 8, plan.a1)
        assert np.array_equal(a1, plan.a1) and np.array_equal(a2, plan.a2)
        # the plain fit of each outline: within the grid of the design (angles within half a degree)
        fit = rebuild_design(d, polys, a1, a2, plan.options, fab(), exact=False)
        for e, f in zip(sorted(d.elements, key=lambda e: float(e.center[0])), fit.elements, strict=True):
            assert np.allclose(np.asarray(f.center), np.asarray(e.center), atol=1.0)
            if e.shape == "rod":
                assert abs(float(f.length) - float(e.length)) <= 1.5
                assert abs(float(f.width) - float(e.width)) <= 1.5
                assert abs((float(f.angle_deg) - float(e.angle_deg) + 90) % 180 - 90) <= 0.5
            else:
                assert abs(float(f.diameter) - float(e.diameter)) <= 1.5
        # on the deck's grid and angle step, the geometry read back decides the design
        rebuilt.append(rebuild_design(d, polys, a1, a2, plan.options, fab()))
    assert rebuilt[0].to_dict() == rebuilt[1].to_dict()  # GDSII and OASIS agree
    assert rebuilt[0].to_dict()["elements"] == d.to_dict()["elements"]
    fn, r0 = _forward(d.name)
    r1 = fn(_strong(rebuilt[0].params))
    assert np.max(np.abs(np.asarray(r0.t) - np.asarray(r1.t))) <= 1e-6  # issue requirement
    assert np.max(np.abs(np.asarray(r0.r) - np.asarray(r1.r))) <= 1e-6
    assert np.max(np.abs(np.asarray(r0.transmittance) - np.asarray(r1.transmittance))) <= 1e-6


def test_sharp_rotated_rod_on_a_fine_grid_is_reported_ambiguous(tmp_path):
    d, plan, paths = export(tmp_path, HERON, **{"rods.round_corners": False})
    polys, vecs = _read_back(paths["gds"], plan)
    a1, a2 = _lattice(vecs, 6, 5, plan.a1)
    # the 55° rod: its four snapped corners are also those of 328 × 92 and 329 × 93 nm rods
    with pytest.raises(LayoutError, match="ambiguous: 3 elements") as info:
        rebuild_design(d, polys, a1, a2, plan.options, fab())
    assert "328 × 93 nm at 55°" in str(info.value)


# -------------------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("changes,match", [
    ({"field.size_um": [100.0, 100.0], "field.cells": [3, 3]}, "layout.field: give exactly one"),
    ({"field.size_um": None, "field.cells": [0, 3]}, "layout.field.cells"),
    ({"layers.label": [90]}, r"layout.layers.label must be \[layer, datatype\]"),
    ({"formats": ["gds", "dxf"]}, "layout.formats"),
    ({"disks.vertices": 10}, "layout.disks.vertices must be a multiple of 4"),
    ({"dose.elements": ["boost", None]}, r"layout.dose.elements\[0\] = 'boost' is not a dose class"),
    ({"beam.current_nA": -1.0}, "layout.beam.current_nA must be > 0"),
])
def test_bad_settings_name_the_key(changes, match):
    with pytest.raises(LayoutError, match=match):
        layout_options(**changes)


def test_unknown_key_and_missing_material_and_sphere():
    doc = yaml.safe_load((ROOT / "conf/layout/field100.yaml").read_text())
    doc["colour"] = "red"
    with pytest.raises(LayoutError, match="layout: unknown key 'colour'"):
        parse_layout(doc)
    d = Design.from_json(copy.deepcopy(HERON))
    with pytest.raises(LayoutError, match="no entry for material 'gold_rakic1998'"):
        plan_layout(d, fab(), layout_options(**{"layers.materials": {"silver": [2, 0]}}))
    doc = copy.deepcopy(HERON)
    doc["elements"].append({"shape": "sphere", "material": "gold_rakic1998", "center": [0.0, 200.0],
                            "radius": 20.0})
    with pytest.raises(LayoutError, match="element 2 is a sphere"):
        plan_layout(Design.from_json(doc), fab(), layout_options())


# --------------------------------------------------------------------------------- exposure estimate
def test_exposure_time_is_dose_times_area_over_current(tmp_path):
    from invdesign._layout_traveller import exposure

    doc = copy.deepcopy(BROKEN)
    doc["elements"][1]["width"] = 60.0
    doc["elements"][1]["center"] = [90.0, 0.0]
    d = Design.from_json(doc)
    plan = plan_layout(d, fab(), layout_options(**{"rods.round_corners": False, "marks.enabled": False,
                                                   "field.size_um": None, "field.cells": [50, 40]}))
    # area dose is charge per area (definition): t = D·A/I; 900 µC/cm², 1 nA from conf/layout/field100.yaml
    area_cm2 = 50 * 40 * 2 * (200 * 60) * 1e-14
    expected = 900e-6 * area_cm2 / 1e-9
    assert exposure(plan)["seconds"] == pytest.approx(expected, rel=1e-12)
