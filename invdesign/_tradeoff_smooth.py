"""A smooth, conservative bandwidth shortfall for the trade-off's constraint term.

The bandwidth goal's shortfall (``_optimize.goal_shortfalls``) is r = (D − min_k c_k)/D over the held-phase
depth c_k (dimensionless) at the window's wavelengths and the goal's depth D: a minimum, kinked wherever
two samples tie, which makes an L-BFGS line search backtrack. The soft minimum

    smin_τ(c) = −τ·log Σ_k exp(−c_k/τ)        (τ > 0, same unit as c)

is smooth and satisfies min c − τ·log n ≤ smin_τ(c) ≤ min c (n samples; the log-sum-exp bounds, e.g.
Boyd & Vandenberghe, *Convex Optimization*, Cambridge 2004, §3.1.5 and example 3.14), with smin_τ → min c
as τ → 0. So the smooth shortfall r_τ = (D − smin_τ(c))/D ≥ r: meeting the smooth constraint with its
margin also meets the exact one. It is used only inside the sweep's loss; every reported check stays
exact (``evaluate_candidate``).

``softness`` below is τ/D (dimensionless); 0 gives the exact minimum back.
"""

import jax.numpy as jnp
from jax.scipy.special import logsumexp

from . import _optimize as opt
from ._metrics import channel_amplitudes, fixed_phase_depth


def soft_min(x, tau: float):
    """−τ·log Σ exp(−x/τ) over the last axis of ``x`` (…, n) → (…,); τ = 0 gives the exact minimum."""
    if tau <= 0:
        return jnp.min(x, axis=-1)
    return -tau * logsumexp(-jnp.asarray(x) / tau, axis=-1)


def smooth_goal_shortfalls(resp, setup: opt.Setup, softness: float):
    """``_optimize.goal_shortfalls`` (n_goals,) with every bandwidth goal's minimum over the window
    replaced by ``soft_min`` with τ = softness·D (so each such entry is ≥ the exact one)."""
    exact = opt.goal_shortfalls(resp, setup)
    spec = setup.spec
    if softness <= 0 or not any(g.metric == "bandwidth_nm" for g in spec.goals):
        return exact
    J = resp.t if spec.matrix == "t" else resp.r
    a, b = channel_amplitudes(J, spec.signal, spec.control, spec.analyzer)
    a0, b0 = a[setup.i0], b[setup.i0]
    held = jnp.angle(a0 * jnp.conj(b0)) + jnp.pi  # phases held at their λ0 optimum, as the exact check
    out = []
    for j, (g, win, depth) in enumerate(zip(spec.goals, setup.windows, setup.depths, strict=True)):
        if g.metric == "bandwidth_nm":
            curve = fixed_phase_depth(a[win], b[win], spec.rho, held)
            out.append((depth - soft_min(curve, softness * depth)) / depth)
        else:
            out.append(exact[j])
    return jnp.stack(out)

