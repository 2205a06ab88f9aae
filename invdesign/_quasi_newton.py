"""L-BFGS over an already-compiled, batched value-and-gradient: optax's direction, a host-side line search.

Why not ``optax.lbfgs`` as it stands: its zoom line search calls the loss inside a ``lax.while_loop`` of the
step, so the step's program holds the model's loss a second time (inside the loop) beside the gradient.
(Its 20-minute compile on the 3-rod benchmark cell was mostly the then-unrolled gap penalty,
``invdesign._penalties.smooth_gaps``, since vectorised; this split stays because it compiles exactly the
program the Adam step compiles.) Here the step is split so that nothing new of the model is compiled:

* ``value_grad`` is the one jitted, ``jax.vmap``-ed function u (S, n) -> ((loss (S,), aux), grad (S, n))
  that the Adam step uses too (S starts, n unconstrained parameters, loss dimensionless);
* the search direction is ``optax.scale_by_lbfgs`` (two-loop recursion over the last ``memory`` pairs of
  parameter and gradient differences, scaled-identity initial preconditioner; Liu & Nocedal, Math. Program.
  45, 503 (1989)), jitted and vmapped on its own — a few vector operations, it compiles in about a second;
* the step length by backtracking until the Armijo condition f(u + η p) ≤ f(u) + c₁ η ∇f·p holds
  (Nocedal & Wright, *Numerical Optimization*, 2nd ed., Springer 2006, Alg. 3.1; c₁ = 1e-4 there), each
  rejected trial η replaced by the minimiser of the quadratic through f(u), ∇f·p and f(u + η p)
  (ibid. §3.5, eq. 3.58), η_new = −(∇f·p) η² / (2 [f(u + η p) − f(u) − η ∇f·p]), safeguarded into
  [``min_shrink``·η, ``shrink``·η] (a non-finite trial takes ``shrink``·η; ``min_shrink`` = ``shrink``
  is plain halving), run on the host: every trial is one call of ``value_grad`` on the whole batch
  (starts already accepted are re-evaluated at their accepted point, so the batch keeps one shape and
  nothing recompiles).

Safeguards (per start): the first trial step is η₀ = min(1, ``max_step`` / max|p|) so a first,
unpreconditioned step cannot leave the sigmoid transforms' useful range in one jump (``max_step`` in
unconstrained units); a direction that is not a descent direction (∇f·p ≥ 0, possible when a curvature
pair has sᵀy < 0 on this non-convex loss) is replaced by −∇f; a start whose search fails
``max_backtracks`` times stays where it is and its memory is cleared, so its next step starts again from
steepest descent; a start at its minimum to machine precision — a rejected trial left the loss unchanged
in floating point, or the next trial could only lower it by less than its rounding level,
−η ∇f·p ≤ ``stall_tol``·|f| — stops searching for that step without a reset (otherwise, because a trial
evaluates the whole batch, one converged start would cost every step ``max_backtracks`` calls).

The optimiser state is (lbfgs memory, loss, gradient, aux at the current point, calls (S,) int): the
running count of ``value_grad`` calls (each one a batched loss and gradient, about 2.2 forward costs per
start) comes last. Everything is a deterministic function of the parameters, so a checkpoint of
(u, state) resumes bit for bit. ``step`` returns the loss and aux at the point it started from, as the
Adam step does.
"""

import dataclasses

import jax
import jax.numpy as jnp
import numpy as np
import optax


@dataclasses.dataclass(frozen=True)
class LineSearch:
    """Backtracking settings (module docstring)."""

    c1: float = 1e-4          # Armijo sufficient-decrease constant
    shrink: float = 0.5       # largest η_new/η after a rejected trial (the interpolation's upper safeguard)
    min_shrink: float = 0.1   # smallest η_new/η (lower safeguard); min_shrink = shrink is plain halving
    max_backtracks: int = 12  # trials per step before the start gives up and resets its memory
    max_step: float = 1.0     # cap on max|η₀ p|, unconstrained units
    memory: int = 10          # curvature pairs kept by the direction
    stall_tol: float = 1e-12  # a start stops searching once −η ∇f·p ≤ stall_tol·|f| (decrease below rounding)

    def __post_init__(self):
        checks = {"c1": 0 < self.c1 < 1, "shrink": 0 < self.shrink < 1,
                  "min_shrink": 0 < self.min_shrink <= self.shrink,
                  "max_backtracks": self.max_backtracks >= 1, "max_step": self.max_step > 0,
                  "memory": self.memory >= 1, "stall_tol": 0 <= self.stall_tol < 1}
        bad = ", ".join(f"{k}={getattr(self, k)!r}" for k, ok in checks.items() if not ok)
        if bad:
            raise ValueError(f"line search settings out of range: {bad}; valid: 0 < c1 < 1, "
                             "0 < shrink < 1, 0 < min_shrink <= shrink, max_backtracks >= 1, max_step > 0, "
                             "memory >= 1, 0 <= stall_tol < 1")


def _batched_where(mask, new, old):
    """Per start: leaves of ``new`` where mask (S,) is true, of ``old`` elsewhere (leading axis S)."""
    return jax.tree_util.tree_map(
        lambda a, b: jnp.where(mask.reshape((-1,) + (1,) * (a.ndim - 1)), a, b), new, old)


def make_lbfgs(value_grad, ls: LineSearch = LineSearch()):
    """(init, step) for a batched L-BFGS over ``value_grad`` (see the module docstring).

    init(u (S, n)) -> state; step(u, state) -> (u_next, state_next, loss (S,) at u, aux at u).
    """
    direction = optax.scale_by_lbfgs(memory_size=ls.memory)
    dir_init = jax.jit(jax.vmap(direction.init))
    dir_update = jax.jit(jax.vmap(direction.update))
    select = jax.jit(_batched_where)

    def init(u):
        (f, aux), g = value_grad(u)
        return (dir_init(u), f, _finite(g), aux, jnp.ones(f.shape, jnp.int64))

    def step(u, state):
        memory, f, g, aux, calls_before = state
        p, memory_next = dir_update(g, memory, u)
        p, g_np, f_np = -np.asarray(p), np.asarray(g), np.asarray(f)
        slope = np.sum(g_np * p, axis=1)
        uphill = ~(slope < 0) | ~np.all(np.isfinite(p), axis=1)
        p = np.where(uphill[:, None], -g_np, p)
        slope = np.where(uphill, -np.sum(g_np * g_np, axis=1), slope)
        top = np.max(np.abs(p), axis=1)
        eta = np.minimum(1.0, ls.max_step / np.where(top > 0, top, 1.0))
        u_np = np.asarray(u)
        accepted = np.zeros(len(f_np), bool)
        stationary = slope == 0.0   # zero gradient (a met spec): nothing to search
        stalled = np.zeros(len(f_np), bool)
        tiny = np.finfo(np.float64).tiny
        best = (u, f, g, aux)
        calls = 0
        for _ in range(ls.max_backtracks):
            trial = np.where(accepted[:, None], np.asarray(best[0]), u_np + eta[:, None] * p)
            (ft, auxt), gt = value_grad(jnp.asarray(trial))
            calls += 1
            ft_np = np.asarray(ft)
            ok = ~accepted & ~stationary & np.isfinite(ft_np) & (ft_np <= f_np + ls.c1 * eta * slope)
            best = select(jnp.asarray(ok), (jnp.asarray(trial), ft, _finite(gt), auxt), best)
            accepted |= ok
            eta = np.where(accepted, eta, next_trial(eta, f_np, slope, ft_np, ls))
            stalled |= ~accepted & ((ft_np == f_np)
                                    | (-eta * slope <= ls.stall_tol * np.maximum(np.abs(f_np), tiny)))
            if np.all(accepted | stationary | stalled):
                break
        failed = ~accepted & ~stationary & ~stalled
        memory_next = select(jnp.asarray(failed), dir_init(u), memory_next)
        u_next, f_next, g_next, aux_next = best
        return u_next, (memory_next, f_next, g_next, aux_next, calls_before + calls), f, aux

    return init, step


def next_trial(eta, f0, slope, f_trial, ls: LineSearch):
    """(S,) next trial step after rejecting ``eta`` (S,): the safeguarded minimiser of the quadratic
    q(0) = f0, q'(0) = slope (< 0), q(eta) = f_trial (Nocedal & Wright, eq. 3.58), clipped into
    [min_shrink·eta, shrink·eta]; shrink·eta where the trial was not finite or the curvature is not
    positive."""
    with np.errstate(all="ignore"):
        excess = f_trial - f0 - slope * eta          # > 0 when the trial failed the Armijo test
        quad = -slope * eta * eta / (2.0 * excess)
    fallback = ls.shrink * eta
    ok = np.isfinite(f_trial) & np.isfinite(quad) & (excess > 0)
    return np.where(ok, np.clip(quad, ls.min_shrink * eta, ls.shrink * eta), fallback)


def _finite(g):
    return jnp.where(jnp.isfinite(g), g, 0.0)
