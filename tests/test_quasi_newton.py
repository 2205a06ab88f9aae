"""L-BFGS with a host-side Armijo backtracking line search (``invdesign._quasi_newton``).

References: the Rosenbrock function's minimum is at (1, …, 1) with value 0 (H. H. Rosenbrock, Comput. J.
3, 175 (1960)); a strictly convex quadratic ½xᵀAx − bᵀx has its minimum where A x = b (checked against
``numpy.linalg.solve``); the Armijo condition makes every accepted step decrease the loss (Nocedal &
Wright, *Numerical Optimization*, 2nd ed. (2006), §3.1), so the loss sequence of each start is monotone;
the backtracking's quadratic interpolation (ibid. §3.5, eq. 3.58) is exact for a loss that is
quadratic along the search line.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign._quasi_newton import LineSearch, make_lbfgs, next_trial


def rosenbrock(x):
    v = jnp.sum(100.0 * (x[1:] - x[:-1] ** 2) ** 2 + (1.0 - x[:-1]) ** 2)
    return v, {"value": v}


def batched(fn):
    return jax.jit(jax.vmap(jax.value_and_grad(fn, has_aux=True)))


def run(init, step, u, steps):
    state = init(u)
    losses = []
    for _ in range(steps):
        u, state, f, _ = step(u, state)
        losses.append(np.asarray(f))
    return u, state, np.stack(losses)


def test_rosenbrock_minimum_from_three_starts():
    init, step = make_lbfgs(batched(rosenbrock))
    u0 = jnp.asarray([[-1.2, 1.0, -0.5, 0.3], [0.0, 0.0, 0.0, 0.0], [2.0, 2.0, 2.0, 2.0]])
    u, state, losses = run(init, step, u0, 200)
    np.testing.assert_allclose(np.asarray(u), 1.0, atol=1e-6)   # Rosenbrock (1960): minimum at (1, ..., 1)
    assert np.all(np.asarray(state[1]) < 1e-12)
    assert np.all(np.diff(losses, axis=0) <= 0.0), "an accepted Armijo step never raises the loss"
    assert np.all(np.asarray(state[4]) >= 200)    # at least one loss-and-gradient call per step, counted


def test_convex_quadratic_reaches_the_linear_solve(rng):
    n = 12
    q = rng.normal(size=(n, n))
    a = q @ q.T + n * np.eye(n)        # symmetric positive definite, condition number ~ a few
    b = rng.normal(size=n)
    x_ref = np.linalg.solve(a, b)

    def quad(x):
        v = 0.5 * x @ (jnp.asarray(a) @ x) - jnp.asarray(b) @ x
        return v, {}

    init, step = make_lbfgs(batched(quad))
    u, _, _ = run(init, step, jnp.zeros((2, n)).at[1].set(5.0), 60)
    np.testing.assert_allclose(np.asarray(u), np.broadcast_to(x_ref, (2, n)), rtol=0, atol=1e-9)


def test_uphill_direction_falls_back_to_steepest_descent():
    # a concave-up-then-down 1-D loss where the secant pair has s·y < 0: the step must still descend
    def bumpy(x):
        v = jnp.sum(jnp.sin(3.0 * x) + 0.1 * x ** 2)
        return v, {}

    init, step = make_lbfgs(batched(bumpy))
    u, _, losses = run(init, step, jnp.asarray([[0.4], [-2.0], [1.7]]), 40)
    assert np.all(np.diff(losses, axis=0) <= 0.0)
    g = np.asarray(jax.vmap(jax.grad(lambda x: bumpy(x)[0]))(u))
    np.testing.assert_allclose(g, 0.0, atol=1e-6)   # each start ends at a stationary point


def test_checkpointed_state_resumes_bit_for_bit():
    init, step = make_lbfgs(batched(rosenbrock), LineSearch(memory=4))
    u0 = jnp.asarray([[-1.2, 1.0, -0.5], [0.5, 0.5, 0.5]])
    u_ref, _, loss_ref = run(init, step, u0, 30)
    u, state, loss_a = run(init, step, u0, 12)
    leaves, treedef = jax.tree_util.tree_flatten(state)
    saved = [np.array(leaf) for leaf in leaves]          # what a checkpoint keeps
    state = jax.tree_util.tree_unflatten(treedef, [jnp.asarray(x) for x in saved])
    losses = [loss_a]
    for _ in range(18):
        u, state, f, _ = step(jnp.asarray(np.array(u)), state)
        losses.append(np.asarray(f)[None])
    np.testing.assert_array_equal(np.asarray(u), np.asarray(u_ref))
    np.testing.assert_array_equal(np.concatenate(losses), loss_ref)


def test_interpolated_trial_is_the_minimum_of_a_quadratic_line_and_is_safeguarded():
    # phi(eta) = f0 + slope*eta + c*eta^2: minimum at -slope/(2c) (Nocedal & Wright eq. 3.58 is exact here)
    f0, slope = 3.0, -2.0
    c = np.array([4.0, 1.2, 200.0, 0.6])        # minima 0.25, 0.833, 0.005, 1.667 for a rejected eta = 1
    eta = np.ones(4)
    out = next_trial(eta, np.full(4, f0), np.full(4, slope), f0 + slope * eta + c * eta ** 2, LineSearch())
    expect = np.clip(-slope / (2 * c), 0.1, 0.5)  # the safeguards [min_shrink, shrink] = [0.1, 0.5]
    np.testing.assert_allclose(out, expect, rtol=1e-14)
    assert out[0] == pytest.approx(0.25)          # inside the safeguards: the exact line minimum
    bad = next_trial(np.ones(2), np.zeros(2), -np.ones(2), np.array([np.nan, np.inf]), LineSearch())
    np.testing.assert_array_equal(bad, 0.5)       # non-finite trials halve
    halving = next_trial(eta, np.full(4, f0), np.full(4, slope), f0 + slope * eta + c * eta ** 2,
                         LineSearch(min_shrink=0.5))
    np.testing.assert_array_equal(halving, 0.5)   # min_shrink = shrink is plain halving


def test_a_start_converged_to_machine_precision_stops_searching():
    # log cosh(3x) rounds to exactly 0 near its minimum while its gradient (9x) is still nonzero, so no
    # Armijo trial can succeed there; without the stall rule every later step burns max_backtracks calls
    def flat_bottom(x):
        v = jnp.sum(jnp.asarray([1.0, 30.0]) * jnp.log(jnp.cosh(3.0 * x)))
        return v, {}

    init, step = make_lbfgs(batched(flat_bottom))
    u, state, losses = run(init, step, jnp.asarray([[2.0, 1.5], [0.3, -0.2]]), 40)
    assert np.all(np.asarray(state[1]) == 0.0)            # both at the minimum (value 0 at x = 0)
    np.testing.assert_allclose(np.asarray(u), 0.0, atol=1e-6)
    assert np.all(np.diff(losses, axis=0) <= 0.0)
    calls = int(np.asarray(state[4])[0])
    # measured 120 with the rule (3-4 calls per converged step); without it 13 + 27 x 12 = 337
    assert calls <= 200, calls


@pytest.mark.parametrize("bad", [{"shrink": 1.0}, {"min_shrink": 0.8}, {"c1": 0.0}, {"max_backtracks": 0},
                                 {"max_step": -1.0}, {"memory": 0}, {"stall_tol": -1.0}])
def test_bad_line_search_settings_are_refused(bad):
    with pytest.raises(ValueError, match=next(iter(bad))):
        LineSearch(**bad)
