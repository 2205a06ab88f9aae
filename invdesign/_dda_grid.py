"""Volume discretisation for the verification solver: the elements of a cell on one cubic dipole grid.

One regular grid of spacing d (nm) covers the bounding box of every element of the cell; a grid point
carries a dipole when it lies strictly inside an element (a voxel of side d centred on it is "in" when
its centre is). Unoccupied points stay in the grid so that the coupling is a discrete convolution
(``invdesign._dda_operator``); they are masked out.

Choices, all stated:
  * Spacing: the requested spacing is adjusted to d = T/round(T/d_req), T the thickness of the first
    element (a sphere's diameter), so that its film is represented exactly by round(T/d) dipole layers
    at z = (j + 1/2) d. Other thicknesses are represented as well as the grid allows (reported).
  * In-plane alignment: grid columns are placed relative to the first element's centre, at integer or
    half-integer multiples of d (half-integer when its axis-aligned extent spans an even number of d),
    so that a rod of length n·d along x or y is filled with exactly n columns and the point set is
    mirror-symmetric about that element's centre. Under a 90° rotation of a cell the grid rotates
    onto itself.
  * Volume: N_e d³ generally differs from the element's true volume V_e (staircased edges and disks,
    spheres); ``volume_ratio`` reports N_e d³ / V_e per element. ``invdesign._dda`` either keeps the
    grid volume (default) or gives each dipole of element e the volume V_e / N_e (see there).
Geometry conventions as ``invdesign._elements`` (substrate surface z = 0; lengths in nm).
"""

import dataclasses
import math

import numpy as np

from ._errors import InvdesignError

#: points closer than this fraction of d to an element's boundary count as outside (ties broken the same
#: way on every face, which keeps the discretised element as symmetric as the element itself)
_EDGE = 1e-6


@dataclasses.dataclass(frozen=True)
class DipoleGrid:
    """A cubic grid over the bounding box of a cell's elements (static, NumPy).

    Attributes:
      spacing_nm: grid spacing d actually used, nm.
      origin_nm: (3,) position of grid point (0, 0, 0), nm.
      element: (nx, ny, nz) int array, index of the element owning each point, -1 where empty.
      volume_ratio: (n_el,) N_e d³ / V_e per element (1 = exact volume).
      counts: (n_el,) dipoles per element N_e.
    """

    spacing_nm: float
    origin_nm: np.ndarray
    element: np.ndarray
    volume_ratio: np.ndarray
    counts: np.ndarray

    @property
    def shape(self) -> tuple:
        """(nx, ny, nz) grid points per axis."""
        return tuple(int(n) for n in self.element.shape)

    @property
    def occupied(self) -> np.ndarray:
        """Flat indices (n_d,) of the occupied points in C order over the grid."""
        return np.flatnonzero(self.element.ravel() >= 0)

    @property
    def owner(self) -> np.ndarray:
        """(n_d,) element index of each dipole, in the order of ``occupied``."""
        return self.element.ravel()[self.occupied]

    def positions_nm(self) -> np.ndarray:
        """(n_d, 3) positions of the dipoles, nm."""
        ijk = np.stack(np.unravel_index(self.occupied, self.shape), axis=1)
        return self.origin_nm + self.spacing_nm * ijk


def adjusted_spacing(elements, spacing_nm: float) -> float:
    """d = T/round(T/d_req) for the first element's thickness (sphere: diameter) T, nm."""
    if isinstance(spacing_nm, bool) or not isinstance(spacing_nm, (int, float)) \
            or not math.isfinite(spacing_nm) or spacing_nm <= 0:
        raise InvdesignError(f"dipole spacing must be a positive number of nm, got {spacing_nm!r}")
    if not elements:
        raise InvdesignError("the cell has no elements to discretise")
    height = _top(elements[0])
    return height / max(1, round(height / spacing_nm))


def _top(e) -> float:
    return 2.0 * float(e.radius) if e.shape == "sphere" else float(e.thickness)


def _half_extents(e) -> tuple:
    """Axis-aligned half extents (x, y) of the footprint, nm."""
    if e.shape == "rod":
        th = math.radians(float(e.angle_deg))
        c, s = abs(math.cos(th)), abs(math.sin(th))
        hl, hw = 0.5 * float(e.length), 0.5 * float(e.width)
        return hl * c + hw * s, hl * s + hw * c
    r = 0.5 * float(e.diameter) if e.shape == "disk" else float(e.radius)
    return r, r


def _inside(e, x, y, z, tol) -> np.ndarray:
    """Boolean mask of points (nm arrays of one shape) strictly inside element ``e``."""
    cx, cy = (float(v) for v in np.asarray(e.center))
    dx, dy = x - cx, y - cy
    if e.shape == "sphere":
        r = float(e.radius)
        return np.sqrt(dx**2 + dy**2 + (z - r) ** 2) < r - tol
    in_z = (z > tol) & (z < float(e.thickness) - tol)
    if e.shape == "disk":
        return in_z & (np.hypot(dx, dy) < 0.5 * float(e.diameter) - tol)
    th = math.radians(float(e.angle_deg))
    u = dx * math.cos(th) + dy * math.sin(th)
    v = -dx * math.sin(th) + dy * math.cos(th)
    return in_z & (np.abs(u) < 0.5 * float(e.length) - tol) & (np.abs(v) < 0.5 * float(e.width) - tol)


def _axis(lo, hi, anchor, offset, d) -> tuple:
    """Grid coordinates anchor + (i + offset) d covering [lo, hi]: (first coordinate, count)."""
    i0 = math.floor((lo - anchor) / d - offset)
    i1 = math.ceil((hi - anchor) / d - offset)
    return anchor + (i0 + offset) * d, i1 - i0 + 1


def discretise(elements, spacing_nm: float, *, max_points: int = 4_000_000) -> DipoleGrid:
    """Fill the elements of a cell with dipoles on one cubic grid.

    Args:
      elements: sequence of ``Rod`` / ``Disk`` / ``Sphere`` with concrete values (nm).
      spacing_nm: requested spacing, nm (adjusted, see the module docstring).
      max_points: refuse grids with more points than this (the FFT kernel needs about 800 bytes per
        grid point), before any heavy work.

    Returns:
      ``DipoleGrid``. Raises ``InvdesignError`` if an element receives no dipole, two elements claim a
      point, or the grid is too large.
    """
    d = adjusted_spacing(elements, spacing_nm)
    tol = _EDGE * d
    first = elements[0]
    anchor = np.asarray(first.center, dtype=float)
    ext0 = _half_extents(first)
    offsets = [0.5 if round(2 * h / d) % 2 == 0 else 0.0 for h in ext0]
    lo = np.min([np.asarray(e.center, float) - _half_extents(e) for e in elements], axis=0)
    hi = np.max([np.asarray(e.center, float) + _half_extents(e) for e in elements], axis=0)
    x0, nx = _axis(lo[0], hi[0], anchor[0], offsets[0], d)
    y0, ny = _axis(lo[1], hi[1], anchor[1], offsets[1], d)
    nz = max(1, math.ceil(max(_top(e) for e in elements) / d - _EDGE))
    if nx * ny * nz > max_points:
        raise InvdesignError(
            f"a dipole spacing of {d:.3g} nm needs a grid of {nx}×{ny}×{nz} = {nx * ny * nz} points, more "
            f"than the limit of {max_points}; use a coarser spacing or raise max_points")
    x = x0 + d * np.arange(nx)
    y = y0 + d * np.arange(ny)
    z = d * (np.arange(nz) + 0.5)
    gx, gy, gz = np.meshgrid(x, y, z, indexing="ij")
    owner = np.full((nx, ny, nz), -1, dtype=np.int64)
    counts = np.zeros(len(elements), dtype=np.int64)
    for idx, e in enumerate(elements):
        mask = _inside(e, gx, gy, gz, tol)
        if np.any(owner[mask] >= 0):
            raise InvdesignError(f"elements {int(owner[mask].max())} and {idx} share dipole grid points; "
                                 "they overlap, fix the design")
        owner[mask] = idx
        counts[idx] = int(mask.sum())
        if counts[idx] == 0:
            raise InvdesignError(f"element {idx} ({e.shape}) gets no dipole at spacing {d:.3g} nm; use a "
                                 "spacing smaller than its smallest dimension")
    volumes = np.array([float(e.volume()) for e in elements])
    return DipoleGrid(d, np.array([x0, y0, z[0]]), owner, counts * d**3 / volumes, counts)
