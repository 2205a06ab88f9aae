"""Preconditioners of the verification solver: block Jacobi, and a two-level method with a coarse space of
element segments.

The DDA system A p̃ = b (``invdesign._dda``) has A = diag(α⁻¹) + K, K the FFT-applied coupling
(``invdesign._dda_operator``); n_d dipoles, unknowns flattened to (3 n_d,) in (dipole, component) order.

Why plain block Jacobi is slow for metals: for a metal with Re ε ≪ −1 (gold in the near infrared), the
eigenvalues of A near zero belong to the element's low-order plasmon modes — polarisation that is smooth
over the element (the longitudinal dipole mode of a rod resonates at large negative ε). Their distance
from zero is set by Im ε and radiation, so the Krylov iteration needs very many steps to resolve them;
the local block Jacobi D (each dipole's own 3 × 3 block α_i⁻¹ I − k² G_L,self) does nothing for smooth
modes. A coarse space of piecewise-constant polarisations on element segments contains them.

Coarse space: each element is cut, in its own principal frame (``axes()``, ``dimensions()``), into boxes
of about ``segment_nm`` per side (at least one per axis); the dipoles of one box form an aggregate. Z is
the (3 n_d, 3 n_agg) real matrix whose column (J, b) is 1/√n_J on the b components of aggregate J's
dipoles (orthonormal columns). The number of aggregates depends on the geometry and ``segment_nm``, not
on the grid spacing, so the coarse space has a fixed size as the grid is refined and the stored A Z
(3 n_d × 3 n_agg) grows linearly with n_d.

With E = Zᵀ A Z (unconjugated transpose; E is complex symmetric when A is) and Q = Z E⁻¹ Zᵀ:
  * "jacobi":   M = D⁻¹.
  * "additive": M = D⁻¹ + Q.
  * "two-level" (multiplicative, coarse solve then smoothing; "A-DEF2"-type of Tang, Nabben, Vuik &
    Erlangga, J. Sci. Comput. 39, 340 (2009)): M = Q + D⁻¹ (I − A Q), used with right-preconditioned
    GMRES. Not symmetric.
  * for COCG (symmetric A and M needed) the balancing form of the same paper ("BNN"),
    M = Q + (I − Q A) D⁻¹ (I − A Q), complex symmetric when A is.
Each application costs no product with A: A Z is built once (one FFT of each aggregate's indicator and
six inverse FFTs, about 1.2 products per aggregate) and stored; Q A y = Z E⁻¹ (A Z)ᵀ y holds for
symmetric A only, which is why the balancing form is offered only with COCG. "local": the exact inverse
of A restricted to each aggregate's box (near-field block Jacobi), stored as (n_agg, 3B, 3B).

Measured (``benchmarks/dda_scaling.py`` gold two-rod cell, d = 8.75 nm, 964 dipoles, 1000 nm, COCG to
1e-6, products for the two input polarisations): block Jacobi 1133 / 1185; two-level (balancing, 20 nm
segments) 2846 / 2947; additive 2173 / 2381; local blocks of 9 nm 1276 / 1300, of 18 nm no convergence
in 6000. So block Jacobi remains the default. Why: the dense spectrum of d³A for that case lies on a
strip Im ≈ −0.0033 from Re −0.13 to +1.02, with about a quarter of the 2892 eigenvalues left of zero.
Zero sits inside the spectrum's span, and the modes next to it are not smooth: they are the
discretisation-spread cluster of divergence-free (transverse) modes at d³λ ≈ 1/(ε − 1), and the few
smooth plasmon modes a coarse space can hold are only part of the difficulty; small metal blocks are
themselves near-resonant, so their exact inverses amplify. The other kinds stay as options to measure
(they are exact in their limits: a complete coarse space, or one block per isolated element).
"""

from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np

from ._dda_operator import _INDEX

PRECONDITIONERS = ("jacobi", "local", "additive", "two-level")


def aggregates(positions_nm: np.ndarray, owner: np.ndarray, elements, segment_nm: float) -> np.ndarray:
    """Aggregate label (n_d,) int of every dipole, labels 0 .. n_agg − 1 (none empty).

    Args:
      positions_nm: (n_d, 3) dipole positions, nm. owner: (n_d,) element index of each dipole.
      elements: the cell's elements (``axes()``, ``dimensions()``, ``height()``, ``center``; nm).
      segment_nm: target side of an aggregate box along each principal axis, nm.
    """
    labels = np.zeros(len(owner), dtype=np.int64)
    start = 0
    for e_idx, e in enumerate(elements):
        sel = owner == e_idx
        centre = np.array([*np.asarray(e.center, float), float(e.height())])
        local = (positions_nm[sel] - centre) @ np.asarray(e.axes(), float)  # (n_e, 3) principal coordinates
        dims = np.asarray(e.dimensions(), float)
        n_box = np.maximum(1, np.round(dims / segment_nm)).astype(int)
        idx = np.clip(np.floor((local / dims + 0.5) * n_box).astype(int), 0, n_box - 1)
        flat = np.ravel_multi_index(idx.T, n_box)
        _, compact = np.unique(flat, return_inverse=True)
        labels[sel] = start + compact
        start += int(compact.max()) + 1
    return labels


class CoarseSpace(NamedTuple):
    """Static description of the aggregates: ``labels`` (n_d,) int, ``n_agg`` int, ``weight`` (n_d,)
    1/√(dipoles in the dipole's aggregate)."""

    labels: np.ndarray
    n_agg: int
    weight: np.ndarray


def coarse_space(labels: np.ndarray) -> CoarseSpace:
    """``CoarseSpace`` from aggregate labels (n_d,)."""
    counts = np.bincount(labels)
    return CoarseSpace(labels, int(counts.size), 1.0 / np.sqrt(counts[labels]))


def restrict(space: CoarseSpace, v):
    """Zᵀ v: (n_d, 3, ...) -> (n_agg, 3, ...)."""
    w = jnp.asarray(space.weight).reshape((-1,) + (1,) * (v.ndim - 1))
    return jax.ops.segment_sum(w * v, jnp.asarray(space.labels), num_segments=space.n_agg)


def prolong(space: CoarseSpace, c):
    """Z c: (n_agg, 3) -> (n_d, 3)."""
    return jnp.asarray(space.weight)[:, None] * c[jnp.asarray(space.labels)]


def coupling_on_aggregates(kernel_hat, space: CoarseSpace, shape, occupied):
    """K Z, the coupling applied to every coarse basis vector: (n_agg, n_d, 3, 3) complex, [J, i, a, b] =
    (K z_{J,b})_{i,a}, 1/m³ (Z dimensionless).

    One forward FFT of the aggregate's weighted indicator and six inverse FFTs (the symmetric components)
    per aggregate, under ``jax.lax.map`` so that only one aggregate's FFT arrays are alive at a time.
    """
    size = int(np.prod(shape))
    m = kernel_hat.shape[1:]
    occ = jnp.asarray(occupied)
    labels = jnp.asarray(space.labels)
    weight = jnp.asarray(space.weight)

    def column(j):
        ind = jnp.zeros(size, dtype=complex).at[occ].set(jnp.where(labels == j, weight, 0.0))
        ind_hat = jnp.fft.fftn(ind.reshape(shape), s=m)
        conv = jnp.fft.ifftn(kernel_hat * ind_hat[None], axes=(1, 2, 3))
        conv = conv[:, : shape[0], : shape[1], : shape[2]].reshape(6, size)[:, occ]  # (6, n_d)
        return conv[jnp.asarray(_INDEX)].transpose(2, 0, 1)  # (n_d, 3, 3)

    return jax.lax.map(column, jnp.arange(space.n_agg))


class TwoLevel(NamedTuple):
    """Data of the two-level preconditioner of one system (traced arrays).

    ``az``: (n_agg, n_d, 3, 3) A Z; ``lu``, ``piv``: LU factors of E = Zᵀ A Z, (3 n_agg, 3 n_agg) and
    (3 n_agg,); ``dinv``: (n_d, 3, 3) inverse Jacobi blocks.
    """

    az: jax.Array
    lu: jax.Array
    piv: jax.Array
    dinv: jax.Array


def two_level(kz, alpha_inv, dinv, space: CoarseSpace) -> TwoLevel:
    """A Z = α⁻¹ Z + K Z and the factorised E = Zᵀ A Z for one α⁻¹ (n_d,) (K Z from
    ``coupling_on_aggregates``, shared by the polarisations)."""
    n_agg = space.n_agg
    diag = (alpha_inv * jnp.asarray(space.weight))[:, None, None] * jnp.eye(3)  # (n_d, 3, 3)
    az = kz.at[jnp.asarray(space.labels), jnp.arange(diag.shape[0])].add(diag)
    # E[(I, a), (J, b)] = Σ_i z_I(i) (A z_{J, b})_{i, a}
    e = restrict(space, az.transpose(1, 2, 0, 3))  # (n_agg, 3, n_agg, 3)
    lu, piv = jax.scipy.linalg.lu_factor(e.reshape(3 * n_agg, 3 * n_agg))
    return TwoLevel(az, lu, piv, dinv)


def _coarse_solve(t: TwoLevel, c, trans=0):
    """E⁻¹ c (``trans`` 0) or E⁻ᵀ c (1) for c (n_agg, 3)."""
    return jax.scipy.linalg.lu_solve((t.lu, t.piv), c.reshape(-1), trans=trans).reshape(c.shape)


def _jacobi(dinv, v):
    return jnp.einsum("dab,db->da", dinv, v)


def apply(t: TwoLevel, space: CoarseSpace, r, *, kind: str):
    """M r for r (n_d, 3): kind "additive", "two-level" or "balancing" (module docstring)."""
    y = _coarse_solve(t, restrict(space, r))  # (n_agg, 3)
    q = prolong(space, y)
    if kind == "additive":
        return q + _jacobi(t.dinv, r)
    s = _jacobi(t.dinv, r - jnp.einsum("jdab,jb->da", t.az, y))
    if kind == "two-level":
        return q + s
    # balancing: also remove the coarse part of the smoothed correction, Q A s = Z E⁻¹ (A Z)ᵀ s
    return q + s - prolong(space, _coarse_solve(t, jnp.einsum("jdab,da->jb", t.az, s)))


def apply_transpose(t: TwoLevel, space: CoarseSpace, r, *, kind: str):
    """Mᵀ r for r (n_d, 3), the preconditioner of the adjoint system Aᵀ x = r (same kinds as ``apply``)."""
    dt = jnp.swapaxes(t.dinv, 1, 2)
    q = prolong(space, _coarse_solve(t, restrict(space, r), trans=1))
    if kind == "additive":
        return q + _jacobi(dt, r)
    if kind == "balancing":  # symmetric
        return apply(t, space, r, kind=kind)
    s = _jacobi(dt, r)  # (Q + D⁻¹ (I − A Q))ᵀ = Qᵀ + (I − Qᵀ Aᵀ) D⁻ᵀ, Qᵀ Aᵀ s = Z E⁻ᵀ (A Z)ᵀ s
    return q + s - prolong(space, _coarse_solve(t, jnp.einsum("jdab,da->jb", t.az, s), trans=1))


class Boxes(NamedTuple):
    """Static padding of the aggregates into equal boxes: ``members`` (n_agg, B) dipole indices (n_d for
    padding), ``ijk`` (n_d, 3) grid indices of the dipoles, B the largest aggregate."""

    members: np.ndarray
    ijk: np.ndarray


def boxes(space: CoarseSpace, shape, occupied) -> Boxes:
    """``Boxes`` of a coarse space on a grid of ``shape`` (nx, ny, nz) with ``occupied`` flat indices."""
    n_d = space.labels.size
    order = np.argsort(space.labels, kind="stable")
    counts = np.bincount(space.labels, minlength=space.n_agg)
    width = int(counts.max())
    members = np.full((space.n_agg, width), n_d, dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    slot = np.arange(n_d) - np.repeat(starts, counts)
    members[space.labels[order], slot] = order
    return Boxes(members, np.stack(np.unravel_index(occupied, shape), axis=1))


def local_inverse(kernel_hat, alpha_inv, bx: Boxes):
    """Inverse of A restricted to each box (exact near-field block), (n_agg, 3B, 3B); padding rows are
    identity. kernel_hat (6, M1, M2, M3) from ``invdesign._dda_operator``; alpha_inv (n_d,)."""
    m = kernel_hat.shape[1:]
    kern = jnp.fft.ifftn(kernel_hat, axes=(1, 2, 3))  # real-space K(i − j), circulant layout
    n_agg, width = bx.members.shape
    n_d = bx.ijk.shape[0]
    valid = bx.members < n_d
    ijk = np.concatenate([bx.ijk, np.zeros((1, 3), np.int64)])[bx.members]  # (n_agg, B, 3)
    disp = (ijk[:, :, None, :] - ijk[:, None, :, :]) % np.array(m)  # (n_agg, B, B, 3)
    pair = valid[:, :, None] & valid[:, None, :]
    comps = kern[:, disp[..., 0], disp[..., 1], disp[..., 2]]  # (6, n_agg, B, B)
    blk = comps[jnp.asarray(_INDEX)]  # (3, 3, n_agg, B, B)
    blk = jnp.where(jnp.asarray(pair), blk, 0.0).transpose(2, 3, 0, 4, 1)  # (n_agg, B, 3, B, 3)
    a_inv = jnp.concatenate([alpha_inv, jnp.ones(1, alpha_inv.dtype)])[jnp.asarray(bx.members)]
    eye = jnp.eye(width)[None, :, None, :, None] * jnp.eye(3)[None, None, :, None, :]
    blk = blk + a_inv[:, :, None, None, None] * eye  # K(0) holds the lattice self term (zero if free)
    return jnp.linalg.inv(blk.reshape(n_agg, 3 * width, 3 * width))


def apply_local(inv, bx: Boxes, r):
    """Block-diagonal M r for r (n_d, 3) with the boxes' inverses ``inv`` (n_agg, 3B, 3B)."""
    n_d = r.shape[0]
    n_agg, width = bx.members.shape
    rp = jnp.concatenate([r, jnp.zeros((1, 3), r.dtype)])[jnp.asarray(bx.members)].reshape(n_agg, 3 * width)
    out = jnp.einsum("jab,jb->ja", inv, rp).reshape(n_agg * width, 3)
    return jnp.zeros((n_d + 1, 3), r.dtype).at[jnp.asarray(bx.members.ravel())].set(out)[:n_d]
