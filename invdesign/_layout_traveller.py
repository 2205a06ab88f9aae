"""The fab traveller that goes beside a layout: ``traveller.md`` and ``cell.png`` (the unit cell with its
dimensions), from a ``LayoutPlan`` and the written files.

Exposure-time estimate (stated in the traveller too):

    t = Σ_k D_k · A_k / I,   D_k = f_k · D_0

with D_0 the base area dose (µC/cm²), f_k the dose factor of class k, A_k the area written in class k over
the whole field (cm², from the snapped polygons as written, bias included) and I the beam current (nA).
It is the beam-on time only — a lower bound of the tool time.
"""

import datetime
import hashlib
import math

import numpy as np

from ._atomic import atomic_savefig
from ._layout import LayoutPlan, format_violation
from ._layout_shapes import area, mark_polygons
from ._layout_write import frame_tiles

NM2_PER_CM2 = 1e14

CAUTIONS = """\
Making this surface involves hazardous materials and equipment: electron-beam resists and their developers,
solvents such as acetone and isopropanol, lift-off and etch chemistry (including etch gases and plasma
tools), metal evaporation or sputtering, and high-voltage electron-beam tools. The finished device is used
with lasers. Follow local codes and regulations, your lab's safety rules (including laser safety: eyewear
rated for the wavelength and power, interlocks, beam enclosures), the tool owners' procedures and your lab
safety officer. The numbers above are a planning aid, not a process recipe: doses, currents and corrections
must be set by the tool owner or a qualified process engineer. invdesign gives no safety advice of its own
and this traveller is no substitute for licensed professional practice."""


def exposure(plan: LayoutPlan) -> dict:
    """Written areas (cm²) and beam-on times (s) per dose class and for the marks; see module docstring."""
    o = plan.options
    classes = {}
    for w in plan.elements:
        key = w.dose_class or "base"
        c = classes.setdefault(key, {"factor": w.dose_factor, "layer": f"{w.layer}/{w.datatype}",
                                     "area_cm2": 0.0})
        c["area_cm2"] += w.area_nm2 * plan.cells / NM2_PER_CM2
    if o.marks:
        a = sum(abs(area(p)) for p in mark_polygons(o.mark_size_um * 1000, o.mark_line_um * 1000)) * 4
        classes["alignment marks"] = {"factor": 1.0, "layer": "{}/{}".format(*o.marks_layer),
                                      "area_cm2": a / NM2_PER_CM2}
    total = 0.0
    for c in classes.values():
        c["dose_uC_cm2"] = c["factor"] * o.base_dose_uC_cm2
        charge_C = c["dose_uC_cm2"] * 1e-6 * c["area_cm2"]
        c["seconds"] = charge_C / (o.beam_current_nA * 1e-9)
        total += c["seconds"]
    return {"classes": classes, "seconds": total}


def _duration(s: float) -> str:
    if s < 120:
        return f"{s:.3g} s"
    if s < 7200:
        return f"{s / 60:.3g} min"
    return f"{s / 3600:.3g} h"


def _sha256(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _row(*cells) -> str:
    return "| " + " | ".join(str(c) for c in cells) + " |"


def _element_rows(plan: LayoutPlan) -> list:
    rows = [_row("#", "shape", "material", "centre x, y (nm)", "length × width (nm)", "angle (deg)",
                 "thickness (nm)", "bias (nm)", "as written (nm)", "layer/datatype", "dose class",
                 "written area (nm²)"),
            _row(*["---"] * 12)]
    for w in plan.elements:
        e = w.element
        c = np.asarray(e.center, float)
        if e.shape == "rod":
            dims, ang = f"{float(e.length):g} × {float(e.width):g}", f"{float(e.angle_deg):g}"
            wr = f"{float(e.length) + 2 * w.bias_nm:g} × {float(e.width) + 2 * w.bias_nm:g}"
        else:
            dims, ang = f"⌀ {float(e.diameter):g}", "–"
            wr = f"⌀ {float(e.diameter) + 2 * w.bias_nm:g}"
        rows.append(_row(w.index, e.shape, e.material, f"{c[0]:g}, {c[1]:g}", dims, ang,
                         f"{float(e.thickness):g}", f"{w.bias_nm:g}", wr, f"{w.layer}/{w.datatype}",
                         w.dose_class or "base", f"{w.area_nm2:.0f}"))
    return rows


def traveller_text(plan: LayoutPlan, files: dict, *, design_path: str = "", forced: bool = False,
                   png: str | None = None) -> str:
    """The traveller as Markdown."""
    o, d, fab = plan.options, plan.design, plan.fab
    cell_area = abs(float(plan.a1[0] * plan.a2[1] - plan.a1[1] * plan.a2[0]))
    written = sum(w.area_nm2 for w in plan.elements)
    exp = exposure(plan)
    n_el = len(plan.elements)
    marks = 4 * len(mark_polygons(1.0, 0.1)) if o.marks else 0
    nx, ny, _ = frame_tiles(plan)
    fw, fh = plan.field_um
    thick = sorted({float(w.element.thickness) for w in plan.elements})
    angle = math.degrees(math.acos(float(np.dot(plan.a1, plan.a2))
                                   / (np.linalg.norm(plan.a1) * np.linalg.norm(plan.a2))))
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    L = [f"# Fab traveller: {d.name or 'unnamed design'}", "",
         f"Written by `invdesign export` on {stamp}. Lengths in nm unless marked µm.", ""]
    if plan.violations:
        head = "WRITTEN WITH force=true DESPITE" if forced else "THE DESIGN HAS"
        L += [f"**{head} {len(plan.violations)} RULE VIOLATION(S) — see 'Rule check' below.**", ""]
    L += ["## Files", "", _row("file", "format", "bytes", "sha256"), _row("---", "---", "---", "---")]
    for fmt, p in files.items():
        L.append(_row(p.name, {"gds": "GDSII", "oas": "OASIS"}[fmt], p.stat().st_size, _sha256(p)))
    if png:
        L.append(_row(png, "PNG drawing of the unit cell", "", ""))
    L += ["", "## Source", "",
          f"- design: `{design_path or '(in memory)'}` — {d.name or 'unnamed'}"
          + (f"; {d.notes}" if d.notes else ""),
          f"- fab deck: `{fab.name}` — {fab.label}", f"- layout settings: `{o.name}` — {o.label}",
          f"- cells: unit cell `{plan.unit_name}`, top cell `{plan.top_name}`", "",
          "## Units, grid and corrections", "",
          f"- database unit {o.database_nm:g} nm, user unit {o.user_um:g} µm; every vertex on a "
          f"{plan.grid_nm:g} nm grid",
          "- rod corners: " + (f"rounded, radius {plan.corner_radius_nm:g} nm (plus bias), arc tolerance "
                                f"{o.arc_tolerance_nm:g} nm" if plan.corner_radius_nm > 0 else "sharp"),
          "- disks: " + (f"{o.disk_vertices} vertices" if o.disk_vertices else
                         f"regular polygons within {o.disk_tolerance_nm:g} nm of the circle") + ", same area",
          "- edge bias per material: " + (", ".join(f"{k}: {v:g} nm" for k, v in o.bias_nm.items()) or "none")
          + " (positive grows every edge outward)", "",
          "## Layers", "", _row("layer/datatype", "content", "dose"), _row("---", "---", "---")]
    for key, c in exp["classes"].items():
        what = "alignment marks (exposed)" if key == "alignment marks" else f"elements, dose class {key}"
        dose = f"{c['factor']:g} × {o.base_dose_uC_cm2:g} = {c['dose_uC_cm2']:g} µC/cm²"
        L.append(_row(c["layer"], what, dose))
    L.append(_row("{}/{}".format(*o.label_layer), "label texts (identity and parameters; not for exposure)",
                  "–"))
    if o.frame:
        L.append(_row("{}/{}".format(*o.frame_layer), "write-field frame (reference only; not for exposure)",
                      "–"))
    L += ["", "## Unit cell", "",
          f"- lattice a1 = ({plan.a1[0]:g}, {plan.a1[1]:g}) nm, a2 = ({plan.a2[0]:g}, {plan.a2[1]:g}) nm; "
          f"periods {np.linalg.norm(plan.a1):g} and {np.linalg.norm(plan.a2):g} nm at {angle:g}°; "
          f"cell area {cell_area:g} nm²",
          f"- film thickness: {', '.join(f'{t:g}' for t in thick)} nm "
          f"(deck allows {', '.join(f'{t:g}' for t in fab.thickness_nm)})",
          f"- written area per cell {written:.0f} nm²; fill factor {written / cell_area:.4f}", ""]
    L += _element_rows(plan)
    total_area_um2 = written * plan.cells / 1e6
    L += ["", "## Field", "",
          f"- {plan.n1} × {plan.n2} = {plan.cells} cells, one array reference; extent {fw:.3f} × {fh:.3f} µm",
          f"- write field {o.write_field_um:g} µm, stitching {'allowed' if o.stitching else 'not allowed'}; "
          f"{nx} × {ny} write field(s) cover the field",
          f"- shapes: {n_el} polygon(s) in the unit cell, {n_el * plan.cells} when flattened"
          + (f", plus {marks} in the 4 alignment marks" if marks else ""),
          f"- written area of the elements: {total_area_um2:.4g} µm²", "",
          "## Exposure-time estimate", "",
          "t = Σ_k D_k · A_k / I with D_k = f_k · D_0 the area dose of class k (µC/cm²), A_k the area "
          "written in class k (cm²) and I the beam current (nA).", "",
          f"D_0 = {o.base_dose_uC_cm2:g} µC/cm², I = {o.beam_current_nA:g} nA.", "",
          _row("class", "layer/datatype", "dose (µC/cm²)", "area (cm²)", "beam-on time"),
          _row("---", "---", "---", "---", "---")]
    for key, c in exp["classes"].items():
        L.append(_row(key, c["layer"], f"{c['dose_uC_cm2']:g}", f"{c['area_cm2']:.4g}",
                      _duration(c["seconds"])))
    L += ["", f"**Total beam-on time: {_duration(exp['seconds'])}** ({exp['seconds']:.4g} s). This is a "
          "lower bound: beam settling, stage moves, stitching, height and registration steps and any "
          "proximity correction add to it; ask the tool owner for the tool's own estimate.", "",
          "## Rule check", ""]
    if plan.violations:
        L.append(f"{len(plan.violations)} violation(s) of fab deck `{fab.name}` or the layout's rules"
                 + (" (written anyway: force=true)" if forced else "") + ":")
        L += [""] + [f"- {format_violation(v)}" for v in plan.violations]
    else:
        L.append(f"No violations: the design obeys fab deck `{fab.name}` (widths, lengths, gaps including "
                 f"periodic images, aspect, thickness, grid, angle step, period) and the field fits the "
                 f"write-field rule.")
    L += ["", "## Cautions", "", CAUTIONS, ""]
    return "\n".join(L)


def plot_cell(plan: LayoutPlan, path) -> None:
    """PNG of the unit cell as written (nm), with the lattice vectors and every element's dimensions."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Polygon

    a1, a2 = plan.a1, plan.a2
    fig, ax = plt.subplots(figsize=(7, 7), constrained_layout=True)
    corners = np.array([-(a1 + a2), a1 - a2, a1 + a2, a2 - a1]) / 2
    ax.add_patch(Polygon(corners, closed=True, fill=False, ls="--", color="0.4"))
    for i in (-1, 0, 1):
        for j in (-1, 0, 1):
            if i or j:
                for w in plan.elements:
                    ax.add_patch(Polygon(w.outline + i * a1 + j * a2, closed=True, color="0.88"))
    for w in plan.elements:
        ax.add_patch(Polygon(w.outline, closed=True, color="goldenrod", ec="k", lw=0.5))
        _dimension_element(ax, w)
    dim = dict(arrowstyle="<->", color="tab:blue", lw=1.0)
    base = corners[0] - 0.08 * (a2 / np.linalg.norm(a2)) * np.linalg.norm(a2)
    ax.annotate("", base + a1, base, arrowprops=dim)
    ax.text(*(base + a1 / 2 - 0.04 * a2), f"a1 = ({a1[0]:g}, {a1[1]:g}) nm", color="tab:blue", ha="center",
            va="top", fontsize=8)
    side = corners[0] - 0.08 * a1
    ax.annotate("", side + a2, side, arrowprops=dim)
    ax.text(*(side + a2 / 2 - 0.04 * a1), f"a2 = ({a2[0]:g}, {a2[1]:g}) nm", color="tab:blue", rotation=90,
            ha="right", va="center", fontsize=8)
    span = np.abs(corners).max() * 1.35
    ax.set_xlim(-span, span)
    ax.set_ylim(-span, span)
    ax.set_aspect("equal")
    ax.set(xlabel="x (nm)", ylabel="y (nm)",
           title=f"{plan.design.name or 'design'}: unit cell as written (grid {plan.grid_nm:g} nm; "
                 f"grey: neighbouring cells)")
    atomic_savefig(fig, path, dpi=130)


def _dimension_element(ax, w) -> None:
    e = w.element
    c = np.asarray(e.center, float)
    if e.shape == "disk":
        d = float(e.diameter) + 2 * w.bias_nm
        ax.annotate("", c + [d / 2, 0], c - [d / 2, 0], arrowprops=dict(arrowstyle="<->", lw=0.8))
        ax.text(c[0], c[1] + 4, f"#{w.index} ⌀{d:g}", ha="center", va="bottom", fontsize=7)
        return
    L, W = float(e.length) + 2 * w.bias_nm, float(e.width) + 2 * w.bias_nm
    th = math.radians(float(e.angle_deg))
    u, v = np.array([math.cos(th), math.sin(th)]), np.array([-math.sin(th), math.cos(th)])
    arrow = dict(arrowstyle="<->", lw=0.8, color="k")
    off = (W / 2 + 12) * v
    ax.annotate("", c + off + L / 2 * u, c + off - L / 2 * u, arrowprops=arrow)
    ax.text(*(c + off + 6 * v), f"{L:g}", ha="center", va="center", fontsize=7,
            rotation=(math.degrees(th) + 90) % 180 - 90)
    end = c + (L / 2 + 12) * u
    ax.annotate("", end + W / 2 * v, end - W / 2 * v, arrowprops=arrow)
    ax.text(*(end + 14 * u), f"{W:g}", ha="center", va="center", fontsize=7)
    ax.text(*c, f"#{w.index}\n{float(e.angle_deg):g}°", ha="center", va="center", fontsize=7)
