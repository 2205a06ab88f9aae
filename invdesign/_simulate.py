"""From a design to spectra: the fast periodic coupled-dipole model, as a pure function and a front door.

Pipeline (one arrow per module): design → permittivities ε(λ) (``_materials``) → element
inverse polarizabilities (``_polarizability``) → dipoles, rods optionally resolved into chains
(``_chain``) → Ewald lattice Green's tensor (``_green``) → dense coupled-dipole solve (``_solve``) →
diffraction orders and zero-order Jones matrices (``_farfield``) → ``Response``.

Approximations of the fast model, all stated:
  * each element is one point dipole (or a chain of N for rods, ``ModelOptions.dipoles_per_rod``) with
    an ellipsoid-equivalent anisotropic polarizability and a long-wavelength correction
    (``ModelOptions.correction``); spheres use the exact Mie a1 dipole term;
  * environment "averaged" (default): the cell sits in a homogeneous medium of index
    sqrt((n_sup² + n_sub²)/2) (``Design.medium_index``): no Fresnel reflection from the substrate, no
    substrate-induced resonance shift beyond that average;
  * environment "interface" (``ModelOptions.environment``): the elements sit in the superstrate n1 above
    a planar interface with the substrate n2 at z = 0 (dipoles at mid-height, thickness/2). Polarizabilities,
    the direct lattice Green's tensor and the chain renormalisation use the homogeneous medium n1; the
    interface enters through the reflected lattice Green's tensor (each dipole's own image included),
    the Fresnel-reflected incident wave, and Fresnel transmission of every order (``invdesign._interface``).
    A point dipole at height h = thickness/2 sees its image like a charge concentrated at its centre,
    which overstates the image coupling of a rod much longer than its thickness: resolve rods into chains
    with spacing L/N no coarser than about the thickness (measured: a 150 × 50 × 20 nm gold rod on glass
    keeps no resonance in 500–1900 nm at N = 1 or 5 and has one near 1000 nm at N = 9);
  * magnetic dipoles and higher multipoles are neglected (valid for thin metal rods well below λ).
Incidence from the superstrate side (travelling towards -z); plane wave of unit amplitude at z = 0.
"""

import dataclasses
import math
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np

from . import _jaxsetup  # noqa: F401
from ._chain import chain_coupling, chain_offsets, intra_chain_correction, renormalise
from ._elements import effective_length, stack_elements
from ._errors import InvdesignError
from ._farfield import order_amplitudes
from ._geometry import pair_gaps
from ._interface import (
    DEFAULT_TOLERANCE,
    far_nodes,
    far_sums,
    incident_with_reflection,
    interface_matrix,
    make_interface_plan,
    order_fields,
)
from ._lattice import Lattice, make_ewald_plan
from ._materials.size_damping import (
    DEFAULT_COEFFICIENT,
    collision_increase_ev,
    drude_size_correction,
    free_electron_parameters,
)
from ._polarizability import inverse_polarizability
from ._solve import absorbed_fraction, interaction_matrix, plane_wave_at, solve_dipoles
from ._units import NM, ev_from_nm, k0_per_m

CORRECTIONS = ("radiative", "kelly", "moroz")
ENVIRONMENTS = ("averaged", "interface")


@dataclasses.dataclass(frozen=True)
class ModelOptions:
    """Choices of the fast model (static: changing one recompiles).

    Attributes:
      dipoles_per_rod: dipoles per rod chain (1 = a single point dipole per rod), an int ≥ 1, or
        "auto": per rod, the smallest odd N with L/N ≤ max(g, W) — dipole spacing no coarser than the
        larger of the smallest gap g the rod faces (periodic images included) and its width W — capped
        at 13 (``auto_chain_length``).
      correction: long-wavelength correction of the element polarizability: "radiative" (quasi-static
        plus radiative reaction), "kelly" or "moroz" (see ``invdesign._polarizability``).
      size_damping: if True, each metal element's free-electron damping rises by ħΔγ = A ħ v_F / L_eff
        with L_eff = 4V/S of that element (``invdesign._materials.size_damping``), so ε becomes per
        element and differentiable in its dimensions. Off by default (bulk ε for every element).
      size_damping_coefficient: the dimensionless surface-scattering factor A ≥ 0 (default 1).
      environment: "averaged" (default): the cell sits in a homogeneous medium of index
        sqrt((n_sup² + n_sub²)/2); "interface": the elements sit in the superstrate above a planar
        interface with the substrate at z = 0, with the reflected periodic Green's tensor and Fresnel
        plane waves (``invdesign._interface``).
      interface_tolerance: truncation tolerance of the interface's order sum, relative to the
        quasi-static self-image term, in (0, 1) (only used with environment "interface").
    """

    dipoles_per_rod: int | str = 1
    correction: str = "kelly"
    size_damping: bool = False
    size_damping_coefficient: float = DEFAULT_COEFFICIENT
    environment: str = "averaged"
    interface_tolerance: float = DEFAULT_TOLERANCE

    def __post_init__(self):
        ok_int = isinstance(self.dipoles_per_rod, int) and self.dipoles_per_rod >= 1
        if not (ok_int or self.dipoles_per_rod == "auto"):
            raise InvdesignError(
                f"model.dipoles_per_rod must be an integer ≥ 1 or \"auto\", got {self.dipoles_per_rod!r}")
        if self.correction not in CORRECTIONS:
            raise InvdesignError(f"model.correction must be one of {', '.join(CORRECTIONS)}, "
                                 f"got {self.correction!r}")
        if not isinstance(self.size_damping, bool):
            raise InvdesignError(f"model.size_damping must be true or false, got {self.size_damping!r}")
        a = self.size_damping_coefficient
        if isinstance(a, bool) or not isinstance(a, (int, float)) or not math.isfinite(a) or a < 0:
            raise InvdesignError("model.size_damping_coefficient (surface-scattering factor A, "
                                 f"dimensionless) must be a finite number >= 0, got {a!r}")
        if self.environment not in ENVIRONMENTS:
            raise InvdesignError(f"model.environment must be one of {', '.join(ENVIRONMENTS)}, "
                                 f"got {self.environment!r}")
        tol = self.interface_tolerance
        if isinstance(tol, bool) or not isinstance(tol, (int, float)) or not 0 < tol < 1:
            raise InvdesignError("model.interface_tolerance (relative truncation error of the interface's "
                                 f"order sum) must be a number in (0, 1), got {tol!r}")


@dataclasses.dataclass(frozen=True)
class Incidence:
    """Incident plane wave, coming from the superstrate.

    Attributes:
      polar_deg: angle from the surface normal, degrees (0 = normal incidence).
      azimuth_deg: azimuth of the plane of incidence from +x, degrees.

    Jones basis: input column 0 is p (TM), column 1 is s (TE), with s = (-sin φ, cos φ, 0) and
    p = k̂ × s for the incident and transmitted waves, p = s × k̂ for the reflected wave. At normal
    incidence with φ = 0 these are exactly x and y, so t and r are the usual x–y Jones matrices.
    """

    polar_deg: float = 0.0
    azimuth_deg: float = 0.0


class Orders(NamedTuple):
    """Diffraction orders (m1, m2) that propagate somewhere in the band.

    Fields: indices (n_o, 2) int; propagating (n_wl, n_o) bool; transmitted and reflected power
    fractions (n_wl, n_o, 2) for the two input polarisations; amplitudes (n_wl, n_o, 3, 2) complex lab-
    frame field vectors (scattered part; the zero-order transmitted amplitude excludes the incident wave).
    """

    indices: jax.Array
    propagating: jax.Array
    transmitted_power: jax.Array
    reflected_power: jax.Array
    transmitted_amplitude: jax.Array
    reflected_amplitude: jax.Array


class Response(NamedTuple):
    """Spectral response of a cell. n_wl wavelengths; input polarisation index last where it appears.

    Fields:
      wavelengths_nm: (n_wl,).
      t, r: (n_wl, 2, 2) complex zero-order Jones matrices [output, input] in the (x, y) basis at normal
        incidence (p, s in general), transmitted into the substrate side and reflected to the superstrate.
      transmittance, reflectance: (n_wl, 2) total power fractions over all propagating orders, for
        x- (p-) and y- (s-) polarised input.
      absorbance: (n_wl, 2) absorbed fraction from the dipoles' work.
      orders: ``Orders``.
      chain_residual: (n_wl,) worst chain-renormalisation residual (0 without chains).
    """

    wavelengths_nm: jax.Array
    t: jax.Array
    r: jax.Array
    transmittance: jax.Array
    reflectance: jax.Array
    absorbance: jax.Array
    orders: Orders
    chain_residual: jax.Array


@dataclasses.dataclass(frozen=True)
class Problem:
    """Everything about a simulation except the differentiable cell parameters (built by ``prepare``)."""

    wavelengths_nm: np.ndarray
    eps: dict  # material name -> (n_wl,) complex permittivity
    medium_index: float
    incidence: Incidence
    model: ModelOptions
    plan: object
    order_indices: np.ndarray
    chain_lengths: tuple  # dipoles per element (1 for disks and spheres), static
    shapes: tuple  # element shape names, static
    # material name -> (Drude weight eV², ħγ eV, v_F m/s) when model.size_damping (zeros: no free electrons)
    free_electron: dict = dataclasses.field(default_factory=dict)
    # ``InterfacePlan`` in the "interface" environment, None in the averaged one
    interface: object = None


def prepare(design, wavelengths_nm, *, model: ModelOptions = ModelOptions(),
            incidence: Incidence = Incidence(), period_scales=(1.0,), ewald_scale: float = 1.0) -> Problem:
    """Check inputs and precompute the static part of a simulation (materials, truncation, orders).

    Raises ``InvdesignError`` (before any heavy work) for wavelengths outside a material's data or a
    non-positive wavelength. ``period_scales``: lattice scale factors the Ewald truncation must cover
    (the optimiser passes its period bounds). ``ewald_scale``: the Ewald split parameter's scale the
    plan is cut for (``make_ewald_plan(e_scale=...)``; the verification solver's kernel table uses
    ``invdesign._green_grid.GRID_EWALD_SCALE``).
    """
    wl = np.atleast_1d(np.asarray(wavelengths_nm, dtype=float))
    if wl.ndim != 1 or wl.size == 0 or not np.all(np.isfinite(wl)) or np.any(wl <= 0):
        raise InvdesignError("wavelengths must be a non-empty 1-D list of positive numbers in nm")
    used = sorted({e.material for e in design.elements})
    eps = {}
    for name in used:
        mat = design.material(name)
        mat.check_range(wl, where=f"elements of material '{name}'")
        eps[name] = np.asarray(mat.permittivity(jnp.asarray(wl)), dtype=complex)
    free = {name: free_electron_parameters(design.material(name)) or (0.0, 0.0, 0.0)
            for name in used} if model.size_damping else {}
    interface = model.environment == "interface"
    n_med = design.superstrate_index if interface else design.medium_index()
    k0_max = 2 * math.pi / (wl.min() * NM)
    k_max = k0_max * n_med
    p = design.params
    a1, a2 = np.asarray(p.a1, float), np.asarray(p.a2, float)
    sin_t = math.sin(math.radians(incidence.polar_deg))
    kpar_max = k_max * abs(sin_t)
    r_max = 0.5 * (math.hypot(*a1) + math.hypot(*a2))  # bound on wrapped in-cell separations
    plan = make_ewald_plan(a1, a2, k_max, r_max_nm=r_max, kpar_max_per_m=kpar_max, scales=period_scales,
                           e_scale=ewald_scale)
    iplan = None
    if interface:
        heights = [float(e.height()) for e in design.elements]
        iplan = make_interface_plan(a1, a2, design.superstrate_index, design.substrate_index, k0_max,
                                    min(heights) if heights else 1.0, kpar_max_per_m=kpar_max,
                                    tolerance=model.interface_tolerance, scales=period_scales)
        k_max = k0_max * max(design.superstrate_index, design.substrate_index)  # orders of both media
    orders = _propagating_orders(a1, a2, k_max, kpar_max, period_scales)
    return Problem(wl, eps, n_med, incidence, model, plan, orders, chain_lengths(design, model),
                   tuple(e.shape for e in design.elements), free, iplan)


#: the largest chain the automatic rule picks
AUTO_MAX_DIPOLES = 13


def auto_chain_length(length_nm: float, width_nm: float, gap_nm: float) -> int:
    """Smallest odd N with length/N ≤ max(gap, width), capped at ``AUTO_MAX_DIPOLES``."""
    scale = max(gap_nm, width_nm)
    n = max(1, math.ceil(length_nm / scale - 1e-9))
    n = n + 1 if n % 2 == 0 else n
    return min(n, AUTO_MAX_DIPOLES)


def chain_lengths(design, model: ModelOptions) -> tuple:
    """Dipoles per element for a design under ``model`` (rods only are resolved into chains)."""
    els = design.elements
    if model.dipoles_per_rod != "auto":
        return tuple(model.dipoles_per_rod if e.shape == "rod" else 1 for e in els)
    p = design.params
    smallest = [math.inf] * len(els)
    for i, j, gap in pair_gaps(els, np.asarray(p.a1), np.asarray(p.a2)):
        smallest[i] = min(smallest[i], gap)
        smallest[j] = min(smallest[j], gap)
    return tuple(auto_chain_length(float(e.length), float(e.width), g) if e.shape == "rod" else 1
                 for e, g in zip(els, smallest, strict=True))


def _propagating_orders(a1, a2, k_max, kpar_max, scales) -> np.ndarray:
    found = {(0, 0)}
    for s in scales:
        m = np.stack([a1, a2], axis=1) * NM * s
        b = 2 * math.pi * np.linalg.inv(m).T
        nmax = int(math.ceil((k_max + kpar_max) * max(np.linalg.norm(np.linalg.inv(b), axis=1)))) + 1
        for i in range(-nmax, nmax + 1):
            for j in range(-nmax, nmax + 1):
                if np.linalg.norm(b @ np.array([i, j])) <= k_max + kpar_max:
                    found.add((i, j))
    return np.array(sorted(found, key=lambda t: (abs(t[0]) + abs(t[1]), t)), dtype=np.int64)


def _dipole_order(problem: Problem):
    """Element index and chain length of each dipole, in the order ``_dipoles`` emits them."""
    groups: dict = {}
    for idx, (e, n) in enumerate(zip(problem.shapes, problem.chain_lengths, strict=True)):
        groups.setdefault((e, n), []).append(idx)
    return [(idx, n) for (_, n), members in groups.items() for idx in members for _ in range(n)]


def _same_chain_pairs(problem: Problem):
    """Static (i, j), i < j, dipole pairs that belong to the same rod chain."""
    owner = np.array([idx for idx, n in _dipole_order(problem)] or [0])
    chained = np.array([n > 1 for _, n in _dipole_order(problem)] or [False])
    i, j = np.triu_indices(len(owner), 1)
    keep = (owner[i] == owner[j]) & chained[i]
    return i[keep], j[keep]


def _element_eps(element, eps_bulk, free, problem: Problem):
    """ε (n_wl,) of one element: the bulk value, plus the size-damping change when it is switched on.

    ``free`` is (Drude weight eV², ħγ eV, v_F m/s), zeros for a material without free electrons.
    """
    if not problem.model.size_damping:
        return eps_bulk
    energy = ev_from_nm(jnp.asarray(problem.wavelengths_nm))
    dg = collision_increase_ev(effective_length(element), free[2], problem.model.size_damping_coefficient)
    return eps_bulk + drude_size_correction(energy, free[0], free[1], dg)


def _dipoles(params, problem: Problem, k):
    """Positions (n_d, 3) m, Λ (n_wl, n_d, 3), axes (n_d, 3, 3) and chain residual (n_wl,).

    Elements of the same shape and chain length are evaluated together under ``jax.vmap`` (one trace
    per group keeps compile time flat in the number of elements).
    """
    eps_m = problem.medium_index**2
    groups: dict = {}
    for e, n in zip(params.elements, problem.chain_lengths, strict=True):
        groups.setdefault((e.shape, n), []).append(e)
    pos, lams, axes, resid = [], [], [], []
    for (_, n), elems in groups.items():
        stacked = stack_elements(elems)
        eps = jnp.stack([jnp.asarray(problem.eps[e.material]) for e in elems])  # (n_g, n_wl)
        free = jnp.array([problem.free_electron.get(e.material, (0.0, 0.0, 0.0)) for e in elems])

        def lam_of(el, ep, fe):
            ep = _element_eps(el, ep, fe, problem)
            return inverse_polarizability(el, ep, eps_m, k, correction=problem.model.correction)[0]

        lam = jax.vmap(lam_of)(stacked, eps, free)  # (n_g, n_wl, 3)
        rot = jax.vmap(lambda el: el.axes())(stacked)  # (n_g, 3, 3)
        centre = jnp.stack([stacked.center[:, 0], stacked.center[:, 1],
                            jax.vmap(lambda el: el.height())(stacked)], axis=1) * NM  # (n_g, 3)
        if n == 1:
            pos.append(centre)
            lams.append(jnp.swapaxes(lam, 0, 1))
            axes.append(rot)
            continue
        length = stacked.length * NM  # (n_g,)
        lam_c, res = jax.vmap(lambda lr, ln, n=n: renormalise(lr, chain_coupling(n, ln, k)))(lam, length)
        offsets = jax.vmap(lambda ln, n=n: chain_offsets(n, ln))(length)  # (n_g, n)
        pos.append((centre[:, None] + offsets[..., None] * rot[:, None, :, 0]).reshape(-1, 3))
        lams.append(jnp.swapaxes(jnp.repeat(lam_c, n, axis=0), 0, 1))
        axes.append(jnp.repeat(rot, n, axis=0))
        resid.append(jnp.max(res, axis=(0, 2)))
    residual = jnp.max(jnp.stack(resid), axis=0) if resid else jnp.zeros(k.shape)
    return jnp.concatenate(pos), jnp.concatenate(lams, axis=1), jnp.concatenate(axes), residual


def response_from_params(params, problem: Problem) -> Response:
    """The model as a pure function of the cell parameters: jit- and grad-compatible.

    Args:
      params: ``CellParams`` (nm), the differentiable pytree.
      problem: static ``Problem`` from ``prepare`` (closed over, never traced).
    """
    wl = jnp.asarray(problem.wavelengths_nm)
    k = k0_per_m(wl) * problem.medium_index  # (n_wl,)
    lattice = Lattice.from_nm(params.a1, params.a2)
    th = math.radians(problem.incidence.polar_deg)
    ph = math.radians(problem.incidence.azimuth_deg)
    s_vec = jnp.array([-math.sin(ph), math.cos(ph), 0.0])
    khat_in = jnp.array([math.sin(th) * math.cos(ph), math.sin(th) * math.sin(ph), -math.cos(th)])
    p_in = jnp.cross(khat_in, s_vec)
    pols = jnp.stack([p_in, s_vec]).astype(complex)  # (2, 3)
    positions, lam, axes, chain_res = _dipoles(params, problem, k)
    area = lattice.area()
    orders = jnp.asarray(problem.order_indices)

    n_d = positions.shape[0]
    pair_i, pair_j = _same_chain_pairs(problem)
    iplan = problem.interface
    fallback = jnp.array([math.cos(ph), math.sin(ph)])

    far = None
    if iplan is not None:
        # far orders of the interface's order sum: at a few k0 nodes, interpolated to every wavelength
        nodes, weights = far_nodes(problem.wavelengths_nm)
        kpar_dir = problem.medium_index * khat_in[:2]
        at_nodes = far_sums(positions, nodes, kpar_dir, lattice, iplan, fallback)
        far = jnp.einsum("wc,cij->wij", weights, at_nodes)

    def system(k1, lam1, kpar, far1):
        if iplan is None:
            mat = interaction_matrix(positions, lam1, axes, k1, kpar, lattice, problem.plan)
        else:
            mat = interface_matrix(positions, lam1, axes, k1 / iplan.n1, kpar, lattice, problem.plan, iplan,
                                   fallback, far=far1)
        if pair_i.size:
            corr = intra_chain_correction(positions, axes, pair_i, pair_j, k1)
            blocks = jnp.zeros((n_d, n_d, 3, 3)).at[pair_i, pair_j].set(corr).at[pair_j, pair_i].set(corr)
            mat = mat + blocks.transpose(0, 2, 1, 3).reshape(3 * n_d, 3 * n_d)
        return mat

    def one(args):
        k1, lam1, far1 = args
        kvec = k1 * khat_in
        kpar = kvec[:2]
        mat = system(k1, lam1, kpar, far1)
        if iplan is not None:
            return _interface_outputs(mat, positions, lam1, axes, k1, kpar, lattice, orders, iplan, pols,
                                      fallback, math.cos(th), area)
        p = solve_dipoles(mat, plane_wave_at(positions, kvec, pols))
        trans, refl, kz, prop = order_amplitudes(p, positions, k1, kpar, lattice, orders)
        kz_in = k1 * math.cos(th)
        t_pow = jnp.sum(jnp.abs(trans) ** 2, axis=-1) * kz[None] / kz_in
        # zero order: add the incident wave to the forward scattered amplitude
        t_pow = t_pow.at[:, 0].set(jnp.sum(jnp.abs(trans[:, 0] + pols) ** 2, axis=-1))
        r_pow = jnp.sum(jnp.abs(refl) ** 2, axis=-1) * kz[None] / kz_in
        khat_r = jnp.array([khat_in[0], khat_in[1], -khat_in[2]])
        p_r = jnp.cross(s_vec, khat_r)
        out_t = jnp.stack([p_in, s_vec])
        out_r = jnp.stack([p_r, s_vec])
        t0 = jnp.einsum("oa,na->on", out_t, trans[:, 0] + pols)
        r0 = jnp.einsum("oa,na->on", out_r, refl[:, 0])
        absorb = absorbed_fraction(p, lam1, axes, k1, area) / math.cos(th)  # per incident flux A cos θ
        return (t0, r0, t_pow.T, r_pow.T, absorb, prop,
                trans.transpose(1, 2, 0), refl.transpose(1, 2, 0))

    t0, r0, t_pow, r_pow, absorb, prop, t_amp, r_amp = jax.lax.map(one, (k, lam, far))
    return Response(
        wavelengths_nm=wl, t=t0, r=r0,
        transmittance=jnp.sum(t_pow, axis=1), reflectance=jnp.sum(r_pow, axis=1), absorbance=absorb,
        orders=Orders(orders, prop, t_pow, r_pow, t_amp, r_amp), chain_residual=chain_res,
    )


def _interface_outputs(mat, positions, lam1, axes, k1, kpar, lattice, orders, iplan, pols, fallback, cos_in,
                       area):
    """Solve and project one wavelength in the interface environment (same tuple as the averaged path).

    Jones normalisation: t is flux-normalised, t = (ê_out · E_t) sqrt(k_z2 / k_z1,in) (k_z in each medium,
    i.e. n cos θ), so |t_ij|² is the power fraction in output polarisation i; r needs no factor. Power per
    order: |E|² k_z2 / k_z1,in below, |E|² k_z1 / k_z1,in above. Absorbance: the dipoles' work over the
    incident flux through one cell, (k1 / (A cos θ)) Σ (-Im Λ) |p̃|².
    """
    k0 = k1 / iplan.n1
    p = solve_dipoles(mat, incident_with_reflection(positions, k0, kpar, iplan, pols, fallback))
    f = order_fields(p, positions, k0, kpar, lattice, orders, iplan, fallback)
    r_s, r_p, t_s, t_p = (c[0] for c in f["fresnel"])
    bare_t = jnp.stack([t_p * f["p_t"][0], t_s * f["s"][0]])  # bare interface, (p, s) input
    bare_r = jnp.stack([r_p * f["p_up"][0], r_s * f["s"][0]])
    trans = f["trans"].at[:, 0].add(bare_t)
    refl = f["refl"].at[:, 0].add(bare_r)
    trans = jnp.where(f["prop2"][None, :, None], trans, 0.0)
    refl = jnp.where(f["prop1"][None, :, None], refl, 0.0)
    kz_in = k1 * cos_in
    kz1 = jnp.where(f["prop1"], jnp.real(f["kz1"]), 0.0)
    kz2 = jnp.where(f["prop2"], jnp.real(f["kz2"]), 0.0)
    t_pow = jnp.sum(jnp.abs(trans) ** 2, axis=-1) * kz2[None] / kz_in
    r_pow = jnp.sum(jnp.abs(refl) ** 2, axis=-1) * kz1[None] / kz_in
    out_t = jnp.stack([f["p_t"][0], f["s"][0]])
    out_r = jnp.stack([-f["p_up"][0], f["s"][0]])  # p_r = ŝ × k̂_r, as in the averaged environment
    flux = jnp.where(f["prop2"][0], jnp.sqrt(jnp.where(f["prop2"][0], kz2[0], kz_in) / kz_in), 0.0)
    t0 = jnp.einsum("oa,na->on", out_t, trans[:, 0]) * flux
    r0 = jnp.einsum("oa,na->on", out_r, refl[:, 0])
    absorb = absorbed_fraction(p, lam1, axes, k1, area) / cos_in
    # amplitudes: the dipoles' scattered part only (the bare interface's specular waves excluded)
    t_amp = jnp.where(f["prop2"][None, :, None], f["trans"], 0.0)
    r_amp = jnp.where(f["prop1"][None, :, None], f["refl"], 0.0)
    return (t0, r0, t_pow.T, r_pow.T, absorb, f["prop1"] | f["prop2"],
            t_amp.transpose(1, 2, 0), r_amp.transpose(1, 2, 0))


def forward_function(design, wavelengths_nm, *, model: ModelOptions = ModelOptions(),
                     incidence: Incidence = Incidence(), period_scales=(1.0,)):
    """A jitted pure function params -> Response for the optimiser, and the design's starting params.

    Returns:
      (fn, params): ``fn(params: CellParams) -> Response`` (jit-compiled once per shape);
      ``params`` the design's ``CellParams``.
    """
    problem = prepare(design, wavelengths_nm, model=model, incidence=incidence, period_scales=period_scales)
    return jax.jit(lambda params: response_from_params(params, problem)), design.params


def simulate(design, wavelengths_nm, *, model: ModelOptions = ModelOptions(),
             incidence: Incidence = Incidence()) -> Response:
    """Spectra of a design over the given wavelengths (nm). See ``Response`` for shapes and conventions."""
    fn, params = forward_function(design, wavelengths_nm, model=model, incidence=incidence)
    return jax.tree_util.tree_map(np.asarray, fn(params))
