"""Speed of the fast model: forward and value-and-gradient of a 201-wavelength spectrum of a 4-element cell.

Prints, from one run on this machine: compile time, forward time, value-and-gradient time, their ratio
(aim ≤ 3), the same spectrum by the plain-NumPy loop implementation (benchmarks/numpy_reference.py) and
the speed-up (aim ≥ 30×), the agreement between the two, and a retrace check. Usage:

    python benchmarks/forward_speed.py [--repeats 5] [--chain 1]
"""

import argparse
import pathlib
import sys
import time

import jax
import jax.numpy as jnp
import numpy as np

import invdesign
from invdesign._simulate import _dipoles, prepare
from invdesign._units import k0_per_m

sys.path.insert(0, str(pathlib.Path(__file__).parent))
from _timing import time_calls  # noqa: E402
from numpy_reference import zero_order_t  # noqa: E402

CELL = {
    "name": "benchmark-four-rods",
    "lattice": {"a1": [460.0, 0.0], "a2": [40.0, 440.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "au", "center": [-120.0, -110.0], "length": 180.0, "width": 50.0,
         "thickness": 40.0, "angle_deg": 0.0},
        {"shape": "rod", "material": "au", "center": [110.0, -90.0], "length": 150.0, "width": 45.0,
         "thickness": 40.0, "angle_deg": 90.0},
        {"shape": "rod", "material": "au", "center": [-100.0, 110.0], "length": 160.0, "width": 55.0,
         "thickness": 40.0, "angle_deg": 45.0},
        {"shape": "disk", "material": "au", "center": [100.0, 120.0], "diameter": 90.0, "thickness": 40.0},
    ],
}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--chain", type=int, default=1, help="dipoles per rod")
    args = ap.parse_args()
    design = invdesign.Design.from_json(CELL)
    wl = np.linspace(600.0, 1400.0, 201)
    model = invdesign.ModelOptions(dipoles_per_rod=args.chain)
    fn, params = invdesign.forward_function(design, wl, model=model)

    def loss(p):
        t = fn(p).t
        return jnp.sum(jnp.abs(t[:, 1, 0]) ** 2) - jnp.sum(jnp.abs(t[:, 0, 0]) ** 2)

    vg = jax.jit(jax.value_and_grad(loss))
    t0 = time.perf_counter()
    jax.block_until_ready(fn(params))
    compile_fwd = time.perf_counter() - t0
    t0 = time.perf_counter()
    jax.block_until_ready(vg(params))
    compile_vg = time.perf_counter() - t0
    t_fwd = time_calls(lambda: fn(params), args.repeats)
    t_vg = time_calls(lambda: vg(params), args.repeats)
    moved = jax.tree_util.tree_map(lambda v: v * 1.001, params)
    cache = fn._cache_size()
    fn(moved)
    retraced = fn._cache_size() != cache

    problem = prepare(design, wl, model=model)
    k = np.asarray(k0_per_m(jnp.asarray(wl)) * problem.medium_index)
    pos, lam, axes, _ = _dipoles(params, problem, jnp.asarray(k))
    m = np.stack([np.asarray(params.a1), np.asarray(params.a2)], axis=1) * 1e-9
    t0 = time.perf_counter()
    t_np = zero_order_t(np.asarray(pos), np.asarray(lam), np.asarray(axes), k, m,
                        problem.plan.direct, problem.plan.reciprocal)
    t_numpy = time.perf_counter() - t0
    t_jax = np.asarray(fn(params).t)
    agree = np.max(np.abs(t_np - t_jax))

    n_d = pos.shape[0]
    print(f"cell: 4 elements ({n_d} dipoles), 201 wavelengths, Ewald terms {len(problem.plan.direct)} "
          f"real + {len(problem.plan.reciprocal)} spectral; {jax.devices()[0].platform} backend")
    print(f"compile: forward {compile_fwd:.2f} s, value-and-gradient {compile_vg:.2f} s")
    print(f"forward (after compile):          {t_fwd * 1e3:9.1f} ms")
    print(f"value-and-gradient:               {t_vg * 1e3:9.1f} ms")
    print(f"gradient / forward cost ratio:    {t_vg / t_fwd:9.2f}   (aim ≤ 3)")
    print(f"plain-NumPy loop, same spectrum:  {t_numpy * 1e3:9.1f} ms")
    print(f"speed-up over NumPy loop:         {t_numpy / t_fwd:9.1f}×  (aim ≥ 30×)")
    print(f"max |t_jax - t_numpy|:            {agree:9.2e}")
    print(f"retraced for new parameter values: {retraced}")


if __name__ == "__main__":
    main()
