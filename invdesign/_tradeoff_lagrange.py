"""Augmented-Lagrangian treatment of the goal constraints, in the shifted-penalty form.

The goals are inequality constraints c_g = r_g + m ≤ 0 (r_g the normalised shortfall, m the goal margin).
The plain penalty of ``_optimize.goal_loss`` is μ·Σ_g w_g relu(c_g)². Its minimiser violates an active
constraint by c_g = λ_g/(2μw_g) (λ_g the constraint's Lagrange multiplier), so holding it tightly needs a
large μ, which makes the loss a stiff, curved valley along the constraint. The augmented Lagrangian of
Powell–Hestenes–Rockafellar (Nocedal & Wright, *Numerical Optimization*, 2nd ed., Springer 2006, §17.4,
eq. 17.65) for inequalities, with penalty parameter ρ_g = 2μw_g, is

    ψ_g(c, λ) = (relu(λ + ρ c)² − λ²) / (2ρ) = μ·w_g·(relu(c + s)² − s²),   s = λ/ρ,

the plain penalty with the constraint shifted by s ≥ 0 (minus a constant, so that ψ = 0 at c = 0 and
λ = 0 gives the plain penalty back). Between inner minimisations the multiplier is updated by
λ ← relu(λ + ρ c(u*)) (§17.4, eq. 17.67), in shift units

    s ← relu(s + c(u*)),

so a moderate μ converges to c = 0 (on the constraint, with its margin) as s converges to λ*/ρ.

Shapes: ``worst`` (n_goals,) combined shortfalls (dimensionless), ``shift`` (n_goals,), ``weights``
(n_goals,) the goals' weights w_g; the loss is dimensionless.
"""

import jax
import jax.numpy as jnp
import numpy as np


def shifted_goal_loss(worst, weights, margin: float, shift):
    """Σ_g w_g·(relu(r_g + m + s_g)² − s_g²): ``_optimize.goal_loss`` with the constraints shifted by s."""
    c = worst + margin
    return jnp.sum(weights * (jax.nn.relu(c + shift) ** 2 - shift ** 2))


def update_shift(shift, worst, margin: float) -> np.ndarray:
    """The multiplier update in shift units, s ← relu(s + r + m); rows broadcast (…, n_goals)."""
    return np.maximum(np.asarray(shift, float) + np.asarray(worst, float) + margin, 0.0)


def multipliers(shift, weights, mu: float) -> np.ndarray:
    """λ_g = 2μ·w_g·s_g (…, n_goals): the multiplier estimates in the loss's units."""
    return 2.0 * mu * np.asarray(weights, float) * np.asarray(shift, float)
