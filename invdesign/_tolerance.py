"""Fabrication tolerance: Monte Carlo yield and linear sensitivity of a design under Gaussian fab errors.

Error model (stated once; σ values come from the fab deck's ``tolerance`` block, ``FabTolerance``, as
1σ standard deviations in nm or degrees). Sample s is one fabrication run; for element i of the cell

    width_i     = w_i + σ_w,glob · g_w(s) + σ_w,loc · ℓ_w,i(s)        (a disk: its diameter)
    length_i    = L_i + σ_L,glob · g_L(s) + σ_L,loc · ℓ_L,i(s)        (rods)
    centre_i    = c_i + σ_pos,loc · (ℓ_x,i(s), ℓ_y,i(s))
    angle_i     = θ_i + σ_θ,glob · g_θ(s) + σ_θ,loc · ℓ_θ,i(s)        (degrees; rods)
    thickness_i = t_i + σ_t,glob · g_t(s) + σ_t,loc · ℓ_t,i(s)

with every g (one draw per run, shared by all elements: dose and development bias, deposited film) and
every ℓ (one draw per element: edge roughness, proximity effects, beam placement) an independent standard
normal. The ten sources are uncorrelated with each other (a real dose error moves width and length
together; give the run-to-run part as it is measured). Not sampled, and said so in the output:

* a common shift of every centre: a rigid translation of the periodic array, which leaves its zero-order
  response unchanged (the deck parser refuses ``position_nm.global`` for that reason);
* the corner radius: the model replaces each rod by the ellipsoid of the same aspect ratios and the volume
  L·W·t of the sharp box (``invdesign._polarizability``), so rounded corners never enter it
  (``CORNER_RADIUS_NOTE``); the deck's σ is recorded, not used;
* the lattice vectors (stage calibration) and the materials' permittivity.

Each sample is an infinite, perfect array of one perturbed cell, so "local" errors repeat in every cell.
A real array has different local errors in each cell and its zero-order beam averages over the cells in
the spot, so this treatment of local errors is probably pessimistic.

A sample *passes* when it meets every goal of the spec under ``exact_goals`` (the optimiser's exact check,
same wavelength grid, windows and depths) with the chosen model, and no two elements touch or overlap
(gap ≤ 0, periodic images included: merged rods are a failed device whatever the model says). The yield
is the fraction of passing samples, with a binomial confidence interval (``binomial_interval``).

Linear sensitivity: each goal's differentiable quantity q_g (the goal's metric; for ``bandwidth_nm`` the
smallest fixed-phase depth over λ0 ± B/2, because the band width itself moves in steps of the wavelength
grid) as a function of the standard normals z of all sources, q_g(z) = q_g(perturb(p0, σ·z)).
∂q_g/∂z_k = ∂q_g/∂p · σ_k from one reverse-mode Jacobian at z = 0; the linear spread is
σ_lin,g = sqrt(Σ_k (∂q_g/∂z_k)²) (quadrature), and each source's share is the sum over its z_k. For small
σ the Monte Carlo standard deviation of q_g approaches σ_lin,g (tested).
"""

import dataclasses
import hashlib
import json
import math

import jax
import jax.numpy as jnp
import numpy as np

from ._design import CellParams, Design
from ._errors import SpecError
from ._geometry import pair_gaps
from ._optimize import Setup, evaluation_setup, exact_goals, goal_shortfalls
from ._simulate import ModelOptions, prepare, response_from_params
from ._spec import FabDeck, FabTolerance, Spec

#: the sampled sources, (quantity, component); see the module docstring
SOURCES = (("width_nm", "global"), ("width_nm", "local"), ("length_nm", "global"), ("length_nm", "local"),
           ("position_nm", "local"), ("angle_deg", "global"), ("angle_deg", "local"),
           ("thickness_nm", "global"), ("thickness_nm", "local"))
CORNER_RADIUS_NOTE = ("not sampled: the point-dipole model turns each rod into the ellipsoid with the same "
                      "aspect ratios and the volume length x width x thickness of the sharp box, so the "
                      "corner radius does not enter it; the deck's sigma is recorded only")
CI_METHODS = ("clopper_pearson", "wilson")


@dataclasses.dataclass(frozen=True)
class StudyOptions:
    """Settings of a tolerance study (``conf/tolerance.yaml``)."""

    design: str
    samples: int = 1000
    seed: int = 0
    sigma_scale: float = 1.0
    level: float = 0.95
    method: str = "clopper_pearson"
    driver_samples: int = 400
    batch: int = 64


def parse_study_options(cfg: dict) -> StudyOptions:
    """``StudyOptions`` from the tolerance config (plain dict); ``SpecError`` naming the key on mistakes."""
    from ._spec import _Reader

    keys = ("design", "samples", "seed", "sigma_scale", "confidence", "drivers", "batch")
    r = _Reader({k: cfg.get(k) for k in keys if k in cfg}, "tolerance", {
        "design": "path to a design file (e.g. runs/optimize/<timestamp>/design.json)",
        "samples": "number of Monte Carlo samples (>= 2)", "seed": "seed of the draws (integer)",
        "sigma_scale": "factor on every sigma of the deck's tolerance block (>= 0)",
        "confidence": "{level: in (0, 1), method: clopper_pearson or wilson}",
        "drivers": "{samples: samples per removal run (0 to skip)}",
        "batch": "samples per vmapped batch (>= 1)"})
    if not r.has("design"):
        raise SpecError("design is missing: give design=PATH, a design file such as the design.json of an "
                        "'invdesign optimize' run (runs/optimize/<timestamp>/design.json)")
    conf = r.sub("confidence", {"level": "confidence level in (0, 1)",
                                "method": f"one of {', '.join(CI_METHODS)}"}, {})
    level = conf.number("level", 0.95, positive=True)
    if level >= 1:
        raise SpecError(f"tolerance.confidence.level must lie in (0, 1), got {level:g}")
    drv = r.sub("drivers", {"samples": "samples per removal run (0 to skip)"}, {})
    return StudyOptions(design=str(r.raw("design")),
                        samples=r.number("samples", 1000, integer=True, minimum=2),
                        seed=r.number("seed", 0, integer=True),
                        sigma_scale=r.number("sigma_scale", 1.0, minimum=0.0), level=level,
                        method=conf.text("method", "clopper_pearson", choices=CI_METHODS),
                        driver_samples=drv.number("samples", 400, integer=True, minimum=0),
                        batch=r.number("batch", 64, integer=True, minimum=1))


def source_name(source) -> str:
    """'width_nm.global' for ("width_nm", "global")."""
    return f"{source[0]}.{source[1]}"


def sigmas(tol: FabTolerance, scale: float = 1.0) -> dict:
    """{source name: σ × scale} for every sampled source (0 where the deck gives none)."""
    return {source_name(s): float(scale) * tol.get(*s) for s in SOURCES}


# ------------------------------------------------------------------------------------ intervals
def binomial_interval(k: int, n: int, level: float = 0.95, method: str = "clopper_pearson") -> tuple:
    """Two-sided confidence interval (lo, hi) for a binomial proportion k/n at confidence ``level``.

    ``clopper_pearson``: the exact interval from beta quantiles, lo = B⁻¹(α/2; k, n−k+1),
    hi = B⁻¹(1−α/2; k+1, n−k), with lo = 0 at k = 0 and hi = 1 at k = n (Clopper & Pearson, Biometrika
    26, 404 (1934)). ``wilson``: the score interval (p̂ + z²/2n ± z·sqrt(p̂(1−p̂)/n + z²/4n²))/(1 + z²/n)
    with z = Φ⁻¹(1−α/2) (Wilson, J. Am. Stat. Assoc. 22, 209 (1927)). α = 1 − level.
    """
    from scipy import stats

    if not (isinstance(n, (int, np.integer)) and n >= 1 and 0 <= k <= n):
        raise ValueError(f"need integers 0 <= k <= n, n >= 1; got k={k!r}, n={n!r}")
    if not 0 < level < 1:
        raise ValueError(f"confidence level must lie in (0, 1), got {level!r}")
    alpha = 1.0 - level
    if method == "clopper_pearson":
        lo = 0.0 if k == 0 else float(stats.beta.ppf(alpha / 2, k, n - k + 1))
        hi = 1.0 if k == n else float(stats.beta.ppf(1 - alpha / 2, k + 1, n - k))
        return lo, hi
    if method == "wilson":
        z = float(stats.norm.ppf(1 - alpha / 2))
        p = k / n
        centre = (p + z * z / (2 * n)) / (1 + z * z / n)
        half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
        # at k = 0 (k = n) the lower (upper) limit is exactly 0 (1); say so rather than round to it
        return (0.0 if k == 0 else max(0.0, centre - half)), (1.0 if k == n else min(1.0, centre + half))
    raise ValueError(f"unknown interval method {method!r}; use one of: {', '.join(CI_METHODS)}")


# ---------------------------------------------------------------------------------- perturbation
def draw(seed: int, n_samples: int, n_elements: int) -> dict:
    """Standard normals of every source: {name: (n,) global, (n, n_e) local, (n, n_e, 2) position}.

    Drawn in ``SOURCES`` order from one NumPy generator, so the same seed gives the same draws (common
    random numbers for every σ, every source switched off or on, and every design of the same size).
    """
    rng = np.random.default_rng(seed)
    out = {}
    for q, c in SOURCES:
        shape = (n_samples,) if c == "global" else (n_samples, n_elements)
        shape += (2,) if q == "position_nm" else ()
        out[source_name((q, c))] = rng.standard_normal(shape)
    return out


def perturb(params: CellParams, z: dict, sigma: dict) -> CellParams:
    """One fabricated cell: ``params`` (nm, degrees) moved by σ·z (one sample of ``draw``). Pure JAX."""
    def delta(q, i):
        return sigma[f"{q}.global"] * z[f"{q}.global"] + sigma[f"{q}.local"] * z[f"{q}.local"][i]

    out = []
    for i, e in enumerate(params.elements):
        centre = e.center + sigma["position_nm.local"] * z["position_nm.local"][i]
        thick = e.thickness + delta("thickness_nm", i)
        if e.shape == "rod":
            out.append(dataclasses.replace(e, center=centre, thickness=thick,
                                           width=e.width + delta("width_nm", i),
                                           length=e.length + delta("length_nm", i),
                                           angle_deg=e.angle_deg + delta("angle_deg", i)))
        else:  # disk (checked by ``check_design``)
            out.append(dataclasses.replace(e, center=centre, thickness=thick,
                                           diameter=e.diameter + delta("width_nm", i)))
    return CellParams(params.a1, params.a2, tuple(out))


# --------------------------------------------------------------------------------- the evaluator
def check_design(design: Design, spec: Spec) -> None:
    """Refuse designs the error model does not cover or that do not sit in the spec's environment."""
    for i, e in enumerate(design.elements):
        if e.shape not in ("rod", "disk"):
            raise SpecError(f"design.elements[{i}] is a {e.shape}; the fab error model covers lithographic "
                            f"rods and disks only")
    env = (design.superstrate_index, design.substrate_index)
    want = (spec.superstrate_index, spec.substrate_index)
    if any(abs(a - b) > 1e-9 for a, b in zip(env, want, strict=True)):
        raise SpecError(f"design environment (superstrate {env[0]:g}, substrate {env[1]:g}) differs from "
                        f"spec.environment ({want[0]:g}, {want[1]:g}); pick the spec the design was made "
                        f"for or edit the design's environment")


@dataclasses.dataclass(frozen=True, eq=False)
class Evaluator:
    """A design, a spec and one model, compiled for batches of perturbed samples."""

    setup: Setup        # goals judged exactly as the optimiser does (``exact_goals``)
    params: CellParams  # nominal parameters (nm)
    batch: int
    forward: object     # jitted (z batch, σ) -> (Response batch, q batch, params batch)
    quantities: object  # jitted (z, σ) -> q (n_goals,), for the Jacobian

    @property
    def labels(self) -> tuple:
        return self.setup.labels


def quantity_names(spec: Spec) -> tuple:
    """What q_g is for each goal: the metric, or the window's smallest fixed-phase depth for band width."""
    return tuple("band_min_fixed_phase_depth" if g.metric == "bandwidth_nm" else g.metric for g in spec.goals)


def _quantities_fn(setup: Setup):
    """resp -> q (n_goals,): each goal's metric value in JAX (see the module docstring). Reuses
    ``goal_shortfalls`` with every sense read as '<=', so r = (q − target)/scale."""
    spec = setup.spec
    as_upper = tuple(dataclasses.replace(g, sense="<=", tolerance=0.0) for g in spec.goals)
    vsetup = dataclasses.replace(setup, spec=dataclasses.replace(spec, goals=as_upper))
    band = np.array([g.metric == "bandwidth_nm" for g in spec.goals])
    target = np.array([g.target for g in spec.goals])
    scale = np.array([g.scale for g in spec.goals])
    depth = np.array([d if d is not None else 1.0 for d in setup.depths])

    def q(resp):
        r = goal_shortfalls(resp, vsetup)
        return jnp.where(band, depth * (1.0 - r), target + scale * r)
    return q


def make_evaluator(design: Design, spec: Spec, fab: FabDeck, model: ModelOptions,
                   batch: int = 64) -> Evaluator:
    """Check the inputs and build the batched forward model (compiled lazily, once per process)."""
    check_design(design, spec)
    doc = {"spec": dataclasses.asdict(spec), "fab": dataclasses.asdict(fab), "design": design.to_dict(),
           "model": dataclasses.asdict(model)}
    fp = hashlib.sha256(json.dumps(doc, sort_keys=True, default=str).encode()).hexdigest()[:16]
    setup = evaluation_setup(spec, fab, design, ((model.dipoles_per_rod, model.correction),),
                             lambda wl: (prepare(design, wl, model=model),), fp,
                             environment=model.environment)
    problem = setup.problems[0]
    params = jax.tree_util.tree_map(lambda x: jnp.asarray(np.asarray(x, float)), design.params)
    qfn = _quantities_fn(setup)

    def one(z, sig):
        p = perturb(params, z, sig)
        resp = response_from_params(p, problem)
        return resp, qfn(resp), p

    return Evaluator(setup, params, int(batch), jax.jit(jax.vmap(one, in_axes=(0, None))),
                     jax.jit(lambda z, sig: qfn(response_from_params(perturb(params, z, sig), problem))))


def _jnp_sigma(sigma: dict) -> dict:
    return {k: jnp.asarray(float(v)) for k, v in sigma.items()}


def _reach(e) -> np.ndarray:
    """Half-diagonal (rod) or radius (disk) of batched elements, nm: no footprint point lies farther from
    the centre."""
    if e.shape == "rod":
        return 0.5 * np.hypot(e.length, e.width)
    return 0.5 * e.diameter


def _bridged(p: CellParams, p0: CellParams, gaps0: list) -> np.ndarray:
    """(B,) True where two elements (periodic images included) touch or overlap, or a size is <= 0.

    ``p``: a batch of perturbed parameters (leading axis B); ``gaps0``: ``pair_gaps`` of the nominal
    ``p0``. A cheap bound first: a footprint point moves by at most |Δc| + Δreach + reach·|Δθ| (rotation
    about the centre by Δθ in radians), so a pair whose bounds add up to less than its nominal gap cannot
    touch; the others get the exact polygon check (``pair_gaps``).
    """
    n = np.asarray(p.elements[0].thickness).shape[0]
    bad = np.zeros(n, bool)
    move = []
    for e, e0 in zip(p.elements, p0.elements, strict=True):
        sizes = [e.width, e.length, e.thickness] if e.shape == "rod" else [e.diameter, e.thickness]
        bad |= np.min(np.stack(sizes), axis=0) <= 0
        shift = np.hypot(*(np.asarray(e.center) - np.asarray(e0.center)[None]).T)
        turn = np.abs(np.radians(e.angle_deg - e0.angle_deg)) if e.shape == "rod" else 0.0
        reach = _reach(e)
        move.append(shift + np.abs(reach - _reach(e0)) + np.maximum(reach, _reach(e0)) * turn)
    risky = np.zeros(n, bool)
    for i, j, gap in gaps0:
        risky |= move[i] + move[j] >= gap
    for b in np.flatnonzero(risky & ~bad):
        one = jax.tree_util.tree_map(lambda x, b=b: x[b], p.elements)
        bad[b] = any(g <= 0 for _, _, g in pair_gaps(one, np.asarray(p.a1), np.asarray(p.a2)))
    return bad


@dataclasses.dataclass(frozen=True)
class MonteCarlo:
    """Per-sample results: values and met (n, n_goals) exact goal values and pass flags, q (n, n_goals)
    the differentiable quantities, bridged and passed (n,) bool."""

    values: np.ndarray
    met: np.ndarray
    q: np.ndarray
    bridged: np.ndarray
    passed: np.ndarray

    @property
    def n(self) -> int:
        return int(self.passed.size)

    @property
    def k(self) -> int:
        return int(np.sum(self.passed))


def monte_carlo(ev: Evaluator, z: dict, sigma: dict) -> MonteCarlo:
    """Every sample of ``z`` (a ``draw``) at ``sigma``, in fixed-size batches (one compile)."""
    n = next(iter(z.values())).shape[0]
    sig = _jnp_sigma(sigma)
    labels = ev.labels
    p0 = jax.tree_util.tree_map(np.asarray, ev.params)
    gaps0 = pair_gaps(p0.elements, p0.a1, p0.a2)
    values, met, qs, bridged = [], [], [], []
    for start in range(0, n, ev.batch):
        stop = min(start + ev.batch, n)
        chunk = {k: np.zeros((ev.batch,) + v.shape[1:]) for k, v in z.items()}
        for k, v in z.items():
            chunk[k][: stop - start] = v[start:stop]
        resp, q, p = jax.tree_util.tree_map(np.asarray, ev.forward(chunk, sig))
        for j in range(stop - start):
            goals = exact_goals(jax.tree_util.tree_map(lambda x, j=j: x[j], resp), ev.setup)
            values.append([goals[lab][0] for lab in labels])
            met.append([goals[lab][1] for lab in labels])
        keep = jax.tree_util.tree_map(lambda x, m=stop - start: x[:m], p)
        bridged.append(_bridged(dataclasses.replace(keep, a1=p0.a1, a2=p0.a2), p0, gaps0))
        qs.append(q[: stop - start])
    values, met = np.asarray(values, float), np.asarray(met, bool)
    bridged = np.concatenate(bridged)
    return MonteCarlo(values, met, np.concatenate(qs), bridged, np.all(met, axis=1) & ~bridged)


def zero_draw(n_elements: int) -> dict:
    """One sample with every z = 0 (the nominal design)."""
    return {k: v[0] * 0.0 for k, v in draw(0, 1, n_elements).items()}


def linear_sensitivity(ev: Evaluator, sigma: dict) -> dict:
    """Jacobian of q at z = 0: {"q0": (n_goals,), "jacobian": {source: (n_goals, ...)},
    "per_source_sigma": {source: (n_goals,)}, "sigma": (n_goals,)} (goal units; see module docstring)."""
    z0 = jax.tree_util.tree_map(jnp.asarray, zero_draw(len(ev.params.elements)))
    sig = _jnp_sigma(sigma)
    q0 = np.asarray(ev.quantities(z0, sig))
    jac = jax.tree_util.tree_map(np.asarray, jax.jacrev(ev.quantities)(z0, sig))
    n_g = q0.size
    per = {k: np.sqrt(np.sum(v.reshape(n_g, -1) ** 2, axis=1)) for k, v in jac.items()}
    total = np.sqrt(sum(v**2 for v in per.values()))
    return {"q0": q0, "jacobian": jac, "per_source_sigma": per, "sigma": total}


def linear_prediction(lin: dict, z: dict) -> np.ndarray:
    """q0 + J·z for every sample of a draw, (n, n_goals): the first-order model of each sample."""
    n = next(iter(z.values())).shape[0]
    out = np.tile(lin["q0"], (n, 1))
    for k, jk in lin["jacobian"].items():
        out += z[k].reshape(n, -1) @ jk.reshape(jk.shape[0], -1).T
    return out


# ------------------------------------------------------------------------------- what drives loss
def variance_shares(lin: dict) -> dict:
    """{source: (n_goals,)} fraction of each goal's linear variance σ_lin² that the source contributes."""
    total = np.where(lin["sigma"] > 0, lin["sigma"] ** 2, 1.0)
    return {k: v**2 / total for k, v in lin["per_source_sigma"].items()}


def _failure_sign(goal, q0: float) -> float:
    """+1 when q rising misses the goal, −1 when q falling does ('=' goals: away from the target)."""
    if goal.metric == "bandwidth_nm" or goal.sense == ">=":
        return -1.0
    if goal.sense == "<=":
        return 1.0
    return 1.0 if q0 >= goal.target else -1.0


def failure_attribution(ev: Evaluator, lin: dict, z: dict, mc: MonteCarlo) -> dict:
    """{source or 'bridged': number of failed samples it dominates} by the first-order model.

    For each failed, unbridged sample and each goal it misses, the source whose linear push J_s·z_s
    towards failure is largest takes the blame (one count per missed goal).
    """
    n = mc.n
    counts = {k: 0 for k in lin["jacobian"]}
    counts["bridged"] = int(np.sum(mc.bridged))
    push = {k: z[k].reshape(n, -1) @ jk.reshape(jk.shape[0], -1).T for k, jk in lin["jacobian"].items()}
    signs = np.array([_failure_sign(g, q) for g, q in zip(ev.setup.spec.goals, lin["q0"], strict=True)])
    names = list(push)
    stacked = np.stack([push[k] * signs for k in names])  # (n_src, n, n_goals)
    for s, g in zip(*np.nonzero(~mc.met & ~mc.bridged[:, None]), strict=True):
        counts[names[int(np.argmax(stacked[:, s, g]))]] += 1
    return counts


def removal_yields(ev: Evaluator, z: dict, sigma: dict, samples: int) -> dict:
    """Yield on the first ``samples`` draws with all sources, and with each nonzero source removed.

    Returns {"samples", "all": k, "removed": {source: k}} (pass counts; same draws throughout, so the
    differences are not blurred by sampling noise between runs).
    """
    sub = {k: v[:samples] for k, v in z.items()}
    out = {"samples": int(samples), "all": monte_carlo(ev, sub, sigma).k, "removed": {}}
    for name, s in sigma.items():
        if s > 0:
            out["removed"][name] = monte_carlo(ev, sub, {**sigma, name: 0.0}).k
    return out


# --------------------------------------------------------------------------------------- a study
def _stats(x: np.ndarray) -> dict:
    x = np.asarray(x, float)
    fin = x[np.isfinite(x)]
    if fin.size == 0:
        return {"finite_samples": 0}
    p05, p50, p95 = np.percentile(fin, [5, 50, 95])
    return {"finite_samples": int(fin.size), "mean": float(np.mean(fin)),
            "std": float(np.std(fin, ddof=1)) if fin.size > 1 else 0.0,
            "p05": float(p05), "median": float(p50), "p95": float(p95),
            "min": float(np.min(fin)), "max": float(np.max(fin))}


def study(ev: Evaluator, sigma: dict, *, samples: int, seed: int = 0, level: float = 0.95,
          method: str = "clopper_pearson", driver_samples: int = 0) -> dict:
    """The whole tolerance study of one design; JSON-ready summary plus arrays under "_arrays"."""
    n_e = len(ev.params.elements)
    z = draw(seed, samples, n_e)
    lin = linear_sensitivity(ev, sigma)
    nominal = monte_carlo(ev, {k: v[:1] * 0.0 for k, v in z.items()}, sigma)
    mc = monte_carlo(ev, z, sigma)
    lo, hi = binomial_interval(mc.k, mc.n, level, method)
    shares = variance_shares(lin)
    q_names = quantity_names(ev.setup.spec)
    goals = {}
    for gi, (label, g) in enumerate(zip(ev.labels, ev.setup.spec.goals, strict=True)):
        q_std = float(np.std(mc.q[:, gi], ddof=1)) if mc.n > 1 else 0.0
        s_lin = float(lin["sigma"][gi])
        per = {k: float(v[gi]) for k, v in lin["per_source_sigma"].items()}
        goals[label] = {
            "metric": g.metric, "sense": g.sense, "target": g.target, "tolerance": g.tolerance,
            "unit": g.unit,
            "nominal": float(nominal.values[0, gi]), "nominal_pass": bool(nominal.met[0, gi]),
            "pass_fraction": float(np.mean(mc.met[:, gi])), "distribution": _stats(mc.values[:, gi]),
            "linear": {"quantity": q_names[gi], "nominal": float(lin["q0"][gi]),
                       "sigma_linear": s_lin, "sigma_monte_carlo": q_std,
                       "ratio_mc_to_linear": q_std / s_lin if s_lin > 0 else None,
                       "per_source_sigma": per,
                       "variance_share": {k: float(v[gi]) for k, v in shares.items()},
                       "largest_source": max(per, key=per.get)},
        }
    blame = failure_attribution(ev, lin, z, mc)
    out = {
        "yield": {"passed": mc.k, "samples": mc.n, "fraction": mc.k / mc.n,
                  "interval": {"method": method, "level": level, "low": lo, "high": hi},
                  "bridged_samples": int(np.sum(mc.bridged)), "nominal_passes": bool(nominal.passed[0])},
        "goals": goals,
        "drivers": {"failures_by_source_linear": blame, "removal": None},
        "_arrays": {"values": mc.values, "q": mc.q, "passed": mc.passed, "bridged": mc.bridged,
                    "met": mc.met, "lin": lin},
    }
    if driver_samples > 0:
        rem = removal_yields(ev, z, sigma, min(driver_samples, samples))
        m = rem["samples"]
        out["drivers"]["removal"] = {
            "samples": m, "yield_all_sources": rem["all"] / m,
            "yield_without": {k: v / m for k, v in rem["removed"].items()},
            "yield_gain_if_removed": {k: (v - rem["all"]) / m for k, v in rem["removed"].items()}}
    return out
