"""Time of tabulating the verification solver's periodic Green's kernel: grid form against pointwise.

The DDA kernel −k² G_L is needed at every displacement of the circulant table (about 35 points per
dipole). Side by side, in one run, per grid spacing of the ``benchmarks/dda_scaling.py`` cell (two gold
rods, 400 nm square lattice, normal incidence, half table):

  * pointwise: ``invdesign._green.lattice_dyadic`` at every displacement with the fast model's Ewald
    split (the solver's tabulation before ``invdesign._green_grid``);
  * grid: ``invdesign._dda_operator.lattice_kernel`` as the solver calls it (separable spectral sum, the
    split raised by each ``--scales`` value; the solver's default is ``GRID_EWALD_SCALE``).

Prints the wall time of each (best of ``--repeats`` after a compiling call), the ratio pointwise / grid,
the real-space images and spectral orders of each plan, and the largest difference between the two tables
relative to the table's largest entry (they are the same sum, so it should be ~1e-15).

    python benchmarks/kernel_tabulation.py [--spacings 8 6 4.5 2.9] [--wavelength 1000] [--scales 1 2.5]
"""

import argparse
import pathlib
import sys

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from _timing import time_calls  # noqa: E402
from dda_scaling import CELL  # noqa: E402

import invdesign._jaxsetup  # noqa: E402,F401  (CPU + x64 first)


def pointwise_table(shape, spacing_m, k, lattice, plan, exclude):
    """The earlier tabulation: lattice_dyadic point by point over the half table, mirrored (6, M1, M2, M3)."""
    import jax.numpy as jnp

    from invdesign._dda_operator import _tabulate, displacement_table
    from invdesign._green import lattice_dyadic

    rvec, valid = displacement_table(shape, spacing_m)
    keep = valid & ~exclude
    nz = shape[2]
    safe = np.where(keep[..., None], rvec, np.array([1.0, 0.0, 0.0]) * spacing_m)[:, :, :nz]
    g = _tabulate(lambda r, o: lattice_dyadic(r, o, k, jnp.zeros(2), lattice, plan), safe, 2048)
    m1, m2, m3 = rvec.shape[:3]
    mirrored = g[:, (-np.arange(m1)) % m1][:, :, (-np.arange(m2)) % m2][:, :, :, 1:nz][:, :, :, ::-1]
    gap = jnp.zeros((6, m1, m2, m3 - 2 * nz + 1), dtype=g.dtype)
    g = jnp.concatenate([g, gap, mirrored], axis=3)
    return jnp.fft.fftn(jnp.where(jnp.asarray(keep), -(k**2) * g, 0.0), axes=(1, 2, 3))


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--spacings", type=float, nargs="+", default=[8.0, 6.0, 4.5])
    ap.add_argument("--wavelength", type=float, default=1000.0)
    ap.add_argument("--scales", type=float, nargs="+", default=None,
                    help="Ewald split scales of the grid form (default: GRID_EWALD_SCALE)")
    ap.add_argument("--repeats", type=int, default=2)
    args = ap.parse_args()

    import jax

    from invdesign import Design
    from invdesign._dda import dda_setup
    from invdesign._dda_operator import lattice_kernel
    from invdesign._green_grid import GRID_EWALD_SCALE
    from invdesign._lattice import Lattice
    from invdesign._simulate import prepare
    from invdesign._units import NM, k0_per_m

    scales = args.scales or [GRID_EWALD_SCALE]
    design = Design.from_json(CELL)
    lattice = Lattice.from_nm(design.params.a1, design.params.a2)
    print(f"{'d nm':>5} {'dipoles':>7} {'table pts':>9} {'pointwise s':>11} {'images':>6} {'orders':>6}  "
          + "  ".join(f"{'grid s @' + format(s, 'g'):>11} {'images':>6} {'orders':>6} {'ratio':>6} "
                      f"{'max diff':>8}" for s in scales))
    for d in args.spacings:
        setup = dda_setup(design, [args.wavelength], d)
        g = setup.grid
        k = k0_per_m(args.wavelength) * setup.problem.medium_index
        d_m = g.spacing_nm * NM
        old = jax.jit(lambda kk, s=setup, gg=g, dm=d_m: pointwise_table(
            gg.shape, dm, kk, lattice, s.problem.plan, s.exclude))
        ref = jax.block_until_ready(old(k))
        t_old = time_calls(lambda o=old, kk=k: o(kk), args.repeats)
        table_pts = int(np.prod([2 * n - 1 for n in g.shape[:2]]) * g.shape[2])
        line = (f"{g.spacing_nm:5.2f} {int(g.counts.sum()):7d} {table_pts:9d} {t_old:11.2f} "
                f"{len(setup.problem.plan.direct):6d} {len(setup.problem.plan.reciprocal):6d}")
        for s in scales:
            plan = prepare(design, [args.wavelength], ewald_scale=s).plan
            new = jax.jit(lambda kk, p=plan, s=setup, gg=g, dm=d_m: lattice_kernel(
                gg.shape, dm, kk, jax.numpy.zeros(2), lattice, p, s.exclude, even=True))
            got = jax.block_until_ready(new(k))
            t_new = time_calls(lambda n=new, kk=k: n(kk), args.repeats)
            # FFTs of the same table: compare in real space
            diff = np.abs(np.fft.ifftn(np.asarray(got - ref), axes=(1, 2, 3))).max()
            size = np.abs(np.fft.ifftn(np.asarray(ref), axes=(1, 2, 3))).max()
            line += (f"  {t_new:11.2f} {len(plan.direct):6d} {len(plan.reciprocal):6d} {t_old / t_new:6.1f} "
                     f"{diff / size:8.1e}")
        print(line, flush=True)


if __name__ == "__main__":
    main()
