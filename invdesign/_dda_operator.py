"""The coupling operator of the verification solver: a translation-invariant kernel applied by FFT.

On a cubic grid (``invdesign._dda_grid``) the dipole–dipole coupling −k² G(r_i − r_j) depends only on
the integer displacement between grid points, so the field of all dipoles is a discrete convolution

    E_i = Σ_j K(i − j) p̃_j,   K = −k² G,

of the six independent components of the symmetric tensor K (xx, xy, xz, yy, yz, zz) with the three
components of p̃ (reduced moments p/(ε0 ε_m), V·m; positions in m; K in 1/m³). K is tabulated once per
wavelength on the (2n − 1) displacements of each axis, embedded in a circulant array of fast FFT size
M ≥ 2n − 1 (zero elsewhere), and a product costs 3 forward and 3 inverse FFTs of size M1·M2·M3
(Goodman, Draine & Flatau, Opt. Lett. 16, 1198 (1991)); unoccupied points carry p̃ = 0 and their
fields are discarded. Memory is about 6 + 6 complex arrays of M1·M2·M3 (≈ 8 grid sizes) each.

Kernels:
  * ``lattice_kernel``: G = G_L, the Ewald lattice dyadic (``invdesign._green.lattice_dyadic``; periodic
    DDA, Draine & Flatau, J. Opt. Soc. Am. A 25, 2693 (2008)). At zero displacement it holds the
    regularised self term lim[G_L − G] (the dipole's own free-space field is its radiative reaction,
    already in α). Displacements that coincide with a non-zero lattice vector (a grid wider than a
    period) are excluded: no two dipoles of a valid design are that far apart along a period.
  * ``free_kernel``: G = the free dyadic (one isolated target); zero at zero displacement.
Tabulation runs in chunks under ``jax.lax.map`` so memory stays at a few chunks of the Ewald sums.
Extension point: a substrate adds a reflected kernel K_R(ρ_i − ρ_j, z_i + z_j); it is a convolution in
x, y and a correlation (Hankel) in z, i.e. the same FFT product with the z axis of p̃ reversed.
"""

import jax
import jax.numpy as jnp
import numpy as np
import scipy.fft

from ._green import free_dyadic
from ._green_grid import COMPONENTS, grid_lattice_dyadic

#: component number of each (a, b), symmetric
_INDEX = np.array([[0, 1, 2], [1, 3, 4], [2, 4, 5]])


def fft_shape(shape) -> tuple:
    """Circulant size M ≥ 2n − 1 per axis with small prime factors (fast FFTs)."""
    return tuple(scipy.fft.next_fast_len(2 * n - 1) for n in shape)


def displacement_table(shape, spacing_m):
    """Integer displacements of the circulant layout, as positions and a validity mask.

    Returns:
      (rvec (M1, M2, M3, 3) metres, valid (M1, M2, M3) bool) NumPy arrays: index m stands for the
      displacement m (m < n) or m − M (m > M − n); other indices are never used.
    """
    axes, valid = [], []
    for n, m in zip(shape, fft_shape(shape), strict=True):
        idx = np.arange(m)
        axes.append(np.where(idx < n, idx, idx - m).astype(float))
        valid.append((idx < n) | (idx > m - n))
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1) * spacing_m
    mask = valid[0][:, None, None] & valid[1][None, :, None] & valid[2][None, None, :]
    return grid, mask


def lattice_image_mask(rvec, a1_nm, a2_nm) -> np.ndarray:
    """(M1, M2, M3) bool: displacements equal to a non-zero lattice vector (in-plane, z = 0)."""
    m = np.stack([np.asarray(a1_nm, float), np.asarray(a2_nm, float)], axis=1) * 1e-9
    frac = rvec[..., :2] @ np.linalg.inv(m).T
    on_lattice = np.all(np.abs(frac - np.round(frac)) < 1e-9, axis=-1) & (np.abs(rvec[..., 2]) < 1e-20)
    return on_lattice & np.any(np.abs(rvec) > 0, axis=-1)


def _tabulate(fn, rvec, chunk):
    """Six components of fn(r_chunk (c, 3), flags (c,)) -> (c, 3, 3) over a flat table, chunked."""
    flat = rvec.reshape(-1, 3)
    n = flat.shape[0]
    n_chunks = -(-n // chunk)
    pad = n_chunks * chunk - n
    safe = np.concatenate([flat, np.tile([[1.0, 0.0, 0.0]], (pad, 1))]) if pad else flat
    is_origin = np.all(safe == 0.0, axis=1)
    ia, ib = np.array(COMPONENTS).T

    def block(args):
        r, origin = args
        return fn(r, origin)[:, ia, ib]  # (chunk, 6)

    out = jax.lax.map(block, (jnp.asarray(safe.reshape(n_chunks, chunk, 3)),
                              jnp.asarray(is_origin.reshape(n_chunks, chunk))))
    return out.reshape(-1, 6)[:n].T.reshape((6,) + rvec.shape[:-1])


def _axis_entries(n: int, m: int, spacing_m: float, half: bool):
    """Used circulant indices of one axis and their displacements (m): 0 … n − 1, then M − n + 1 … M − 1
    (the displacements −(n − 1) … −1); only the first group when ``half``."""
    idx = np.arange(n) if half else np.concatenate([np.arange(n), np.arange(m - n + 1, m)])
    return idx, np.where(idx < n, idx, idx - m).astype(float) * spacing_m


def lattice_kernel(shape, spacing_m, k, kpar, lattice, plan, exclude, *, chunk=2048, even=False):
    """FFT of the periodic kernel −k² G_L on the circulant displacement table.

    Args:
      shape: (nx, ny, nz) grid points (static). spacing_m: grid spacing d, metres (static float).
      k: medium wavenumber, 1/m, scalar. kpar: (2,) Bloch wavevector, 1/m.
      lattice: ``Lattice`` (metres; may be traced). plan: ``EwaldPlan`` (static); the tabulation
        (``invdesign._green_grid``) is fastest with one made for ``e_scale=GRID_EWALD_SCALE``.
      exclude: (M1, M2, M3) static bool, displacements to zero (``lattice_image_mask`` of the nominal
        lattice, plus nothing else).
      chunk: displacements per block of the real-space tabulation (static).
      even: static; True promises k∥ = 0, where G_L(−r) = G_L(r) (each term G(r − R_n) is even and the
        lattice is symmetric under R → −R), so only displacements with z ≥ 0 are tabulated (about half).

    Returns:
      (6, M1, M2, M3) complex128 FFT of K, 1/m³.
    """
    ms = fft_shape(shape)
    nz = shape[2]
    (ix, x), (iy, y), (iz, z) = (_axis_entries(n, m, spacing_m, h)
                                 for n, m, h in zip(shape, ms, (False, False, even), strict=True))
    table = np.ix_(ix, iy, iz)
    at_origin = (ix == 0)[:, None, None] & (iy == 0)[None, :, None] & (iz == 0)[None, None, :]
    singular = exclude[table] | at_origin  # lattice images are zeroed below; they must stay finite
    g_used = grid_lattice_dyadic(x, y, z, k, kpar, lattice, plan, singular=singular, chunk=chunk)
    g = jnp.zeros((6, ms[0], ms[1], len(iz) if even else ms[2]), complex)
    g = g.at[(slice(None),) + table].set(g_used)
    if even:  # K at index (i, j, M3 − l) is K at (−i, −j, l) mod M, for l = 1 .. nz − 1
        m1, m2, m3 = ms
        mirrored = g[:, (-np.arange(m1)) % m1][:, :, (-np.arange(m2)) % m2][:, :, :, 1:nz][:, :, :, ::-1]
        gap = jnp.zeros((6, m1, m2, m3 - 2 * nz + 1), dtype=g.dtype)
        g = jnp.concatenate([g, gap, mirrored], axis=3)
    valid = np.zeros(ms, bool)
    valid[np.ix_(ix, iy, _axis_entries(nz, ms[2], spacing_m, False)[0])] = True
    keep = valid & ~exclude
    return jnp.fft.fftn(jnp.where(jnp.asarray(keep), -(k**2) * g, 0.0), axes=(1, 2, 3))


def free_kernel(shape, spacing_m, k, *, chunk=2048):
    """FFT of the free-space kernel −k² G (zero at zero displacement), (6, M1, M2, M3), 1/m³."""
    rvec, valid = displacement_table(shape, spacing_m)
    keep = valid & np.any(rvec != 0.0, axis=-1)
    safe = np.where(keep[..., None], rvec, np.array([1.0, 0.0, 0.0]) * spacing_m)
    g = _tabulate(lambda r, o: free_dyadic(r, k), safe, chunk)
    return jnp.fft.fftn(jnp.where(jnp.asarray(keep), -(k**2) * g, 0.0), axes=(1, 2, 3))


def convolve(kernel_hat, p_grid):
    """Field Σ_j K(i − j) p̃_j on the grid: p_grid (3, nx, ny, nz) -> (3, nx, ny, nz), by zero-padded FFT.

    Components first, so that every FFT runs over contiguous data (measured 1.4× faster per product
    than components last, 7392 dipoles, ``benchmarks/dda_scaling.py`` cell).
    """
    shape = p_grid.shape[1:]
    m = kernel_hat.shape[1:]
    p_hat = jnp.fft.fftn(p_grid, s=m, axes=(1, 2, 3))
    out = jnp.stack([sum(kernel_hat[_INDEX[a, b]] * p_hat[b] for b in range(3)) for a in range(3)])
    field = jnp.fft.ifftn(out, axes=(1, 2, 3))
    return field[:, : shape[0], : shape[1], : shape[2]]


def make_matvec(kernel_hat, alpha_inv, shape, occupied):
    """The DDA operator p̃ (n_d, 3) -> α⁻¹ p̃ + K * p̃ restricted to the occupied points.

    Args:
      kernel_hat: (6, M1, M2, M3) from ``lattice_kernel`` / ``free_kernel``.
      alpha_inv: (n_d,) complex 1/α of each dipole (isotropic), 1/m³.
      shape: (nx, ny, nz) static; occupied: (n_d,) static flat indices into the grid.

    Returns:
      a linear function of (n_d, 3) complex arrays (the unknowns flattened by the caller as needed).
    """
    size = int(np.prod(shape))
    occ = jnp.asarray(occupied)

    def matvec(p):
        grid = jnp.zeros((3, size), dtype=complex).at[:, occ].set(p.T, unique_indices=True)
        field = convolve(kernel_hat, grid.reshape((3,) + tuple(shape))).reshape(3, size)[:, occ]
        return alpha_inv[:, None] * p + field.T

    return matvec
