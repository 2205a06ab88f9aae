"""Speed of the optimiser on a 3-rod cell over a 21-wavelength band, printed as ratios from one run.

1. Time to spec: ``invdesign``'s vmapped Adam step (exact JAX gradients) against SciPy's L-BFGS-B with
   finite-difference gradients on the same loss (the same jitted model, value only), from the same starts.
   Both are timed after compilation; the ratio is SciPy's time to reach the loss our run reaches over
   our time to reach it (if SciPy never gets there, its whole budget is used and the ratio is a lower
   bound, marked ">").
2. Per-step overhead: one optimiser step (loss with goals, penalties and robust combination, gradient,
   optax update) against one forward + gradient of the bare model for the same batch of starts.
3. Cost of discretisation-robust optimisation: one step whose loss is the worst case over the robust set
   (N = 1, 3, 5 dipoles per rod with the Kelly correction and N = 1, 3 with Moroz, the default whenever the
   deck allows gaps below 40 nm) against one nominal step (N = 1, Kelly), compile and run time.

Usage:  python benchmarks/optimize_speed.py [--steps 60] [--starts 2] [--scipy-evals 4000] [--optimizer lbfgs]
"""

import argparse
import time

import jax
import jax.numpy as jnp
import numpy as np
import scipy.optimize
from _timing import time_calls

from invdesign import _optimize as opt
from invdesign._simulate import response_from_params
from invdesign._spec import parse_cell, parse_fab, parse_spec

SPEC = {"name": "bench", "operating_nm": 1310.0, "band": {"start_nm": 1210.0, "stop_nm": 1410.0, "count": 21},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45}, "material": "gold_rakic1998",
        "goals": [{"metric": "modulation_depth", "sense": ">=", "target": 1.2},
                  {"metric": "insertion_loss_db", "sense": "<=", "target": 6.0},
                  {"metric": "bandwidth_nm", "sense": ">=", "target": 60.0}]}
FAB = {"name": "bench", "label": "typical values (common practice, no source)", "thickness_nm": 40.0,
       "width_nm": {"min": 50.0, "max": 150.0}, "length_nm": {"min": 80.0, "max": 400.0}, "min_gap_nm": 50.0,
       "max_aspect": 6.0, "grid_nm": 5.0, "period_nm": {"min": 300.0, "max": 820.0}}
CELL = {"family": "free_rods", "period_nm": [560.0, 560.0],
        "rods": [{"center": [-150.0, 0.0], "length": 220.0, "width": 60.0, "angle_deg": 90.0},
                 {"center": [20.0, -120.0], "length": 170.0, "width": 60.0, "angle_deg": 45.0},
                 {"center": [60.0, 150.0], "length": 160.0, "width": 60.0, "angle_deg": 0.0}]}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--steps", type=int, default=60)
    ap.add_argument("--starts", type=int, default=2)
    ap.add_argument("--scipy-evals", type=int, default=4000, help="SciPy loss evaluations per start")
    ap.add_argument("--optimizer", default="adam", choices=opt.OPTIMIZERS, help="our optimiser")
    args = ap.parse_args()
    spec, fab, cell = parse_spec(SPEC), parse_fab(FAB), parse_cell(CELL)
    cfg = {"optimizer": {"name": args.optimizer, "steps": args.steps, "starts": args.starts,
                         "learning_rate": 0.08},
           "robust": {"resolutions": [1], "corrections": ["kelly"]}}
    setup = opt.build_setup(spec, fab, cell, opt.parse_run_options(cfg, fab, {"correction": "kelly"}))
    init_fn, step_fn = opt.compiled_step(setup)
    u0 = jnp.asarray(opt.initial_starts(setup))
    state = init_fn(u0)
    t0 = time.perf_counter()
    jax.block_until_ready(step_fn(u0, state))
    print(f"optimizer: {args.optimizer}")
    print(f"cell: 3 rods, {len(setup.family.names)} free parameters, {len(setup.wavelengths)} wavelengths, "
          f"{args.starts} starts; step compile {time.perf_counter() - t0:.1f} s")

    # ---- ours: loss per step and wall time
    u, state = u0, init_fn(u0)
    times, losses = [], []
    t0 = time.perf_counter()
    for _ in range(args.steps):
        u, state, loss, _ = step_fn(u, state)
        losses.append(np.asarray(loss))
        times.append(time.perf_counter() - t0)
    best_curve = np.minimum.accumulate(np.stack(losses), axis=0)  # (steps, starts)

    # ---- SciPy L-BFGS-B with finite differences on the same loss, one start at a time
    loss_fn = opt.make_loss(setup)
    value = jax.jit(lambda x: loss_fn(x)[0])
    jax.block_until_ready(value(u0[0]))
    ratios = []
    for k in range(args.starts):
        target = float(best_curve[-1, k])
        ours = times[int(np.argmax(best_curve[:, k] <= target))]
        seen = {"t0": time.perf_counter(), "hit": None, "best": np.inf, "n": 0}

        def f(x, seen=seen, target=target):
            v = float(value(jnp.asarray(x)))
            seen["n"] += 1
            seen["best"] = min(seen["best"], v)
            if seen["hit"] is None and v <= target:
                seen["hit"] = time.perf_counter() - seen["t0"]
            if seen["n"] >= args.scipy_evals:
                raise StopIteration
            return v

        try:
            scipy.optimize.minimize(f, np.asarray(u0[k]), method="L-BFGS-B",
                                    options={"maxfun": args.scipy_evals, "maxiter": 10_000})
        except StopIteration:
            pass
        spent = time.perf_counter() - seen["t0"]
        hit = seen["hit"]
        ratio = (hit if hit is not None else spent) / ours
        ratios.append(ratio)
        print(f"start {k}: ours reaches loss {target:.4g} in {ours:.2f} s; SciPy L-BFGS-B (FD) "
              + (f"in {hit:.2f} s" if hit is not None else
                 f"never within {seen['n']} evaluations / {spent:.1f} s (best {seen['best']:.4g})")
              + f"  -> ratio {'>' if hit is None else ''}{ratio:.1f}x")

    # ---- per-step overhead against a bare forward + gradient for the same batch
    problem = setup.problems[0]

    def bare(x):
        return jnp.sum(jnp.abs(response_from_params(setup.family.params(x), problem).t) ** 2)

    bare_vg = jax.jit(jax.vmap(jax.value_and_grad(bare)))
    jax.block_until_ready(bare_vg(u0))

    st = init_fn(u0)
    t_step = time_calls(lambda: step_fn(u0, st))
    t_bare = time_calls(lambda: bare_vg(u0))
    # ---- robust (several model resolutions and corrections) against nominal, per step and compile
    rcfg = dict(cfg, robust={"resolutions": [1, 3, 5], "corrections": ["kelly", "moroz"]})
    rsetup = opt.build_setup(spec, fab, cell, opt.parse_run_options(rcfg, fab, {"correction": "kelly"}))
    rinit, rstep = opt.compiled_step(rsetup)
    t0 = time.perf_counter()
    rst = rinit(u0)
    jax.block_until_ready(rstep(u0, rst))
    t_rcompile = time.perf_counter() - t0
    t_rstep = time_calls(lambda: rstep(u0, rst))

    print(f"time to spec, SciPy FD L-BFGS-B / ours: {' '.join(f'{r:.1f}x' for r in ratios)} (aim >= 20x)")
    print(f"per step {1e3 * t_step:.1f} ms vs bare forward+gradient {1e3 * t_bare:.1f} ms: "
          f"overhead {100 * (t_step / t_bare - 1):+.1f} % (aim <= 20 %)")
    models = ", ".join(f"{c}/N={n}" for n, c in rsetup.opts.models)
    print(f"robust step over {len(rsetup.opts.models)} models ({models}): {1e3 * t_rstep:.1f} ms vs nominal "
          f"{1e3 * t_step:.1f} ms -> {t_rstep / t_step:.1f}x per step; compile {t_rcompile:.1f} s")


if __name__ == "__main__":
    main()
