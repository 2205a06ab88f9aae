"""L-BFGS with a host-side Armijo backtracking line search (``invdesign._quasi_newton``).

References: the Rosenbrock function's minimum is at (1, …, 1) with value 0 (H. H. Rosenbrock, Comput. J.
3, 175 (1960)); a strictly convex quadratic ½xᵀAx − bᵀx has its minimum where A x = b (checked against
``numpy.linalg.solve``); the Armijo condition makes every accepted step decrease the loss (Nocedal &
Wright, *Numerical Optimization*, 2nd ed. (2006), §3.1), so the loss sequence of each start is monotone.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign._quasi_newton import LineSearch, make_lbfgs


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


@pytest.mark.parametrize("bad", [{"shrink": 1.0}, {"c1": 0.0}, {"max_backtracks": 0}, {"max_step": -1.0},
                                 {"memory": 0}])
def test_bad_line_search_settings_are_refused(bad):
    with pytest.raises(ValueError, match=next(iter(bad))):
        LineSearch(**bad)
