"""Cost of the verification solver (volume DDA) against the number of dipoles per cell.

A realistic two-rod cell (400 nm square lattice, 35 nm film, glass below, air above; an invented
layout; rods of gold by default, any ``--material``) is discretised at spacings giving about 1k to 20k+
dipoles. Each size runs in a fresh subprocess so that its peak resident memory (``resource.getrusage``,
ru_maxrss) is its own. Prints per size: dipoles, grid and FFT sizes, time per wavelength (mean over the
wavelengths after the first, which includes compilation), time of the Green's-tensor tabulation alone,
products with the DDA matrix per solve, peak memory; then the fitted exponents of time and memory
against the dipole count. With several ``--preconditioners`` (``invdesign._dda_precond``; the first is
the reference) every size is run with each, side by side in one run, and the ratios of time and products
to the reference are printed. ``--warm-start 0 2`` likewise runs every size cold (0) and warm-started
from the last 2 wavelengths' solutions (``DdaOptions.warm_start``), side by side; the first value is the
reference.

Memory of the solver itself: the peak RSS is dominated by a fixed base (Python, JAX, compiled code), so
each size also prints XLA's buffer assignment of the compiled one-wavelength solve
(``Compiled.memory_analysis()``: arguments, outputs, temporaries — the tabulated Green's kernel and its
FFT, the FFT product's work arrays, the Krylov vectors; ``kern MB`` is the 6 complex FFT-box arrays of
the kernel alone, ``temp MB`` the temporaries, ``solv MB`` their sum with arguments and outputs), and
fits it against the dipole count and the FFT-box size (all sizes, and the 3 largest, where the bytes per
FFT-box point have settled; below that a fixed Ewald tabulation workspace dominates: 6.7 MiB with the
grid tabulation, ~50 MiB before).
The FFT box is twice the grid over the elements' bounding box (not the lattice cell), so at a fixed
geometry it is a constant multiple of the dipole count.

``--material``: library:NAME (default library:gold_rakic1998) or constant:n=2.0 / constant:n=3.5,k=0.01
(or eps_real=..,eps_imag=..; ``invdesign._materials``), the same geometry in another material, e.g. to
see whether the products per solve come from the metal.

    python benchmarks/dda_scaling.py [--spacings 8 6 4.5 3.5 2.9] [--wavelengths 900 1000 1100]
                                     [--preconditioners jacobi two-level] [--segment-nm 20]
                                     [--warm-start 0 2] [--material constant:n=2.0]
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


def material_entry(text: str) -> dict:
    """Design-file material entry from ``--material``: "library:NAME" or "constant:KEY=VALUE,..." with the
    keys of the constant model (n, k or eps_real, eps_imag); raises ValueError saying what is wrong."""
    model, _, rest = text.partition(":")
    if model == "library" and rest:
        return {"model": "library", "name": rest}
    if model == "constant" and rest:
        entry = {"model": "constant"}
        for item in rest.split(","):
            key, eq, value = item.partition("=")
            try:
                entry[key.strip()] = float(value)
            except ValueError:
                eq = ""
            if not eq:
                raise ValueError(f"--material constant: expected KEY=NUMBER items, got {item!r} "
                                 "(e.g. constant:n=2.0 or constant:n=3.5,k=0.01)")
        return entry
    raise ValueError("--material must be library:NAME (e.g. library:gold_rakic1998) or "
                     f"constant:KEY=VALUE,... (e.g. constant:n=2.0,k=0), got {text!r}")


def cell(material: str) -> dict:
    """The benchmark cell with both rods made of the ``--material`` entry (checked by ``Design``)."""
    return {**CELL, "materials": {"au": material_entry(material)}}


def solver_memory(design, setup, wavelength_nm, warm: int) -> dict:
    """Bytes of the compiled one-wavelength solve (``invdesign._dda.wavelength_function``), from XLA's
    buffer assignment (``Compiled.memory_analysis()``): arguments (permittivities, lattice, the warm-start
    stack of earlier solutions), outputs (spectra and the solved p̃) and temporaries (the tabulated
    Green's kernel and its FFT, the FFT product's work arrays, the Krylov vectors), independent of the
    process's fixed base (Python, libraries, compiled code). Also the FFT kernel's own size, 6 complex
    arrays of the FFT box, for comparison, and the temporaries of one block of the Green's-tensor
    tabulation alone (``DdaOptions.chunk`` displacements through the real-space Ewald sum,
    ``invdesign._green_grid``): a workspace set by the chunk and the Ewald plan, not by the grid, which the
    solve's temporaries contain."""
    import jax
    import jax.numpy as jnp

    from invdesign._dda import wavelength_function
    from invdesign._dda_operator import fft_shape
    from invdesign._green_grid import _real_block
    from invdesign._lattice import Lattice
    from invdesign._units import k0_per_m

    n_d = int(setup.grid.counts.sum())
    eps = jnp.asarray([setup.problem.eps[n][0] for n in setup.materials])
    a1, a2 = (jnp.asarray(v, dtype=float) for v in (design.params.a1, design.params.a2))
    guess = None if warm == 0 else jnp.zeros((2, warm, n_d, 3), complex)
    lowered = jax.jit(wavelength_function(setup)).lower(eps, jnp.float64(wavelength_nm), a1, a2, guess)
    mem = lowered.compile().memory_analysis()
    box = int(np.prod(fft_shape(setup.grid.shape)))
    k = k0_per_m(wavelength_nm) * setup.problem.medium_index
    lattice = Lattice.from_nm(a1, a2)
    chunk = setup.options.chunk
    plan = setup.kernel_plan
    e = lattice.ewald_parameter(k, plan.e_scale)
    block = jax.jit(lambda r, o: _real_block(r, o, k, jnp.zeros(2), lattice, plan, e))
    r = jnp.tile(jnp.array([[1e-9, 0.0, 0.0]]), (chunk, 1))
    chunk_mem = block.lower(r, jnp.zeros(chunk, bool)).compile().memory_analysis()
    return {"chunk_temp_bytes": int(chunk_mem.temp_size_in_bytes),
            "arg_bytes": int(mem.argument_size_in_bytes), "out_bytes": int(mem.output_size_in_bytes),
            "temp_bytes": int(mem.temp_size_in_bytes), "fft_points": box, "kernel_bytes": 6 * 16 * box,
            "solver_bytes": int(mem.argument_size_in_bytes + mem.output_size_in_bytes
                                + mem.temp_size_in_bytes - mem.alias_size_in_bytes)}


def one_size(spacing: float, wavelengths, preconditioner: str, segment_nm: float, warm: int,
             material: str) -> dict:
    import jax

    from invdesign import Design
    from invdesign._dda import DdaOptions, dda_response, dda_setup
    from invdesign._dda_operator import lattice_kernel
    from invdesign._lattice import Lattice
    from invdesign._units import NM, k0_per_m

    design = Design.from_json(cell(material))
    opts = DdaOptions(tol=1e-6, preconditioner=preconditioner, segment_nm=segment_nm, warm_start=warm)
    _, info = dda_response(design, wavelengths, spacing, options=opts, strict=False)
    setup = dda_setup(design, wavelengths, spacing, options=opts)
    memory = solver_memory(design, setup, wavelengths[0], warm)
    g = setup.grid
    k = k0_per_m(wavelengths[0]) * setup.problem.medium_index
    lat = Lattice.from_nm(design.params.a1, design.params.a2)
    kern = jax.jit(lambda kk: lattice_kernel(g.shape, g.spacing_nm * NM, kk, jax.numpy.zeros(2), lat,
                                             setup.kernel_plan, setup.exclude, even=True))
    jax.block_until_ready(kern(k))
    t0 = time.perf_counter()
    jax.block_until_ready(kern(k))
    t_kernel = time.perf_counter() - t0
    return {"spacing_nm": info.spacing_nm, "dipoles": info.n_dipoles, "grid": list(info.grid_shape),
            "fft": list(info.fft_shape), "first_s": float(info.seconds[0]),
            "per_wl_s": float(np.mean(info.seconds[1:])), "kernel_s": t_kernel,
            "products": float(np.mean(info.iterations[1:])), "mkd": float(np.max(info.mkd_max)),
            "converged": bool(info.converged),
            "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0, **memory}


def _fit(rows, key, against="dipoles"):
    n = np.array([r[against] for r in rows], float)
    return np.polyfit(np.log(n), np.log([r[key] for r in rows]), 1)[0]


def _report(name, rows):
    n = np.array([r["dipoles"] for r in rows], float)
    if len(n) < 2:
        return
    for key, label in (("per_wl_s", "time per wavelength"), ("kernel_s", "kernel tabulation"),
                       ("products", "products per solve")):
        print(f"[{name}] fitted exponent, {label} ∝ N^{_fit(rows, key):.2f}")
    for key, label in (("solver_bytes", "solver memory (XLA: arguments + outputs + temporaries)"),
                       ("temp_bytes", "XLA temporaries")):
        print(f"[{name}] fitted exponent, {label} ∝ N^{_fit(rows, key):.2f}, "
              f"∝ (FFT box)^{_fit(rows, key, 'fft_points'):.2f}")
    box = np.array([r["fft_points"] for r in rows], float)
    solver = np.array([r["solver_bytes"] for r in rows], float)
    block_mib = rows[-1]["chunk_temp_bytes"] / 2**20
    print(f"[{name}] one Ewald tabulation block compiled alone has {block_mib:.1f} MiB "
          "of temporaries; XLA reuses that workspace for the FFT arrays, so the solver's bytes are about "
          "the larger of it and a fixed number of bytes per FFT-box point (6 complex kernel arrays alone "
          "are 96 B per point)")
    if len(rows) >= 4:
        big = slice(len(rows) - 3, None)
        print(f"[{name}] fitted exponent over the 3 largest sizes, solver bytes ∝ "
              f"N^{np.polyfit(np.log(n[big]), np.log(solver[big]), 1)[0]:.2f}, "
              f"∝ (FFT box)^{np.polyfit(np.log(box[big]), np.log(solver[big]), 1)[0]:.2f}")
    print(f"[{name}] fitted exponent, FFT box points ∝ N^{_fit(rows, 'fft_points'):.2f}; solver bytes per "
          "FFT-box point " + " / ".join(f"{r['solver_bytes'] / r['fft_points']:.0f}" for r in rows)
          + ", per dipole " + " / ".join(f"{r['solver_bytes'] / r['dipoles']:.0f}" for r in rows))
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
    ap.add_argument("--material", default="library:gold_rakic1998",
                    help="material of both rods: library:NAME or constant:n=..,k=.. "
                         "(or eps_real=..,eps_imag=..)")
    ap.add_argument("--one", type=float, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if any(w < 0 for w in args.warm_start):
        ap.error("--warm-start values are counts of earlier solutions, 0 or more")
    if len(args.wavelengths) < 2:
        ap.error("give at least two wavelengths (the first includes compilation)")
    try:
        from invdesign import Design

        Design.from_json(cell(args.material))  # the material's own checks, before any solve
    except Exception as exc:  # noqa: BLE001 - any refusal of the entry is a usage error here
        ap.error(str(exc))
    if args.one is not None:
        row = one_size(args.one, np.array(args.wavelengths), args.preconditioners[0], args.segment_nm,
                       args.warm_start[0], args.material)
        print(json.dumps(row))
        return
    variants = [(p, w) for p in args.preconditioners for w in args.warm_start]
    rows = {v: [] for v in variants}
    ref = variants[0]
    print(f"material of both rods: {args.material}")
    print(f"{'precond':>9} {'warm':>4} {'d nm':>6} {'dipoles':>8} {'grid':>13} {'FFT':>13} {'s/wl':>7} "
          f"{'kernel s':>8} {'products':>8} {'conv':>5} {'|m|kd':>6} {'peak MB':>8} {'kern MB':>8} "
          f"{'temp MB':>8} {'solv MB':>8} {'t/t_ref':>7} {'prod/ref':>8}")
    for d in args.spacings:
        for pc, warm in variants:
            cmd = [sys.executable, __file__, "--one", str(d), "--wavelengths", *map(str, args.wavelengths),
                   "--preconditioners", pc, "--segment-nm", str(args.segment_nm), "--warm-start", str(warm),
                   "--material", args.material]
            out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
            r = json.loads(out.strip().splitlines()[-1])
            rows[(pc, warm)].append(r)
            base = rows[ref][-1]
            print(f"{pc:>9} {warm:4d} {r['spacing_nm']:6.2f} {r['dipoles']:8d} "
                  f"{'x'.join(map(str, r['grid'])):>13} {'x'.join(map(str, r['fft'])):>13} "
                  f"{r['per_wl_s']:7.2f} {r['kernel_s']:8.2f} "
                  f"{r['products']:8.0f} {'yes' if r['converged'] else 'NO':>5} {r['mkd']:6.3f} "
                  f"{r['peak_mb']:8.0f} {r['kernel_bytes'] / 2**20:8.1f} {r['temp_bytes'] / 2**20:8.1f} "
                  f"{r['solver_bytes'] / 2**20:8.1f} {r['per_wl_s'] / base['per_wl_s']:7.2f} "
                  f"{r['products'] / base['products']:8.2f}", flush=True)
    for pc, warm in variants:
        _report(f"{pc}, warm {warm}", rows[(pc, warm)])


if __name__ == "__main__":
    main()
