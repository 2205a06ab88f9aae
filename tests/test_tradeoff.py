"""A small front end to end: its points are mutually non-dominated, fab-clean and exactly re-checked; a
sweep stopped between waves resumes to the same front; bad input is refused before any work.

Small problem (one tilted rod, 5 wavelengths, one model N = 1, 5 weight vectors, few steps): the compile
costs tens of seconds, so the sweep runs once per module and the resume run reuses its compiled step.
Check values: for x signal, y control and x analyzer the channel amplitudes are a = t_xx, b = t_xy
(hand-derived from a = analyzerᴴ·T·signal, invdesign/_metrics.py docstring), so the insertion loss is
−10·log10|t_xx|² and the control power ratio for depth M is (M·|t_xx|/(4|t_xy|))².
"""

import json
import math
import pathlib
import subprocess
import sys

import numpy as np
import pytest
from helpers import SMALL_CELL as CELL
from helpers import SMALL_FAB as FAB

from invdesign import Design
from invdesign import _optimize as opt
from invdesign._errors import SpecError
from invdesign._pareto import dominates
from invdesign._penalties import check_rules
from invdesign._spec import parse_cell, parse_fab, parse_spec
from invdesign._tradeoff import build_tradeoff, evaluate_front, extreme_bounds, reference_scales, run_front
from invdesign._tradeoff_io import write_front

ROOT = pathlib.Path(__file__).resolve().parent.parent
GOALS = [{"metric": "modulation_depth", "sense": ">=", "target": 0.8},
         {"metric": "leakage", "sense": "<=", "target": 0.15},
         {"metric": "insertion_loss_db", "sense": "<=", "target": 10.0},
         {"metric": "control_power_ratio", "sense": "<=", "target": 2.0, "depth": 1.0}]
OBJECTIVES = ["insertion_loss_db", "control_power_ratio"]


def small(objectives=OBJECTIVES, front=None):
    spec = parse_spec({"name": "tiny", "operating_nm": 1310.0,
                       "band": {"start_nm": 1290.0, "stop_nm": 1330.0, "count": 5},
                       "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
                       "material": "gold_rakic1998", "goals": GOALS})
    fab, cell = parse_fab(FAB), parse_cell(CELL)
    cfg = {"optimizer": {"steps": 30, "starts": 2}, "robust": {"resolutions": [1], "corrections": ["kelly"]},
           "report": {"resolutions": [1], "corrections": ["kelly"]}}
    opts = opt.parse_run_options(cfg, fab, {"correction": "kelly"})
    return build_tradeoff(spec, fab, cell, opts, objectives, front or {"divisions": 4, "steps": 15})


@pytest.fixture(scope="module")
def front(tmp_path_factory):
    out = tmp_path_factory.mktemp("front")
    ts = small()
    state = run_front(ts, out, quiet=True)
    cands = evaluate_front(ts, state)
    res = write_front(ts, state, cands, out, meta={"test": True}, plot=True)
    return ts, state, cands, res, out


def test_front_points_are_mutually_non_dominated_and_fab_clean(front):
    ts, state, cands, res, out = front
    # every row's best is a candidate: 2 anchors x 2 starts, their 4 polished rows, their 4 extremes rows,
    # then waves {1, 3} and {2} of 4 rows each
    assert state["done"].all() and len(cands) == 20
    assert sorted({c["lattice_point"] for c in cands}) == [0, 1, 2, 3, 4]
    pts = res["front"]
    assert len(pts) >= 3  # a real trade-off: the anchors differ and the interior fills in
    F = np.array([[p["objectives"][n] for n in OBJECTIVES] for p in pts])
    for i in range(len(F)):
        for j in range(len(F)):
            assert i == j or not dominates(F[j], F[i])
    for p in pts:
        design = Design.from_json(out / p["design_json"])  # a loadable design file
        assert check_rules(design.params, ts.base.fab, ts.base.spec) == []  # exact rules, no margin
        for g in p["constraints"].values():
            assert g["pass"]
    assert sum(p["knee"] for p in pts) == 1
    doc = json.loads((out / "front.json").read_text())
    assert doc["quality"]["hypervolume"] > 0 and doc["quality"]["spacing"] >= 0
    assert "laser" in doc["safety"].lower()
    rows = (out / "front.csv").read_text().strip().splitlines()
    assert len(rows) == 1 + len(pts)
    assert rows[0].startswith("point,lattice_point,knee,insertion_loss_db,control_power_ratio")
    assert (out / "front.png").stat().st_size > 0


def test_objective_values_are_the_metrics_of_the_snapped_design(front):
    ts, _, cands, res, out = front
    from invdesign import ModelOptions, simulate

    p = res["front"][0]
    design = Design.from_json(out / p["design_json"])
    resp = simulate(design, ts.base.wavelengths, model=ModelOptions(1, "kelly"))
    t = np.asarray(resp.t)[ts.base.i0]
    il = -10 * np.log10(abs(t[0, 0]) ** 2)
    cpr = (1.0 * abs(t[0, 0]) / (4 * abs(t[0, 1]))) ** 2
    assert p["objectives"]["insertion_loss_db"] == pytest.approx(il, rel=1e-9)
    assert p["objectives"]["control_power_ratio"] == pytest.approx(cpr, rel=1e-9)


def test_anchors_bound_the_front(front):
    ts, state, cands, res, _ = front
    # the lattice vertices minimise one objective each (smooth values at the best iterate): no other
    # lattice point beats an anchor at its own objective by more than the snap can explain
    verts = ts.vertices
    for i, v in enumerate(verts):
        assert state["f"][v, i] <= state["f"][:, i].min() + 0.02 * state["span"][i]


def test_refined_extremes_hold_their_bound_and_are_no_worse_than_their_anchors(front):
    ts, state, *_ = front
    # the extremes phase holds objective i of vertex i within its slack of the anchor's value and trades it
    # only for the others: a vertex that took a refined point is no worse than its anchor in the others
    # (the phase's loss counts the anchor itself at step 0, so a refinement that made them worse would
    # not be the best iterate), and one that did not kept its anchor exactly
    scales = np.array([o.scale for o in ts.objectives])
    _, span0 = reference_scales(state["anchor_f"], state["anchor_f"], scales, ts.front.utopia_offset)
    _, accept = extreme_bounds(state["anchor_f"], span0, ts.front.extreme_slack)
    (phase,) = [p for p in state["phases"] if p["phase"] == "extremes"]
    assert phase["steps"] == ts.front.extreme_steps and phase["rows"] == ts.rows
    for i, v in enumerate(ts.vertices):
        f, a = state["f"][v], state["anchor_f"][i]
        others = np.arange(len(f)) != i
        if phase["refined"][i]:
            assert f[i] <= accept[i]
            assert np.sum(f[others] / span0[others]) <= np.sum(a[others] / span0[others]) + 1e-9
        else:
            np.testing.assert_array_equal(f, a)
    # the scalarisation's scales come from the refined extremes (nadir) and everything seen (ideal)
    z, span = reference_scales(state["anchor_f"], state["f"][ts.vertices], scales, ts.front.utopia_offset)
    np.testing.assert_allclose(state["z"], z, rtol=0, atol=0)
    np.testing.assert_allclose(state["span"], span, rtol=0, atol=0)


def test_polished_anchors_are_no_worse_than_their_starts_and_every_call_is_counted(front):
    ts, state, *_ = front
    fr, rows = ts.front, ts.rows
    phases = {p["phase"]: p for p in state["phases"]}
    pol = phases["polish"]
    assert pol["rounds"] == fr.lagrange_rounds and pol["steps"] == fr.polish_steps
    # an L-BFGS step makes at least one value-and-gradient call and every round one more at its start, so a
    # count of steps instead of calls would fall short of this
    assert pol["calls"] >= fr.lagrange_rounds * (fr.polish_steps + 1)
    # every polished row keeps the best merit (the anchors' own loss, plain penalty) of its start and its
    # rounds' ends, so it is no worse than its start, the anchor row's best iterate; a vertex took a polished
    # row only when that beat its anchor
    k = ts.base.opts.starts
    polished = state["pool_loss"][rows:2 * rows]
    assert np.all(polished <= np.asarray(pol["start_loss"]))
    for i in range(len(ts.vertices)):
        mine = slice(i * k, (i + 1) * k)
        assert pol["refined"][i] == bool(polished[mine].min() < min(pol["start_loss"][mine]))
    # the augmented-Lagrangian shifts are the multiplier estimates: never negative
    assert np.min(pol["shift"]) >= 0
    # the evaluation count is the sum over every phase: rows x (steps of Adam, calls of L-BFGS)
    anchors = phases["anchors"]
    expect = rows * (anchors["steps"] + anchors["feasibility_steps"]) + rows * pol["calls"]
    expect += pol["spread_evaluations"]  # the spread starts' scoring calls (0 unless polish_starts = spread)
    expect += rows * phases["extremes"]["calls"]
    expect += sum(p["rows"] * p["steps"] for p in state["phases"] if p["phase"].startswith("wave"))
    assert int(state["evaluations"]) == expect


def test_sweep_stopped_after_the_anchors_resumes_without_redoing_them(front, tmp_path):
    ts, state, *_ = front
    part = run_front(ts, tmp_path, quiet=True, stop_after_anchors=True)
    assert part.get("interrupted") and [p["phase"] for p in part["phases"]] == ["anchors"]
    mid = run_front(ts, tmp_path, quiet=True, stop_after_waves=0)  # runs the extremes, stops before waves
    assert [p["phase"] for p in mid["phases"]] == ["anchors", "polish", "extremes"]
    again = run_front(ts, tmp_path, quiet=True)
    assert [p["phase"] for p in again["phases"]][:3] == ["anchors", "polish", "extremes"]
    for name in ("polish", "extremes"):  # not redone on resume
        assert sum(p["phase"] == name for p in again["phases"]) == 1
    assert int(again["evaluations"]) == int(state["evaluations"])
    np.testing.assert_allclose(again["anchor_f"], state["anchor_f"], rtol=0, atol=1e-12)
    np.testing.assert_allclose(again["u"], state["u"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(again["pool_u"], state["pool_u"], rtol=0, atol=1e-9)


def test_stopped_sweep_resumes_to_the_same_front(front, tmp_path):
    ts, state, *_ = front
    part = run_front(ts, tmp_path, quiet=True, stop_after_waves=1)
    assert part.get("interrupted") and not part["done"].all()
    again = run_front(ts, tmp_path, quiet=True)
    assert again["done"].all()
    np.testing.assert_allclose(again["u"], state["u"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(again["pool_u"], state["pool_u"], rtol=0, atol=1e-9)


def test_bad_objectives_are_refused_by_name():
    with pytest.raises(SpecError, match=r"objectives\[1\] = 'speed'"):
        small(["insertion_loss_db", "speed"])
    with pytest.raises(SpecError, match="2 to 4"):
        small(["insertion_loss_db"])
    with pytest.raises(SpecError, match="front.divisions"):
        small(front={"divisions": 0})
    with pytest.raises(SpecError, match="front.reference"):
        small(front={"reference": [1.0]})
    with pytest.raises(SpecError, match=r"front.extreme_slack must be in \[0, 1\)"):
        small(front={"extreme_slack": 1.5})
    with pytest.raises(SpecError, match="front.extreme_steps must be at least 0"):
        small(front={"extreme_steps": -1})
    with pytest.raises(SpecError, match=r"extreme_method = 'newton' is not valid; use one of: adam, lbfgs"):
        small(front={"extreme_method": "newton"})
    with pytest.raises(SpecError, match=r"front.warm_start = 'far' is not valid; use one of: nearest, best"):
        small(front={"warm_start": "far"})
    with pytest.raises(SpecError, match="front.lagrange_rounds must be at least 1"):
        small(front={"lagrange_rounds": 0})
    with pytest.raises(SpecError, match="front.lagrange_weight must be > 0"):
        small(front={"lagrange_weight": 0.0})
    with pytest.raises(SpecError, match="front.polish_steps must be a whole number"):
        small(front={"polish_steps": 2.5})
    with pytest.raises(SpecError, match=r"polish_starts = 'all' is not valid; use one of: own, crossed"):
        small(front={"polish_starts": "all"})
    with pytest.raises(SpecError, match=r"front.band_softness must be in \[0, 0.1\]"):
        small(front={"band_softness": 0.5})
    with pytest.raises(SpecError, match="front.band_softness must be at least 0"):
        small(front={"band_softness": -0.01})
    with pytest.raises(SpecError, match="front: unknown key 'weigths'"):
        small(front={"weigths": 3})


def test_cli_refuses_a_bad_objective_before_work(tmp_path):
    cmd = [sys.executable, "-m", "invdesign.cli", "tradeoff", "objectives=[insertion_loss_db,x]",
           f"hydra.run.dir={tmp_path}"]
    done = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert done.returncode == 2
    assert "objectives[1] = 'x'" in done.stderr and "insertion_loss_db" in done.stderr


def test_smooth_band_shortfall_is_conservative_and_exact_elsewhere():
    from invdesign._simulate import response_from_params
    from invdesign._tradeoff_smooth import smooth_goal_shortfalls

    # with a bandwidth goal: the smooth shortfall (D − smin_τ c)/D is at least the exact (D − min c)/D and
    # at most τ·log n above it (log-sum-exp bounds, Boyd & Vandenberghe, Convex Optimization, §3.1.5),
    # n the window's samples; every other goal's shortfall is the exact one, bit for bit
    spec = parse_spec({"name": "tiny", "operating_nm": 1310.0,
                       "band": {"start_nm": 1290.0, "stop_nm": 1330.0, "count": 5},
                       "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
                       "material": "gold_rakic1998",
                       "goals": GOALS + [{"metric": "bandwidth_nm", "sense": ">=", "target": 20.0}]})
    fab, cell = parse_fab(FAB), parse_cell(CELL)
    opts = opt.parse_run_options({"robust": {"resolutions": [1], "corrections": ["kelly"]}}, fab,
                                 {"correction": "kelly"})
    setup = opt.build_setup(spec, fab, cell, opts)
    band = [g.metric for g in spec.goals].index("bandwidth_nm")
    n = len(np.atleast_1d(np.arange(len(setup.wavelengths))[setup.windows[band]]))
    assert n >= 2
    for seed in range(3):
        u = np.random.default_rng(seed).normal(size=len(setup.family.names))
        resp = response_from_params(setup.family.params(u), setup.problems[0])
        exact = np.asarray(opt.goal_shortfalls(resp, setup))
        np.testing.assert_array_equal(np.asarray(smooth_goal_shortfalls(resp, setup, 0.0)), exact)
        for softness in (0.05, 0.01):
            smooth = np.asarray(smooth_goal_shortfalls(resp, setup, softness))
            others = np.arange(len(exact)) != band
            np.testing.assert_array_equal(smooth[others], exact[others])
            assert exact[band] <= smooth[band] <= exact[band] + softness * np.log(n) + 1e-12


def test_spread_polish_counts_its_scoring_calls_and_resumes_to_the_same_front(tmp_path):
    from invdesign._tradeoff import SPREAD_POINTS

    # polish_starts = spread: each vertex gets one polish row more than its anchor starts, and the spread
    # points' scoring (SPREAD_POINTS per vertex, in batches of the compiled width) is in the count; a run
    # stopped after the anchors resumes to the same result as a straight one
    ts = small(front={"divisions": 4, "steps": 15, "polish_starts": "spread", "polish_steps": 5,
                      "lagrange_rounds": 2, "extreme_steps": 10})
    straight = run_front(ts, tmp_path / "a", quiet=True)
    phases = {p["phase"]: p for p in straight["phases"]}
    pol, m, k = phases["polish"], len(ts.objectives), ts.base.opts.starts
    assert pol["starts"] == "spread" and pol["rows"] == m * (k + 1)
    assert pol["spread_evaluations"] == m * ts.rows * math.ceil(SPREAD_POINTS / ts.rows)
    expect = ts.rows * (phases["anchors"]["steps"] + phases["anchors"]["feasibility_steps"])
    expect += pol["rows"] * pol["calls"] + pol["spread_evaluations"] + ts.rows * phases["extremes"]["calls"]
    expect += sum(p["rows"] * p["steps"] for p in straight["phases"] if p["phase"].startswith("wave"))
    assert int(straight["evaluations"]) == expect
    run_front(ts, tmp_path / "b", quiet=True, stop_after_anchors=True)
    again = run_front(ts, tmp_path / "b", quiet=True)
    assert int(again["evaluations"]) == int(straight["evaluations"])
    np.testing.assert_allclose(again["u"], straight["u"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(again["pool_u"], straight["pool_u"], rtol=0, atol=1e-9)
