"""Monte Carlo over fabrication errors: the error model does what its docstring says, the Monte Carlo
agrees with the linear model for small σ (and the disagreement shrinks in proportion to σ), goals are
judged exactly as the optimiser judges them, and touching rods are caught.

Small problems (two rods, 5 wavelengths, one dipole per rod, tens of samples); each compile costs seconds,
so one evaluator is shared by the module. Check values: the linear model is the first-order Taylor
expansion, so its per-sample error relative to the spread falls as O(σ) (Taylor's theorem; no outside
numbers); the sample standard deviation of n normal draws has relative standard error 1/sqrt(2(n−1))
(a textbook result, from memory). Translation invariance of an infinite periodic array is general physics.
"""

import dataclasses

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign import Design, ModelOptions
from invdesign import _tolerance as tol
from invdesign._geometry import pair_gaps
from invdesign._optimize import exact_goals
from invdesign._spec import parse_fab, parse_spec
from invdesign._tolerance_io import write_outputs

SPEC = {"name": "tiny", "operating_nm": 1310.0, "band": {"start_nm": 1290.0, "stop_nm": 1330.0, "count": 5},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45}, "material": "gold_rakic1998",
        "goals": [{"metric": "modulation_depth", "sense": ">=", "target": 0.3},
                  {"metric": "leakage", "sense": "<=", "target": 0.15},
                  {"metric": "insertion_loss_db", "sense": "<=", "target": 10.0},
                  {"metric": "control_power_ratio", "sense": "<=", "target": 50.0, "depth": 1.0},
                  {"metric": "bandwidth_nm", "sense": ">=", "target": 20.0}]}
FAB = {"name": "f", "label": "typical values (common practice, no source)", "thickness_nm": 30.0,
       "width_nm": {"min": 40.0, "max": 120.0}, "length_nm": {"min": 60.0, "max": 400.0},
       "min_gap_nm": 20.0, "max_aspect": 8.0, "corner_radius_nm": 10.0, "grid_nm": 1.0,
       "angle_step_deg": 0.5, "period_nm": {"min": 250.0, "max": 900.0},
       "tolerance": {"label": "typical values (common practice, no source)",
                     "width_nm": {"global": 2.0, "local": 1.5}, "length_nm": {"global": 2.0, "local": 1.5},
                     "position_nm": {"local": 1.0}, "angle_deg": {"global": 0.2, "local": 0.5},
                     "thickness_nm": {"global": 1.0, "local": 0.3}}}


def design_doc(gap_nm=None):
    """Two gold rods on glass in a 500 nm square cell: one along y, one at 50 degrees."""
    doc = {"format": "invdesign.design", "version": 1, "length_unit": "nm",
           "lattice": {"a1": [500.0, 0.0], "a2": [0.0, 500.0]},
           "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
           "materials": {"gold": {"model": "library", "name": "gold_rakic1998"}},
           "elements": [{"shape": "rod", "material": "gold", "center": [-120.0, 0.0], "length": 200.0,
                         "width": 70.0, "thickness": 30.0, "angle_deg": 90.0},
                        {"shape": "rod", "material": "gold", "center": [120.0, 0.0], "length": 260.0,
                         "width": 70.0, "thickness": 30.0, "angle_deg": 50.0}], "name": "pair"}
    if gap_nm is not None:  # two parallel rods along y, side by side with this edge gap
        doc["elements"][1].update(center=[-120.0 + 70.0 + gap_nm, 0.0], angle_deg=90.0, length=200.0)
    return doc


@pytest.fixture(scope="module")
def ev():
    spec, fab = parse_spec(SPEC), parse_fab(FAB)
    return tol.make_evaluator(Design.from_json(design_doc()), spec, fab, ModelOptions(1, "kelly"), batch=32)


@pytest.fixture(scope="module")
def sigma():
    return tol.sigmas(parse_fab(FAB).tolerance)


def test_perturb_follows_the_error_model(sigma):
    p0 = Design.from_json(design_doc()).params
    z = tol.zero_draw(2)
    z["width_nm.global"] = 1.0                       # one run-to-run draw: every width +2 nm
    z["length_nm.local"] = np.array([0.0, -2.0])     # element 1 only: length −3 nm
    z["position_nm.local"] = np.array([[1.0, 0.0], [0.0, 0.0]])
    z["thickness_nm.global"] = -1.0
    p = tol.perturb(p0, z, sigma)
    e0, e1 = p.elements
    assert float(e0.width) == pytest.approx(72.0) and float(e1.width) == pytest.approx(72.0)
    assert float(e0.length) == pytest.approx(200.0) and float(e1.length) == pytest.approx(257.0)
    np.testing.assert_allclose(np.asarray(e0.center), [-119.0, 0.0])
    assert float(e0.thickness) == float(e1.thickness) == pytest.approx(29.0)
    assert float(e1.angle_deg) == pytest.approx(50.0)
    zero = tol.perturb(p0, tol.zero_draw(2), sigma)
    assert jax.tree_util.tree_all(jax.tree_util.tree_map(lambda a, b: np.allclose(a, b), zero, p0))


def test_draws_are_common_random_numbers():
    a, b = tol.draw(7, 20, 3), tol.draw(7, 20, 3)
    assert all(np.array_equal(a[k], b[k]) for k in a)
    assert a["width_nm.local"].shape == (20, 3) and a["position_nm.local"].shape == (20, 3, 2)
    assert a["width_nm.global"].shape == (20,)
    assert not np.array_equal(tol.draw(8, 20, 3)["width_nm.global"], a["width_nm.global"])


def test_rigid_shift_leaves_the_response_unchanged(ev):
    # why the deck refuses position_nm.global: a common shift is a translation of the infinite array
    from invdesign._simulate import response_from_params

    pb = ev.setup.problems[0]
    p0 = ev.params
    shift = jnp.array([13.0, -7.0])
    moved = dataclasses.replace(p0, elements=tuple(dataclasses.replace(e, center=e.center + shift)
                                                   for e in p0.elements))
    t0 = np.asarray(response_from_params(p0, pb).t)
    t1 = np.asarray(response_from_params(moved, pb).t)
    np.testing.assert_allclose(t1, t0, rtol=0, atol=1e-10)


def test_differentiable_quantities_equal_the_exact_goal_values(ev, sigma):
    z = tol.draw(1, 32, 2)
    mc = tol.monte_carlo(ev, z, sigma)
    band = [g.metric == "bandwidth_nm" for g in ev.setup.spec.goals]
    keep = ~np.array(band)
    np.testing.assert_allclose(mc.values[:, keep], mc.q[:, keep], rtol=1e-10, atol=1e-12)
    # and the exact values are exactly what the optimiser's check gives for that geometry
    from invdesign._simulate import response_from_params

    one = {k: v[3] for k, v in z.items()}
    p = tol.perturb(ev.params, one, sigma)
    ref = exact_goals(jax.tree_util.tree_map(np.asarray, response_from_params(p, ev.setup.problems[0])),
                      ev.setup)
    np.testing.assert_allclose(mc.values[3], [ref[lab][0] for lab in ev.labels], rtol=1e-12)
    assert list(mc.met[3]) == [ref[lab][1] for lab in ev.labels]


def test_linear_model_agrees_with_monte_carlo_for_small_sigma(ev, sigma):
    n = 128
    z = tol.draw(3, n, 2)
    errs = {}
    for scale in (0.05, 0.1):
        sig = {k: scale * v for k, v in sigma.items()}
        lin = tol.linear_sensitivity(ev, sig)
        mc = tol.monte_carlo(ev, z, sig)
        pred = tol.linear_prediction(lin, z)
        np.testing.assert_allclose(lin["q0"], mc.q.mean(0), rtol=0.05)
        # sample by sample: the first-order model leaves an O(σ²) remainder, i.e. O(σ) of the spread
        errs[scale] = np.sqrt(np.mean((pred - mc.q) ** 2, axis=0)) / lin["sigma"]
        assert np.all(errs[scale] < 0.03), errs[scale]
        # the spreads: Monte Carlo σ within 4 standard errors 1/sqrt(2(n-1)) of the linear σ
        ratio = np.std(mc.q, axis=0, ddof=1) / lin["sigma"]
        np.testing.assert_allclose(ratio, 1.0, atol=4 / np.sqrt(2 * (n - 1)))
    # halving σ halves the relative disagreement (order 1 in σ; 1.6–2.4 allows for curvature)
    order = errs[0.1] / errs[0.05]
    assert np.all((order > 1.6) & (order < 2.4)), order


def test_per_source_shares_add_up(ev, sigma):
    lin = tol.linear_sensitivity(ev, sigma)
    shares = tol.variance_shares(lin)
    np.testing.assert_allclose(sum(shares.values()), 1.0, rtol=1e-12)
    # a source with σ = 0 contributes nothing
    lin0 = tol.linear_sensitivity(ev, {**sigma, "angle_deg.local": 0.0})
    assert np.all(lin0["per_source_sigma"]["angle_deg.local"] == 0.0)


def test_touching_rods_are_caught_exactly():
    d = Design.from_json(design_doc(gap_nm=3.0))
    p0 = jax.tree_util.tree_map(lambda x: jnp.asarray(np.asarray(x, float)), d.params)
    sig = {k: 0.0 for k in tol.sigmas(parse_fab(FAB).tolerance)}
    sig.update({"position_nm.local": 2.0, "width_nm.local": 1.5, "angle_deg.local": 0.5})
    z = tol.draw(5, 200, 2)
    batch = jax.vmap(lambda zz: tol.perturb(p0, zz, sig))(jax.tree_util.tree_map(jnp.asarray, z))
    batch = jax.tree_util.tree_map(np.asarray, batch)
    batch = dataclasses.replace(batch, a1=np.asarray(p0.a1), a2=np.asarray(p0.a2))
    p0n = jax.tree_util.tree_map(np.asarray, p0)
    fast = tol._bridged(batch, p0n, pair_gaps(p0n.elements, p0n.a1, p0n.a2))
    brute = np.array([any(g <= 0 for _, _, g in pair_gaps(
        jax.tree_util.tree_map(lambda x, s=s: x[s], batch.elements), p0n.a1, p0n.a2)) for s in range(200)])
    assert 10 < brute.sum() < 190  # the case exercises both outcomes
    np.testing.assert_array_equal(fast, brute)


def test_study_and_files(ev, sigma, tmp_path):
    res = tol.study(ev, sigma, samples=40, seed=2, driver_samples=16)
    y = res["yield"]
    assert y["samples"] == 40 and 0 <= y["passed"] <= 40
    assert y["interval"]["low"] <= y["fraction"] <= y["interval"]["high"]
    assert y["passed"] == int(np.sum(np.all(res["_arrays"]["met"], axis=1) & ~res["_arrays"]["bridged"]))
    again = tol.study(ev, sigma, samples=40, seed=2, driver_samples=0)
    np.testing.assert_array_equal(again["_arrays"]["values"], res["_arrays"]["values"])  # deterministic
    failed_goals = int(np.sum(~res["_arrays"]["met"] & ~res["_arrays"]["bridged"][:, None]))
    blame = res["drivers"]["failures_by_source_linear"]
    assert sum(v for k, v in blame.items() if k != "bridged") == failed_goals
    assert set(res["drivers"]["removal"]["yield_without"]) == {k for k, v in sigma.items() if v > 0}
    paths = write_outputs(res, ev, tmp_path, meta={"test": True}, plot=True)
    import json

    doc = json.loads(paths["tolerance"].read_text())
    assert "laser" in doc["safety"].lower()
    assert "corner_radius_nm" in doc["not_sampled"]
    assert doc["goals"]["leakage"]["linear"]["sigma_linear"] > 0
    for kind in ("samples", "histograms_png", "sensitivity_png"):
        assert paths[kind].is_file() and paths[kind].stat().st_size > 0
    assert len(paths["samples"].read_text().splitlines()) == 41


def test_refuses_designs_outside_the_model():
    spec, fab = parse_spec(SPEC), parse_fab(FAB)
    doc = design_doc()
    doc["environment"]["substrate_index"] = 1.5
    with pytest.raises(Exception, match="differs from spec.environment"):
        tol.make_evaluator(Design.from_json(doc), spec, fab, ModelOptions(1, "kelly"))
    doc = design_doc()
    doc["elements"][1] = {"shape": "sphere", "material": "gold", "center": [120.0, 0.0], "radius": 40.0}
    with pytest.raises(Exception, match=r"design.elements\[1\] is a sphere"):
        tol.make_evaluator(Design.from_json(doc), spec, fab, ModelOptions(1, "kelly"))
