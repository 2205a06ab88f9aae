"""Fab rules: the exact checker catches a design breaking each rule; the smooth gap is a lower bound.

Check values are hand-derived from the geometry of rectangles, with the derivation beside each one.
"""

import dataclasses

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign import CellParams, Rod
from invdesign._geometry import pair_gaps
from invdesign._penalties import (
    SAMPLES_PER_EDGE,
    SOFTMIN_NM,
    check_rules,
    rule_penalty,
    smooth_gaps,
    snap,
)
from invdesign._spec import parse_fab, parse_spec

FAB = parse_fab({"name": "f", "label": "typical values (common practice, no source)",
                 "thickness_nm": [30.0, 40.0],
                 "width_nm": {"min": 40.0, "max": 120.0}, "length_nm": {"min": 60.0, "max": 400.0},
                 "min_gap_nm": 20.0, "max_aspect": 8.0, "corner_radius_nm": 10.0, "grid_nm": 1.0,
                 "angle_step_deg": 0.5, "period_nm": {"min": 250.0, "max": 900.0}})
SPEC = parse_spec({"operating_nm": 1310.0, "band": {"start_nm": 1250.0, "stop_nm": 1370.0, "count": 13},
                   "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
                   "material": "gold_rakic1998",
                   "goals": [{"metric": "insertion_loss_db", "sense": "<=", "target": 10.0}]})


def rod(x, y, length=200.0, width=60.0, angle=0.0, thickness=40.0):
    f = lambda v: jnp.asarray(float(v))  # noqa: E731
    return Rod(jnp.array([float(x), float(y)]), f(length), f(width), f(thickness), f(angle), "au")


def cell(rods, px=500.0, py=500.0):
    return CellParams(jnp.array([px, 0.0]), jnp.array([0.0, py]), tuple(rods))


GOOD = cell([rod(-100, 0, angle=90), rod(100, 0, length=180, angle=90)])


def rules(params, spec=SPEC):
    return {v["rule"] for v in check_rules(params, FAB, spec)}


def test_good_cell_has_no_violation():
    # rods along y at x = ±100 with width 60: gap 200 - 60 = 140 nm inside; across the boundary 500 - 200 - 60
    assert check_rules(GOOD, FAB, SPEC) == []


@pytest.mark.parametrize("params,rule", [
    # two rods along y 70 nm apart centre to centre, width 60: edge gap 70 - 60 = 10 nm < 20
    (cell([rod(-35, 0, angle=90), rod(35, 0, angle=90)]), "min_gap"),
    # the same rods 50 nm apart: they overlap (gap 50 - 60 < 0)
    (cell([rod(-25, 0, angle=90), rod(25, 0, angle=90)]), "overlap"),
    # across the boundary: rods along x at y = 0, lengths 160 and 280 centred at x = -130 and x = 135 in a
    # 500 nm cell span [-210, -50] and [-5, 275] (gap 45 inside); the image of the first starts at 290: 15 nm
    (cell([rod(-130, 0, length=160), rod(135, 0, length=280)], px=500.0), "min_gap"),
    # a rod against its own image: length 390 in a 400 nm cell leaves 10 nm < 20 between images
    (cell([rod(0, 0, length=390)], px=400.0), "min_gap"),
    (cell([rod(0, 0, width=30.0)]), "width_min"),
    (cell([rod(0, 0, width=130.0, length=300)]), "width_max"),
    (cell([rod(0, 0, length=50.0, width=45.0)]), "length_min"),
    (cell([rod(0, 0, length=410.0)], px=600.0), "length_max"),
    # 390 / 45 = 8.67 > 8
    (cell([rod(0, 0, length=390.0, width=45.0)], px=600.0), "max_aspect"),
    (cell([rod(0, 0, thickness=35.0)]), "thickness"),
    (cell([rod(0.4, 0)]), "grid"),
    (cell([rod(0, 0, angle=10.2)]), "angle_step"),
    (cell([rod(0, 0)], px=240.0 * 1.0), "period_min"),
    (cell([rod(0, 0)], px=950.0), "period_max"),
    # 1250 / 1.45 = 862.07 nm is the zero-order limit for this band on glass (grating equation)
    (cell([rod(0, 0)], px=870.0), "zero_order"),
])
def test_each_rule_is_caught(params, rule):
    assert rule in rules(params)


def test_zero_order_rule_is_off_when_diffraction_is_allowed():
    spec = dataclasses.replace(SPEC, allow_diffraction=True)
    assert "zero_order" not in rules(cell([rod(0, 0)], px=870.0), spec)


def test_smooth_gap_matches_a_hand_derived_gap():
    # parallel rods along y, centres 140 nm apart, width 60: gap 140 - 60 = 80 nm; across the boundary the
    # image is 500 - 140 = 360 nm away, gap 300 nm; each rod's own image: 500 - 60 = 440 nm
    p = cell([rod(-70, 0, angle=90), rod(70, 0, angle=90)])
    g = np.asarray(smooth_gaps(p))  # pairs (0,0), (0,1), (1,1)
    n_points = 2 * 2 * 4 * SAMPLES_PER_EDGE * 9  # both directions, 4 edges, 9 images (upper bound)
    bound = SOFTMIN_NM * np.log(n_points)
    assert 80.0 - bound <= g[1] <= 80.0
    exact = {(i, j): gap for i, j, gap in pair_gaps(p.elements, p.a1, p.a2)}
    assert exact[(0, 1)] == pytest.approx(80.0, abs=1e-9)


def test_smooth_gap_is_a_lower_bound_of_the_exact_gap(rng):
    for _ in range(30):
        a = rod(rng.uniform(-150, -60), rng.uniform(-50, 50), rng.uniform(60, 200), rng.uniform(40, 80),
                rng.uniform(-90, 90))
        b = rod(rng.uniform(60, 150), rng.uniform(-50, 50), rng.uniform(60, 200), rng.uniform(40, 80),
                rng.uniform(-90, 90))
        p = cell([a, b], px=600.0, py=600.0)
        exact = [gap for _, _, gap in pair_gaps(p.elements, p.a1, p.a2)]
        smooth = np.asarray(smooth_gaps(p))
        for e, s in zip(exact, smooth, strict=True):
            if e >= 0:
                assert s <= e + 1e-9
            else:
                assert s < 0


def test_crossing_rods_read_as_overlapping():
    # a plus sign: no corner of either rod lies inside the other, the edge samples do
    p = cell([rod(0, 0, length=200), rod(0, 0, length=200, angle=90)])
    assert float(smooth_gaps(p)[1]) < 0
    assert "overlap" in rules(p)


def test_penalty_zero_when_rules_hold_and_positive_with_finite_gradient_otherwise():
    pen, _ = rule_penalty(GOOD, FAB)
    assert float(pen) == 0.0
    close = cell([rod(-38, 0, angle=90), rod(38, 0, angle=90)])  # gap 16 nm
    pen, parts = rule_penalty(close, FAB)
    assert float(pen) > 0 and float(parts["gap"]) > 0
    g = jax.grad(lambda p: rule_penalty(p, FAB)[0])(close)
    leaves = jax.tree_util.tree_leaves(g)
    assert all(np.all(np.isfinite(np.asarray(x))) for x in leaves)
    # moving the rods apart lowers the penalty: d/dx of rod 1's centre is negative
    assert float(g.elements[1].center[0]) < 0
    asp = cell([rod(0, 0, length=390, width=45)], px=600.0)
    assert float(rule_penalty(asp, FAB)[1]["aspect"]) > 0


def test_snap_puts_the_cell_on_the_grid():
    p = cell([rod(-100.37, 3.2, length=200.6, width=60.4, angle=44.8)], px=500.3, py=500.3)
    s = snap(p, FAB, SPEC)
    assert {v["rule"] for v in check_rules(s, FAB, SPEC)} == set()
    e = s.elements[0]
    assert float(e.center[0]) == -100.0 and float(e.length) == 201.0 and float(e.angle_deg) == 45.0
    assert float(s.a1[0]) == 500.0
    # a period just under the zero-order limit snaps down, never across it
    near = snap(cell([rod(0, 0)], px=862.05, py=862.05), FAB, SPEC)
    assert float(near.a1[0]) == 862.0
