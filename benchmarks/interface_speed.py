"""Cost of the planar-interface environment against the averaged one: forward and value-and-gradient.

A 2-rod cell of 20 nm gold films on glass (dipoles 10 nm above the interface, the hardest case for the
order sum), 21 wavelengths, reverse-mode gradient of a scalar of the zero-order Jones matrix with respect
to every cell parameter. Prints, per environment and chain length: compile time, forward time, value-and-
gradient time, the number of interface orders, and the interface/averaged ratios (aim: value-and-gradient
within about 2–3× of the averaged model). Usage:

    python benchmarks/interface_speed.py [--repeats 5] [--chain 1 5]
"""

import argparse
import pathlib
import sys
import time

import jax
import jax.numpy as jnp
import numpy as np

import invdesign
from invdesign._simulate import prepare, response_from_params

sys.path.insert(0, str(pathlib.Path(__file__).parent))
from _timing import time_calls  # noqa: E402

CELL = {
    "name": "benchmark-two-thin-rods",
    "lattice": {"a1": [420.0, 0.0], "a2": [0.0, 400.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [
        {"shape": "rod", "material": "au", "center": [-100.0, 0.0], "length": 170.0, "width": 50.0,
         "thickness": 20.0, "angle_deg": 90.0},
        {"shape": "rod", "material": "au", "center": [90.0, 20.0], "length": 140.0, "width": 50.0,
         "thickness": 20.0, "angle_deg": 40.0},
    ],
}
WAVELENGTHS = np.linspace(700.0, 1300.0, 21)


def measure(design, environment: str, chain: int, repeats: int) -> dict:
    model = invdesign.ModelOptions(dipoles_per_rod=chain, environment=environment)
    problem = prepare(design, WAVELENGTHS, model=model)

    def scalar(params):
        t = response_from_params(params, problem).t
        return jnp.sum(jnp.abs(t[:, 1, 0]) ** 2) + jnp.sum(jnp.real(t[:, 0, 0]))

    fwd = jax.jit(lambda p: response_from_params(p, problem))
    vg = jax.jit(jax.value_and_grad(scalar))
    params = design.params
    t0 = time.perf_counter()
    jax.block_until_ready(fwd(params))
    jax.block_until_ready(vg(params))
    compile_s = time.perf_counter() - t0
    orders = 0 if problem.interface is None else len(problem.interface.reciprocal)
    return {"compile": compile_s, "forward": time_calls(lambda: fwd(params), repeats),
            "grad": time_calls(lambda: vg(params), repeats), "orders": orders}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--chain", type=int, nargs="+", default=[1, 5])
    args = ap.parse_args()
    design = invdesign.Design.from_json(CELL)
    print(f"{len(design.elements)} rods, {len(WAVELENGTHS)} wavelengths; times in s (min of {args.repeats})")
    for n in args.chain:
        avg = measure(design, "averaged", n, args.repeats)
        itf = measure(design, "interface", n, args.repeats)
        for name, m in (("averaged", avg), ("interface", itf)):
            print(f"  N={n:<2d} {name:9s}  compile {m['compile']:6.2f}  forward {m['forward']:.4f}  "
                  f"value+grad {m['grad']:.4f}  interface orders {m['orders']}")
        print(f"  N={n:<2d} ratio interface/averaged: forward {itf['forward'] / avg['forward']:.2f}×, "
              f"value+grad {itf['grad'] / avg['grad']:.2f}× (aim ≤ 3)")


if __name__ == "__main__":
    main()
