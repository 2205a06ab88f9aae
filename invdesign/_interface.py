"""A planar interface under the dipole lattice: Fresnel coefficients, the reflected periodic Green's tensor,
and plane waves through the interface.

Geometry: the dipoles sit in the superstrate (index n1, permittivity ε1 = n1², z > 0) above a planar
interface at z = 0 with the substrate (n2, ε2 = n2², z < 0); both real (lossless dielectrics).
Conventions as ``invdesign._green``: exp(-iωt), SI units inside (m, 1/m), reduced moments p̃ = p/(ε0 ε1),
so a dipole radiates E = k1² G p̃ with k1 = n1 k0.

Plane-wave basis of an order with in-plane wavevector κ (|κ| = κ), k_zj = sqrt(k_j² - κ²) with
Im k_zj ≥ 0 (evanescent orders decay away from the interface):

    ŝ = ẑ × κ̂,   p̂± = k̂± × ŝ = (∓k_z1 κ̂ + κ ẑ)/k1,   k̂± = (κ, ±k_z1)/k1   (superstrate, up/down),
    p̂_t = k̂_t × ŝ,  k̂_t = (κ, -k_z2)/k2                               (transmitted, substrate).

At κ = 0 the direction κ̂ is taken from the incidence azimuth (any choice gives the same dyadics there).
All dot products are bilinear (no conjugation), so p̂ stays a valid basis for evanescent orders:
ŝŝᵀ + p̂±p̂±ᵀ = I - k̂±k̂±ᵀ. With this basis the Fresnel coefficients are (Novotny & Hecht, Principles of
Nano-Optics, 2nd ed., §2.8.1 and ch. 10; Born & Wolf, Principles of Optics, §1.5.2)

    r_s = (k_z1 - k_z2)/(k_z1 + k_z2),            t_s = 2 k_z1/(k_z1 + k_z2),
    r_p = (ε2 k_z1 - ε1 k_z2)/(ε2 k_z1 + ε1 k_z2),  t_p = 2 n1 n2 k_z1/(ε2 k_z1 + ε1 k_z2),

(a down-going wave a_s ŝ + a_p p̂⁻ becomes r_s a_s ŝ + r_p a_p p̂⁺ up and t_s a_s ŝ + t_p a_p p̂_t down).

Reflected Green's tensor. Poisson's formula turns the lattice sum of the Weyl expansion of the free
dyadic into one plane wave per order (``invdesign._farfield``); each down-going order is reflected at
z = 0, giving (observation r_i, source r_j, both z > 0)

    G_R(r_i, r_j) = Σ_G (i / (2 A k_z1)) [r_s ŝŝᵀ + r_p p̂⁺p̂⁻ᵀ] e^{iκ·(ρ_i - ρ_j)} e^{i k_z1 (z_i + z_j)},

with κ = k∥ + G and A the cell area. Evanescent orders decay like e^{-κ (z_i + z_j)}, so the sum
converges, but slowly for dipoles close to the interface (z_i + z_j = 20 nm for two 20 nm films).

Quasi-static image subtraction. For κ → ∞, r_s → 0 and r_p → β = (ε2 - ε1)/(ε2 + ε1), and the order sum
tends to β times the spectral form of the *direct* lattice dyadic at the mirrored source, times the mirror
M = diag(-1, -1, 1) (the electrostatic image dipole, Novotny & Hecht ch. 10). Exactly, per order,

    (i / (2 A k_z1)) (I - k̂⁺k̂⁺ᵀ) M e^{...} = (i / (2 A k_z1)) [-ŝŝᵀ + p̂⁺p̂⁻ᵀ] e^{...},

whose sum over all orders is β G_L(ρ_i - ρ_j, z_i + z_j) M. So

    G_R = β G_L(ρ_i - ρ_j, z_i + z_j) M                                 (Ewald, ``lattice_dyadic``)
        + Σ_G (i / (2 A k_z1)) [(r_s + β) ŝŝᵀ + (r_p - β) p̂⁺p̂⁻ᵀ] e^{iκ·(ρ_i-ρ_j) + i k_z1 (z_i+z_j)}.

The remainder's bracket stays O(1) for large κ instead of growing like κ²/k1², so its sum is smaller
than the image term by about (k1 Z)² (Z = z_i + z_j). Each order is a rank-2 dyadic times
e^{iκ·ρ_i + i k_z1 z_i} · e^{-iκ·ρ_j + i k_z1 z_j}, so the whole (3 n_d)² matrix is two matrix products over
orders, with memory O(n_d · n_orders) instead of O(n_d² · n_orders).

Truncation (``make_interface_plan``). The orders dropped beyond |κ| > K contribute, to leading order,
k1² |β| e^{-K Z}/(4π Z) to k1² G_R (continuum estimate of the order sum), against the quasi-static
self-image term k1² G_R,zz ≈ β/(2π Z³) (= β/(16π h³), h = Z/2). Their ratio is (k1 Z)²/2 · e^{-KZ};
K is the smallest value making it ≤ ``tolerance`` for the smallest Z = 2 h_min of the design (pairs
further from the interface converge faster). Default tolerance 1e-6 (``DEFAULT_TOLERANCE``), checked in
``tests/test_interface.py`` by doubling K.

Cost. Orders with |κ| ≤ 3 max(k1, k2) + |k∥| (a few dozen) are summed at every wavelength; the far
orders (thousands for 10 nm heights) are summed at 6 Chebyshev nodes in k0 across the band and
interpolated (``far_nodes``: the far sum is analytic in k0 there), so their cost does not grow with
the number of wavelengths. The direct and image Ewald sums share one evaluation (``interface_matrix``).
Measured (``benchmarks/interface_speed.py``, 2 rods, 21 wavelengths, shared 2-core machine):
value-and-gradient 2.8× (N = 1) and 3.0× (N = 5) the averaged model.

Energy. For lossless media every order that is evanescent on both sides contributes a Hermitian block
(real r_s, r_p, real i/(2A k_z1) e^{i k_z1 Z}, Hermitian p̂⁺p̂⁻ᵀ), so the truncation never breaks energy
conservation; only orders propagating in one medium or both carry power, and they are all kept.

Where it stops holding: point dipoles at height h see the interface through their image only at the
dipole level; a real film touching the glass has its charge spread over its thickness, so the image
coupling of a rod whose thickness is comparable to its height (always: h = thickness/2) is approximate
(no multipole image terms). Rayleigh anomalies of either medium (κ = k1 or κ = k2) are singular as in
``invdesign._green``.
"""

import dataclasses
import math

import jax
import jax.numpy as jnp
import numpy as np

from ._green import lattice_dyadic, lattice_dyadic_pair
from ._lattice import _disk_indices

#: default tolerance of the image-subtracted order sum, relative to the quasi-static self-image term
DEFAULT_TOLERANCE = 1e-6
_MIRROR = jnp.diag(jnp.array([-1.0, -1.0, 1.0]))


#: the remainder sum is split at |κ| = _NEAR_FACTOR · max(k1, k2) + |k∥| (band maximum): nearer orders
#: are summed per wavelength, farther ones at ``_FAR_NODES`` Chebyshev nodes in k0 and interpolated
_NEAR_FACTOR = 3.0
_FAR_NODES = 6


@dataclasses.dataclass(frozen=True)
class InterfacePlan:
    """Static description of the interface environment (hashable; changing it recompiles).

    Attributes:
      n1, n2: superstrate and substrate refractive indices (real, ≥ 1).
      reciprocal: (n_g, 2) int orders (m1, m2) of the image-subtracted remainder sum.
      near: (n_g,) bool, the orders summed at every wavelength (|κ| up to a few k, where the Fresnel
        coefficients have their branch points); the others are far orders (``far_weights``).
      cutoff_per_m: the truncation K in 1/m (|k∥ + G| ≤ K at the design's period), for reports.
      tolerance: the tolerance K was chosen for (module docstring).
    """

    n1: float
    n2: float
    reciprocal: np.ndarray
    near: np.ndarray
    cutoff_per_m: float
    tolerance: float

    def _key(self):
        return (self.n1, self.n2, self.reciprocal.tobytes(), self.near.tobytes(), self.cutoff_per_m,
                self.tolerance)

    def __hash__(self):
        return hash(self._key())

    def __eq__(self, other):
        return isinstance(other, InterfacePlan) and self._key() == other._key()


def truncation_cutoff(k1_max: float, z_min_m: float, tolerance: float, k_floor: float) -> float:
    """K in 1/m with (k1 Z)²/2 · exp(-K Z) ≤ tolerance at Z = ``z_min_m``, and at least ``k_floor``."""
    est = math.log(max((k1_max * z_min_m) ** 2 / (2.0 * tolerance), 1.0)) / z_min_m
    return max(est, k_floor)


def make_interface_plan(a1_nm, a2_nm, n1: float, n2: float, k0_max_per_m: float, min_height_nm: float, *,
                        kpar_max_per_m: float = 0.0, tolerance: float = DEFAULT_TOLERANCE,
                        scales=(1.0,), cutoff_per_m: float | None = None) -> InterfacePlan:
    """Choose the orders of the remainder sum for a lattice, a band and the lowest dipole height.

    Args:
      a1_nm, a2_nm: primitive vectors, nm, shape (2,).
      n1, n2: superstrate and substrate indices.
      k0_max_per_m: largest vacuum wavenumber of the band, 1/m.
      min_height_nm: smallest dipole height above the interface, nm (> 0).
      kpar_max_per_m: largest in-plane Bloch wavenumber, 1/m.
      tolerance: dropped-term bound relative to the self-image term (module docstring), in (0, 1).
      scales: lattice scale factors the index set must cover (union over them).
      cutoff_per_m: override K (tests use it to double the truncation).
    """
    if not (0.0 < tolerance < 1.0):
        raise ValueError(f"interface tolerance must lie in (0, 1), got {tolerance!r}")
    if not min_height_nm > 0:
        raise ValueError(f"dipoles must sit above the interface (height > 0 nm), got {min_height_nm!r}")
    k_floor = 2.0 * k0_max_per_m * max(n1, n2) + kpar_max_per_m  # every propagating order, with margin
    if cutoff_per_m is None:
        cutoff_per_m = truncation_cutoff(k0_max_per_m * n1, 2.0 * min_height_nm * 1e-9, tolerance, k_floor)
    found, near = set(), set()
    k_near = _NEAR_FACTOR * k0_max_per_m * max(n1, n2)
    for s in scales:
        m = np.stack([np.asarray(a1_nm, float), np.asarray(a2_nm, float)], axis=1) * 1e-9 * s
        b = 2 * math.pi * np.linalg.inv(m).T
        found.update(map(tuple, _disk_indices(b, cutoff_per_m, kpar_max_per_m)))
        near.update(map(tuple, _disk_indices(b, k_near, kpar_max_per_m)))
    found |= near
    idx = np.array(sorted(found, key=lambda t: (abs(t[0]) + abs(t[1]), t)), dtype=np.int64)
    is_near = np.array([tuple(t) in near for t in idx], dtype=bool)
    return InterfacePlan(float(n1), float(n2), idx, is_near, float(cutoff_per_m), float(tolerance))


def far_nodes(wavelengths_nm) -> tuple:
    """Vacuum wavenumbers (1/m) at which the far-order sum is evaluated, and (n_wl, n_nodes) weights.

    Chebyshev nodes of the first kind in k0 over the band; the weights are the Lagrange interpolation
    weights of each wavelength's k0. With ``_FAR_NODES`` or fewer wavelengths the nodes are the band's
    own k0 (weights = identity: no interpolation). The far sum is analytic in k0 across the band: its
    nearest singularities are the branch points |κ| = n k0 of orders with |κ| ≥ 3 max(k1, k2), at least
    ~3× beyond the band edge, so the interpolation error falls like ρ^-6 with ρ ≳ 10 (≲ 1e-6 of the far
    sum, itself ≲ 1e-2 of the self-image term).
    """
    k0 = 2 * math.pi / (np.asarray(wavelengths_nm, float) * 1e-9)
    if k0.size <= _FAR_NODES:
        return k0, np.eye(k0.size)
    lo, hi = k0.min(), k0.max()
    j = np.arange(_FAR_NODES)
    nodes = 0.5 * (lo + hi) + 0.5 * (hi - lo) * np.cos((2 * j + 1) * np.pi / (2 * _FAR_NODES))
    diff = k0[:, None] - nodes[None, :]
    weights = np.ones((k0.size, _FAR_NODES))
    for a in range(_FAR_NODES):
        for b in range(_FAR_NODES):
            if a != b:
                weights[:, a] *= diff[:, b] / (nodes[a] - nodes[b])
    return nodes, weights


def fresnel(kz1, kz2, eps1, eps2):
    """Fresnel coefficients (r_s, r_p, t_s, t_p) in the basis of the module docstring (broadcasting)."""
    n12 = jnp.sqrt(eps1 * eps2)
    den_s = kz1 + kz2
    den_p = eps2 * kz1 + eps1 * kz2
    return ((kz1 - kz2) / den_s, (eps2 * kz1 - eps1 * kz2) / den_p,
            2 * kz1 / den_s, 2 * n12 * kz1 / den_p)


def kz_of(k, kappa):
    """k_z = sqrt(k² - |κ|²) with Im k_z ≥ 0, complex (..., ) for κ (..., 2)."""
    return jnp.sqrt(k**2 - jnp.sum(kappa**2, axis=-1) + 0j)


def plane_basis(kappa, kz1, k1, kz2, k2, fallback):
    """ŝ, p̂⁺, p̂⁻, p̂_t (each (..., 3), complex) for in-plane wavevectors κ (..., 2).

    ``fallback``: (2,) unit in-plane direction used for κ̂ where |κ| is (numerically) zero; the norm is
    masked so the gradient stays finite there.
    """
    q2 = jnp.sum(kappa**2, axis=-1)
    tiny = q2 <= (1e-12 * k1) ** 2
    q = jnp.sqrt(jnp.where(tiny, 1.0, q2))
    khat = jnp.where(tiny[..., None], fallback, kappa / q[..., None])
    q = jnp.where(tiny, 0.0, q)
    zeros = jnp.zeros(q.shape)
    s = jnp.stack([-khat[..., 1], khat[..., 0], zeros], axis=-1).astype(complex)

    def p_vec(kz, k, sign):
        return jnp.concatenate([(sign * kz / k)[..., None] * khat, (q / k)[..., None] + 0j], axis=-1)

    return s, p_vec(kz1, k1, -1.0), p_vec(kz1, k1, 1.0), p_vec(kz2, k2, 1.0)


def reflected_coupling(positions, k0, kpar, lattice, ewald_plan, plan: InterfacePlan, fallback, far=None):
    """k1² G_R as a (3 n_d, 3 n_d) matrix (rows: observation dipole i, axis a; columns: source j, b).

    Args:
      positions: (n_d, 3) dipole positions, metres, all z > 0.
      k0: vacuum wavenumber, 1/m, scalar. kpar: (2,) Bloch wavevector, 1/m.
      lattice: ``Lattice``; ewald_plan: ``EwaldPlan`` for the medium k1 = n1 k0 (image term).
      plan: ``InterfacePlan``. fallback: (2,) in-plane direction for κ = 0.
      far: the far-order part of the remainder at this k0 (from ``far_sums``, interpolated), or None to
        sum every order here.

    Returns:
      complex128 (3 n_d, 3 n_d), 1/m³ (k1² G_R, the term subtracted from the coupled-dipole matrix).
    """
    n_d = positions.shape[0]
    eps1, eps2 = plan.n1**2, plan.n2**2
    k1 = plan.n1 * k0
    beta = (eps2 - eps1) / (eps2 + eps1)
    image = beta * _image_blocks(positions, k1, kpar, lattice, ewald_plan)  # (n_d, n_d, 3, 3)
    image = image.transpose(0, 2, 1, 3).reshape(3 * n_d, 3 * n_d)
    if far is None:
        return k1**2 * image + remainder_sum(positions, k0, kpar, lattice, plan.reciprocal, plan, fallback)
    near = plan.reciprocal[plan.near]
    return k1**2 * image + remainder_sum(positions, k0, kpar, lattice, near, plan, fallback) + far


def far_sums(positions, k0_nodes, kpar_dir, lattice, plan: InterfacePlan, fallback):
    """The far-order remainder at each node k0: (n_nodes, 3 n_d, 3 n_d); k∥ = k0 · ``kpar_dir`` (2,)."""
    far = plan.reciprocal[~plan.near]
    one = lambda k: remainder_sum(positions, k, k * kpar_dir, lattice, far, plan, fallback)  # noqa: E731
    return jax.vmap(one)(jnp.asarray(k0_nodes))


def remainder_sum(positions, k0, kpar, lattice, indices, plan: InterfacePlan, fallback):
    """k1² × the image-subtracted order sum over ``indices`` (n, 2): (3 n_d, 3 n_d) complex, 1/m³."""
    n_d = positions.shape[0]
    eps1, eps2 = plan.n1**2, plan.n2**2
    k1, k2 = plan.n1 * k0, plan.n2 * k0
    beta = (eps2 - eps1) / (eps2 + eps1)
    kappa = kpar + lattice.reciprocal_points(indices)  # (n_g, 2)
    kz1, kz2 = kz_of(k1, kappa), kz_of(k2, kappa)
    r_s, r_p, _, _ = fresnel(kz1, kz2, eps1, eps2)
    s, p_up, p_down, _ = plane_basis(kappa, kz1, k1, kz2, k2, fallback)
    c = 1j / (2 * lattice.area() * kz1)
    rho = positions[:, :2] @ kappa.T  # (n_d, n_g)
    z = positions[:, 2:3] * kz1  # (n_d, n_g)
    u_obs, u_src = jnp.exp(1j * rho + 1j * z), jnp.exp(-1j * rho + 1j * z)

    def rank(w, left, right):
        lm = (u_obs[:, None, :] * left.T[None]).reshape(3 * n_d, -1)
        rm = (u_src[:, None, :] * right.T[None]).reshape(3 * n_d, -1)
        return (lm * w) @ rm.T

    return k1**2 * (rank(c * (r_s + beta), s, s) + rank(c * (r_p - beta), p_up, p_down))


def _image_blocks(positions, k1, kpar, lattice, ewald_plan):
    """G_L(ρ_i - ρ_j, z_i + z_j) M per pair (n_d, n_d, 3, 3), via Ewald (mirror symmetry for j > i)."""
    disp, iu, ju = _image_displacements(positions)
    return _image_from(*lattice_dyadic_pair(disp, k1, kpar, lattice, ewald_plan), iu, ju, positions.shape[0])


def _image_displacements(positions):
    """Displacements r_i - mirror(r_j) for i ≤ j (diagonal included: z_i + z_j > 0, never a self term)."""
    iu, ju = np.triu_indices(positions.shape[0], 0)
    mirrored = positions * jnp.array([1.0, 1.0, -1.0])
    return positions[iu] - mirrored[ju], iu, ju


def _image_from(g_plus, g_minus, iu, ju, n_d):
    """Blocks G_L(·) M from ``lattice_dyadic_pair`` at ``_image_displacements``.

    G_L(ρ_j - ρ_i, z_i + z_j) = M G_L(-(ρ_i - ρ_j, z_i + z_j)) M (the lattice is mirror-symmetric in z), so
    the lower triangle is M G_minus.
    """
    blocks = jnp.zeros((n_d, n_d, 3, 3), dtype=complex)
    return blocks.at[ju, iu].set(_MIRROR @ g_minus).at[iu, ju].set(g_plus @ _MIRROR)


def interface_matrix(positions, lam, axes, k0, kpar, lattice, ewald_plan, plan: InterfacePlan, fallback,
                     far=None):
    """The coupled-dipole matrix with the interface: Σ δ_ij α_i⁻¹ - k1² [G_L(r_i - r_j) + G_R(r_i, r_j)].

    Equal to ``interaction_matrix(...) - reflected_coupling(...)`` (``invdesign._solve``), but the direct
    and the image Ewald sums share one evaluation (one graph to compile, one pass over the lattice
    terms). Arguments as ``interaction_matrix`` (medium k1 = n1 k0) and ``reflected_coupling``.
    """
    n_d = positions.shape[0]
    k1 = plan.n1 * k0
    eps1, eps2 = plan.n1**2, plan.n2**2
    beta = (eps2 - eps1) / (eps2 + eps1)
    alpha_inv = lam - 1j * k1**3 / (6 * jnp.pi)
    own = jnp.einsum("dab,db,dcb->dac", axes, alpha_inv, axes)
    g_self = lattice_dyadic(jnp.zeros(3), jnp.asarray(True), k1, kpar, lattice, ewald_plan)
    iu, ju = np.triu_indices(n_d, 1)
    disp_i, id_, jd = _image_displacements(positions)
    disp = jnp.concatenate([positions[iu] - positions[ju], disp_i])
    g_plus, g_minus = lattice_dyadic_pair(disp, k1, kpar, lattice, ewald_plan)
    n_p = iu.size
    coupling = jnp.broadcast_to(g_self, (n_d, n_d, 3, 3))
    coupling = coupling.at[iu, ju].set(g_plus[:n_p]).at[ju, iu].set(g_minus[:n_p])
    coupling = coupling + beta * _image_from(g_plus[n_p:], g_minus[n_p:], id_, jd, n_d)
    blocks = jnp.eye(n_d)[:, :, None, None] * own[:, None] - k1**2 * coupling
    mat = blocks.transpose(0, 2, 1, 3).reshape(3 * n_d, 3 * n_d)
    if far is None:
        return mat - remainder_sum(positions, k0, kpar, lattice, plan.reciprocal, plan, fallback)
    near = plan.reciprocal[plan.near]
    return mat - remainder_sum(positions, k0, kpar, lattice, near, plan, fallback) - far


def incident_with_reflection(positions, k0, kpar, plan: InterfacePlan, pols, fallback):
    """Incident plus Fresnel-reflected plane wave at each dipole, (n_in, n_d, 3) complex.

    ``pols``: (2, 3) incident unit vectors (p̂⁻, ŝ) of the zero order (unit amplitude at z = 0).
    """
    k1, k2 = plan.n1 * k0, plan.n2 * k0
    kz1, kz2 = kz_of(k1, kpar), kz_of(k2, kpar)
    r_s, r_p, _, _ = fresnel(kz1, kz2, plan.n1**2, plan.n2**2)
    s, p_up, p_down, _ = plane_basis(kpar, kz1, k1, kz2, k2, fallback)
    refl = jnp.stack([r_p * p_up, r_s * s])  # reflected vectors for (p, s) input
    down = jnp.exp(1j * positions[:, :2] @ kpar - 1j * positions[:, 2] * kz1)
    up = jnp.exp(1j * positions[:, :2] @ kpar + 1j * positions[:, 2] * kz1)
    return pols[:, None, :] * down[None, :, None] + refl[:, None, :] * up[None, :, None]


def order_fields(p, positions, k0, kpar, lattice, order_indices, plan: InterfacePlan, fallback):
    """Scattered plane-wave amplitudes of each order with the interface, per input polarisation.

    Args:
      p: (n_in, n_d, 3) reduced dipole moments. Others as ``reflected_coupling``.

    Returns:
      dict with ``trans`` (n_in, n_o, 3): field of exp(iκ·ρ - i k_z2 z) in the substrate (Fresnel-
      transmitted down-going dipole waves); ``refl`` (n_in, n_o, 3): field of exp(iκ·ρ + i k_z1 z) in the
      superstrate (direct up-going plus interface-reflected down-going waves); ``kz1``, ``kz2`` (n_o,)
      complex; ``prop1``, ``prop2`` (n_o,) bool (propagating in super-/substrate); the basis vectors
      ``s``, ``p_up``, ``p_down``, ``p_t`` (n_o, 3) and Fresnel coefficients ``fresnel`` (4 × (n_o,)).
      The bare interface's own specular waves are *not* included (the caller adds them to order 0).
    """
    k1, k2 = plan.n1 * k0, plan.n2 * k0
    kappa = kpar + lattice.reciprocal_points(order_indices)
    kz1, kz2 = kz_of(k1, kappa), kz_of(k2, kappa)
    coeffs = fresnel(kz1, kz2, plan.n1**2, plan.n2**2)
    r_s, r_p, t_s, t_p = coeffs
    s, p_up, p_down, p_t = plane_basis(kappa, kz1, k1, kz2, k2, fallback)
    pref = 1j * k1**2 / (2 * lattice.area() * kz1)
    rho = positions[:, :2] @ kappa.T
    zk = positions[:, 2:3] * kz1
    e_up, e_down = jnp.exp(-1j * rho - 1j * zk), jnp.exp(-1j * rho + 1j * zk)  # (n_d, n_o)

    def comp(vec, e):
        return pref * jnp.einsum("oa,nda,do->no", vec, p, e)  # (n_in, n_o)

    down_s, down_p = comp(s, e_down), comp(p_down, e_down)
    up_s, up_p = comp(s, e_up), comp(p_up, e_up)
    trans = (t_s * down_s)[..., None] * s + (t_p * down_p)[..., None] * p_t
    refl = (up_s + r_s * down_s)[..., None] * s + (up_p + r_p * down_p)[..., None] * p_up
    prop1 = jnp.sum(kappa**2, axis=-1) < k1**2
    prop2 = jnp.sum(kappa**2, axis=-1) < k2**2
    return {"trans": trans, "refl": refl, "kz1": kz1, "kz2": kz2, "prop1": prop1, "prop2": prop2,
            "s": s, "p_up": p_up, "p_down": p_down, "p_t": p_t, "fresnel": coeffs}
