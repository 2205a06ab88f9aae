"""Accuracy of the verification solver (volume DDA) as the grid is refined, against outside references.

Prints three tables from one run:
  1. an isolated gold sphere (radius 10 nm, the project's Rakić 1998 gold, in water) against miepython's
     extinction and absorption, for R/d = 3, 5, 8 (add 12 with --fine), at 500–600 nm;
  2. a lossless dielectric sphere (m = 1.5, radius 50 nm, λ = 400 nm in air), grid and effective volume;
  3. a gold rod array (200 × 50 × 40 nm rod, 400 nm square lattice, glass below, air above; an invented
     cell) by the DDA at d = 10, 5 (and 3.33 with --fine) nm beside the fast model (1 and 5 dipoles per rod).

    python benchmarks/dda_accuracy.py [--fine]
"""

import argparse

import jax.numpy as jnp
import miepython
import numpy as np

from invdesign import LIBRARY, Design, ModelOptions, Sphere, simulate
from invdesign._dda import DdaOptions, dda_cross_sections, dda_response

ROD_CELL = {
    "name": "accuracy-one-rod",
    "lattice": {"a1": [400.0, 0.0], "a2": [0.0, 400.0]},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
    "materials": {"au": {"model": "library", "name": "gold_rakic1998"}},
    "elements": [{"shape": "rod", "material": "au", "center": [0.0, 0.0], "length": 200.0, "width": 50.0,
                  "thickness": 40.0, "angle_deg": 0.0}],
}


def mie(eps, radius_nm, wl, n_env):
    qext, qsca, _, _ = miepython.efficiencies(np.sqrt(eps), 2 * radius_nm, wl, n_env)
    return qext * np.pi * radius_nm**2, (qext - qsca) * np.pi * radius_nm**2


def gold_sphere(fine: bool):
    radius, n, wl = 10.0, 1.33, np.array([500.0, 520.0, 540.0, 600.0])
    eps = np.asarray(LIBRARY["gold_rakic1998"]().permittivity(jnp.asarray(wl)))
    ext_ref, abs_ref = mie(eps, radius, wl, n)
    print("gold sphere R = 10 nm in water: DDA/Mie − 1 (extinction; absorption)")
    print(f"{'R/d':>4} {'N':>6} {'|m|kd':>6} " + " ".join(f"{w:>15.0f}" for w in wl))
    for per in (3, 5, 8, 12) if fine else (3, 5, 8):
        cs, info = dda_cross_sections(Sphere(jnp.zeros(2), jnp.float64(radius), "au"), eps, wl, n,
                                      radius / per, options=DdaOptions(tol=1e-8))
        cells = [f"{e:+6.1%};{a:+6.1%}" for e, a in zip(cs.ext / ext_ref - 1, cs.abs / abs_ref - 1,
                                                       strict=True)]
        head = f"{per:4d} {info.n_dipoles:6d} {np.max(info.mkd_max):6.3f} "
        print(head + " ".join(f"{c:>15}" for c in cells))


def dielectric_sphere():
    radius, wl, eps = 50.0, np.array([400.0]), np.array([2.25 + 0.0j])
    ext_ref, _ = mie(eps, radius, wl, 1.0)
    print("dielectric sphere m = 1.5, R = 50 nm, λ = 400 nm: DDA/Mie − 1 (extinction)")
    print(f"{'R/d':>4} {'N':>6} {'|m|kd':>6} {'grid vol':>9} {'exact vol':>9}")
    for per in (4, 6, 9):
        errs = []
        for vol in ("grid", "exact"):
            cs, info = dda_cross_sections(Sphere(jnp.zeros(2), jnp.float64(radius), "x"), eps, wl, 1.0,
                                          radius / per, options=DdaOptions(volume=vol, tol=1e-8))
            errs.append(cs.ext[0] / ext_ref[0] - 1)
        print(f"{per:4d} {info.n_dipoles:6d} {np.max(info.mkd_max):6.3f} {errs[0]:+9.2%} {errs[1]:+9.2%}")


def rod_array(fine: bool):
    design = Design.from_json(ROD_CELL)
    wl = np.array([900.0, 1000.0, 1100.0, 1200.0])
    print("gold rod array, x-polarised transmittance T_x (absorbance A_x)")
    print(f"{'model':>22} " + " ".join(f"{w:>13.0f}" for w in wl))

    def row(label, resp):
        cells = [f"{t:.3f} ({a:.3f})" for t, a in zip(resp.transmittance[:, 0], resp.absorbance[:, 0],
                                                       strict=True)]
        print(f"{label:>22} " + " ".join(f"{c:>13}" for c in cells), flush=True)

    for n in (1, 5):
        row(f"fast, {n} dipole(s)/rod", simulate(design, wl, model=ModelOptions(dipoles_per_rod=n)))
    for d in (10.0, 5.0, 40.0 / 12) if fine else (10.0, 5.0):
        resp, info = dda_response(design, wl, d)
        row(f"DDA d={info.spacing_nm:.2f} N={info.n_dipoles}", resp)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fine", action="store_true", help="add the finest grids (several more minutes)")
    args = ap.parse_args()
    gold_sphere(args.fine)
    dielectric_sphere()
    rod_array(args.fine)


if __name__ == "__main__":
    main()
