"""Cost of the verification solver (volume DDA) against the number of dipoles per cell.

A realistic two-rod gold cell (400 nm square lattice, 35 nm film, glass below, air above; an invented
layout) is discretised at spacings giving about 1k to 20k+ dipoles. Each size runs in a fresh
subprocess so that its peak resident memory (``resource.getrusage``, ru_maxrss) is its own. Prints per
size: dipoles, grid and FFT sizes, time per wavelength (mean over the wavelengths after the first, which
includes compilation), time of the Green's-tensor tabulation alone, products with the DDA matrix per
solve, peak memory; then the fitted exponents of time and memory against the dipole count. With several
``--preconditioners`` (``invdesign._dda_precond``; the first is the reference) every size is run with
each, side by side in one run, and the ratios of time and products to the reference are printed.
``--warm-start 0 2`` likewise runs every size cold (0) and warm-started from the last 2 wavelengths'
solutions (``DdaOptions.warm_start``), side by side; the first value is the reference.

    python benchmarks/dda_scaling.py [--spacings 8 6 4.5 3.5 2.9] [--wavelengths 900 1000 1100]
                                     [--preconditioners jacobi two-level] [--segment-nm 20]
                                     [--warm-start 0 2]
"""

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np

from invdesign._dda import DdaOptions

CELL = {
    "name": "benchmark-two-rods",
    "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "au", "center": [-80.0, -60.0], "length": 200.0, "width": 50.0,
         "thickness": 35.0, "angle_deg": 0.0},
        {"shape": "rod", "material": "au", "center": [90.0, 60.0], "length": 160.0, "width": 50.0,
         "thickness": 35.0, "angle_deg": 60.0},
    ],
}


def one_size(spacing: float, wavelengths, preconditioner: str, segment_nm: float, warm: int) -> dict:
    import jax

    from invdesign import Design
    from invdesign._dda import DdaOptions, dda_response, dda_setup
    from invdesign._dda_operator import lattice_kernel
    from invdesign._lattice import Lattice
    from invdesign._units import NM, k0_per_m

    design = Design.from_json(CELL)
    opts = DdaOptions(tol=1e-6, preconditioner=preconditioner, segment_nm=segment_nm, warm_start=warm)
    _, info = dda_response(design, wavelengths, spacing, options=opts, strict=False)
    setup = dda_setup(design, wavelengths, spacing)
    g = setup.grid
    k = k0_per_m(wavelengths[0]) * setup.problem.medium_index
    lat = Lattice.from_nm(design.params.a1, design.params.a2)
    kern = jax.jit(lambda kk: lattice_kernel(g.shape, g.spacing_nm * NM, kk, jax.numpy.zeros(2), lat,
                                             setup.problem.plan, setup.exclude))
    jax.block_until_ready(kern(k))
    t0 = time.perf_counter()
    jax.block_until_ready(kern(k))
    t_kernel = time.perf_counter() - t0
    return {"spacing_nm": info.spacing_nm, "dipoles": info.n_dipoles, "grid": list(info.grid_shape),
            "fft": list(info.fft_shape), "first_s": float(info.seconds[0]),
            "per_wl_s": float(np.mean(info.seconds[1:])), "kernel_s": t_kernel,
            "products": float(np.mean(info.iterations[1:])), "mkd": float(np.max(info.mkd_max)),
            "converged": bool(info.converged),
            "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}


def _fit(rows, key):
    n = np.array([r["dipoles"] for r in rows], float)
    return np.polyfit(np.log(n), np.log([r[key] for r in rows]), 1)[0]


def _report(name, rows):
    n = np.array([r["dipoles"] for r in rows], float)
    if len(n) < 2:
        return
    for key, label in (("per_wl_s", "time per wavelength"), ("kernel_s", "kernel tabulation"),
                       ("products", "products per solve")):
        print(f"[{name}] fitted exponent, {label} ∝ N^{_fit(rows, key):.2f}")
    extra = np.array([r["peak_mb"] - rows[0]["peak_mb"] for r in rows[1:]])
    if len(extra) >= 2 and np.all(extra > 0):
        slope = np.polyfit(np.log(n[1:]), np.log(extra), 1)[0]
        print(f"[{name}] fitted exponent, peak memory above the smallest run ∝ N^{slope:.2f}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--spacings", type=float, nargs="+", default=[8.0, 6.0, 4.5, 3.5, 2.9])
    ap.add_argument("--wavelengths", type=float, nargs="+", default=[900.0, 1000.0, 1100.0])
    ap.add_argument("--preconditioners", nargs="+", default=["jacobi", "two-level"])
    ap.add_argument("--segment-nm", type=float, default=20.0)
    ap.add_argument("--warm-start", type=int, nargs="+", default=[DdaOptions().warm_start])
    ap.add_argument("--one", type=float, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if any(w < 0 for w in args.warm_start):
        ap.error("--warm-start values are counts of earlier solutions, 0 or more")
    if len(args.wavelengths) < 2:
        ap.error("give at least two wavelengths (the first includes compilation)")
    if args.one is not None:
        row = one_size(args.one, np.array(args.wavelengths), args.preconditioners[0], args.segment_nm,
                       args.warm_start[0])
        print(json.dumps(row))
        return
    variants = [(p, w) for p in args.preconditioners for w in args.warm_start]
    rows = {v: [] for v in variants}
    ref = variants[0]
    print(f"{'precond':>9} {'warm':>4} {'d nm':>6} {'dipoles':>8} {'grid':>13} {'FFT':>13} {'s/wl':>7} "
          f"{'kernel s':>8} {'products':>8} {'conv':>5} {'|m|kd':>6} {'peak MB':>8} {'t/t_ref':>7} "
          f"{'prod/ref':>8}")
    for d in args.spacings:
        for pc, warm in variants:
            cmd = [sys.executable, __file__, "--one", str(d), "--wavelengths", *map(str, args.wavelengths),
                   "--preconditioners", pc, "--segment-nm", str(args.segment_nm), "--warm-start", str(warm)]
            out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
            r = json.loads(out.strip().splitlines()[-1])
            rows[(pc, warm)].append(r)
            base = rows[ref][-1]
            print(f"{pc:>9} {warm:4d} {r['spacing_nm']:6.2f} {r['dipoles']:8d} "
                  f"{'x'.join(map(str, r['grid'])):>13} {'x'.join(map(str, r['fft'])):>13} "
                  f"{r['per_wl_s']:7.2f} {r['kernel_s']:8.2f} "
                  f"{r['products']:8.0f} {'yes' if r['converged'] else 'NO':>5} {r['mkd']:6.3f} "
                  f"{r['peak_mb']:8.0f} {r['per_wl_s'] / base['per_wl_s']:7.2f} "
                  f"{r['products'] / base['products']:8.2f}", flush=True)
    for pc, warm in variants:
        _report(f"{pc}, warm {warm}", rows[(pc, warm)])


if __name__ == "__main__":
    main()
