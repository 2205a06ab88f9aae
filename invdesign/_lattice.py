"""Two-dimensional Bravais lattices: direct and reciprocal vectors, and truncation plans for lattice sums.

Units: lattice vectors are in metres inside the physics (``Lattice``), nm at the edges. The lattice lies
in the x–y plane. Lattice vectors are pytree leaves so the optimiser can differentiate with respect to
the period; the *index sets* over which lattice sums run are static (``EwaldPlan``) so that a change of
period never retraces a jitted function.
"""

import dataclasses
import math
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np

#: how far the real-space and reciprocal Gaussians of the Ewald split are followed: terms smaller than
#: exp(-_EWALD_DECAY) relative to the leading term are dropped (exp(-36) ≈ 2e-16).
_EWALD_DECAY = 36.0
#: the splitting parameter is raised to k/(2·_EWALD_H) at short wavelengths so that the cancellation
#: between real-space terms stays below exp(_EWALD_H²) (about 5e2 for 2.5), i.e. 2–3 digits of float64.
_EWALD_H = 2.5


@partial(jax.tree_util.register_dataclass, data_fields=["a1", "a2"], meta_fields=[])
@dataclasses.dataclass(frozen=True)
class Lattice:
    """A 2D Bravais lattice in the x–y plane.

    Attributes:
      a1, a2: primitive vectors in metres, shape (2,) float64 each.
    """

    a1: jax.Array
    a2: jax.Array

    @classmethod
    def from_nm(cls, a1_nm, a2_nm) -> "Lattice":
        """Build from vectors in nm (the design-file unit)."""
        return cls(jnp.asarray(a1_nm, dtype=float) * 1e-9, jnp.asarray(a2_nm, dtype=float) * 1e-9)

    def matrix(self):
        """(2, 2) matrix whose columns are a1 and a2, metres."""
        return jnp.stack([self.a1, self.a2], axis=1)

    def area(self):
        """Unit-cell area |a1 × a2| in m², scalar."""
        return jnp.abs(self.a1[0] * self.a2[1] - self.a1[1] * self.a2[0])

    def reciprocal_matrix(self):
        """(2, 2) matrix whose columns b1, b2 satisfy a_i · b_j = 2π δ_ij, in 1/m."""
        return 2.0 * jnp.pi * jnp.linalg.inv(self.matrix()).T

    def points(self, indices):
        """Direct lattice points n1 a1 + n2 a2 for integer ``indices`` (n, 2); returns (n, 2) metres."""
        return jnp.asarray(indices, dtype=float) @ self.matrix().T

    def reciprocal_points(self, indices):
        """Reciprocal lattice vectors m1 b1 + m2 b2 for integer ``indices`` (n, 2); returns (n, 2) in 1/m."""
        return jnp.asarray(indices, dtype=float) @ self.reciprocal_matrix().T

    def ewald_parameter(self, k, scale: float = 1.0):
        """Ewald splitting parameter E in 1/m (scalar or broadcast with ``k``, the medium wavenumber).

        E = scale · max(sqrt(π/A), Re k / (2H)): the first balances real- and reciprocal-space
        convergence (Jordan, Richter & Sheng, J. Comput. Phys. 63, 222 (1986)); the second caps the
        cancellation between real-space terms, which grow like exp(k²/(4E²)). The sum does not depend on
        E; ``scale`` > 1 moves work from the real-space to the spectral sum (``invdesign._green_grid``,
        where the spectral sum is cheap), and the plan must be made with the same scale.
        """
        return scale * jnp.maximum(jnp.sqrt(jnp.pi / self.area()), jnp.real(k) / (2.0 * _EWALD_H))


@dataclasses.dataclass(frozen=True)
class EwaldPlan:
    """Static integer index sets for the two halves of an Ewald lattice sum.

    Attributes:
      direct: (n_s, 2) int array of (n1, n2) for real-space terms, the origin included.
      reciprocal: (n_g, 2) int array of (m1, m2) for spectral terms.
      e_scale: the split parameter's ``scale`` (``Lattice.ewald_parameter``) the sets were cut for; the
        sums use it.
    """

    direct: np.ndarray
    reciprocal: np.ndarray
    e_scale: float = 1.0

    def __hash__(self):
        return hash((self.direct.tobytes(), self.reciprocal.tobytes(), self.e_scale))

    def __eq__(self, other):
        return (
            isinstance(other, EwaldPlan)
            and np.array_equal(self.direct, other.direct)
            and np.array_equal(self.reciprocal, other.reciprocal)
            and self.e_scale == other.e_scale
        )


def _disk_indices(matrix: np.ndarray, radius: float, centre_shift: float = 0.0) -> np.ndarray:
    """All integer pairs n with |M n| ≤ radius + centre_shift, for a (2, 2) column-vector basis M."""
    inv = np.linalg.inv(matrix)
    # |n_i| ≤ |row_i(M⁻¹)| · |x| bounds every index inside the disk
    bound = [int(math.ceil(np.linalg.norm(inv[i]) * (radius + centre_shift))) + 1 for i in range(2)]
    n1, n2 = np.meshgrid(np.arange(-bound[0], bound[0] + 1), np.arange(-bound[1], bound[1] + 1))
    idx = np.stack([n1.ravel(), n2.ravel()], axis=1)
    keep = np.linalg.norm(idx @ matrix.T, axis=1) <= radius + centre_shift
    idx = idx[keep]
    order = np.lexsort((idx[:, 1], idx[:, 0], np.linalg.norm(idx @ matrix.T, axis=1)))
    return idx[order]


def make_ewald_plan(
    a1_nm, a2_nm, k_max_per_m: float, *, r_max_nm: float = 0.0, kpar_max_per_m: float = 0.0,
    z_max_nm: float = 0.0, scales=(1.0,), e_scale: float = 1.0,
) -> EwaldPlan:
    """Choose the Ewald truncation for a lattice and a band, so every dropped term is below ~2e-16.

    Args:
      a1_nm, a2_nm: primitive vectors in nm, shape (2,).
      k_max_per_m: the largest medium wavenumber in the band, 1/m.
      r_max_nm: largest in-plane displacement between two dipoles after wrapping into the cell around
        the origin, nm (widens real space); (|a1| + |a2|)/2 always suffices.
      kpar_max_per_m: largest in-plane Bloch wavenumber |k∥|, 1/m (widens reciprocal space).
      z_max_nm: largest |z| separation between dipoles, nm.
      scales: lattice scale factors the plan must also cover (an optimiser varying the period passes
        its bounds, e.g. (0.8, 1.0, 1.25)); the union of index sets is returned.
      e_scale: the ``scale`` of ``Lattice.ewald_parameter`` the sums are evaluated with (kept in the plan).

    Returns:
      An ``EwaldPlan``; a hashable, static object.
    """
    direct, recip = set(), set()
    for s in scales:
        m = np.stack([np.asarray(a1_nm, float), np.asarray(a2_nm, float)], axis=1) * 1e-9 * s
        area = abs(np.linalg.det(m))
        for k in (0.0, k_max_per_m):
            e = e_scale * max(math.sqrt(math.pi / area), k / (2.0 * _EWALD_H))
            r_cut = math.sqrt(k**2 / (4 * e**2) + _EWALD_DECAY) / e
            shift = r_max_nm * 1e-9 * s
            direct.update(map(tuple, _disk_indices(m, r_cut, shift)))
            kappa_cut = math.sqrt(k_max_per_m**2 + 4 * e**2 * _EWALD_DECAY)
            b = 2 * math.pi * np.linalg.inv(m).T
            recip.update(map(tuple, _disk_indices(b, kappa_cut, kpar_max_per_m)))
    del z_max_nm  # z separations only make the dropped terms smaller
    as_sorted = lambda s: np.array(sorted(s, key=lambda t: (abs(t[0]) + abs(t[1]), t)), dtype=np.int64)  # noqa: E731
    return EwaldPlan(direct=as_sorted(direct), reciprocal=as_sorted(recip), e_scale=float(e_scale))
