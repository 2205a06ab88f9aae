"""Yield of a fab-robust design against a nominal one, and the cost of a fab-robust step.

The shipped example's spec (``conf/spec/heron_1310.yaml``, the invented Heron Bay Optics Lab's 1310 nm
modulator; demo data) and fab deck (``conf/fab/ebl_fine.yaml``), in a smaller variant so that it runs in a
few minutes on two cores: the shipped cell family (``conf/cell/pivot_pair.yaml``) under one model (one
dipole per rod, Kelly correction) instead of the example's five, and a report at N = 1, 3 only.

1. Optimise twice from the same starts (same optimiser seed): nominally, and with ``fab_robust`` (K copies
   at ``--sigma-scale`` × the deck's σ, drawn once with ``--train-seed``).
2. Snap both best designs and re-check them exactly (``finish``), then run the tolerance Monte Carlo on both
   at the same σ with the same draws (``--mc-seed``, independent of the training draws, so the robust run
   cannot have fitted the very samples it is judged on). Print each yield with its 95 % Clopper-Pearson
   interval, the difference and ratio, and the paired comparison (the same draws for both designs):
   discordant samples and an exact McNemar (binomial) p-value from ``scipy.stats.binomtest``.
3. Time one compiled step of each (starts batched as in a run) and print the cost ratio.

Usage:  python benchmarks/fab_robust_yield.py [--samples 8] [--statistic mean] [--sigma-scale 2]
                                              [--mc-samples 1000] [--steps 150] [--starts 4]

Safety: the modulator's beams are lasers and making it uses nanofabrication chemicals and tools; follow
your lab's laser-safety rules, local codes and your lab safety officer. This script gives no safety advice.
"""

import argparse
import pathlib
import tempfile
import time

import jax
import jax.numpy as jnp
import numpy as np
import yaml
from _timing import time_calls
from scipy import stats

from invdesign import _optimize as opt
from invdesign import _tolerance as tol
from invdesign._simulate import ModelOptions
from invdesign._spec import parse_cell, parse_fab, parse_spec
from invdesign._spectra_io import SAFETY_NOTE

CONF = pathlib.Path(__file__).resolve().parent.parent / "conf"


def _load(group: str, name: str) -> dict:
    return yaml.safe_load((CONF / group / f"{name}.yaml").read_text())


def build(args, fab_robust: dict | None):
    spec, fab = parse_spec(_load("spec", args.spec)), parse_fab(_load("fab", args.fab))
    cell = parse_cell(_load("cell", args.cell))
    cfg = {"optimizer": {"steps": args.steps, "starts": args.starts, "seed": args.seed},
           "robust": {"resolutions": [1], "corrections": ["kelly"]},
           "report": {"resolutions": [1, 3], "corrections": ["kelly"]}, "checkpoint": {"every": 50}}
    if fab_robust is not None:
        cfg["fab_robust"] = fab_robust
    return opt.build_setup(spec, fab, cell, opt.parse_run_options(cfg, fab, {"correction": "kelly"}))


def optimise(setup, label: str):
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        result = opt.run(setup, tmp, quiet=True)
    final = opt.finish(setup, result)
    best = final["best_feasible"] or final["best_infeasible"]
    print(f"{label}: {result['steps']} steps ({result['stopped']}), {time.perf_counter() - t0:.1f} s; "
          f"{'feasible' if final['best_feasible'] else 'NOT feasible'} (start {best['start']}, "
          f"loss {best['loss']:.4g})")
    for m in opt.misses(best):
        print(f"    misses: {m}")
    return best


def step_seconds(setup, repeats: int = 5) -> tuple[float, float]:
    """(compile s, median s of one step) for the setup's batched step."""
    init_fn, step_fn = opt.compiled_step(setup)
    u = jnp.asarray(opt.initial_starts(setup))
    state = init_fn(u)
    t0 = time.perf_counter()
    jax.block_until_ready(step_fn(u, state))
    compile_s = time.perf_counter() - t0
    return compile_s, time_calls(lambda: step_fn(u, state), repeats, stat=np.median)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--spec", default="heron_1310")
    ap.add_argument("--fab", default="ebl_fine")
    ap.add_argument("--cell", default="pivot_pair")
    ap.add_argument("--samples", type=int, default=8, help="fabricated copies K per robust step")
    ap.add_argument("--statistic", default="mean", choices=opt.FAB_STATISTICS)
    ap.add_argument("--quantile", type=float, default=0.9)
    ap.add_argument("--sigma-scale", type=float, default=2.0,
                    help="factor on the deck sigma, for training and Monte Carlo")
    ap.add_argument("--train-seed", type=int, default=0)
    ap.add_argument("--mc-seed", type=int, default=20261202)
    ap.add_argument("--mc-samples", type=int, default=1000)
    ap.add_argument("--steps", type=int, default=150)
    ap.add_argument("--starts", type=int, default=4)
    ap.add_argument("--seed", type=int, default=0, help="optimiser seed (the same starts for both runs)")
    args = ap.parse_args()

    nominal = build(args, None)
    robust = build(args, {"samples": args.samples, "statistic": args.statistic, "quantile": args.quantile,
                          "sigma_scale": args.sigma_scale, "seed": args.train_seed})
    np.testing.assert_array_equal(opt.initial_starts(nominal), opt.initial_starts(robust))
    what = "mean" if args.statistic == "mean" else f"{args.quantile:g}-quantile"
    print(f"spec '{nominal.spec.name}', fab '{nominal.fab.name}', cell '{nominal.cell.name}', "
          f"{len(nominal.wavelengths)} wavelengths, model kelly/N=1, {args.starts} starts, up to "
          f"{args.steps} steps; robust: {what} over K = {args.samples} copies at {args.sigma_scale:g} x "
          f"deck sigma")

    c_n, s_n = step_seconds(nominal)  # first: the compile is timed here, the runs reuse it
    c_r, s_r = step_seconds(robust)
    designs = {"nominal": optimise(nominal, "nominal"), "robust": optimise(robust, "robust ")}

    sigma = tol.sigmas(nominal.fab.tolerance, args.sigma_scale)
    mc = {}
    for label, best in designs.items():
        ev = tol.make_evaluator(best["design"], nominal.spec, nominal.fab, ModelOptions(1, "kelly"))
        z = tol.draw(args.mc_seed, args.mc_samples, len(best["design"].elements))
        t0 = time.perf_counter()
        mc[label] = tol.monte_carlo(ev, z, sigma)
        print(f"Monte Carlo of the {label} design: {args.mc_samples} samples in "
              f"{time.perf_counter() - t0:.1f} s")

    print(f"\nyield at {args.sigma_scale:g} x deck sigma ({nominal.fab.tolerance.label}), "
          f"{args.mc_samples} samples, Monte Carlo seed {args.mc_seed} (training draws: seed "
          f"{args.train_seed}):")
    for label, m in mc.items():
        lo, hi = tol.binomial_interval(m.k, m.n, 0.95, "clopper_pearson")
        fails = {lab: int(np.sum(~m.met[:, i])) for i, lab in enumerate(nominal.labels)
                 if np.any(~m.met[:, i])}
        print(f"  {label:<8} {100 * m.k / m.n:6.1f} %  (95 % Clopper-Pearson {100 * lo:.1f}-"
              f"{100 * hi:.1f} %)  failed goals: {fails or 'none'}; touching rods {int(np.sum(m.bridged))}")
    yn, yr = mc["nominal"].k / args.mc_samples, mc["robust"].k / args.mc_samples
    gain = int(np.sum(mc["robust"].passed & ~mc["nominal"].passed))
    loss = int(np.sum(~mc["robust"].passed & mc["nominal"].passed))
    p = stats.binomtest(gain, gain + loss).pvalue if gain + loss else 1.0
    ratio = f"{yr / yn:.3g}" if yn > 0 else "inf"
    print(f"  difference robust - nominal {100 * (yr - yn):+.1f} points, ratio {ratio}; same draws: robust "
          f"passes where nominal fails in {gain} samples, the reverse in {loss} (exact McNemar p = {p:.2g})")
    for label, best in designs.items():
        print(f"  {label} design goals (nominal cell): " + ", ".join(
            f"{k} {g['achieved']:.4g}" for k, g in best["goals"].items()))

    print(f"\ncost of one step ({args.starts} starts batched): nominal {1e3 * s_n:.1f} ms, robust "
          f"{1e3 * s_r:.1f} ms, ratio {s_r / s_n:.2f} (K = {args.samples}: K + 1 forwards at the "
          f"cheapest model instead of 1); compile {c_n:.1f} s vs {c_r:.1f} s")
    print(SAFETY_NOTE)


if __name__ == "__main__":
    main()
