"""Gradient front (``invdesign tradeoff``) against pymoo's NSGA-II on the same model, by hypervolume.

Both methods see the same problem: the shipped heron_1310 spec, ebl_fine deck and a cell family, objectives
insertion_loss_db and control_power_ratio, the spec's other goals and the deck's rules as constraints, one
model (one dipole per rod, Kelly correction). NSGA-II searches the family's bounded parameters directly
(the same box the gradient method reaches through its sigmoid transform); its constraints are the goals'
normalised shortfalls plus the same goal margin the gradient method aims past, and the smooth rule penalty
with the same gap margin (G ≤ 0 is feasible). It runs twice: with as many model
evaluations as the gradient sweep used, and with ten times as many. A gradient evaluation is one value and
gradient, about 2.2 forward costs (README, benchmarks/forward_speed.py), so "equal" favours NSGA-II in
compute.

Every final point of every method is snapped to the deck's grid, checked exactly and re-simulated
(``evaluate_candidate``); the hypervolumes are of the feasible non-dominated snapped points, against one
reference point for all (the worst value of each objective over the union of the fronts plus 10 % of its
range; common practice, no source). NSGA-II is stochastic: one run's hypervolume moves by about 1 % with
its seed, more than the differences being measured, so it runs ``--nsga-runs`` times per budget (seeds
``--seed``, ``--seed`` + 1, …; the gradient front is deterministic given ``--seed``). Prints every
hypervolume, and the ratios ours / theirs to their mean, to their best run and per run.

    pip install -e ".[benchmark]"
    python benchmarks/tradeoff_vs_nsga2.py [--cell lone_tilt] [--band-count 13] [--seed 0] [--nsga-runs 5]
"""

import argparse
import pathlib
import sys
import tempfile
import time

import numpy as np
import yaml

ROOT = pathlib.Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import invdesign._jaxsetup  # noqa: E402,F401  (CPU + x64 first)


def load(name):
    from omegaconf import OmegaConf

    return OmegaConf.to_container(OmegaConf.load(ROOT / "conf" / name), resolve=True)


def build(args):
    from invdesign import _optimize as opt
    from invdesign._spec import parse_cell, parse_fab, parse_spec
    from invdesign._tradeoff import build_tradeoff

    spec_doc = load("spec/heron_1310.yaml")
    spec_doc["band"]["count"] = args.band_count
    spec, fab, cell = parse_spec(spec_doc), parse_fab(load("fab/ebl_fine.yaml")), parse_cell(
        load(f"cell/{args.cell}.yaml"))
    cfg = {"optimizer": {"steps": args.anchor_steps, "starts": args.starts, "seed": args.seed},
           "robust": {"resolutions": [1], "corrections": ["kelly"]},
           "report": {"resolutions": [1], "corrections": ["kelly"]}}
    opts = opt.parse_run_options(cfg, fab, {"correction": "kelly"})
    front = {"steps": args.point_steps, "divisions": args.divisions}
    for item in args.front:
        key, _, text = item.partition("=")
        front[key] = yaml.safe_load(text)
    return build_tradeoff(spec, fab, cell, opts, ["insertion_loss_db", "control_power_ratio"], front)


def exact_front(ts, us):
    """Snap and check every row of us; (oriented objective values of the feasible points, count)."""
    from invdesign import _optimize as opt
    from invdesign._pareto import non_dominated
    from invdesign._tradeoff import exact_objectives, oriented

    F = []
    for u in us:
        c = opt.evaluate_candidate(ts.base, u, with_report=False)
        if c.get("design") is None or not c["feasible"]:
            continue
        per = np.stack([exact_objectives(r, ts) for r in c["responses"].values()])
        signs = np.array([o.sign for o in ts.objectives])
        F.append(np.where(signs > 0, per.max(axis=0), per.min(axis=0)))
    if not F:
        return np.zeros((0, len(ts.objectives)))
    F = oriented(ts, np.array(F))
    F = F[np.all(np.isfinite(F), axis=1)]
    return F[non_dominated(F)]


def nsga2(ts, evaluations, seed, pop_size):
    import jax
    import jax.numpy as jnp
    from pymoo.algorithms.moo.nsga2 import NSGA2
    from pymoo.core.problem import Problem
    from pymoo.optimize import minimize

    from invdesign import _optimize as opt
    from invdesign._penalties import rule_penalty
    from invdesign._simulate import response_from_params
    from invdesign._tradeoff import smooth_objectives

    setup = ts.base
    fam = setup.family

    def one(values):
        u = jnp.log(values - fam.lo) - jnp.log(fam.hi - values)  # inverse of lo + (hi − lo)·sigmoid(u)
        params = fam.params(u)
        resp = response_from_params(params, setup.problems[0])
        f = smooth_objectives(resp, ts)
        g = opt.goal_shortfalls(resp, setup) + setup.opts.goal_margin  # the same margin as ours
        pen, _ = rule_penalty(params, setup.fab, setup.opts.gap_margin_nm)
        return f, jnp.concatenate([g, pen[None]])

    batch = jax.jit(jax.vmap(one))
    eps = 1e-6 * (fam.hi - fam.lo)

    class Front(Problem):
        def __init__(self):
            super().__init__(n_var=len(fam.names), n_obj=len(ts.objectives),
                             n_ieq_constr=len(setup.spec.goals) + 1, xl=fam.lo + eps, xu=fam.hi - eps)

        def _evaluate(self, x, out, *args, **kwargs):
            f, g = batch(jnp.asarray(x))
            f, g = np.asarray(f), np.asarray(g)
            out["F"] = np.where(np.isfinite(f), f, 1e6)
            out["G"] = np.where(np.isfinite(g), g, 1e6)

    res = minimize(Front(), NSGA2(pop_size=pop_size), ("n_evals", int(evaluations)), seed=seed,
                   verbose=False)
    X = res.pop.get("X")
    u = np.log(X - fam.lo) - np.log(fam.hi - X)
    return u, int(res.algorithm.evaluator.n_eval)


def main():
    from invdesign._pareto import hypervolume
    from invdesign._tradeoff import run_front

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cell", default="pivot_pair")
    ap.add_argument("--band-count", type=int, default=13)
    ap.add_argument("--anchor-steps", type=int, default=100)
    ap.add_argument("--point-steps", type=int, default=20)
    ap.add_argument("--divisions", type=int, default=16)
    ap.add_argument("--starts", type=int, default=2)
    ap.add_argument("--pop-size", type=int, default=40)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--nsga-runs", type=int, default=5,
                    help="independent NSGA-II runs per budget (seeds SEED, SEED+1, ...): one run's "
                         "hypervolume moves by about 1 %% with its seed, so the ratios are printed to the "
                         "runs' mean and best")
    ap.add_argument("--front", action="append", default=[], metavar="KEY=VALUE",
                    help="a front option other than its default (conf/tradeoff.yaml), e.g. polish_steps=0; "
                         "repeatable")
    args = ap.parse_args()
    if args.nsga_runs < 1:
        ap.error("--nsga-runs must be 1 or more")
    ts = build(args)
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        state = run_front(ts, tmp, quiet=False)
    ours_s = time.perf_counter() - t0
    n_ours = int(state["evaluations"])
    fronts = {"gradient front": (exact_front(ts, state["pool_u"]), n_ours, ours_s)}
    runs = {1: [], 10: []}
    for mult in (1, 10):
        for j in range(args.nsga_runs):
            t0 = time.perf_counter()
            u, n = nsga2(ts, mult * n_ours, args.seed + j, args.pop_size)
            name = f"NSGA-II, {mult}x evaluations, seed {args.seed + j}"
            fronts[name] = (exact_front(ts, u), n, time.perf_counter() - t0)
            runs[mult].append(name)
    union = np.concatenate([f for f, _, _ in fronts.values() if len(f)])
    worst, best = union.max(axis=0), union.min(axis=0)
    ref = worst + 0.1 * np.where(worst > best, worst - best, np.maximum(np.abs(worst), 1.0))
    signs = np.array([o.sign for o in ts.objectives])
    print(f"problem: heron_1310 / ebl_fine / {args.cell}, {args.band_count} wavelengths, model kelly/N=1; "
          f"objectives {', '.join(ts.names)}")
    print(f"reference point (objective units): {(ref * signs).round(6).tolist()}")
    hv = {}
    for name, (F, n, sec) in fronts.items():
        hv[name] = hypervolume(F, ref) if len(F) else 0.0
        lows = F.min(axis=0) * signs if len(F) else []
        best = ", ".join(f"{o.name} {v:.4g}" for o, v in zip(ts.objectives, lows, strict=False)) or "-"
        print(f"  {name:<36} evaluations {n:>6}  feasible front points {len(F):>3}  "
              f"hypervolume {hv[name]:.6g}  ({sec:.1f} s); best {best}")
    ours = hv["gradient front"]
    for mult in (1, 10):
        theirs = np.array([hv[name] for name in runs[mult]])
        ratios = ours / np.where(theirs > 0, theirs, np.nan)
        spread = f" (sd {theirs.std(ddof=1):.3g}, {100 * theirs.std(ddof=1) / theirs.mean():.2f} %)" \
            if len(theirs) > 1 else ""
        print(f"NSGA-II, {mult}x evaluations over {len(theirs)} run(s): hypervolume mean {theirs.mean():.6g}"
              f"{spread}, best {theirs.max():.6g}")
        print(f"ratio gradient front / NSGA-II, {mult}x evaluations: {ours / theirs.mean():.4g} to the mean, "
              f"{ours / theirs.max():.4g} to the best run, per run {np.round(ratios, 4).tolist()}")

if __name__ == "__main__":
    main()
