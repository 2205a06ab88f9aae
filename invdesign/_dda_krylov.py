"""Krylov solvers for the verification solver, in JAX, reporting their work and the true residual.

Solves A x = b for complex vectors (flat, (n,)) with A given as a function and a preconditioner M ≈ A⁻¹.

"gmres": restarted GMRES, right-preconditioned. Right preconditioning
(A M y = b, x = M y) keeps the monitored residual the true one, ‖b − A x‖, up to rounding. Each cycle
runs up to ``restart`` Arnoldi steps (classical Gram–Schmidt applied twice), Givens rotations track the
residual so a cycle stops as soon as it reaches ``tol``·‖b‖, and the cycle ends with the true residual
recomputed (one extra product). Y. Saad and M. H. Schultz, SIAM J. Sci. Stat. Comput. 7, 856 (1986).

"bicgstab": H. A. van der Vorst, SIAM J. Sci. Stat. Comput. 13, 631 (1992), right-preconditioned; two
products per iteration, constant memory, for any A.

"cocg": conjugate orthogonal conjugate gradients for complex *symmetric* A = Aᵀ with a symmetric M
(H. A. van der Vorst and J. B. M. Melissen, IEEE Trans. Magn. 26, 706 (1990)): one product per
iteration, constant memory. The DDA matrix is complex symmetric by reciprocity for an isolated target
and for a lattice at normal incidence (k∥ = 0); not for oblique incidence.
All three stop on the true residual ‖b − A x‖ ≤ tol ‖b‖ (recomputed, not the recurrence's estimate).

Initial guess (warm start): ``solve(..., guess=V)`` with V (m, n) a few earlier solutions (e.g. the same
polarisation at the previous wavelengths) starts from x₀ = V c, the combination with the least residual,
c = argmin ‖b − (A V) c‖ (m products; a small least-squares problem; c = 0 when V is zero, so a zero
guess is the cold start). The guess changes where the iteration starts, not the system solved: the
solution still meets ‖b − A x‖ ≤ tol ‖b‖, and derivatives are those of A⁻¹ b (the guess enters through
``stop_gradient``; the adjoint solve starts from zero).

``solve`` wraps this in ``jax.lax.custom_linear_solve``: derivatives are those of the exact solution
(implicit differentiation; the adjoint solve is GMRES on the transposed operator), never unrolled
through the iterations. Non-convergence is reported (``converged`` False), not raised, so it works
under ``jit``; the front door refuses the result.
"""

from typing import NamedTuple

import jax
import jax.numpy as jnp


class SolveStats(NamedTuple):
    """Diagnostics of one solve: ``iterations`` = products with A (int), the relative true ``residual``
    ‖b − A x‖/‖b‖ (float) and ``converged`` (bool)."""

    iterations: jax.Array
    residual: jax.Array
    converged: jax.Array


def _rotation(a, b):
    """Complex Givens rotation (c real, s) with [c s; −s̄ c] (a, b)ᵀ = (r, 0)ᵀ."""
    r = jnp.sqrt(jnp.abs(a) ** 2 + jnp.abs(b) ** 2)
    phase = jnp.where(jnp.abs(a) > 0, a / jnp.where(jnp.abs(a) > 0, jnp.abs(a), 1.0), 1.0)
    safe_r = jnp.where(r > 0, r, 1.0)
    return jnp.abs(a) / safe_r, phase * jnp.conj(b) / safe_r


def _cycle(matvec, precond, b, x, tol_abs, restart):
    """One GMRES(restart) cycle from x; returns (new x, Arnoldi steps taken)."""
    n = b.shape[0]
    r0 = b - matvec(x)
    beta = jnp.linalg.norm(r0)
    basis = jnp.zeros((restart + 1, n), dtype=b.dtype).at[0].set(r0 / jnp.where(beta > 0, beta, 1.0))
    hess = jnp.zeros((restart + 1, restart), dtype=b.dtype)
    cs = jnp.zeros(restart)
    sn = jnp.zeros(restart, dtype=b.dtype)
    g = jnp.zeros(restart + 1, dtype=b.dtype).at[0].set(beta)

    def cond(state):
        j, _, _, _, _, g = state
        return (j < restart) & (jnp.abs(g[j]) > tol_abs)

    def body(state):
        j, basis, hess, cs, sn, g = state
        w = matvec(precond(basis[j]))
        h = jnp.conj(basis) @ w
        w = w - basis.T @ h
        h2 = jnp.conj(basis) @ w
        w = w - basis.T @ h2
        h = h + h2
        norm_w = jnp.linalg.norm(w)
        basis = basis.at[j + 1].set(w / jnp.where(norm_w > 0, norm_w, 1.0))
        col = h.at[j + 1].set(norm_w)

        def rotate(i, col):
            a, bb = col[i], col[i + 1]
            new_a = cs[i] * a + sn[i] * bb
            new_b = -jnp.conj(sn[i]) * a + cs[i] * bb
            use = i < j
            return col.at[i].set(jnp.where(use, new_a, a)).at[i + 1].set(jnp.where(use, new_b, bb))

        col = jax.lax.fori_loop(0, restart, rotate, col)
        c, s = _rotation(col[j], col[j + 1])
        col = col.at[j].set(c * col[j] + s * col[j + 1]).at[j + 1].set(0.0)
        g = g.at[j + 1].set(-jnp.conj(s) * g[j]).at[j].set(c * g[j])
        return j + 1, basis, hess.at[:, j].set(col), cs.at[j].set(c), sn.at[j].set(s), g

    steps, basis, hess, _, _, g = jax.lax.while_loop(cond, body, (0, basis, hess, cs, sn, g))
    used = jnp.arange(restart) < steps
    upper = jnp.where(used[:, None] & used[None, :], hess[:restart], 0.0)
    upper = upper + jnp.diag(jnp.where(used, 0.0, 1.0))  # unit diagonal on the unused steps: y = 0 there
    y = jax.scipy.linalg.solve_triangular(upper, jnp.where(used, g[:restart], 0.0), lower=False)
    return x + precond(basis[:restart].T @ y), steps


def _start(b, x0, r0):
    """Start (x₀, r₀ = b − A x₀): zero and b unless a guess and its residual are given."""
    if x0 is None:
        return jnp.zeros_like(b), b
    return x0, r0


def gmres(matvec, b, precond, *, tol, restart, max_iterations, x0=None, r0=None):
    """Solve A x = b by restarted, right-preconditioned GMRES.

    Args:
      matvec: x (n,) -> A x (n,), complex. precond: y (n,) -> M y (n,), an approximate inverse of A.
      b: (n,) complex right-hand side.
      tol: target relative residual ‖b − A x‖/‖b‖ (static float). restart: Krylov dimension per cycle.
      max_iterations: stop after this many Arnoldi steps in total (rounded up to whole cycles).
      x0, r0: optional start (n,) and its residual b − A x0 (n,); default zero and b.

    Returns:
      (x (n,), ``SolveStats``).
    """
    bnorm = jnp.linalg.norm(b)
    tol_abs = tol * bnorm
    max_cycles = -(-max_iterations // restart)

    def cond(state):
        _, _, res, cycles = state
        return (res > tol_abs) & (cycles < max_cycles)

    def body(state):
        x, its, _, cycles = state
        x, steps = _cycle(matvec, precond, b, x, tol_abs, restart)
        return x, its + steps + 2, jnp.linalg.norm(b - matvec(x)), cycles + 1

    x0, r0 = _start(b, x0, r0)
    x, its, res, _ = jax.lax.while_loop(cond, body, (x0, 0, jnp.linalg.norm(r0), 0))
    rel = res / jnp.where(bnorm > 0, bnorm, 1.0)
    return x, SolveStats(its, rel, rel <= tol)


def _true_stats(matvec, b, x, its, tol):
    bnorm = jnp.linalg.norm(b)
    rel = jnp.linalg.norm(b - matvec(x)) / jnp.where(bnorm > 0, bnorm, 1.0)
    return SolveStats(its + 1, rel, rel <= tol)


def bicgstab(matvec, b, precond, *, tol, max_iterations, x0=None, r0=None, **_):
    """Right-preconditioned BiCGSTAB; same interface and return as ``gmres``."""
    tol_abs = tol * jnp.linalg.norm(b)
    x0, r0 = _start(b, x0, r0)
    one = jnp.ones((), dtype=b.dtype)
    zero = jnp.zeros_like(b)

    def cond(state):
        _, r, *_, its = state
        return (jnp.linalg.norm(r) > tol_abs) & (its < max_iterations)

    def body(state):
        x, r, p, v, rho, alpha, omega, its = state
        rho_new = jnp.vdot(r0, r)
        beta = (rho_new / rho) * (alpha / omega)
        p = r + beta * (p - omega * v)
        y = precond(p)
        v = matvec(y)
        alpha = rho_new / jnp.vdot(r0, v)
        s = r - alpha * v
        z = precond(s)
        t = matvec(z)
        omega = jnp.vdot(t, s) / jnp.vdot(t, t)
        return x + alpha * y + omega * z, s - omega * t, p, v, rho_new, alpha, omega, its + 2

    x, *_, its = jax.lax.while_loop(cond, body, (x0, r0, zero, zero, one, one, one, 0))
    return x, _true_stats(matvec, b, x, its, tol)


def cocg(matvec, b, precond, *, tol, max_iterations, x0=None, r0=None, **_):
    """Preconditioned COCG for complex symmetric A and M; same interface and return as ``gmres``."""
    tol_abs = tol * jnp.linalg.norm(b)
    x0, r0 = _start(b, x0, r0)
    z = precond(r0)
    rho = jnp.sum(r0 * z)

    def cond(state):
        _, r, *_, its = state
        return (jnp.linalg.norm(r) > tol_abs) & (its < max_iterations)

    def body(state):
        x, r, p, rho, its = state
        q = matvec(p)
        alpha = rho / jnp.sum(p * q)
        x = x + alpha * p
        r = r - alpha * q
        z = precond(r)
        rho_new = jnp.sum(r * z)
        return x, r, z + (rho_new / rho) * p, rho_new, its + 1

    x, *_, its = jax.lax.while_loop(cond, body, (x0, r0, z, rho, 0))
    return x, _true_stats(matvec, b, x, its, tol)


METHODS = {"gmres": gmres, "bicgstab": bicgstab, "cocg": cocg}


def least_residual_start(matvec, b, basis):
    """The start x₀ = Vᵀc in the span of ``basis`` V (m, n) with the least ‖b − A x₀‖, and its residual.

    Returns (x₀ (n,), r₀ = b − A x₀ (n,)); m products with A. A zero (or rank-deficient) basis gives the
    least-norm c (SVD least squares), so a zero basis returns x₀ = 0, r₀ = b.
    """
    av = jax.vmap(matvec)(basis)  # (m, n)
    c, *_ = jnp.linalg.lstsq(av.T, b)
    return basis.T @ c, b - av.T @ c


def solve(matvec, b, precond, *, method="gmres", tol=1e-6, restart=40, max_iterations=2000,
          precond_transpose=None, guess=None):
    """x = A⁻¹ b with implicit derivatives (``jax.lax.custom_linear_solve``) and ``SolveStats``.

    ``method``: "gmres", "bicgstab" or "cocg" (static; "cocg" only for complex symmetric A, which
    then also serves as its own transpose). ``precond_transpose`` (default: ``precond``, right for a
    symmetric preconditioner) is used for the adjoint solve with Aᵀ. ``guess``: None (start from zero)
    or (m, n) earlier solutions to start from (``least_residual_start``; its m products are counted in
    ``SolveStats.iterations``); it never changes the solution or its derivatives. Shapes as ``gmres``.
    """
    pt = precond if precond_transpose is None else precond_transpose
    method_fn = METHODS[method]
    basis = None if guess is None else jax.lax.stop_gradient(guess)

    def forward(mv, rhs):
        if basis is None:
            return method_fn(mv, rhs, precond, tol=tol, restart=restart, max_iterations=max_iterations)
        x0, r0 = least_residual_start(mv, rhs, basis)
        x, stats = method_fn(mv, rhs, precond, tol=tol, restart=restart, max_iterations=max_iterations,
                             x0=x0, r0=r0)
        return x, stats._replace(iterations=stats.iterations + basis.shape[0])

    def adjoint(vm, rhs):
        return method_fn(vm, rhs, pt, tol=tol, restart=restart, max_iterations=max_iterations)

    return jax.lax.custom_linear_solve(matvec, b, forward, adjoint, has_aux=True)
