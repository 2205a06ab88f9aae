"""Layout geometry in plain NumPy: element outlines, process bias, grid snapping, the field, marks, frames.

All coordinates are nm, counter-clockwise (n, 2) arrays, in the unit cell's frame (the design's origin).

* **Rods** are rectangles ``length × width`` rotated by ``angle_deg`` about their centre. With corner
  rounding each corner becomes a circular arc of radius r (clamped to half the shorter side), its vertices
  on the arc, enough of them that the chord-to-arc distance stays ≤ the arc tolerance; the rod's extents
  along its axes are unchanged by rounding (the arcs' end points are vertices).
* **Disks** are regular n-gons with the disk's area (vertex radius r·sqrt(2π / (n·sin(2π/n)))), so the
  written dose × area matches the design; n is given, or the smallest multiple of 4 (≥ 8) whose
  chord-to-circle distance is ≤ the tolerance.
* **Edge bias** b moves every edge outward by b (inward for b < 0): a rod becomes (L + 2b) × (W + 2b)
  with corner radius r + b (the exact offset of a rounded rectangle), a disk's diameter grows by 2b.
* **Snapping** rounds every vertex to the nearest multiple of the grid, halves upwards (towards +x, +y), and
  drops vertices that coincide. Rounding halves one way keeps a feature's size when its edges fall on
  half-grid points (a 93 nm wide rod centred on a 1 nm grid): it moves by half a step instead.

``element_from_outline`` reverses ``element_outline`` (for reading a layout back): the centre and axes
come from the polygon's area moments (exact for a rectangle or rounded rectangle, insensitive to snapping),
length and width from the extents along those axes, less the bias; a polygon whose vertices all lie
within a grid step of one radius is a disk, its diameter 2·sqrt(area/π) less the bias.
"""

import math

import jax.numpy as jnp
import numpy as np

from ._elements import Disk, Rod

MIN_DISK_VERTICES = 8


def _rotation(angle_deg: float) -> np.ndarray:
    if angle_deg % 90.0 == 0.0:  # exact quarter turns: no trigonometric round-off on the grid
        c, s = [(1, 0), (0, 1), (-1, 0), (0, -1)][int(angle_deg // 90.0) % 4]
        return np.array([[c, -s], [s, c]], float)
    th = math.radians(angle_deg)
    return np.array([[math.cos(th), -math.sin(th)], [math.sin(th), math.cos(th)]])


def arc_steps(radius: float, angle: float, tolerance: float) -> int:
    """Segments for an arc of ``radius`` (nm) spanning ``angle`` (rad) with chord-to-arc distance ≤ tol."""
    if radius <= tolerance:
        return 1
    step = 2.0 * math.acos(1.0 - tolerance / radius)
    return max(1, math.ceil(angle / step - 1e-12))


def rounded_rectangle(length: float, width: float, radius: float, tolerance: float) -> np.ndarray:
    """Centred, axis-aligned rectangle (nm) with arcs of ``radius`` at the corners; r = 0: 4 corners."""
    hl, hw = 0.5 * length, 0.5 * width
    r = min(max(radius, 0.0), hl, hw)
    if r <= 0.0:
        return np.array([[-hl, -hw], [hl, -hw], [hl, hw], [-hl, hw]])
    n = arc_steps(r, 0.5 * math.pi, tolerance)
    pts = []
    for k, (sx, sy) in enumerate(((1, -1), (1, 1), (-1, 1), (-1, -1))):
        cx, cy = sx * (hl - r), sy * (hw - r)
        start = -0.5 * math.pi + k * 0.5 * math.pi
        t = start + np.linspace(0.0, 0.5 * math.pi, n + 1)
        pts.append(np.stack([cx + r * np.cos(t), cy + r * np.sin(t)], axis=1))
    return _dedupe(np.concatenate(pts))


def disk_vertices(diameter: float, tolerance: float, fixed: int | None = None) -> int:
    """Vertex count of a disk's polygon: ``fixed``, or the smallest multiple of 4 ≥ 8 within tolerance."""
    if fixed is not None:
        return int(fixed)
    r = 0.5 * diameter
    n = 4 * math.ceil(arc_steps(r, 2 * math.pi, tolerance) / 4)
    return max(MIN_DISK_VERTICES, n)


def disk_polygon(diameter: float, n: int) -> np.ndarray:
    """Regular n-gon centred at the origin with the area of a disk of ``diameter`` (nm)."""
    r = 0.5 * diameter
    rv = r * math.sqrt(2 * math.pi / (n * math.sin(2 * math.pi / n)))
    t = 2 * math.pi * np.arange(n) / n
    return np.stack([rv * np.cos(t), rv * np.sin(t)], axis=1)


def element_outline(e, *, bias: float = 0.0, radius: float = 0.0, arc_tolerance: float = 0.5,
                    disk_tolerance: float = 0.5, disk_n: int | None = None) -> np.ndarray:
    """The written outline (nm, unsnapped) of a rod or disk after an edge bias of ``bias`` nm."""
    c = np.asarray(e.center, float)
    if e.shape == "rod":
        L, W = float(e.length) + 2 * bias, float(e.width) + 2 * bias
        if min(L, W) <= 0:
            raise ValueError(f"edge bias {bias:g} nm leaves nothing of a {float(e.length):g} × "
                             f"{float(e.width):g} nm rod")
        local = rounded_rectangle(L, W, radius + bias if radius > 0 else 0.0, arc_tolerance)
        return local @ _rotation(float(e.angle_deg)).T + c
    if e.shape == "disk":
        d = float(e.diameter) + 2 * bias
        if d <= 0:
            raise ValueError(f"edge bias {bias:g} nm leaves nothing of a {float(e.diameter):g} nm disk")
        return disk_polygon(d, disk_vertices(d, disk_tolerance, disk_n)) + c
    raise ValueError(f"a {e.shape} cannot be drawn in a layout (only rods and disks are flat)")


def _dedupe(pts: np.ndarray, eps: float = 1e-9) -> np.ndarray:
    keep = np.linalg.norm(pts - np.roll(pts, 1, axis=0), axis=1) > eps
    return pts[keep] if keep.any() else pts[:1]


def snap(pts: np.ndarray, grid: float) -> np.ndarray:
    """Vertices rounded to the nearest multiple of ``grid`` (nm), halves upwards; coinciding neighbours
    removed."""
    out = _dedupe(np.floor(np.asarray(pts, float) / grid + 0.5 + 1e-9) * grid)
    if len(out) < 3:
        raise ValueError(f"a shape collapses to fewer than 3 vertices on a {grid:g} nm grid")
    return out


def area(pts: np.ndarray) -> float:
    """Signed area (nm², positive counter-clockwise) by the shoelace formula."""
    x, y = pts[:, 0], pts[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


# ------------------------------------------------------------------------------------------ field
def field_counts(a1, a2, cells=None, size_um=None) -> tuple:
    """(n1, n2) cells along a1, a2: given, or as many as fit in ``size_um`` = (X, Y) µm.

    For ``size_um``, n1 = floor(X/|a1|) and n2 = floor(Y/h2), with h2 = |a1 × a2|/|a1| the spacing of
    rows perpendicular to a1 (so an oblique field is the parallelogram n1·a1 × n2·a2 of that width and
    height). At least one cell each way.
    """
    if cells is not None:
        return int(cells[0]), int(cells[1])
    a1, a2 = np.asarray(a1, float), np.asarray(a2, float)
    p1 = float(np.linalg.norm(a1))
    h2 = abs(float(a1[0] * a2[1] - a1[1] * a2[0])) / p1
    return max(1, math.floor(size_um[0] * 1000.0 / p1 + 1e-9)), max(1, math.floor(size_um[1] * 1000.0 / h2
                                                                                  + 1e-9))


def array_origin(a1, a2, n1: int, n2: int, grid: float) -> np.ndarray:
    """Position (nm) of the first cell so the array is centred on (0, 0), snapped to ``grid``."""
    o = -0.5 * ((n1 - 1) * np.asarray(a1, float) + (n2 - 1) * np.asarray(a2, float))
    return np.round(o / grid) * grid


def array_bbox(cell_pts: list, a1, a2, n1: int, n2: int, origin) -> np.ndarray:
    """[[xmin, ymin], [xmax, ymax]] (nm) of every shape of the arrayed unit cell."""
    pts = np.concatenate(cell_pts)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    corners = [origin + i * (n1 - 1) * np.asarray(a1, float) + j * (n2 - 1) * np.asarray(a2, float)
               for i in (0, 1) for j in (0, 1)]
    cs = np.array(corners)
    return np.array([cs.min(axis=0) + lo, cs.max(axis=0) + hi])


# ------------------------------------------------------------------------------- marks and frames
def mark_polygons(size: float, line: float) -> list:
    """Our alignment mark, centred on (0, 0), nm: four L-shaped corner brackets of a square of side
    ``size`` (arms 0.4·size long, ``line`` wide, open at the middle of each side), a solid centre square
    of side 2·line, and one ``line``-sized square at (size/4, size/4) that shows the orientation (it sits
    in the +x +y quadrant of the mark as drawn)."""
    h, a, w = 0.5 * size, 0.4 * size, line
    bracket = np.array([[h, h], [h - a, h], [h - a, h - w], [h - w, h - w], [h - w, h - a], [h, h - a]])
    polys = [bracket @ _rotation(90.0 * k).T for k in range(4)]
    polys.append(np.array([[-w, -w], [w, -w], [w, w], [-w, w]]))
    q = 0.25 * size
    polys.append(np.array([[q - w / 2, q - w / 2], [q + w / 2, q - w / 2], [q + w / 2, q + w / 2],
                           [q - w / 2, q + w / 2]]))
    return polys


def frame_polygons(side: float, line: float) -> list:
    """A square outline of outer side ``side`` (nm), ``line`` wide, centred on (0, 0): four rectangles."""
    h, i = 0.5 * side, 0.5 * side - line
    return [np.array(p, float) for p in (
        [[-h, -h], [h, -h], [h, -i], [-h, -i]], [[-h, i], [h, i], [h, h], [-h, h]],
        [[-h, -i], [-i, -i], [-i, i], [-h, i]], [[i, -i], [h, -i], [h, i], [i, i]])]


# ------------------------------------------------------------------------------------- read back
def _moments(pts: np.ndarray):
    """Area, centroid and second central moments (Ixx, Iyy, Ixy) of a simple polygon (nm units)."""
    x, y = pts[:, 0], pts[:, 1]
    xn, yn = np.roll(x, -1), np.roll(y, -1)
    cr = x * yn - xn * y
    a = 0.5 * cr.sum()
    cx = ((x + xn) * cr).sum() / (6 * a)
    cy = ((y + yn) * cr).sum() / (6 * a)
    ixx = ((x * x + x * xn + xn * xn) * cr).sum() / 12 - a * cx * cx
    iyy = ((y * y + y * yn + yn * yn) * cr).sum() / 12 - a * cy * cy
    ixy = ((x * yn + 2 * x * y + 2 * xn * yn + xn * y) * cr).sum() / 24 - a * cx * cy
    return a, np.array([cx, cy]), ixx, iyy, ixy


def element_from_outline(pts, material: str, thickness: float, *, bias: float = 0.0, grid: float = 1.0):
    """A ``Rod`` or ``Disk`` (nm) from a written outline (n, 2) nm, undoing an edge bias of ``bias`` nm.

    The rod angle is returned in [0°, 180°), measured to the long axis; a square rod (L = W) has no long
    axis and takes the direction of its longest edge.
    """
    pts = np.asarray(pts, float)
    a, c, ixx, iyy, ixy = _moments(pts)
    if a < 0:
        pts = pts[::-1]
        a, c, ixx, iyy, ixy = _moments(pts)
    radii = np.linalg.norm(pts - c, axis=1)
    if len(pts) >= MIN_DISK_VERTICES and radii.max() - radii.min() <= 2 * grid:
        d = 2 * math.sqrt(a / math.pi) - 2 * bias
        return Disk(jnp.asarray(c), jnp.asarray(d), jnp.asarray(float(thickness)), material)
    # the polygon's x-moment ∫x² dA = ixx; its long axis maximises the moment of the coordinate along it
    ang = 0.5 * math.atan2(2 * ixy, ixx - iyy)
    if abs(ixx - iyy) + abs(ixy) < 1e-6 * (ixx + iyy):
        edges = np.roll(pts, -1, axis=0) - pts
        k = int(np.argmax(np.linalg.norm(edges, axis=1)))
        ang = math.atan2(edges[k, 1], edges[k, 0])
    u = np.array([math.cos(ang), math.sin(ang)])
    v = np.array([-u[1], u[0]])
    pu, pv = (pts - c) @ u, (pts - c) @ v
    L, W = pu.max() - pu.min() - 2 * bias, pv.max() - pv.min() - 2 * bias
    centre = c + 0.5 * (pu.max() + pu.min()) * u + 0.5 * (pv.max() + pv.min()) * v
    deg = math.degrees(ang) % 180.0
    deg = 0.0 if deg > 180.0 - 1e-9 else deg
    return Rod(jnp.asarray(centre), jnp.asarray(L), jnp.asarray(W), jnp.asarray(float(thickness)),
               jnp.asarray(deg), material)
