"""The fab-robust loss (``fab_robust`` option of optimize): the statistic over fabricated copies is what it
claims, the copies are fixed for the run (common random numbers), σ = 0 is the nominal loss to the bit,
a short run resumes bit-for-bit, and bad options are refused by key.

Small problems (5 wavelengths, one tilted rod like conf/cell/lone_tilt.yaml, one dipole per rod, K = 6
copies). The check values are properties of the definition in ``invdesign._optimize`` (module docstring,
"Fabrication robustness"), with the per-copy losses recomputed outside the loss from separately simulated
copies; the order statistic is checked against NumPy's ``np.quantile`` (method "linear", its default),
a general-purpose reference library. The deck σ below are typical values (common practice, no source).
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from test_optimize import FAB, HARD, spec_doc

from invdesign import SpecError, _checkpoint
from invdesign import _optimize as opt
from invdesign import _tolerance as tol
from invdesign._spec import parse_cell, parse_fab, parse_spec

TOLERANCE = {"label": "typical values (common practice, no source)",
             "width_nm": {"global": 2.0, "local": 1.5}, "length_nm": {"global": 2.0, "local": 1.5},
             "position_nm": {"local": 1.0}, "angle_deg": {"global": 0.2, "local": 0.5},
             "thickness_nm": {"global": 1.0, "local": 0.3}}
DECK = dict(FAB, tolerance=TOLERANCE)
# one tilted rod, as conf/cell/lone_tilt.yaml
CELL = {"family": "lone_tilt", "period_nm": [500.0, 500.0], "angle_range_deg": [-80.0, 80.0],
        "start": {"length": 200.0, "width": 60.0, "angle_deg": 30.0}}
K = 6


def build(fab_robust=None, resolutions=(1, 3), steps=6, deck=DECK):
    spec, fab, cell = parse_spec(spec_doc(HARD)), parse_fab(deck), parse_cell(CELL)
    cfg = {"optimizer": {"steps": steps, "starts": 2, "seed": 0},
           "robust": {"resolutions": list(resolutions), "corrections": ["kelly"]},
           "checkpoint": {"every": 3}, "report": {"resolutions": [1], "corrections": ["kelly"]}}
    if fab_robust is not None:
        cfg["fab_robust"] = fab_robust
    return opt.build_setup(spec, fab, cell, opt.parse_run_options(cfg, fab, {"correction": "kelly"}))


@pytest.fixture(scope="module")
def robust():
    """Robust over N = 1, 3 (so the copies' inherited worst-model gap is not zero) with K copies at 2× σ."""
    return build({"samples": K, "sigma_scale": 2.0, "seed": 3})


@pytest.fixture(scope="module")
def robust_loss(robust):
    return jax.jit(opt.make_loss(robust))


@pytest.fixture(scope="module")
def nominal_loss():
    """The plain loss over the same models (N = 1, 3), no copies."""
    return jax.jit(opt.make_loss(build()))


def _copy_losses(setup, u, scale):
    """Per-copy losses recomputed outside the loss: every copy simulated on its own, unbatched."""
    params = setup.family.params(u)
    nominal = {n: np.asarray(opt.goal_shortfalls(opt._forward(setup, n, "kelly")(params), setup))
               for n in (1, 3)}
    worst = np.maximum(nominal[1], nominal[3])
    z = tol.draw(3, K, 1)                                   # the option's seed, K copies, one element
    sigma = tol.sigmas(setup.fab.tolerance, scale)
    out, shifts = [], []
    for k in range(K):
        p_k = tol.perturb(params, {name: v[k] for name, v in z.items()}, sigma)
        r_k = np.asarray(opt.goal_shortfalls(opt._forward(setup, 1, "kelly")(p_k), setup))
        shifts.append(r_k - nominal[1])
        out.append(float(opt.goal_loss(jnp.asarray(worst + r_k - nominal[1]), setup)))
    return np.asarray(out), worst - nominal[1], np.asarray(shifts)


def test_order_statistic_is_numpys_linear_quantile(rng):
    for k in (1, 2, 5, 6, 8, 13):
        x = rng.lognormal(size=k) * rng.integers(0, 2, size=k)  # ties at zero, as met copies give
        for q in (0.01, 0.25, 0.5, 0.9, 0.99):
            got = float(opt.fab_statistic(jnp.asarray(x), opt.FabRobust(k, "quantile", q)))
            assert got == pytest.approx(float(np.quantile(x, q)), rel=1e-14, abs=1e-300)
        got = float(opt.fab_statistic(jnp.asarray(x), opt.FabRobust(k, "mean"), reference=float(x[0])))
        assert got == pytest.approx(float(np.mean(x)), rel=1e-13, abs=1e-300)


def test_loss_is_the_statistic_of_separately_computed_copies(robust, robust_loss, nominal_loss, rng):
    quant = build({"samples": K, "sigma_scale": 2.0, "seed": 3, "statistic": "quantile", "quantile": 0.9})
    quant_loss = jax.jit(opt.make_loss(quant))
    for _ in range(2):
        u = jnp.asarray(rng.normal(scale=0.7, size=len(robust.family.names)))
        losses, gap, shifts = _copy_losses(robust, u, 2.0)
        assert np.any(gap > 0) and np.ptp(losses) > 0  # the worst-model gap and the fab errors both matter
        assert np.all(np.abs(shifts).max(axis=0) > 0)
        total, aux = robust_loss(u)
        pen = robust.opts.rules_weight * float(aux["penalty"])
        np.testing.assert_allclose(np.asarray(aux["fab_losses"]), losses, rtol=1e-10, atol=1e-14)
        assert float(total) == pytest.approx(float(np.mean(losses)) + pen, rel=1e-10)
        total_q, _ = quant_loss(u)
        assert float(total_q) == pytest.approx(float(np.quantile(losses, 0.9)) + pen, rel=1e-10)
        # the nominal loss is still reported and differs from the robust one
        nominal, _ = nominal_loss(u)
        assert float(aux["nominal_goal_loss"]) + pen == pytest.approx(float(nominal), rel=1e-12)


def test_draws_are_fixed_for_the_run(robust, robust_loss, rng):
    u = jnp.asarray(rng.normal(size=len(robust.family.names)))
    first = float(robust_loss(u)[0])
    assert all(float(robust_loss(u)[0]) == first for _ in range(3))
    again = build({"samples": K, "sigma_scale": 2.0, "seed": 3})  # built afresh: the same draws
    assert again.fingerprint == robust.fingerprint
    assert float(jax.jit(opt.make_loss(again))(u)[0]) == first
    other = build({"samples": K, "sigma_scale": 2.0, "seed": 4})
    assert other.fingerprint != robust.fingerprint
    assert float(jax.jit(opt.make_loss(other))(u)[0]) != first


@pytest.mark.parametrize("statistic", ["mean", "quantile"])
def test_zero_sigma_is_the_nominal_loss_exactly(statistic, nominal_loss, rng):
    zero = jax.jit(opt.make_loss(build({"samples": K, "sigma_scale": 0.0, "statistic": statistic})))
    for _ in range(3):
        u = jnp.asarray(rng.normal(size=4))
        assert float(zero(u)[0]) == float(nominal_loss(u)[0])


def test_fingerprint_carries_the_option():
    plain = build()
    assert build({"samples": 0, "seed": 9}).fingerprint == plain.fingerprint  # off is the plain run
    prints = {plain.fingerprint, build({"samples": K}).fingerprint, build({"samples": K + 1}).fingerprint,
              build({"samples": K, "statistic": "quantile"}).fingerprint,
              build({"samples": K, "sigma_scale": 2.0}).fingerprint}
    assert len(prints) == 5


def test_short_run_resumes_bit_for_bit(tmp_path):
    setup = build({"samples": 4, "sigma_scale": 2.0}, resolutions=(1,), steps=6)
    ref = opt.run(setup, tmp_path / "ref", quiet=True)
    assert ref["steps"] == 6  # no early stop: the resume below lands mid-run
    cut = opt.run(setup, tmp_path / "cut", quiet=True, stop_after=5)  # checkpoints every 3 steps
    assert cut == {"interrupted_at": 5}
    assert _checkpoint.load(tmp_path / "cut", setup.fingerprint)[1]["step"] == 3
    resumed = opt.run(setup, tmp_path / "cut", quiet=True)
    np.testing.assert_array_equal(resumed["best_u"], ref["best_u"])
    np.testing.assert_array_equal(resumed["history"], ref["history"])
    with pytest.raises(SpecError, match="different settings"):  # a nominal setup may not resume it
        opt.run(build(resolutions=(1,), steps=6), tmp_path / "cut", quiet=True)


@pytest.mark.parametrize("doc, match", [
    ({"samples": -1}, r"fab_robust\.samples must be at least 0"),
    ({"samples": 2.5}, r"fab_robust\.samples must be a whole number"),
    ({"samples": 4, "statistic": "median"}, r"fab_robust\.statistic = 'median' is not valid; use one of: "
                                            r"mean, quantile"),
    ({"samples": 4, "quantile": 1.0}, r"fab_robust\.quantile must lie in \(0, 1\)"),
    ({"samples": 4, "sigma_scale": -1.0}, r"fab_robust\.sigma_scale must be at least 0"),
    ({"samples": 4, "sample": 4}, r"fab_robust: unknown key 'sample'; valid keys are: quantile, samples"),
])
def test_bad_options_are_refused_by_key(doc, match):
    with pytest.raises(SpecError, match=match):
        opt.parse_fab_robust(doc, parse_fab(DECK))


def test_deck_without_tolerance_is_refused():
    with pytest.raises(SpecError, match=r"fab_robust\.samples = 4 needs the fab deck's tolerance block"):
        opt.parse_fab_robust({"samples": 4}, parse_fab(FAB))
    assert opt.parse_fab_robust({"samples": 0}, parse_fab(FAB)) is None
