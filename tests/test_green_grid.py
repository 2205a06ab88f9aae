"""The lattice Green's tensor tabulated on a grid (``invdesign._green_grid``, separable spectral sum).

References: the pointwise Ewald sum ``invdesign._green.lattice_dyadic`` (itself checked against direct
lattice sums and the literature in ``tests/test_green.py``), and the Ewald identity that the sum does not
depend on the split parameter E (Jordan, Richter & Sheng, J. Comput. Phys. 63, 222 (1986)): a wrong
spectral profile, phase or truncation in either half would change the result with E.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from invdesign._green import lattice_dyadic
from invdesign._green_grid import COMPONENTS, GRID_EWALD_SCALE, grid_lattice_dyadic
from invdesign._lattice import Lattice, make_ewald_plan

A1, A2 = np.array([420.0, 0.0]), np.array([130.0, 380.0])  # oblique, nm
D = 7e-9
X, Y, Z = np.arange(-9, 10) * D, np.arange(-7, 8) * D, np.arange(-3, 4) * D


def _setup(e_scale, kpar_frac=(0.3, -0.1), n_med=1.45, wl_nm=1000.0):
    k = 2 * np.pi / (wl_nm * 1e-9) * n_med
    kpar = jnp.asarray(kpar_frac) * k
    plan = make_ewald_plan(A1, A2, k, r_max_nm=0.5 * (np.hypot(*A1) + np.hypot(*A2)),
                           kpar_max_per_m=float(jnp.linalg.norm(kpar)), e_scale=e_scale)
    return k, kpar, plan


def _pointwise(k, kpar, lattice, plan):
    pts = np.stack(np.meshgrid(X, Y, Z, indexing="ij"), -1).reshape(-1, 3)
    origin = np.all(pts == 0.0, axis=1)
    g = lattice_dyadic(jnp.asarray(pts), jnp.asarray(origin), k, kpar, lattice, plan)
    ia, ib = np.array(COMPONENTS).T
    return g[:, ia, ib].T.reshape(6, len(X), len(Y), len(Z))


@pytest.mark.parametrize("e_scale", [1.0, GRID_EWALD_SCALE])
def test_grid_table_equals_pointwise_ewald_sum(e_scale):
    # every point, the r = 0 self term included, oblique lattice, oblique Bloch vector; tolerance 1e-12 of
    # each component's largest value (double-precision sums of ~10²–10³ terms; measured ~3e-15)
    k, kpar, plan = _setup(e_scale)
    lattice = Lattice.from_nm(A1, A2)
    want = np.asarray(_pointwise(k, kpar, lattice, _setup(1.0)[2]))
    got = np.asarray(grid_lattice_dyadic(X, Y, Z, k, kpar, lattice, plan, chunk=512))
    scale = np.abs(want).max(axis=(1, 2, 3), keepdims=True)
    assert np.max(np.abs(got - want) / scale) < 1e-12


def test_grid_table_does_not_depend_on_the_split_parameter():
    lattice = Lattice.from_nm(A1, A2)
    tables = [np.asarray(grid_lattice_dyadic(X, Y, Z, *_setup(s)[:2], lattice, _setup(s)[2]))
              for s in (1.0, 1.7, 4.0)]
    scale = np.abs(tables[0]).max(axis=(1, 2, 3), keepdims=True)
    for t in tables[1:]:
        assert np.max(np.abs(t - tables[0]) / scale) < 1e-12
    # and a larger split parameter really moves work to the spectral half
    assert len(_setup(4.0)[2].direct) < len(_setup(1.0)[2].direct)
    assert len(_setup(4.0)[2].reciprocal) > len(_setup(1.0)[2].reciprocal)


def test_grid_table_derivatives_match_finite_differences():
    # d/d(period scale) and d/dk of one far component, central differences (step 1e-6 relative;
    # truncation error ~1e-12, so agreement to 1e-6 relative is the check)
    k, kpar, plan = _setup(GRID_EWALD_SCALE, kpar_frac=(0.0, 0.0))

    def value(s, kk):
        lattice = Lattice.from_nm(A1 * s, A2 * s)
        g = grid_lattice_dyadic(X[:4], Y[:3], Z[:2], kk, jnp.zeros(2), lattice, plan, chunk=64)
        return jnp.real(g[0, 1, 2, 1]) + jnp.imag(g[2, 3, 0, 0])

    grad = jax.grad(value, argnums=(0, 1))(1.0, k)
    for i, (arg, h) in enumerate([(1.0, 1e-6), (k, 1e-6 * k)]):
        args_p = [1.0, k]
        args_m = [1.0, k]
        args_p[i] = arg + h
        args_m[i] = arg - h
        fd = (value(*args_p) - value(*args_m)) / (2 * h)
        assert abs(float(grad[i]) - float(fd)) < 1e-6 * abs(float(fd))
