"""The lattice Green's tensor on a regular grid of displacements, with the spectral sum made separable.

The verification solver needs G_L(r) (``invdesign._green.lattice_dyadic``) at every displacement
r = (x_i, y_j, z_l) of its circulant table: about 35 points per dipole, so close to a million points at
25,000 dipoles. Evaluated point by point, both halves of the Ewald sum cost special functions per point
and per term. On a grid the spectral half needs far less:

    G_spec(x_i, y_j, z_l) = Σ_G e^{iκx x_i} e^{iκy y_j} C_G(z_l),   κ = k∥ + G,

where C_G(z) holds the z-profiles f, f', f'' of ``invdesign._green._spectral_profiles`` times the
dyadic's κ factors (f(1 − κx²/k²), −κxκy f/k², iκx f'/k², …). The profiles (the only complex error
functions of the spectral half) are evaluated once per distinct z, not once per point, and the sum over G
is a matrix product. The real-space half keeps its per-point form (wrapped into the cell around the
origin, as in ``lattice_dyadic``). The split parameter is free — the sum does not depend on it — so the
table raises it by ``GRID_EWALD_SCALE`` over the fast model's choice: fewer real-space images (the costly
half here), more spectral orders (the cheap half); the plan must be made with the same scale
(``make_ewald_plan(..., e_scale=GRID_EWALD_SCALE)``). The spectral half is evaluated at the unwrapped
displacement, which is exact: it is Bloch-periodic term by term (e^{iG·R} = 1).

Units: SI (r in m, k in 1/m, G_L in 1/m); exp(−iωt). Same truncation as ``make_ewald_plan`` (dropped
terms below ~2e-16 of the leading one); tested against ``lattice_dyadic`` point by point and for
independence from the split parameter (``tests/test_green_grid.py``).
"""

import jax
import jax.numpy as jnp
import numpy as np

from ._green import _real_space_dyadics, _self_real_space, _spectral_profiles, _wrap

#: the table's Ewald split parameter over the fast model's (``Lattice.ewald_parameter``). Measured on the
#: ``benchmarks/dda_scaling.py`` cell (400 nm square lattice, 3252 dipoles, ``python
#: benchmarks/kernel_tabulation.py --spacings 6 --scales 1 2 3 4 5 6 8``): real-space images 61 / 21 /
#: 13 / 9 / 9 / 9 / 9, spectral orders 37 / 145 / 325 / 577 / 885 / 1305 / 2313, time 7.6 / 3.1 / 2.6 /
#: 1.5–2.2 / 1.8 / 1.8 / 2.4 s; at 4 the real-space images reach their floor of 9 (the wrapped cell and its
#: neighbours), past it only the spectral orders grow.
GRID_EWALD_SCALE = 4.0

#: (a, b) index pairs of the six stored tensor components (the kernel table's order, ``_dda_operator``)
COMPONENTS = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))


def _spectral_coefficients(z, kappa, k, e, area):
    """C (6, n_z, n_g): the spectral dyadic's six components per z and order, before the in-plane phase."""
    f, df, d2f = _spectral_profiles(z, kappa, k, e, area)  # (n_z, n_g) each
    kx, ky = kappa[:, 0], kappa[:, 1]
    k2 = k**2
    return jnp.stack([f - kx * kx * f / k2, -kx * ky * f / k2, 1j * kx * df / k2,
                      f - ky * ky * f / k2, 1j * ky * df / k2, f + d2f / k2])


def spectral_table(x, y, z, k, kpar, lattice, plan, e):
    """Spectral half of G_L on the grid x × y × z (metres, 1-D each): (6, n_x, n_y, n_z) complex, 1/m.

    Cost: n_z·n_g profile evaluations and an (n_x, n_g) × (n_g, 6·n_y·n_z) matrix product.
    """
    kappa = kpar + lattice.reciprocal_points(plan.reciprocal)  # (n_g, 2)
    coef = _spectral_coefficients(jnp.asarray(z), kappa, k, e, lattice.area())  # (6, n_z, n_g)
    px = jnp.exp(1j * jnp.asarray(x)[:, None] * kappa[None, :, 0])  # (n_x, n_g)
    py = jnp.exp(1j * jnp.asarray(y)[:, None] * kappa[None, :, 1])  # (n_y, n_g)
    n_g = kappa.shape[0]
    inner = (py[:, None, None, :] * coef[None]).reshape(-1, n_g)  # (n_y·6·n_z, n_g)
    out = (px @ inner.T).reshape(len(x), len(y), 6, len(z))
    return jnp.transpose(out, (2, 0, 1, 3))


def _real_block(r, origin, k, kpar, lattice, plan, e):
    """Real-space half (c, 6) at displacements r (c, 3); the dipole's own site (origin) regularised."""
    rw, big_r = _wrap(r, lattice)
    terms, pts = _real_space_dyadics(rw, origin, k, lattice, plan, e)
    real = jnp.einsum("...nab,n->...ab", terms, jnp.exp(1j * pts @ kpar))
    real = real + jnp.where(origin[..., None, None], _self_real_space(k, e) * jnp.eye(3), 0.0)
    real = real * jnp.exp(1j * big_r @ kpar)[..., None, None]
    ia, ib = np.array(COMPONENTS).T
    return real[:, ia, ib]


def real_table(x, y, z, k, kpar, lattice, plan, e, *, singular=None, chunk=2048):
    """Real-space half of G_L on the grid x × y × z: (6, n_x, n_y, n_z) complex, 1/m.

    Evaluated point by point in blocks of ``chunk`` under ``jax.lax.map`` (memory: a few blocks of
    n_s real-space terms). Points flagged ``singular`` ((n_x, n_y, n_z) bool, static; default: r = 0)
    get the regularised self term lim[G_L − G] of ``lattice_dyadic(..., self_term=True)``; they must lie
    on a lattice site (r = 0, or a lattice vector, whose value the caller then discards).
    """
    pts = np.stack(np.meshgrid(np.asarray(x), np.asarray(y), np.asarray(z), indexing="ij"), -1).reshape(-1, 3)
    flags = np.all(pts == 0.0, axis=1) if singular is None else np.asarray(singular, bool).reshape(-1)
    n = pts.shape[0]
    n_chunks = -(-n // chunk)
    pad = n_chunks * chunk - n
    if pad:  # padding repeats the last point (its copies are dropped)
        pts = np.concatenate([pts, np.repeat(pts[-1:], pad, axis=0)])
        flags = np.concatenate([flags, np.repeat(flags[-1:], pad)])
    blocks = (jnp.asarray(pts.reshape(n_chunks, chunk, 3)), jnp.asarray(flags.reshape(n_chunks, chunk)))
    out = jax.lax.map(lambda a: _real_block(a[0], a[1], k, kpar, lattice, plan, e), blocks)
    return out.reshape(-1, 6)[:n].T.reshape(6, len(x), len(y), len(z))


def grid_lattice_dyadic(x, y, z, k, kpar, lattice, plan, *, singular=None, chunk=2048):
    """G_L(x_i, y_j, z_l) for every grid point, six components: (6, n_x, n_y, n_z) complex128, 1/m.

    Args:
      x, y, z: 1-D NumPy arrays of displacements, metres (static).
      k: medium wavenumber, 1/m. kpar: (2,) Bloch wavevector, 1/m. lattice: ``Lattice`` (metres; may
        be traced).
      plan: ``EwaldPlan`` (static); best made with ``e_scale=GRID_EWALD_SCALE``.
      singular: (n_x, n_y, n_z) static bool, the points holding lim[G_L − G] instead (see
        ``real_table``); default: the point r = 0 if present.
      chunk: points per block of the real-space half (static).
    """
    e = lattice.ewald_parameter(k, plan.e_scale)
    return (real_table(x, y, z, k, kpar, lattice, plan, e, singular=singular, chunk=chunk)
            + spectral_table(x, y, z, k, kpar, lattice, plan, e))
