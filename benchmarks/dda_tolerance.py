"""How the figures ``verify`` reports move with the Krylov tolerance of the verification solver, against
the discretisation error between its two coarsest grid spacings; and what the warm start saves.

For the benchmark cell of ``dda_scaling.py`` and the shipped example design (``examples/``), judged
against a spec from ``conf/spec`` at its wavelengths: the solver runs at the coarsest verify spacing with
tolerances 1e-3 … 1e-6 and a tight reference, and once at the next spacing. Printed per figure — every
goal of the spec (as ``verify`` computes it, ``invdesign._optimize.exact_goals``) and |t_xx|², |t_xy|²
at the operating wavelength — the reference value, the change at each tolerance, and the change between
the two spacings (both at the default tolerance). Also the products per solve with the warm start on
and off at the default tolerance, side by side.

    python benchmarks/dda_tolerance.py [--design examples/kestrel_cross_pair.json] [--spec heron_1310]
                                       [--spacings 10 7.5] [--tols 1e-3 1e-4 1e-5 1e-6] [--ref-tol 1e-8]
                                       [--skip-example | --skip-benchmark-cell]
"""

import argparse
import pathlib
import sys
import time

import numpy as np
from omegaconf import OmegaConf

ROOT = pathlib.Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "benchmarks"))


def figures(resp, setup) -> dict:
    from invdesign._optimize import exact_goals

    t = np.asarray(resp.t)[setup.i0]
    out = {label: float(v[0]) for label, v in exact_goals(resp, setup).items()}
    out["|t_xx|^2"] = float(abs(t[0, 0]) ** 2)
    out["|t_xy|^2"] = float(abs(t[0, 1]) ** 2)
    return out


def run(design, setup, spacing, tol, warm):
    from invdesign._dda import DdaOptions, dda_response

    t0 = time.perf_counter()
    resp, info = dda_response(design, setup.wavelengths, spacing,
                              options=DdaOptions(tol=tol, warm_start=warm, max_points=400_000))
    return figures(resp, setup), info, time.perf_counter() - t0


def study(name, design, setup, spacings, tols, ref_tol, default_tol):
    print(f"\n== {name}: {len(setup.wavelengths)} wavelengths {setup.wavelengths[0]:g}–"
          f"{setup.wavelengths[-1]:g} nm", flush=True)
    coarse, fine = spacings
    results, products, seconds = {}, {}, {}
    for tol in [ref_tol, *tols]:
        f, info, s = run(design, setup, coarse, tol, 2)
        results[tol], products[tol], seconds[tol] = f, info.iterations, s
        print(f"   d={info.spacing_nm:.3g} nm ({info.n_dipoles} dipoles) tol {tol:g}: mean products per "
              f"solve {info.iterations.mean():.0f}, {s:.1f} s", flush=True)
    f_fine, info_f, _ = run(design, setup, fine, default_tol, 2)
    print(f"   d={info_f.spacing_nm:.3g} nm ({info_f.n_dipoles} dipoles) tol {default_tol:g} done",
          flush=True)
    _, info_cold, s_cold = run(design, setup, coarse, default_tol, 0)
    ref = results[ref_tol]
    head = f"{'figure':>28} {'ref':>10} " + " ".join(f"{'Δ@' + format(t, 'g'):>10}" for t in tols)
    print(head + f" {'Δ grid':>10} {'max Δtol/Δgrid':>14}")
    for key in ref:
        dtol = [abs(results[t][key] - ref[key]) for t in tols]
        dgrid = abs(f_fine[key] - results[default_tol][key])
        ratio = [x / dgrid if dgrid > 0 else float("inf") for x in dtol]
        print(f"{key:>28} {ref[key]:10.4g} " + " ".join(f"{x:10.2e}" for x in dtol)
              + f" {dgrid:10.2e} " + " ".join(f"{r:.1e}" for r in ratio))
    warm = products[default_tol]
    cold = info_cold.iterations
    print(f"   products per solve at tol {default_tol:g}, d={info_cold.spacing_nm:.3g} nm: cold "
          f"{cold.sum():.0f} total ({cold.mean():.0f} mean), warm start (2 earlier wavelengths) "
          f"{warm.sum():.0f} total ({warm.mean():.0f} mean); warm/cold = {warm.sum() / cold.sum():.2f}; "
          f"wall {seconds[default_tol]:.1f} s vs {s_cold:.1f} s")
    print("   per wavelength cold :", cold.sum(axis=1).tolist())
    print("   per wavelength warm :", warm.sum(axis=1).tolist())
    for tol in tols:
        print(f"   products tol {tol:g} / tol {default_tol:g}: {products[tol].sum() / warm.sum():.2f}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--design", default=str(ROOT / "examples" / "kestrel_cross_pair.json"))
    ap.add_argument("--spec", default="heron_1310")
    ap.add_argument("--spacings", type=float, nargs=2, default=[10.0, 7.5])
    ap.add_argument("--tols", type=float, nargs="+", default=[1e-3, 1e-4, 1e-5, 1e-6])
    ap.add_argument("--ref-tol", type=float, default=1e-8)
    ap.add_argument("--skip-benchmark-cell", action="store_true")
    ap.add_argument("--skip-example", action="store_true",
                    help="study only the benchmark cell of dda_scaling.py (two gold rods)")
    args = ap.parse_args()
    if args.skip_example and args.skip_benchmark_cell:
        ap.error("--skip-example and --skip-benchmark-cell together leave nothing to study; drop one")

    from dda_scaling import CELL

    from invdesign import Design
    from invdesign._dda import DdaOptions
    from invdesign._optimize import evaluation_setup
    from invdesign._spec import parse_spec

    spec = parse_spec(OmegaConf.to_container(OmegaConf.load(ROOT / "conf" / "spec" / f"{args.spec}.yaml")))
    default_tol = DdaOptions().tol
    if default_tol not in args.tols:
        ap.error(f"--tols must include the default tolerance {default_tol:g}")
    designs = [] if args.skip_example else [
        ("example " + pathlib.Path(args.design).name, Design.from_json(pathlib.Path(args.design)))]
    if not args.skip_benchmark_cell:
        designs.append(("benchmark cell (dda_scaling.py)", Design.from_json(CELL)))
    for name, design in designs:
        setup = evaluation_setup(spec, None, design, ((1, "kelly"),), lambda wl: (), "tol-study")
        study(name, design, setup, args.spacings, args.tols, args.ref_tol, default_tol)


if __name__ == "__main__":
    main()
