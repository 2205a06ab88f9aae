"""In-plane footprints of elements and the distances between them (plain NumPy, concrete values).

Used to validate designs (no overlaps, also across the periodic boundary) and, later, to check fab rules
(minimum gap). Footprints are convex polygons in nm: a rod's rectangle exactly, a disk's or sphere's
circle as a regular 64-gon circumscribing the circle (so it never under-reports an overlap; the gap it
reports is at most 0.12 % of the radius too small).
"""

import math

import numpy as np

_CIRCLE_SIDES = 64


def footprint(element) -> np.ndarray:
    """Counter-clockwise (n, 2) polygon of an element's footprint, nm."""
    cx, cy = (float(v) for v in np.asarray(element.center))
    if element.shape == "rod":
        th = math.radians(float(element.angle_deg))
        u = np.array([math.cos(th), math.sin(th)])
        v = np.array([-math.sin(th), math.cos(th)])
        hl, hw = 0.5 * float(element.length), 0.5 * float(element.width)
        corners = [(-hl, -hw), (hl, -hw), (hl, hw), (-hl, hw)]
        return np.array([[cx, cy] + a * u + b * v for a, b in corners])
    radius = 0.5 * float(element.diameter) if element.shape == "disk" else float(element.radius)
    r_out = radius / math.cos(math.pi / _CIRCLE_SIDES)
    ang = 2 * math.pi * np.arange(_CIRCLE_SIDES) / _CIRCLE_SIDES
    return np.stack([cx + r_out * np.cos(ang), cy + r_out * np.sin(ang)], axis=1)


def _overlap(p: np.ndarray, q: np.ndarray) -> bool:
    """Separating-axis test for two convex polygons (touching counts as not overlapping)."""
    for poly in (p, q):
        edges = np.roll(poly, -1, axis=0) - poly
        normals = np.stack([-edges[:, 1], edges[:, 0]], axis=1)
        for n in normals:
            a, b = p @ n, q @ n
            if a.max() <= b.min() + 1e-9 or b.max() <= a.min() + 1e-9:
                return False
    return True


def _point_segment(pt, a, b) -> float:
    ab = b - a
    t = np.clip(np.dot(pt - a, ab) / max(np.dot(ab, ab), 1e-300), 0.0, 1.0)
    return float(np.linalg.norm(pt - (a + t * ab)))


def polygon_gap(p: np.ndarray, q: np.ndarray) -> float:
    """Edge-to-edge distance between two convex polygons, nm; negative (-1.0) when they overlap."""
    if _overlap(p, q):
        return -1.0
    best = math.inf
    for poly, other in ((p, q), (q, p)):
        nxt = np.roll(other, -1, axis=0)
        for pt in poly:
            for a, b in zip(other, nxt, strict=True):
                best = min(best, _point_segment(pt, a, b))
    return best


def image_shifts(a1, a2, reach: int = 2) -> np.ndarray:
    """Lattice translations n1 a1 + n2 a2 with |n_i| ≤ reach, nm, shape ((2 reach + 1)², 2)."""
    n = np.arange(-reach, reach + 1)
    n1, n2 = np.meshgrid(n, n)
    return n1.reshape(-1, 1) * np.asarray(a1, float) + n2.reshape(-1, 1) * np.asarray(a2, float)


def pair_gaps(elements, a1, a2):
    """Smallest gap between every pair of elements, periodic images included.

    Returns a list of (i, j, gap_nm) with i ≤ j (i == j: an element against its own images); a negative
    gap means overlap.
    """
    polys = [footprint(e) for e in elements]
    shifts = image_shifts(a1, a2)
    out = []
    for i in range(len(polys)):
        for j in range(i, len(polys)):
            gaps = [
                polygon_gap(polys[i], polys[j] + s)
                for s in shifts
                if not (i == j and np.allclose(s, 0.0))
            ]
            out.append((i, j, min(gaps)))
    return out


def wrap_into_cell(center, a1, a2) -> np.ndarray:
    """Translate an in-plane point by lattice vectors into the cell centred on the origin."""
    m = np.stack([np.asarray(a1, float), np.asarray(a2, float)], axis=1)
    frac = np.linalg.solve(m, np.asarray(center, float))
    frac = frac - np.floor(frac + 0.5)
    return m @ frac
