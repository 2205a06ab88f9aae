"""Fab rules twice: as smooth penalties for the optimiser, and as exact checks for the final design.

Smooth gaps. The edge-to-edge gap between two non-overlapping convex polygons is reached at a vertex of
one against the other polygon, so the gap between rods A and B equals the smallest signed distance from
A's boundary points to B's rectangle and from B's to A's. We sample each rod's boundary at its corners
and ``SAMPLES_PER_EDGE − 1`` points along every edge (the edge points make crossing rods, whose corners
all lie outside each other, read as overlapping), evaluate the exact signed distance of a rectangle at
those points, and take a soft minimum −τ·log Σ exp(−d/τ) with τ = ``SOFTMIN_NM``. The soft minimum never
exceeds the true minimum, so the smooth gap is a lower bound of the exact gap for separated rods: meeting
the penalty's threshold implies meeting the rule. Images across the periodic boundary use the 3 × 3
neighbouring cells (centres stay inside the cell by construction of the families).

Penalty (dimensionless, 0 when every rule holds with its margin):

    P = Σ_pairs relu((g_min + margin − gap)/g_min)² + Σ_rods relu((L/W − A_max)/A_max)²

Length, width, period and angle bounds need no penalty: the families' transforms keep them inside.

Exact checks (``check_rules``) use ``invdesign._geometry.pair_gaps`` (exact polygons, 5 × 5 images) and the
deck's numbers without margin. Rods are checked as sharp rectangles: rounded corners only widen gaps, so
this is conservative for the gap rule.
"""

import dataclasses
import math

import jax
import jax.numpy as jnp
import numpy as np

from ._elements import stack_elements
from ._geometry import pair_gaps
from ._spec import FabDeck, Spec, zero_order_period_limit

SAMPLES_PER_EDGE = 6
SOFTMIN_NM = 1.0
#: tolerance of the exact grid check (nm or degrees): values are snapped in float64
GRID_TOL = 1e-6


def _rod_frame(rod):
    th = jnp.deg2rad(rod.angle_deg)
    return jnp.cos(th), jnp.sin(th)


def boundary_points(rod) -> jax.Array:
    """(4·SAMPLES_PER_EDGE, 2) points on the rod's rectangle outline (corners included), nm."""
    c, s = _rod_frame(rod)
    u, v = jnp.stack([c, s]), jnp.stack([-s, c])
    hl, hw = 0.5 * rod.length, 0.5 * rod.width
    t = jnp.arange(SAMPLES_PER_EDGE) / SAMPLES_PER_EDGE  # [0, 1)
    corners = [(-1, -1), (1, -1), (1, 1), (-1, 1)]
    pts = []
    for k in range(4):
        a, b = corners[k], corners[(k + 1) % 4]
        pa = a[0] * hl * u + a[1] * hw * v
        pb = b[0] * hl * u + b[1] * hw * v
        pts.append(pa[None] + t[:, None] * (pb - pa)[None])
    return jnp.concatenate(pts) + rod.center[None]


def _safe_norm(x):
    sq = jnp.sum(x * x, axis=-1)
    pos = sq > 0
    return jnp.where(pos, jnp.sqrt(jnp.where(pos, sq, 1.0)), 0.0)


def rect_sdf(points, rod) -> jax.Array:
    """Exact signed distance (nm) from points (..., 2) to the rod's rectangle; negative inside."""
    c, s = _rod_frame(rod)
    d = points - rod.center
    lx = d[..., 0] * c + d[..., 1] * s
    ly = -d[..., 0] * s + d[..., 1] * c
    q = jnp.stack([jnp.abs(lx) - 0.5 * rod.length, jnp.abs(ly) - 0.5 * rod.width], axis=-1)
    outside = _safe_norm(jnp.maximum(q, 0.0))
    inside = jnp.minimum(jnp.maximum(q[..., 0], q[..., 1]), 0.0)
    return outside + inside


def softmin(x, tau=SOFTMIN_NM):
    """−τ·log Σ exp(−x/τ) ≤ min(x): a smooth lower bound of the minimum."""
    return -tau * jax.nn.logsumexp(-jnp.ravel(x) / tau)


#: neighbouring-cell shifts (n1, n2) of the smooth gaps, (9, 2); (0, 0) is index 4
SHIFTS = np.array([(i, j) for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float)
#: stands in for a distance that does not exist (a rod against itself); exp(−BIG/τ) is exactly 0
_BIG_NM = 1e9


def smooth_gaps(params) -> jax.Array:
    """Smooth lower bounds of every pair's gap (nm), periodic images included: (n_pairs,) for i ≤ j.

    Pair p = (i, j) (row-major over i ≤ j) sees rod j shifted by every neighbour-cell vector S of
    ``SHIFTS`` (a rod against its own images when i = j, shift 0 left out): the signed distances of rod
    i's boundary points to rod j + S and of rod j + S's points to rod i, all in one soft minimum. One
    vectorised expression over (pairs, shifts, points): unrolling it in Python made the penalty's
    gradient 62k lines of XLA for three rods, seven times the optical model's (measured), and its compile
    the slowest part of an optimiser step.
    """
    rods = stack_elements(params.elements)
    n = len(params.elements)
    i_idx, j_idx = np.triu_indices(n)
    shifts = jnp.asarray(SHIFTS[:, :1]) * params.a1 + jnp.asarray(SHIFTS[:, 1:]) * params.a2   # (9, 2)
    pts = jax.vmap(boundary_points)(rods)                                                        # (n, P, 2)
    take = lambda idx: jax.tree_util.tree_map(lambda x: x[idx], rods)  # noqa: E731
    rod_i, rod_j = take(i_idx), take(j_idx)
    # points of i against j + S  ≡  points of i − S against j; points of j + S against i
    d_ij = jax.vmap(lambda p, r: rect_sdf(p[None] - shifts[:, None], r))(pts[i_idx], rod_j)   # (pairs, 9, P)
    d_ji = jax.vmap(lambda p, r: rect_sdf(p[None] + shifts[:, None], r))(pts[j_idx], rod_i)
    self_image = jnp.asarray((i_idx == j_idx)[:, None] & np.all(SHIFTS == 0, axis=1)[None, :])  # (pairs, 9)
    d = jnp.where(self_image[..., None], _BIG_NM, jnp.concatenate([d_ij, d_ji], axis=-1))
    return -SOFTMIN_NM * jax.nn.logsumexp(-d.reshape(len(i_idx), -1) / SOFTMIN_NM, axis=1)


def rule_penalty(params, fab: FabDeck, gap_margin_nm: float = 2.0) -> tuple[jax.Array, dict]:
    """Smooth penalty P (see module docstring) and its parts {gap, aspect}."""
    g = smooth_gaps(params)
    gmin = fab.min_gap_nm
    gap_term = jnp.sum(jax.nn.relu((gmin + gap_margin_nm - g) / gmin) ** 2)
    aspects = jnp.stack([e.length / e.width for e in params.elements])
    asp_term = jnp.sum(jax.nn.relu((aspects - fab.max_aspect) / fab.max_aspect) ** 2)
    return gap_term + asp_term, {"gap": gap_term, "aspect": asp_term, "min_smooth_gap_nm": jnp.min(g)}


# ----------------------------------------------------------------------------------- exact rules
def _on_grid(x: float, step: float) -> bool:
    return abs(x / step - round(x / step)) * step <= GRID_TOL


def check_rules(params, fab: FabDeck, spec: Spec | None = None) -> list[dict]:
    """Every fab-rule violation of concrete ``CellParams``, exactly (no smoothing, no margin).

    Returns a list of {rule, where, value, limit, miss, unit}; empty when the cell obeys the deck.
    ``spec`` adds the zero-order rule (unless the spec allows diffraction).
    """
    out = []

    def bad(rule, where, value, limit, unit="nm"):
        out.append({"rule": rule, "where": where, "value": float(value), "limit": float(limit),
                    "miss": float(abs(value - limit)), "unit": unit})

    els = params.elements
    a1, a2 = np.asarray(params.a1, float), np.asarray(params.a2, float)
    for i, j, gap in pair_gaps(els, a1, a2):
        where = f"rod {i} and its periodic image" if i == j else f"rods {i} and {j}"
        if gap < 0:
            out.append({"rule": "overlap", "where": where, "value": float(gap), "limit": 0.0,
                        "miss": math.inf, "unit": "nm"})
        elif gap < fab.min_gap_nm - GRID_TOL:
            bad("min_gap", where, gap, fab.min_gap_nm)
    for i, e in enumerate(els):
        L, W, T = float(e.length), float(e.width), float(e.thickness)
        if L < fab.length_min_nm - GRID_TOL:
            bad("length_min", f"rod {i}", L, fab.length_min_nm)
        if L > fab.length_max_nm + GRID_TOL:
            bad("length_max", f"rod {i}", L, fab.length_max_nm)
        if W < fab.width_min_nm - GRID_TOL:
            bad("width_min", f"rod {i}", W, fab.width_min_nm)
        if W > fab.width_max_nm + GRID_TOL:
            bad("width_max", f"rod {i}", W, fab.width_max_nm)
        if L / W > fab.max_aspect + 1e-9:
            bad("max_aspect", f"rod {i}", L / W, fab.max_aspect, unit="")
        if not any(abs(T - t) < 1e-9 for t in fab.thickness_nm):
            bad("thickness", f"rod {i}", T, min(fab.thickness_nm, key=lambda t: abs(t - T)))
        for k, x in enumerate(np.asarray(e.center, float)):
            if not _on_grid(x, fab.grid_nm):
                bad("grid", f"rod {i} centre {'xy'[k]}", x, round(x / fab.grid_nm) * fab.grid_nm)
        for name, x in (("length", L), ("width", W)):
            if not _on_grid(x, fab.grid_nm):
                bad("grid", f"rod {i} {name}", x, round(x / fab.grid_nm) * fab.grid_nm)
        ang = float(e.angle_deg)
        if not _on_grid(ang, fab.angle_step_deg):
            bad("angle_step", f"rod {i} angle", ang, round(ang / fab.angle_step_deg) * fab.angle_step_deg,
                "deg")
    for name, vec in (("a1", a1), ("a2", a2)):
        p = float(np.linalg.norm(vec))
        if p < fab.period_min_nm - GRID_TOL:
            bad("period_min", f"lattice {name}", p, fab.period_min_nm)
        if p > fab.period_max_nm + GRID_TOL:
            bad("period_max", f"lattice {name}", p, fab.period_max_nm)
        for k, x in enumerate(vec):
            if not _on_grid(float(x), fab.grid_nm):
                bad("grid", f"lattice {name}[{k}]", x, round(x / fab.grid_nm) * fab.grid_nm)
        if spec is not None and not spec.allow_diffraction:
            limit = zero_order_period_limit(spec)
            if p >= limit:
                bad("zero_order", f"lattice {name}", p, limit)
    return out


def snap(params, fab: FabDeck, spec: Spec):
    """Snap concrete ``CellParams`` to the placement grid and angle step, staying inside the deck's ranges.

    Centres, lengths, widths and periods go to the nearest multiple of ``grid_nm`` (lengths, widths and
    periods to the nearest multiple inside their allowed range); angles to the nearest ``angle_step_deg``.
    """
    from ._design import CellParams

    g = fab.grid_nm

    def in_range(x, lo, hi):
        lo_g, hi_g = math.ceil(lo / g - 1e-9) * g, math.floor(hi / g + 1e-9) * g
        return float(min(max(round(x / g) * g, lo_g), hi_g))

    p_hi = fab.period_max_nm
    if not spec.allow_diffraction:
        limit = zero_order_period_limit(spec)
        p_hi = min(p_hi, limit - g * 1e-3)
    a1 = np.asarray(params.a1, float)
    a2 = np.asarray(params.a2, float)
    a1 = np.array([in_range(a1[0], fab.period_min_nm, p_hi), 0.0])
    a2 = np.array([0.0, in_range(a2[1], fab.period_min_nm, p_hi)])
    rods = []
    for e in params.elements:
        c = np.round(np.asarray(e.center, float) / g) * g
        ang = round(float(e.angle_deg) / fab.angle_step_deg) * fab.angle_step_deg
        rods.append(dataclasses.replace(
            e, center=jnp.asarray(c), length=jnp.asarray(in_range(float(e.length), fab.length_min_nm,
                                                                  fab.length_max_nm)),
            width=jnp.asarray(in_range(float(e.width), fab.width_min_nm, fab.width_max_nm)),
            thickness=jnp.asarray(float(e.thickness)), angle_deg=jnp.asarray(float(ang))))
    return CellParams(jnp.asarray(a1), jnp.asarray(a2), tuple(rods))
