"""Verification solver: the volume discrete dipole approximation of a periodic cell (and of one particle).

An independent, much finer model than the fast one, to check it. Every element is filled with dipoles
on one cubic grid of spacing d (``invdesign._dda_grid``), each with the lattice-dispersion-relation (or
Clausius–Mossotti) polarizability of its material (``invdesign._dda_polarizability``). The dipoles of
the cell couple through the Ewald lattice Green's tensor, applied by FFT (``invdesign._dda_operator``),
and the system

    α_i⁻¹ p̃_i − k² Σ_j G_L(r_i − r_j) p̃_j = E_inc(r_i)

is solved by a preconditioned Krylov method (``invdesign._dda_krylov``; COCG where the matrix is complex
symmetric, GMRES otherwise) for each input polarisation. The far field
and the power fractions are computed from the dipoles exactly as the fast model does
(``invdesign._farfield.order_amplitudes``), so ``dda_response`` returns the same ``Response``.

Same physics as the fast model: the homogeneous medium of index ``Design.medium_index()`` (no
substrate), the same permittivities (``prepare``), incidence from the superstrate, exp(−iωt), unit
incident amplitude at z = 0; nm at this interface, SI inside. What differs is the resolution: no
equivalent-ellipsoid or chain approximations, only the discretisation error of the DDA, which falls with
d and is small for |m| k d ≲ 1 (``DdaInfo.mkd_max``) and a fine enough staircase of the shape.

Absorption: A = −(k/(A_cell cos θ)) Σ_i Im(Λ_i) |p̃_i|² with Λ = α⁻¹ + i k³/(6π), the dipoles' work minus their
own radiation — consistent with the LDR, whose radiative part is exactly −i k³/(6π), so R + T + A = 1
holds to the solver tolerance. Block-Jacobi preconditioning by default: each dipole's own 3 × 3 block
α_i⁻¹ I − k² G_L,self (two-level and near-field-block alternatives, measured slower for gold in the near
infrared, in ``invdesign._dda_precond``). Derivatives never pass through the preconditioner.

Volume (``DdaOptions.volume``): "grid" gives every dipole the cell volume d³ (the discretised element
has volume N_e d³, reported as ``DdaInfo.volume_ratio``); "exact" gives element e's dipoles the volume
V_e / N_e — the per-element form of the effective-volume practice of Draine & Flatau (J. Opt. Soc. Am.
A 11, 1491 (1994)), who choose d so that N d³ = V; here the positions stay on the common grid.
"""

import dataclasses
import math
import time
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np

from . import _jaxsetup  # noqa: F401
from ._dda_grid import DipoleGrid, discretise
from ._dda_krylov import METHODS, solve
from ._dda_operator import (
    displacement_table,
    fft_shape,
    free_kernel,
    lattice_image_mask,
    lattice_kernel,
    make_matvec,
)
from ._dda_polarizability import POLARIZABILITIES, dipole_lambda, ldr_s
from ._dda_precond import (
    PRECONDITIONERS,
    CoarseSpace,
    aggregates,
    apply,
    apply_local,
    apply_transpose,
    boxes,
    coarse_space,
    coupling_on_aggregates,
    local_inverse,
    two_level,
)
from ._errors import InvdesignError
from ._farfield import order_amplitudes
from ._green import lattice_dyadic
from ._green_grid import GRID_EWALD_SCALE
from ._lattice import Lattice
from ._simulate import Incidence, Orders, Response, prepare
from ._solve import plane_wave_at
from ._units import NM, k0_per_m

VOLUMES = ("grid", "exact")
#: the default incidence: normal, from the superstrate
NORMAL_INCIDENCE = Incidence()


class DdaConvergenceError(InvdesignError):
    """The iterative solve did not reach its tolerance (the message says where and what to change)."""


@dataclasses.dataclass(frozen=True)
class DdaOptions:
    """Choices of the verification solver (static).

    Attributes:
      polarizability: "ldr" (lattice dispersion relation, default) or "cm" (Clausius–Mossotti with
        radiative reaction).
      volume: "grid" (each dipole the volume d³) or "exact" (element e's dipoles V_e/N_e each).
      method: Krylov solver, "auto" (COCG where the system is complex symmetric — isolated targets and
        normal incidence — else GMRES), "gmres", "bicgstab" or "cocg" (``invdesign._dda_krylov``).
      tol: relative residual ‖b − A p̃‖/‖b‖ every solve must reach.
      restart: GMRES Krylov dimension per cycle. max_iterations: products with A allowed per solve.
      chunk: displacements per block when tabulating the Green's tensor (memory vs speed).
      max_points: largest grid (points) accepted before any work.
      preconditioner: "jacobi" (default: each dipole's own 3 × 3 block), "two-level" (block Jacobi plus a
        coarse correction on element segments), "additive" (the same coarse space added to block Jacobi)
        or "local" (exact inverse of each segment's near-field block); ``invdesign._dda_precond``. For gold
        in the near infrared the alternatives measured more products than block Jacobi (see there).
      segment_nm: side of the element segments (coarse space, local blocks), nm.
      warm_start: how many earlier wavelengths' solutions (same polarisation) each solve starts from,
        0 for a cold start from zero. The wavelengths are solved in increasing order and each solve
        begins at the least-residual combination of the last ``warm_start`` solutions
        (``invdesign._dda_krylov.least_residual_start``, that many extra products); the result is the
        same to the solver tolerance, only the number of products changes.
    """

    polarizability: str = "ldr"
    volume: str = "grid"
    method: str = "auto"
    tol: float = 1e-6
    restart: int = 40
    max_iterations: int = 20000
    chunk: int = 2048
    max_points: int = 4_000_000
    preconditioner: str = "jacobi"
    segment_nm: float = 20.0
    warm_start: int = 2

    def __post_init__(self):
        if self.preconditioner not in PRECONDITIONERS:
            raise InvdesignError(f"preconditioner must be one of {', '.join(PRECONDITIONERS)}, got "
                                 f"{self.preconditioner!r}")
        if isinstance(self.segment_nm, bool) or not isinstance(self.segment_nm, (int, float)) \
                or not math.isfinite(self.segment_nm) or self.segment_nm <= 0:
            raise InvdesignError(f"segment_nm must be a positive number of nm (e.g. 20), got "
                                 f"{self.segment_nm!r}")
        if self.polarizability not in POLARIZABILITIES:
            raise InvdesignError(f"polarizability must be one of {', '.join(POLARIZABILITIES)}, got "
                                 f"{self.polarizability!r}")
        if self.method != "auto" and self.method not in METHODS:
            raise InvdesignError(f"method must be auto or one of {', '.join(METHODS)}, got {self.method!r}")
        if self.volume not in VOLUMES:
            raise InvdesignError(f"volume must be one of {', '.join(VOLUMES)}, got {self.volume!r}")
        if not (isinstance(self.tol, float) and 0 < self.tol < 1):
            raise InvdesignError(f"tol must be a float between 0 and 1 (e.g. 1e-6), got {self.tol!r}")
        if isinstance(self.warm_start, bool) or not isinstance(self.warm_start, int) or self.warm_start < 0:
            raise InvdesignError(f"warm_start must be a whole number of earlier solutions (0 for a cold "
                                 f"start, e.g. 2), got {self.warm_start!r}")
        for name in ("restart", "max_iterations", "chunk", "max_points"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                raise InvdesignError(f"{name} must be a positive integer, got {v!r}")


class DdaInfo(NamedTuple):
    """What the verification solve did. n_wl wavelengths, 2 input polarisations (p/x, s/y).

    Fields:
      n_dipoles: dipoles per cell (int). spacing_nm: grid spacing used (float, nm).
      grid_shape: (nx, ny, nz) grid points; fft_shape: (M1, M2, M3) circulant size.
      counts: (n_el,) dipoles per element. volume_ratio: (n_el,) N_e d³ / V_e.
      mkd_max: (n_wl,) largest |m| k d over the materials (accuracy indicator, want ≲ 1).
      iterations: (n_wl, 2) products with the DDA matrix per solve.
      residual: (n_wl, 2) relative true residuals ‖b − A p̃‖/‖b‖.
      converged: bool, every solve reached ``tol``.
      seconds: (n_wl,) wall time per wavelength (the first solved, the shortest wavelength, includes
        compilation).
    """

    n_dipoles: int
    spacing_nm: float
    grid_shape: tuple
    fft_shape: tuple
    counts: np.ndarray
    volume_ratio: np.ndarray
    mkd_max: np.ndarray
    iterations: np.ndarray
    residual: np.ndarray
    converged: bool
    seconds: np.ndarray


@dataclasses.dataclass(frozen=True)
class DdaSetup:
    """Static part of a periodic verification solve (built by ``dda_setup``)."""

    grid: DipoleGrid
    problem: object  # the fast model's ``Problem`` (ε(λ), medium, Ewald plan, orders)
    kernel_plan: object  # ``EwaldPlan`` of the kernel table, cut for ``GRID_EWALD_SCALE``
    materials: tuple  # material names, in the order of the ε vector
    material_index: np.ndarray  # (n_d,) index into ``materials``
    volume_m3: np.ndarray  # (n_d,) dipole volumes
    exclude: np.ndarray  # (M1, M2, M3) displacements zeroed in the kernel
    options: DdaOptions
    coarse: CoarseSpace  # aggregates of the two-level preconditioner


def _dipole_volumes(grid: DipoleGrid, elements, volume: str) -> np.ndarray:
    d3 = (grid.spacing_nm * NM) ** 3
    if volume == "grid":
        return np.full(grid.owner.shape, d3)
    per_element = np.array([float(e.volume()) * NM**3 for e in elements]) / grid.counts
    return per_element[grid.owner]


def dda_setup(design, wavelengths_nm, spacing_nm, *, incidence: Incidence = NORMAL_INCIDENCE,
              options: DdaOptions = DdaOptions()) -> DdaSetup:
    """Check the inputs and discretise the cell (raises ``InvdesignError`` before any heavy work)."""
    problem = prepare(design, wavelengths_nm, incidence=incidence)
    elements = design.elements
    grid = discretise(elements, spacing_nm, max_points=options.max_points)
    materials = tuple(sorted({e.material for e in elements}))
    eps_m = problem.medium_index**2
    for name in materials:
        if np.any(np.abs(problem.eps[name] - eps_m) < 1e-12 * eps_m):
            raise InvdesignError(f"material '{name}' has the permittivity of the surrounding medium; "
                                 "its dipoles would not scatter — remove those elements instead")
    mat_of_el = np.array([materials.index(e.material) for e in elements])
    p = design.params
    rvec, _ = displacement_table(grid.shape, grid.spacing_nm * NM)
    exclude = lattice_image_mask(rvec, np.asarray(p.a1), np.asarray(p.a2))
    kernel_plan = prepare(design, wavelengths_nm, incidence=incidence, ewald_scale=GRID_EWALD_SCALE).plan
    return DdaSetup(grid, problem, kernel_plan, materials, mat_of_el[grid.owner],
                    _dipole_volumes(grid, elements, options.volume), exclude, options,
                    _coarse(grid, elements, options))


def _coarse(grid: DipoleGrid, elements, options: DdaOptions) -> CoarseSpace:
    return coarse_space(aggregates(grid.positions_nm(), grid.owner, elements, float(options.segment_nm)))


def _incident(problem):
    """Incident direction (3,), transverse polarisations p, s (2, 3), reflected p (3,), cos θ."""
    th = math.radians(problem.incidence.polar_deg)
    ph = math.radians(problem.incidence.azimuth_deg)
    s_vec = np.array([-math.sin(ph), math.cos(ph), 0.0])
    khat = np.array([math.sin(th) * math.cos(ph), math.sin(th) * math.sin(ph), -math.cos(th)])
    p_in = np.cross(khat, s_vec)
    p_r = np.cross(s_vec, khat * np.array([1.0, 1.0, -1.0]))
    return khat, np.stack([p_in, s_vec]), p_r, math.cos(th)


def _method(options, symmetric: bool) -> str:
    if options.method == "auto":
        return "cocg" if symmetric else "gmres"
    if options.method == "cocg" and not symmetric:
        raise InvdesignError("method cocg needs a complex symmetric system (normal incidence or an isolated "
                             "target); use gmres or bicgstab for oblique incidence")
    return options.method


def _precond_kind(options, method) -> str:
    if options.preconditioner == "two-level" and method == "cocg":
        return "balancing"  # the symmetric form COCG needs
    return options.preconditioner


def _solve_polarisations(kernel_hat, grid, coarse, alpha_inv, rhs, g_self, k, options, method, guess=None):
    """Krylov solve for each input polarisation; alpha_inv (n_in, n_d), rhs (n_in, n_d, 3) -> p̃
    (n_in, n_d, 3) and ``SolveStats`` with (n_in,) fields. ``coarse``: ``CoarseSpace`` (static).
    ``guess``: None (cold start) or (n_in, m, n_d, 3) earlier solutions per polarisation to start from
    (``invdesign._dda_krylov.least_residual_start``; zeros are a cold start), SI units of p̃."""
    n_d = rhs.shape[1]
    blocks = alpha_inv[:, :, None, None] * jnp.eye(3) - k**2 * g_self  # (2, n_d, 3, 3)
    inv_blocks = jax.lax.stop_gradient(jnp.linalg.inv(blocks))
    kind = _precond_kind(options, method)
    # the preconditioner only steers the iteration: no derivative flows through it
    bx = boxes(coarse, grid.shape, grid.occupied) if kind == "local" else None
    kz = None
    if kind not in ("jacobi", "local"):
        kz = coupling_on_aggregates(jax.lax.stop_gradient(kernel_hat), coarse, grid.shape, grid.occupied)

    def one(a_inv, b, dinv, g):
        mv = make_matvec(kernel_hat, a_inv, grid.shape, grid.occupied)

        def flat_mv(v):
            return mv(v.reshape(n_d, 3)).reshape(-1)

        if kind == "jacobi":
            def precond(v):
                return jnp.einsum("dab,db->da", dinv, v.reshape(n_d, 3)).reshape(-1)

            def precond_t(v):
                return jnp.einsum("dba,db->da", dinv, v.reshape(n_d, 3)).reshape(-1)
        elif kind == "local":
            inv = local_inverse(jax.lax.stop_gradient(kernel_hat), jax.lax.stop_gradient(a_inv), bx)
            inv_t = jnp.swapaxes(inv, 1, 2)

            def precond(v):
                return apply_local(inv, bx, v.reshape(n_d, 3)).reshape(-1)

            def precond_t(v):
                return apply_local(inv_t, bx, v.reshape(n_d, 3)).reshape(-1)
        else:
            t = two_level(kz, jax.lax.stop_gradient(a_inv), dinv, coarse)

            def precond(v):
                return apply(t, coarse, v.reshape(n_d, 3), kind=kind).reshape(-1)

            def precond_t(v):
                return apply_transpose(t, coarse, v.reshape(n_d, 3), kind=kind).reshape(-1)

        x, stats = solve(flat_mv, b.reshape(-1), precond, method=method, tol=options.tol,
                         restart=options.restart, max_iterations=options.max_iterations,
                         precond_transpose=precond_t, guess=None if g is None else g.reshape(g.shape[0], -1))
        return x.reshape(n_d, 3), stats

    # one after the other: a vmapped pair of Krylov loops measured ~1.7x slower than two in sequence
    if guess is None:
        return jax.lax.map(lambda args: one(*args, None), (alpha_inv, rhs, inv_blocks))
    return jax.lax.map(lambda args: one(*args), (alpha_inv, rhs, inv_blocks, guess))


def _lambdas(setup, eps, k, khat, pols):
    """Λ (2, n_d) of every dipole for each input polarisation (LDR S differs between them)."""
    s = ldr_s(jnp.asarray(khat), jnp.asarray(pols))  # (2,)
    eps_pts = eps[jnp.asarray(setup.material_index)]
    return dipole_lambda(eps_pts[None], setup.problem.medium_index**2, jnp.asarray(setup.volume_m3)[None],
                         k, s[:, None], kind=setup.options.polarizability)


def wavelength_function(setup: DdaSetup):
    """Pure, jit- and grad-compatible solve at one wavelength.

    Returns ``fn(eps, wavelength_nm, a1_nm, a2_nm, guess=None) -> (out, stats)`` with ``eps`` (n_mat,)
    complex permittivities in the order of ``setup.materials``, the wavelength a scalar (nm), lattice
    vectors (2,) nm, ``guess`` None (cold start) or (2, m, n_d, 3) earlier dipole moments p̃ per input
    polarisation to start the Krylov solves from (warm start; it changes the products, not the result or
    its derivatives); ``out`` = (t (2, 2), r (2, 2), t_pow (2, n_o), r_pow (2, n_o), absorbance (2,),
    propagating (n_o,), t_amp (n_o, 3, 2), r_amp (n_o, 3, 2), p̃ (2, n_d, 3)) as in the fast model plus
    the solved dipole moments (SI), ``stats`` a ``SolveStats`` with (2,) fields.
    """
    problem, grid = setup.problem, setup.grid
    shape = grid.shape
    d_m = grid.spacing_nm * NM
    positions = jnp.asarray(grid.positions_nm() * NM)
    khat, pols, p_r, cos_in = _incident(problem)
    orders = jnp.asarray(problem.order_indices)
    normal = problem.incidence.polar_deg == 0.0
    method = _method(setup.options, symmetric=normal)

    def fn(eps, wavelength_nm, a1_nm, a2_nm, guess=None):
        k = k0_per_m(wavelength_nm) * problem.medium_index
        lattice = Lattice.from_nm(a1_nm, a2_nm)
        kvec = k * jnp.asarray(khat)
        kpar = kvec[:2]
        lam = _lambdas(setup, eps, k, khat, pols)
        alpha_inv = lam - 1j * k**3 / (6 * jnp.pi)
        kernel_hat = lattice_kernel(shape, d_m, k, kpar, lattice, setup.kernel_plan, setup.exclude,
                                    chunk=setup.options.chunk, even=normal)
        g_self = lattice_dyadic(jnp.zeros(3), jnp.asarray(True), k, kpar, lattice, problem.plan)
        pols_c = jnp.asarray(pols).astype(complex)
        rhs = plane_wave_at(positions, kvec, pols_c)
        p, stats = _solve_polarisations(kernel_hat, grid, setup.coarse, alpha_inv, rhs, g_self, k,
                                        setup.options, method, guess)
        trans, refl, kz, prop = order_amplitudes(p, positions, k, kpar, lattice, orders)
        kz_in = k * cos_in
        t_pow = jnp.sum(jnp.abs(trans) ** 2, axis=-1) * kz[None] / kz_in
        t_pow = t_pow.at[:, 0].set(jnp.sum(jnp.abs(trans[:, 0] + pols_c) ** 2, axis=-1))
        r_pow = jnp.sum(jnp.abs(refl) ** 2, axis=-1) * kz[None] / kz_in
        t0 = jnp.einsum("oa,na->on", jnp.asarray(pols), trans[:, 0] + pols_c)
        r0 = jnp.einsum("oa,na->on", jnp.stack([jnp.asarray(p_r), jnp.asarray(pols[1])]), refl[:, 0])
        # the dipoles' work over the incident flux through one cell, A cos θ
        absorb = -(k / (lattice.area() * cos_in)) * jnp.sum(jnp.imag(lam)[:, :, None] * jnp.abs(p) ** 2,
                                                           axis=(1, 2))
        out = (t0, r0, t_pow, r_pow, absorb, prop, trans.transpose(1, 2, 0), refl.transpose(1, 2, 0), p)
        return out, stats

    return fn


def _mkd(setup, wl):
    eps_m = setup.problem.medium_index**2
    m = np.max([np.abs(np.sqrt(setup.problem.eps[n] / eps_m)) for n in setup.materials], axis=0)
    k = 2 * math.pi * setup.problem.medium_index / (np.asarray(wl) * NM)
    return m * k * setup.grid.spacing_nm * NM


def _check(stats_list, wl, strict, tol):
    for lam, st in zip(wl, stats_list, strict=True):
        if strict and not bool(np.all(st.converged)):
            raise DdaConvergenceError(
                f"the iterative solve stopped at relative residual {float(np.max(st.residual)):.2e} "
                f"(tolerance {tol:g}) "
                f"after {int(np.max(st.iterations))} iterations at {lam:g} nm; raise max_iterations, "
                "loosen tol, or pass strict=False to get the flagged result")


class WarmStart:
    """The last ``m`` solutions p̃ (each of ``shape``, e.g. (2, n_d, 3)), as the guess of the next solve.

    ``guess()`` is None for m = 0 (cold start; a separate compiled function) and otherwise a fixed-shape
    (shape[0], m, *shape[1:]) stack, zeros where no solution exists yet, so one compiled function serves
    every wavelength.
    """

    def __init__(self, m: int, shape: tuple):
        self.m = m
        self.stack = np.zeros((shape[0], m, *shape[1:]), dtype=complex)

    def guess(self):
        return None if self.m == 0 else jnp.asarray(self.stack)

    def push(self, p):
        if self.m:
            self.stack = np.concatenate([np.asarray(p)[:, None], self.stack[:, :-1]], axis=1)


def dda_response(design, wavelengths_nm, spacing_nm, *, incidence: Incidence = NORMAL_INCIDENCE,
                 options: DdaOptions = DdaOptions(), strict: bool = True):
    """Spectra of a periodic cell by the volume discrete dipole approximation.

    Args:
      design: ``Design`` (nm). wavelengths_nm: (n_wl,) vacuum wavelengths, nm.
      spacing_nm: requested dipole spacing d, nm (adjusted so the first element's thickness is a whole
        number of layers; the spacing used is ``info.spacing_nm``).
      incidence: ``Incidence``. options: ``DdaOptions``.
      strict: raise ``DdaConvergenceError`` if a solve misses its tolerance (else only flag it in info).

    Returns:
      (``Response`` with the fast model's shapes and conventions (chain_residual zeros), ``DdaInfo``).
    """
    return dda_responses(design, [wavelengths_nm], spacing_nm, incidence=incidence, options=options,
                         strict=strict)[0]


def dda_responses(design, wavelength_sets, spacing_nm, *, incidence: Incidence = NORMAL_INCIDENCE,
                  options: DdaOptions = DdaOptions(), strict: bool = True):
    """``dda_response`` for several wavelength lists at one spacing with one compiled solver.

    The union of the lists is solved once, in increasing wavelength (warm starts), with the Ewald plan
    and diffraction orders of its shortest wavelength; each list's ``Response`` then keeps the orders
    ``dda_response`` would list for it alone (evanescent orders carry zero power, so sums are unchanged).
    Returns a list of (``Response``, ``DdaInfo``), one per list; the compilation time is in the
    ``seconds`` of whichever list holds the shortest wavelength.
    """
    sets = [np.atleast_1d(np.asarray(w, dtype=float)) for w in wavelength_sets]
    for w in sets:
        prepare(design, w, incidence=incidence)  # each list's own checks (range, positivity) first
    union = np.unique(np.concatenate(sets))
    setup = dda_setup(design, union, spacing_nm, incidence=incidence, options=options)
    problem = setup.problem
    fn = jax.jit(wavelength_function(setup))
    eps = np.stack([problem.eps[n] for n in setup.materials])  # (n_mat, n_wl)
    a1, a2 = (jnp.asarray(v, dtype=float) for v in (design.params.a1, design.params.a2))
    solved = {}
    history = WarmStart(options.warm_start, (2, int(setup.grid.counts.sum()), 3))
    for i, lam in enumerate(union):  # increasing wavelength: neighbours make the warm starts
        start = time.perf_counter()
        out, st = jax.block_until_ready(fn(jnp.asarray(eps[:, i]), jnp.float64(lam), a1, a2, history.guess()))
        seconds = time.perf_counter() - start
        st = jax.tree_util.tree_map(np.asarray, st)
        _check([st], [lam], strict, options.tol)
        history.push(out[-1])
        solved[float(lam)] = ([np.asarray(o) for o in out[:-1]], st, seconds)
    all_orders = [tuple(o) for o in np.asarray(problem.order_indices)]
    results = []
    for w in sets:
        own = np.asarray(prepare(design, w, incidence=incidence).order_indices)
        keep = np.array([all_orders.index(tuple(o)) for o in own])
        results.append(_response_of(setup, w, [solved[float(lam)] for lam in w], own, keep))
    return results


def _response_of(setup, wl, solved, orders, keep):
    """(``Response``, ``DdaInfo``) of the wavelengths ``wl`` from their per-wavelength solves, keeping the
    diffraction orders ``keep`` (indices into the setup's orders; ``orders`` their (n_o, 2) indices)."""
    outs, stats, seconds = zip(*solved, strict=True)
    t0, r0, t_pow, r_pow, absorb, prop, t_amp, r_amp = (np.stack(x) for x in zip(*outs, strict=True))
    t_pow, r_pow, prop, t_amp, r_amp = (t_pow[:, :, keep], r_pow[:, :, keep], prop[:, keep],
                                        t_amp[:, keep], r_amp[:, keep])
    response = Response(
        wavelengths_nm=wl, t=t0, r=r0, transmittance=t_pow.sum(axis=2), reflectance=r_pow.sum(axis=2),
        absorbance=absorb,
        orders=Orders(orders, prop, t_pow.transpose(0, 2, 1), r_pow.transpose(0, 2, 1), t_amp, r_amp),
        chain_residual=np.zeros(len(wl)))
    grid = setup.grid
    info = DdaInfo(
        n_dipoles=int(grid.counts.sum()), spacing_nm=grid.spacing_nm, grid_shape=grid.shape,
        fft_shape=fft_shape(grid.shape), counts=grid.counts, volume_ratio=grid.volume_ratio,
        mkd_max=_mkd(setup, wl), iterations=np.stack([s.iterations for s in stats]),
        residual=np.stack([s.residual for s in stats]),
        converged=bool(all(np.all(s.converged) for s in stats)), seconds=np.array(seconds))
    return response, info


class DdaCrossSections(NamedTuple):
    """Cross sections of one isolated element, nm², each (n_wl,): x-polarised light along −z."""

    ext: np.ndarray
    abs: np.ndarray
    sca: np.ndarray


def dda_cross_sections(element, eps, wavelengths_nm, medium_index, spacing_nm, *,
                       options: DdaOptions = DdaOptions()):
    """Extinction, absorption and scattering of one element alone in a homogeneous medium (free space).

    Args:
      element: ``Rod`` / ``Disk`` / ``Sphere`` (nm). eps: (n_wl,) complex permittivity of its material.
      wavelengths_nm: (n_wl,) vacuum wavelengths, nm. medium_index: real index of the medium.
      spacing_nm: requested dipole spacing, nm. options: ``DdaOptions``.

    Returns:
      (``DdaCrossSections`` in nm², ``DdaInfo``). C_ext = k Im Σ E_inc*·p̃ and C_abs = −k Σ Im Λ |p̃|²
      (the optical theorem and the dipoles' work, B. T. Draine, Astrophys. J. 333, 848 (1988)), C_sca =
      C_ext − C_abs. Raises ``DdaConvergenceError`` if a solve misses its tolerance.
    """
    wl = np.atleast_1d(np.asarray(wavelengths_nm, dtype=float))
    eps = np.broadcast_to(np.asarray(eps, dtype=complex), wl.shape)
    grid = discretise([element], spacing_nm, max_points=options.max_points)
    eps_m = float(medium_index) ** 2
    d_m = grid.spacing_nm * NM
    vol = jnp.asarray(_dipole_volumes(grid, [element], options.volume))
    positions = jnp.asarray(grid.positions_nm() * NM)
    khat = np.array([0.0, 0.0, -1.0])
    pols = np.array([[1.0, 0.0, 0.0]])
    method = _method(options, symmetric=True)
    coarse = _coarse(grid, [element], options)

    @jax.jit
    def one(eps1, lam_nm, guess):
        k = k0_per_m(lam_nm) * medium_index
        s = ldr_s(jnp.asarray(khat), jnp.asarray(pols))
        lam = dipole_lambda(eps1, eps_m, vol[None], k, s[:, None], kind=options.polarizability)
        alpha_inv = lam - 1j * k**3 / (6 * jnp.pi)
        kernel_hat = free_kernel(grid.shape, d_m, k, chunk=options.chunk)
        rhs = plane_wave_at(positions, k * jnp.asarray(khat), jnp.asarray(pols).astype(complex))
        p, stats = _solve_polarisations(kernel_hat, grid, coarse, alpha_inv, rhs, jnp.zeros((3, 3)), k,
                                        options, method, guess)
        ext = k * jnp.imag(jnp.sum(jnp.conj(rhs) * p, axis=(1, 2)))
        absorbed = -k * jnp.sum(jnp.imag(lam)[:, :, None] * jnp.abs(p) ** 2, axis=(1, 2))
        return ext[0], absorbed[0], stats, p

    ext, absorbed = np.zeros(len(wl)), np.zeros(len(wl))
    stats, seconds = [None] * len(wl), [None] * len(wl)
    history = WarmStart(options.warm_start, (1, int(grid.counts.sum()), 3))
    for i in np.argsort(wl, kind="stable"):
        lam = wl[i]
        start = time.perf_counter()
        x, a, st, p = jax.block_until_ready(one(jnp.asarray(eps[i]), jnp.float64(lam), history.guess()))
        seconds[i] = time.perf_counter() - start
        st = jax.tree_util.tree_map(np.asarray, st)
        _check([st], [lam], True, options.tol)
        history.push(p)
        ext[i], absorbed[i] = float(x) / NM**2, float(a) / NM**2
        stats[i] = st
    m = np.abs(np.sqrt(eps / eps_m))
    info = DdaInfo(int(grid.counts.sum()), grid.spacing_nm, grid.shape, fft_shape(grid.shape), grid.counts,
                   grid.volume_ratio, m * 2 * math.pi * medium_index / (wl * NM) * d_m,
                   np.stack([s.iterations for s in stats]), np.stack([s.residual for s in stats]),
                   bool(all(np.all(s.converged) for s in stats)), np.array(seconds))
    return DdaCrossSections(ext, absorbed, ext - absorbed), info
