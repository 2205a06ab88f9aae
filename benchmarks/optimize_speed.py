"""Speed of the optimiser on a 3-rod cell over a 21-wavelength band, printed as ratios from one run.

1. Time to spec: each of ``invdesign``'s optimisers (vmapped Adam step; L-BFGS with a host-side line
   search over the same compiled loss and gradient; exact JAX gradients) against SciPy's L-BFGS-B with
   finite-difference gradients on the same loss (the same jitted model, value only), from the same starts.
   All are timed after compilation. SciPy runs once per start and its best-so-far loss is recorded against
   time; the ratio is SciPy's time to reach the loss our run reaches over our time to reach it (if SciPy
   never gets there, its whole budget is used and the ratio is a lower bound, marked ">").
2. Per-step overhead: one optimiser step (loss with goals, penalties and robust combination, gradient,
   update) against one forward + gradient of the bare model for the same batch of starts; for L-BFGS also
   per loss-and-gradient call (a step makes one or more).
3. Cost of discretisation-robust optimisation: one step whose loss is the worst case over the robust set
   (N = 1, 3, 5 dipoles per rod with the Kelly correction and N = 1, 3 with Moroz, the default whenever the
   deck allows gaps below 40 nm) against one nominal step (N = 1, Kelly), compile and run time (Adam).

Usage:  python benchmarks/optimize_speed.py [--steps 60] [--starts 2] [--scipy-evals 4000]
                                            [--optimizers adam lbfgs] [--skip-robust]
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


def ours(name, args, spec, fab, cell):
    """Compile and run one optimiser; dict with its setup, times, best-loss curve and call count."""
    cfg = {"optimizer": {"name": name, "steps": args.steps, "starts": args.starts, "learning_rate": 0.08},
           "robust": {"resolutions": [1], "corrections": ["kelly"]}}
    setup = opt.build_setup(spec, fab, cell, opt.parse_run_options(cfg, fab, {"correction": "kelly"}))
    init_fn, step_fn = opt.compiled_step(setup)
    u0 = jnp.asarray(opt.initial_starts(setup))
    t0 = time.perf_counter()
    jax.block_until_ready(step_fn(u0, init_fn(u0)))
    compile_s = time.perf_counter() - t0
    u, state = u0, init_fn(u0)
    times, losses = [], []
    t0 = time.perf_counter()
    for _ in range(args.steps):
        u, state, loss, _ = step_fn(u, state)
        losses.append(np.asarray(loss))
        times.append(time.perf_counter() - t0)
    calls = int(np.asarray(state[4])[0]) if name == "lbfgs" else args.steps
    st = init_fn(u0)
    t_step = time_calls(lambda: step_fn(u0, st))
    return {"name": name, "setup": setup, "u0": u0, "compile": compile_s, "times": np.array(times),
            "best": np.minimum.accumulate(np.stack(losses), axis=0), "calls": calls, "t_step": t_step,
            "step_fn": step_fn, "init_fn": init_fn}


def scipy_trace(value, x0, budget, target):
    """(times s, best-so-far losses) of SciPy L-BFGS-B with FD gradients, stopped at ``target`` or budget."""
    t0, ts, best = time.perf_counter(), [], []

    def f(x):
        v = float(value(jnp.asarray(x)))
        ts.append(time.perf_counter() - t0)
        best.append(min(v, best[-1]) if best else v)
        if best[-1] <= target or len(ts) >= budget:
            raise StopIteration
        return v

    try:
        scipy.optimize.minimize(f, np.asarray(x0), method="L-BFGS-B",
                                options={"maxfun": budget, "maxiter": 10_000})
    except StopIteration:
        pass
    return np.array(ts), np.array(best)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--steps", type=int, default=60)
    ap.add_argument("--starts", type=int, default=2)
    ap.add_argument("--scipy-evals", type=int, default=4000, help="SciPy loss evaluations per start")
    ap.add_argument("--optimizers", nargs="+", default=list(opt.OPTIMIZERS), choices=opt.OPTIMIZERS)
    ap.add_argument("--skip-robust", action="store_true", help="skip part 3 (robust vs nominal step)")
    args = ap.parse_args()
    spec, fab, cell = parse_spec(SPEC), parse_fab(FAB), parse_cell(CELL)
    runs = [ours(name, args, spec, fab, cell) for name in args.optimizers]
    setup, u0 = runs[0]["setup"], runs[0]["u0"]
    print(f"cell: 3 rods, {len(setup.family.names)} free parameters, {len(setup.wavelengths)} wavelengths, "
          f"{args.starts} starts; {args.steps} steps each")
    for r in runs:
        print(f"  {r['name']}: step compile {r['compile']:.1f} s; "
              f"{args.steps} steps in {r['times'][-1]:.2f} s, "
              f"{r['calls']} loss-and-gradient calls; final best loss per start "
              + " ".join(f"{x:.4g}" for x in r["best"][-1]))

    # ---- SciPy L-BFGS-B with finite differences on the same loss, one start at a time
    loss_fn = opt.make_loss(setup)
    value = jax.jit(lambda x: loss_fn(x)[0])
    jax.block_until_ready(value(u0[0]))
    ratios = {r["name"]: [] for r in runs}
    for k in range(args.starts):
        target = min(float(r["best"][-1, k]) for r in runs)
        ts, best = scipy_trace(value, u0[k], args.scipy_evals, target)
        print(f"start {k}: SciPy L-BFGS-B (FD) {len(ts)} evaluations in {ts[-1]:.1f} s, best {best[-1]:.4g}")
        for r in runs:
            goal = float(r["best"][-1, k])
            t_ours = r["times"][int(np.argmax(r["best"][:, k] <= goal))]
            hit = np.flatnonzero(best <= goal)
            t_them = ts[hit[0]] if len(hit) else ts[-1]
            ratio = t_them / t_ours
            ratios[r["name"]].append((ratio, bool(len(hit))))
            print(f"    {r['name']} reaches loss {goal:.4g} in {t_ours:.2f} s; SciPy "
                  + (f"in {t_them:.2f} s" if len(hit) else f"never (best {best[-1]:.4g} in {t_them:.1f} s)")
                  + f"  -> ratio {'' if len(hit) else '>'}{ratio:.1f}x")

    # ---- per-step overhead against a bare forward + gradient for the same batch
    problem = setup.problems[0]

    def bare(x):
        return jnp.sum(jnp.abs(response_from_params(setup.family.params(x), problem).t) ** 2)

    bare_vg = jax.jit(jax.vmap(jax.value_and_grad(bare)))
    jax.block_until_ready(bare_vg(u0))
    t_bare = time_calls(lambda: bare_vg(u0))
    for r in runs:
        shown = " ".join(f"{'' if hit else '>'}{x:.1f}x" for x, hit in ratios[r["name"]])
        print(f"time to spec, SciPy FD L-BFGS-B / {r['name']}: {shown} (aim >= 20x)")
    for r in runs:
        line = (f"{r['name']}: per step {1e3 * r['t_step']:.1f} ms vs bare forward+gradient "
                f"{1e3 * t_bare:.1f} ms: "
                f"overhead {100 * (r['t_step'] / t_bare - 1):+.1f} % (aim <= 20 %)")
        if r["name"] == "lbfgs":
            per_call = r["times"][-1] / r["calls"]
            line += (f"; per loss-and-gradient call over the run {1e3 * per_call:.1f} ms "
                     f"({100 * (per_call / t_bare - 1):+.1f} %), "
                     f"{r['calls'] / args.steps:.2f} calls per step")
        print(line)
    if args.skip_robust or "adam" not in args.optimizers:
        return
    # ---- robust (several model resolutions and corrections) against nominal, per step and compile
    adam = next(r for r in runs if r["name"] == "adam")
    cfg = {"optimizer": {"name": "adam", "steps": args.steps, "starts": args.starts, "learning_rate": 0.08},
           "robust": {"resolutions": [1, 3, 5], "corrections": ["kelly", "moroz"]}}
    rsetup = opt.build_setup(spec, fab, cell, opt.parse_run_options(cfg, fab, {"correction": "kelly"}))
    rinit, rstep = opt.compiled_step(rsetup)
    t0 = time.perf_counter()
    rst = rinit(u0)
    jax.block_until_ready(rstep(u0, rst))
    t_rcompile = time.perf_counter() - t0
    t_rstep = time_calls(lambda: rstep(u0, rst))
    models = ", ".join(f"{c}/N={n}" for n, c in rsetup.opts.models)
    print(f"robust step over {len(rsetup.opts.models)} models ({models}): {1e3 * t_rstep:.1f} ms vs nominal "
          f"{1e3 * adam['t_step']:.1f} ms -> {t_rstep / adam['t_step']:.1f}x per step; "
          f"compile {t_rcompile:.1f} s")


if __name__ == "__main__":
    main()
