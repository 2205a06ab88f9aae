"""Pareto arithmetic against hand-derived cases, and hypervolume against pymoo's exact indicator.

Hand-derived values are worked out in the comments beside them (areas and volumes of unions of boxes).
The outside reference is pymoo (``pymoo.indicators.hv.HV``, a general-purpose multi-objective library,
dev extra), whose exact hypervolume is computed by its own code path.
"""

import math

import numpy as np
import pytest

from invdesign._pareto import (
    dominates,
    hypervolume,
    knee,
    non_dominated,
    spacing,
    waves,
    weight_lattice,
)


def test_dominance_hand_derived():
    assert dominates([1, 2], [2, 2])          # better in one, equal in the other
    assert not dominates([1, 2], [1, 2])      # equal points do not dominate each other
    assert not dominates([1, 3], [2, 2])      # a trade-off: neither dominates
    assert not dominates([2, 2], [1, 3])


def test_non_dominated_hand_derived():
    pts = [[1, 5], [2, 3], [3, 4], [4, 1], [2, 3], [5, 5], [np.inf, 0]]
    # [3,4] is dominated by [2,3]; [5,5] by everything; the second [2,3] is a duplicate; the last is not
    # finite and is never kept.
    assert non_dominated(pts).tolist() == [True, True, False, True, False, False, False]
    # three objectives: [1,1,1] dominates [1,2,1]; [0,3,3] and [3,0,3] trade off with it
    pts3 = [[1, 1, 1], [1, 2, 1], [0, 3, 3], [3, 0, 3]]
    assert non_dominated(pts3).tolist() == [True, False, True, True]


def test_hypervolume_two_objectives_hand_derived():
    # points (1,3), (2,2), (3,1) against r = (4,4): a staircase of three boxes,
    # [1,4]x[3,4] = 3, [2,4]x[2,3] = 2, [3,4]x[1,2] = 1 -> 6.
    assert hypervolume([[1, 3], [2, 2], [3, 1]], [4, 4]) == pytest.approx(6.0, abs=1e-15)
    # a dominated point and a point outside the reference change nothing
    assert hypervolume([[1, 3], [2, 2], [3, 1], [3, 3], [5, 0]], [4, 4]) == pytest.approx(6.0, abs=1e-15)
    # one point: the box (4-1)*(4-3) = 3
    assert hypervolume([[1, 3]], [4, 4]) == pytest.approx(3.0, abs=1e-15)
    assert hypervolume([[4, 1]], [4, 4]) == 0.0  # on the reference: no volume
    assert hypervolume(np.zeros((0, 2)), [1, 1]) == 0.0


def test_hypervolume_three_objectives_hand_derived():
    # (0,0,2), (0,2,0), (2,0,0) against r = (3,3,3). Union of boxes B1 = [0,3]x[0,3]x[2,3] (9),
    # B2 = [0,3]x[2,3]x[0,3] (9), B3 = [2,3]x[0,3]x[0,3] (9). Each pairwise intersection has volume
    # 3 (e.g. B1∩B2 = [0,3]x[2,3]x[2,3]), the triple [2,3]^3 is 1: 27 - 9 + 1 = 19.
    assert hypervolume([[0, 0, 2], [0, 2, 0], [2, 0, 0]], [3, 3, 3]) == pytest.approx(19.0, abs=1e-14)
    # one point (1,1,1) against (2,3,4): the box 1*2*3 = 6
    assert hypervolume([[1, 1, 1]], [2, 3, 4]) == pytest.approx(6.0, abs=1e-15)


def test_hypervolume_matches_pymoo_on_random_fronts(rng):
    HV = pytest.importorskip("pymoo.indicators.hv").HV
    for m in (2, 3, 4):
        for _ in range(3):
            pts = rng.uniform(0, 1, size=(12, m))
            ref = np.full(m, 1.1)
            assert hypervolume(pts, ref) == pytest.approx(float(HV(ref_point=ref)(pts)), rel=1e-12)


def test_spacing_hand_derived():
    # evenly spread: nearest-neighbour L1 distances all 2 -> spacing 0
    assert spacing([[0, 4], [1, 3], [2, 2], [3, 1], [4, 0]]) == pytest.approx(0.0, abs=1e-15)
    # (0,3), (1,2), (3,0): L1 nearest distances d = 2, 2, 4; mean 8/3; deviations -2/3, -2/3, 4/3;
    # S = sqrt((4/9 + 4/9 + 16/9) / 2) = sqrt(4/3)
    assert spacing([[0, 3], [1, 2], [3, 0]]) == pytest.approx(math.sqrt(4 / 3), rel=1e-14)
    # scaling an objective by 1/2 before measuring: (0,6),(1,4),(3,0) with scale (1,2) is the case above
    assert spacing([[0, 6], [1, 4], [3, 0]], scale=[1, 2]) == pytest.approx(math.sqrt(4 / 3), rel=1e-14)
    assert math.isnan(spacing([[1, 1]]))


def test_knee_hand_derived():
    # extremes (0,1) and (1,0) in normalised units span the line f1 + f2 = 1; (0.2, 0.2) lies farthest on
    # the ideal side of it (distance 0.6/sqrt 2), (0.5, 0.45) only 0.05/sqrt 2.
    pts = [[0, 10], [2, 2], [5, 4.5], [10, 0]]  # normalised by the ranges (10, 10): same geometry
    assert knee(pts) == 1
    assert knee([[3, 3]]) == 0


def test_weight_lattice_counts_and_sums():
    for m, h in ((2, 8), (3, 4), (4, 3)):
        lat, w = weight_lattice(m, h)
        assert len(lat) == math.comb(h + m - 1, m - 1)  # Das & Dennis count, hand-derived: 9, 15, 20
        assert np.all(lat.sum(axis=1) == h)
        assert np.allclose(w.sum(axis=1), 1.0)
        assert len({tuple(r) for r in lat}) == len(lat)


def test_waves_step_one_lattice_neighbour_at_a_time():
    lat, _ = weight_lattice(2, 4)  # (4,0), (3,1), (2,2), (1,3), (0,4)
    verts = lat.max(axis=1) == 4
    plan = waves(lat, verts)
    # hand-derived: from both ends inwards, each point warm-started from the neighbour one step away
    names = [[(tuple(lat[p]), tuple(lat[s])) for p, s in wave] for wave in plan]
    assert names == [[((3, 1), (4, 0)), ((1, 3), (0, 4))], [((2, 2), (3, 1))]]
    lat3, _ = weight_lattice(3, 3)
    plan3 = waves(lat3, lat3.max(axis=1) == 3)
    solved = set(np.flatnonzero(lat3.max(axis=1) == 3).tolist())
    for wave in plan3:
        for p, s in wave:
            assert s in solved and np.abs(lat3[p] - lat3[s]).sum() == 2  # one unit moved: a neighbour
        solved |= {p for p, _ in wave}
    assert solved == set(range(len(lat3)))


def test_extremes_rows_bounds_and_starts_hand_derived():
    from invdesign._tradeoff import extreme_bounds, extreme_rows, extreme_starts, reference_scales

    # payoff table of two anchors (oriented): anchor 0 minimised objective 0 at (0.5, 1.4), anchor 1
    # objective 1 at (2.7, 0.42); ideal (0.5, 0.42), nadir (2.7, 1.4), span (2.2, 0.98) (hand-derived)
    payoff = np.array([[0.5, 1.4], [2.7, 0.42]])
    z, span = reference_scales(payoff, payoff, np.ones(2), 0.01)
    np.testing.assert_allclose(span, [2.2, 0.98], rtol=1e-14)
    np.testing.assert_allclose(z, [0.5 - 0.022, 0.42 - 0.0098], rtol=1e-14)
    # bounds: own value + ½·0.01·span aimed, + 0.01·span accepted
    aimed, accept = extreme_bounds(payoff, span, 0.01)
    np.testing.assert_allclose(aimed, [0.511, 0.4249], rtol=1e-14)
    np.testing.assert_allclose(accept, [0.522, 0.4298], rtol=1e-14)
    # rows (2 starts each): vertex 0's rows weigh objective 1 and hold objective 0, and vice versa
    w, bound, on = extreme_rows(payoff, span, 2, 0.01)
    np.testing.assert_array_equal(w, [[0, 1], [0, 1], [1, 0], [1, 0]])
    np.testing.assert_array_equal(on, [[1, 0], [1, 0], [0, 1], [0, 1]])
    np.testing.assert_allclose(bound[:, 0], [0.511, 0.511, 0, 0], rtol=1e-14)
    np.testing.assert_allclose(bound[:, 1], [0, 0, 0.4249, 0.4249], rtol=1e-14)
    # starts: own best first, then the other vertex's best; with 3 starts also the own second-best start
    best = np.array([[1.0], [2.0]])
    rows = np.array([[1.5], [1.0], [2.0], [2.5]])  # anchor rows, two starts per vertex
    loss = np.array([0.9, 0.1, 0.2, 0.3])
    np.testing.assert_array_equal(extreme_starts(best, rows, loss, 2)[:, 0], [1.0, 2.0, 2.0, 1.0])
    rows3 = np.array([[1.5], [1.0], [1.7], [2.0], [2.5], [2.7]])
    loss3 = np.array([0.9, 0.1, 0.5, 0.2, 0.3, 0.8])
    np.testing.assert_array_equal(extreme_starts(best, rows3, loss3, 3)[:, 0], [1.0, 2.0, 1.7, 2.0, 1.0, 2.5])


def test_augmented_lagrangian_shift_update_hand_derived():
    import jax
    import jax.numpy as jnp

    from invdesign._tradeoff_lagrange import multipliers, shifted_goal_loss, update_shift

    # min x subject to x >= 1, written as a goal with shortfall r = 1 - x and margin m = 0 (c = r + m):
    # the KKT multiplier is λ* = 1 (d x / d x). Loss x + μ·w·(relu(1 − x + s)² − s²); stationarity
    # 1 = 2μw·relu(1 − x + s) gives x(s) = 1 + s − 1/(2μw) (hand-derived). μ = 10, w = 2: 1/(2μw) = 0.025.
    mu, w = 10.0, jnp.array([2.0])

    def loss(x, s):
        return x + mu * shifted_goal_loss(jnp.array([1.0 - x]), w, 0.0, jnp.array([s]))

    x0 = 1.0 - 0.025                                             # the plain penalty's minimiser (s = 0)
    assert abs(float(jax.grad(loss)(x0, 0.0))) < 1e-12
    assert float(loss(1.0, 0.0)) == 1.0                          # ψ(c = 0, s = 0) = 0
    s1 = update_shift(np.array([0.0]), np.array([1.0 - x0]), 0.0)   # s ← relu(s + c) = 0.025
    np.testing.assert_allclose(s1, [0.025], rtol=1e-12)
    np.testing.assert_allclose(multipliers(s1, [2.0], mu), [1.0], rtol=1e-12)   # λ = 2μw·s = λ* = 1
    # the shifted loss's minimiser is now exactly on the constraint, x(s1) = 1, and stays there
    assert abs(float(jax.grad(loss)(1.0, 0.025))) < 1e-12
    np.testing.assert_allclose(update_shift(s1, np.array([0.0]), 0.0), s1, rtol=0)
    # a slack constraint releases its multiplier: s = 0.3, c = −0.5 → 0; the margin counts as part of c
    np.testing.assert_array_equal(update_shift(np.array([0.3, 0.3]), np.array([-0.5, -0.1]), 0.02),
                                  [0.0, 0.3 - 0.1 + 0.02])


def test_warm_sources_pick_the_best_scoring_solved_point_hand_derived():
    from invdesign._tradeoff import warm_sources

    # three solved points (oriented), one unsolved; z = 0, span = 1, augmentation 0.01
    f = np.array([[0.0, 1.0], [0.4, 0.45], [1.0, 0.0], [0.1, 0.1]])
    solved = np.array([True, True, True, False])
    # w = (0.5, 0.5): scores max(0, 0.5) + 0.01 = 0.51, max(0.2, 0.225) + 0.0085 = 0.2335, 0.51 -> point 1
    # w = (0.9, 0.1): 0.1 + 0.01 = 0.11, 0.36 + 0.0085, 0.9 + 0.01 -> point 0 (the unsolved 3 is skipped)
    np.testing.assert_array_equal(warm_sources(f, solved, np.array([[0.5, 0.5], [0.9, 0.1]]), np.zeros(2),
                                               np.ones(2), 0.01), [1, 0])


def test_soft_minimum_is_a_lower_bound_that_tends_to_the_minimum():
    from scipy.special import logsumexp

    from invdesign._tradeoff_smooth import soft_min

    # the log-sum-exp bounds (Boyd & Vandenberghe, Convex Optimization, Cambridge 2004, §3.1.5):
    # min x − τ·log n ≤ −τ·log Σ exp(−x/τ) ≤ min x, equality on the left for n equal values; reference
    # values from scipy.special.logsumexp (a general-purpose library, its own code path)
    rng = np.random.default_rng(3)
    x = rng.uniform(0.5, 1.0, size=(20, 7))
    lo = x.min(axis=1)
    for tau in (0.1, 0.01, 1e-3):
        s = np.asarray(soft_min(x, tau))
        np.testing.assert_allclose(s, -tau * logsumexp(-x / tau, axis=1), rtol=1e-13)
        assert np.all(s <= lo) and np.all(s >= lo - tau * math.log(7) - 1e-15)
    # τ → 0: the gap closes at least as fast as τ·log n; τ = 0 is the exact minimum
    assert np.max(lo - np.asarray(soft_min(x, 1e-6))) <= 1e-6 * math.log(7)
    np.testing.assert_array_equal(np.asarray(soft_min(x, 0.0)), lo)
    # n equal values: exactly min − τ·log n (hand-derived: −τ·log(n·e^{−c/τ}) = c − τ·log n)
    np.testing.assert_allclose(float(soft_min(np.full(4, 0.8), 0.05)), 0.8 - 0.05 * math.log(4), rtol=1e-14)


def test_crossed_polish_starts_are_the_other_vertices_best_anchors_exactly():
    from invdesign._tradeoff import polish_starts

    # two vertices (lattice points 0 and 4) x two starts; the anchors' rows are the first four pool rows,
    # each vertex's best anchor is also its state["u"] (row 1 for vertex 0, row 2 for vertex 1)
    rows = np.array([[1.5, 0.1], [1.0, 0.2], [2.0, 0.3], [2.5, 0.4]])
    state = {"pool_u": np.concatenate([rows, np.full((3, 2), 9.0)]),
             "pool_loss": np.array([0.9, 0.1, 0.2, 0.3, 0.0, 0.0, 0.0]),
             "u": np.array([[1.0, 0.2], [7.0, 7.0], [7.0, 7.0], [7.0, 7.0], [2.0, 0.3]])}
    verts = np.array([0, 4])
    own = polish_starts(state, verts, 2, "own")
    np.testing.assert_array_equal(own, rows)
    crossed = polish_starts(state, verts, 2, "crossed")
    # vertex 0: its best anchor, then vertex 1's best; vertex 1: its best, then vertex 0's best
    np.testing.assert_array_equal(crossed, [[1.0, 0.2], [2.0, 0.3], [2.0, 0.3], [1.0, 0.2]])


def test_spread_starts_keep_the_anchor_rows_and_add_each_vertex_best_spread_point():
    from invdesign._tradeoff import spread_starts

    # two vertices, two anchor starts each (vertex-major rows), then one extra row per vertex: the spread
    # point with that vertex's lowest merit (hand-derived: vertex 0 point 2, vertex 1 point 1)
    anchors = np.array([[1.0], [1.5], [2.0], [2.5]])
    points = np.array([[10.0], [11.0], [12.0]])
    merit = np.array([[0.5, 0.9, 0.1], [3.0, 1.0, 2.0]])
    np.testing.assert_array_equal(spread_starts(anchors, points, merit, 2)[:, 0],
                                  [1.0, 1.5, 12.0, 2.0, 2.5, 11.0])


def test_spread_points_are_the_seeded_sobol_points_inside_the_box():
    from helpers import SMALL_CELL, SMALL_FAB
    from scipy.stats import qmc

    from invdesign._cells import make_family
    from invdesign._spec import parse_cell, parse_fab, parse_spec
    from invdesign._tradeoff import spread_points

    spec = parse_spec({"name": "tiny", "operating_nm": 1310.0,
                       "band": {"start_nm": 1290.0, "stop_nm": 1330.0, "count": 5},
                       "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
                       "material": "gold_rakic1998",
                       "goals": [{"metric": "modulation_depth", "sense": ">=", "target": 0.8}]})
    fam = make_family(spec, parse_fab(SMALL_FAB), parse_cell(SMALL_CELL))
    u = spread_points(fam, 8, 5)
    v = np.asarray(fam.values(u))
    # the same points as scipy's scrambled Sobol sequence with the same seed (scipy.stats.qmc, its own
    # code path), mapped to the box and kept 1e-3 of the box inside its faces
    frac = np.clip(qmc.Sobol(len(fam.names), scramble=True, seed=5).random(8), 1e-3, 1 - 1e-3)
    np.testing.assert_allclose(v, fam.lo + (fam.hi - fam.lo) * frac, rtol=1e-10)
    assert np.all(v > fam.lo) and np.all(v < fam.hi)
    np.testing.assert_array_equal(spread_points(fam, 8, 5), u)        # seeded: reproducible
