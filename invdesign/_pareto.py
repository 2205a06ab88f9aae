"""Pareto-front arithmetic in plain NumPy: dominance, hypervolume, spacing, knee, weight lattices, waves.

Every function takes objective values as an (n, m) float array, **all minimised** (negate a maximised
objective before calling), and is independent of the physics.

* ``non_dominated``: p dominates q when p ≤ q in every objective and p < q in at least one. Of several
  identical points only the first is kept.
* ``hypervolume``: the Lebesgue measure of the region dominated by the points and bounded by the reference
  point r (points not strictly better than r in every objective add nothing). Exact for any m by slicing
  along the last objective (the "hypervolume by slicing objectives" scheme of While, Hingston, Barone &
  Huband, IEEE Trans. Evol. Comput. 10, 29 (2006)); cost grows as n^(m−1), fine for fronts of tens of
  points and m ≤ 4.
* ``spacing``: Schott's spacing S = sqrt(Σ (d̄ − d_i)² / (n − 1)) with d_i the L1 distance from point i
  to its nearest neighbour on the front (J. R. Schott, MSc thesis, MIT, 1995); 0 for evenly spread points.
* ``knee``: the point farthest on the ideal side of the hyperplane through the front's extreme points, in
  objectives normalised to [0, 1] over the front (I. Das, Struct. Optim. 18, 107 (1999)).
* ``weight_lattice``: the simplex lattice {k/H : k ∈ ℕ^m, Σ k = H} of Das & Dennis, SIAM J. Optim. 8, 631
  (1998): C(H + m − 1, m − 1) evenly spread weight vectors including the m vertices.
* ``waves``: the order of a continuation sweep over a lattice (see the function).
"""

import itertools
import math

import numpy as np


def _as_points(points) -> np.ndarray:
    f = np.asarray(points, dtype=float)
    if f.ndim != 2:
        raise ValueError(f"objective values must be an (n, m) array, got shape {f.shape}")
    return f


def dominates(p, q) -> bool:
    """True when p dominates q (minimisation): p ≤ q everywhere and p < q somewhere."""
    p, q = np.asarray(p, float), np.asarray(q, float)
    return bool(np.all(p <= q) and np.any(p < q))


def non_dominated(points) -> np.ndarray:
    """(n,) bool mask of the points no other point dominates; of identical points only the first is kept.

    Points with a non-finite objective are never kept.
    """
    f = _as_points(points)
    n = len(f)
    keep = np.all(np.isfinite(f), axis=1) if n else np.zeros(0, bool)
    for i in range(n):
        if not keep[i]:
            continue
        for j in range(n):
            if j == i or not np.all(np.isfinite(f[j])):
                continue
            if dominates(f[j], f[i]) or (j < i and np.array_equal(f[j], f[i])):
                keep[i] = False
                break
    return keep


def hypervolume(points, reference) -> float:
    """Exact hypervolume dominated by ``points`` (n, m) and bounded by ``reference`` (m,), minimisation."""
    f = _as_points(points)
    r = np.asarray(reference, float)
    if f.shape[1] != r.shape[0]:
        raise ValueError(f"reference has {r.shape[0]} objectives, points have {f.shape[1]}")
    if not np.all(np.isfinite(r)):
        raise ValueError(f"reference point must be finite, got {r.tolist()}")
    f = f[np.all(np.isfinite(f), axis=1) & np.all(f < r, axis=1)]
    if len(f) == 0:
        return 0.0
    return float(_hv(f[non_dominated(f)], r))


def _hv(f: np.ndarray, r: np.ndarray) -> float:
    m = f.shape[1]
    if m == 1:
        return float(r[0] - f[:, 0].min())
    if m == 2:
        f = f[np.argsort(f[:, 0], kind="stable")]
        vol, y_prev = 0.0, r[1]
        for x, y in f:
            if y < y_prev:
                vol += (r[0] - x) * (y_prev - y)
                y_prev = y
        return vol
    f = f[np.argsort(f[:, -1], kind="stable")]
    vol = 0.0
    for k in range(len(f)):
        top = f[k + 1, -1] if k + 1 < len(f) else r[-1]
        depth = top - f[k, -1]
        if depth <= 0:
            continue
        head = f[: k + 1, :-1]
        vol += depth * _hv(head[non_dominated(head)], r[:-1])
    return vol


def spacing(points, scale=None) -> float:
    """Schott's spacing of the points (n ≥ 2), L1 nearest-neighbour distances; objectives divided by
    ``scale`` (m,) first when given. nan for fewer than two points."""
    f = _as_points(points)
    if scale is not None:
        f = f / np.asarray(scale, float)
    n = len(f)
    if n < 2:
        return float("nan")
    dist = np.sum(np.abs(f[:, None, :] - f[None, :, :]), axis=2)
    np.fill_diagonal(dist, np.inf)
    d = dist.min(axis=1)
    return float(np.sqrt(np.sum((d.mean() - d) ** 2) / (n - 1)))


def normalise(points) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(normalised points in [0, 1], lower, span) with span 1 where an objective does not vary."""
    f = _as_points(points)
    lo, hi = f.min(axis=0), f.max(axis=0)
    span = np.where(hi - lo > 0, hi - lo, 1.0)
    return (f - lo) / span, lo, span


def knee(points) -> int:
    """Index of the knee point of a non-dominated set (see the module docstring); 0 for one point.

    The hyperplane through the extreme points (each objective's minimiser) is n·f = 1 in normalised
    objectives; when the extremes do not span a hyperplane (repeated extremes) it is Σ f = 1.
    """
    f = _as_points(points)
    if len(f) <= 1:
        return 0
    g, _, _ = normalise(f)
    m = g.shape[1]
    extremes = g[np.argmin(g, axis=0)]
    try:
        normal = np.linalg.solve(extremes, np.ones(m))
        if not np.all(np.isfinite(normal)) or np.linalg.cond(extremes) > 1e12:
            raise np.linalg.LinAlgError
    except np.linalg.LinAlgError:
        normal = np.ones(m)
    dist = (1.0 - g @ normal) / np.linalg.norm(normal)
    return int(np.argmax(dist))


def weight_lattice(m: int, divisions: int) -> tuple[np.ndarray, np.ndarray]:
    """(integer lattice (n, m) with rows summing to ``divisions``, weights = lattice / divisions)."""
    if m < 1 or divisions < 1:
        raise ValueError(f"need m >= 1 objectives and divisions >= 1, got m={m}, divisions={divisions}")
    rows = [k for k in itertools.product(range(divisions + 1), repeat=m) if sum(k) == divisions]
    rows.sort(key=lambda k: tuple(-x for x in k))  # vertices first in each block, a stable order
    lat = np.array(rows, dtype=int)
    assert len(lat) == math.comb(divisions + m - 1, m - 1)
    return lat, lat / divisions


def waves(lattice, solved) -> list[list[tuple[int, int]]]:
    """Continuation order over a weight lattice: a list of waves, each a list of (point, warm start).

    Starting from the points marked ``solved`` (n,) bool (normally the m vertices), each wave takes every
    unsolved point at the smallest L1 lattice distance from the solved set, warm-started from its nearest
    solved point (the lowest index on a tie); the wave's points are then solved. So every point starts from
    a neighbour one lattice step away when the lattice allows it.
    """
    lat = np.asarray(lattice, int)
    done = np.asarray(solved, bool).copy()
    if not done.any():
        raise ValueError("waves: at least one lattice point must be solved to start from")
    out = []
    while not done.all():
        todo = np.flatnonzero(~done)
        have = np.flatnonzero(done)
        dist = np.abs(lat[todo][:, None, :] - lat[have][None, :, :]).sum(axis=2)
        near = dist.min(axis=1)
        step = near.min()
        wave = [(int(todo[i]), int(have[np.argmin(dist[i])])) for i in range(len(todo)) if near[i] == step]
        out.append(wave)
        for p, _ in wave:
            done[p] = True
    return out
