"""How far to trust the fast model for one design: fast model vs the volume-discretised solver.

``verify`` runs a design through the fast coupled-dipole model (one dipole or a short chain per rod) and
through the volume-discretised solver (``invdesign._dda``: every element filled with dipoles on a cubic
grid of spacing d) at two or three spacings, and judges every goal of a spec on each.

Grid extrapolation. The discretised solver's error falls with d, roughly linearly for shapes the grid
cannot represent exactly and quadratically otherwise (Yurkin, Maltsev & Hoekstra, J. Opt. Soc. Am. A 24,
2578 (2007), who extrapolate DDA results to d → 0 by fitting a polynomial in d; cited from memory).
We extrapolate the complex zero-order Jones matrices and the power fractions wavelength by wavelength
(smooth quantities; goals such as a band width are not), then judge the goals on the extrapolated
response:
  * two spacings: linear in d through both;
  * three or more: least-squares quadratic in d.
The error bar of each goal is the larger of |goal(extrapolated) − goal(finest grid)| and, with three or
more spacings, |goal(quadratic) − goal(linear through the two finest)| — the size of the correction
itself, a deliberately cautious bar (common practice, no source).

Outside the asymptotic range. On grids too coarse for the element (a few dipole layers across a thin
metal film) the solutions still move fast with d and a polynomial through them can leave the physical
range (a power fraction above 1). When the extrapolated spectra violate 0 ≤ T, R, |t_ij|² ≤ 1, A ≥ 0 or
R + T + A = 1 by more than ``PHYSICAL_SLACK``, the finest grid is taken as the verified value instead and
its error bar is the first-order (Richardson) estimate of its own error, |finest − the straight line
through the two finest grids at d = 0|; the output says so and asks for finer spacings.

Verdict per goal: "met" if the goal holds over the whole interval value ± error bar, "not met" if it
fails over the whole interval, "within error bar" otherwise.

Resonance shift: the wavelength of largest extinction 1 − |t_ii|² of each input polarisation, by the
fast model and by the extrapolated solver, on an optional wider scan (parabolic refinement between
samples; flagged when the maximum sits at an end of the scan).

The discretised solver uses the averaged medium of ``Design.medium_index`` and the same bulk
permittivities as the fast model, so fast vs verified isolates the point-dipole (or chain)
approximation. A second fast row with the rigorous substrate (environment "interface",
``invdesign._interface``) shows how far the averaged medium itself moves each goal.
"""

import dataclasses
import math
import time

import jax
import numpy as np

from ._errors import InvdesignError
from ._optimize import evaluation_setup, exact_goals
from ._simulate import Incidence, ModelOptions, Response, simulate

VERDICTS = ("met", "not met", "within error bar")
EXTRAPOLATED = "extrapolated (d → 0)"


@dataclasses.dataclass(frozen=True)
class VerifyOptions:
    """Settings of one verification.

    Attributes:
      spacings_nm: grid spacings d of the discretised solver, nm, at least two, distinct, each > 0.
      tol: relative residual at which the iterative solve stops. Default 1e-4: measured with
        ``benchmarks/dda_tolerance.py`` on the shipped example and on the benchmark cell, every reported
        figure moved at 1e-4 by at most 1.7e-4 (example) and 2.6e-5 (benchmark cell) of its change between
        the two coarsest grids, against a 1e-8 solve, for 0.52–0.54× the products of 1e-6.
      scan: (start_nm, stop_nm, count) of a wider scan for the resonance shift, or None to skip it.
      substrate_row: also run the fast model with the rigorous substrate (environment "interface") when
        the checked model uses the averaged medium, and show it beside (the solver uses the averaged medium,
        so that row measures the medium approximation, the solver the dipole approximation).
      max_grid_points: refuse a spacing whose grid (bounding box of the elements) would hold more
        points than this, before any work (memory guard).
    """

    spacings_nm: tuple = (10.0, 7.5, 5.0)
    substrate_row: bool = True
    tol: float = 1e-4
    scan: tuple | None = None
    max_grid_points: int = 400_000

    def __post_init__(self):
        d = self.spacings_nm
        if (not isinstance(d, tuple) or len(d) < 2
                or not all(isinstance(x, (int, float)) and math.isfinite(x) and x > 0 for x in d)):
            raise InvdesignError(f"verify.spacings_nm must be a list of at least two positive grid spacings "
                                 f"in nm, e.g. [10, 7.5, 5]; got {d!r}")
        if len(set(float(x) for x in d)) != len(d):
            raise InvdesignError(f"verify.spacings_nm must be distinct (extrapolation needs different "
                                 f"spacings); got {list(d)}")
        if not (0 < self.tol < 1):
            raise InvdesignError(f"verify.tol must be in (0, 1), e.g. 1e-4; got {self.tol!r}")
        if self.scan is not None:
            a, b, n = self.scan
            if not (0 < a < b) or int(n) < 3:
                raise InvdesignError(f"verify.scan needs 0 < start_nm < stop_nm and count >= 3; got "
                                     f"start_nm={a}, stop_nm={b}, count={n}")
        if int(self.max_grid_points) < 1:
            raise InvdesignError(f"verify.max_grid_points must be a positive integer; got "
                                 f"{self.max_grid_points!r}")


def parse_verify_options(doc, operating_nm: float) -> VerifyOptions:
    """``VerifyOptions`` from the ``verification`` config block (plain dict); ``SpecError`` on bad keys.

    The resonance scan defaults to 0.6–1.4 × the operating wavelength; ``count: 0`` skips it.
    """
    from ._spec import _Reader

    r = _Reader(doc if doc is not None else {}, "verification", {
        "spacings_nm": "grid spacings of the discretised solver, nm (at least two, e.g. [10, 7.5, 5])",
        "tol": "relative residual of the iterative solve (0–1)",
        "max_grid_points": "largest grid (points in the elements' bounding box) allowed (memory guard)",
        "resonance_scan": "{start_nm, stop_nm, count} of the wider scan for the resonance shift",
        "substrate_row": "true to add the fast model with the rigorous substrate beside the averaged one"})
    base = VerifyOptions()   # the one place the defaults live
    spacings = r.raw("spacings_nm", list(base.spacings_nm))
    if not isinstance(spacings, (list, tuple)):
        raise InvdesignError(f"verification.spacings_nm must be a list of spacings in nm, got {spacings!r}")
    scan_r = r.sub("resonance_scan", {"start_nm": "first wavelength, nm (default 0.6 x operating)",
                                      "stop_nm": "last wavelength, nm (default 1.4 x operating)",
                                      "count": "number of wavelengths (0: no scan)"}, {})
    count = scan_r.number("count", 9, integer=True, minimum=0)
    scan = None
    if count:
        scan = (scan_r.number("start_nm", 0.6 * operating_nm, positive=True),
                scan_r.number("stop_nm", 1.4 * operating_nm, positive=True), count)
    return VerifyOptions(spacings_nm=tuple(spacings), tol=r.number("tol", base.tol, positive=True),
                         substrate_row=r.flag("substrate_row", base.substrate_row),
                         scan=scan,
                         max_grid_points=r.number("max_grid_points", base.max_grid_points, integer=True,
                                                  minimum=1))


# ------------------------------------------------------------------------------------- extrapolation
def extrapolate(spacings, values, degree: int | None = None):
    """Values at d → 0 from values at several spacings, componentwise.

    Args:
      spacings: (n_d,) grid spacings (any length unit), distinct.
      values: (n_d, ...) real or complex samples, ``values[i]`` at ``spacings[i]``.
      degree: polynomial degree in d; default 1 for two spacings, 2 for three or more.

    Returns:
      (...) array, the fitted polynomial's value at d = 0 (least squares if over-determined).
    """
    d = np.asarray(spacings, dtype=float)
    v = np.asarray(values)
    if degree is None:
        degree = 1 if d.size == 2 else 2
    if d.size < degree + 1:
        raise ValueError(f"degree {degree} extrapolation needs at least {degree + 1} spacings")
    vander = np.vander(d, degree + 1, increasing=True)  # columns 1, d, d², ...
    flat = v.reshape(d.size, -1)
    coef, *_ = np.linalg.lstsq(vander.astype(flat.dtype), flat, rcond=None)
    return coef[0].reshape(v.shape[1:])


def extrapolated_response(spacings, responses) -> Response:
    """A ``Response`` whose t, r, T, R, A are ``extrapolate``d to d → 0 (orders of the finest grid)."""
    fine = responses[int(np.argmin(spacings))]
    fields = {name: extrapolate(spacings, np.stack([np.asarray(getattr(r, name)) for r in responses]))
              for name in ("t", "r", "transmittance", "reflectance", "absorbance")}
    return fine._replace(**fields)


def verdict(goal, value: float, error: float) -> str:
    """'met', 'not met' or 'within error bar' for a goal judged on value ± error."""
    lo_ok, hi_ok, mid_ok = goal.met(value - error), goal.met(value + error), goal.met(value)
    if lo_ok and hi_ok and mid_ok:
        return "met"
    if not (lo_ok or hi_ok or mid_ok):
        return "not met"
    return "within error bar"


# ------------------------------------------------------------------------------------------ resonance
def resonance_nm(wavelengths_nm, curve) -> tuple[float, bool]:
    """Wavelength of the largest sample of ``curve`` (n_wl,), refined by a parabola through its
    neighbours; and whether the maximum sits at an end of the range (then it is only a bound)."""
    wl = np.asarray(wavelengths_nm, float)
    y = np.asarray(curve, float)
    i = int(np.argmax(y))
    if i == 0 or i == wl.size - 1:
        return float(wl[i]), True
    x0, x1, x2 = wl[i - 1:i + 2]
    y0, y1, y2 = y[i - 1:i + 2]
    den = (x0 - x1) * (x0 - x2) * (x1 - x2)
    a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den
    b = (x2**2 * (y0 - y1) + x1**2 * (y2 - y0) + x0**2 * (y1 - y2)) / den
    if a >= 0:
        return float(x1), False
    return float(np.clip(-b / (2 * a), x0, x2)), False


def extinction(resp) -> np.ndarray:
    """(n_wl, 2) zero-order extinction 1 − |t_ii|² for x- and y-polarised input."""
    t = np.asarray(resp.t)
    return 1.0 - np.abs(np.stack([t[:, 0, 0], t[:, 1, 1]], axis=1)) ** 2


# ----------------------------------------------------------------------------------------------- run
def _solver_responses(design, wavelength_sets, spacing, opts, incidence):
    """[(Response, info dict)] per wavelength list at one spacing: one compiled solver for all lists."""
    from ._dda import DdaOptions, dda_responses

    out = dda_responses(design, wavelength_sets, spacing, incidence=incidence,
                        options=DdaOptions(tol=float(opts.tol), max_points=int(opts.max_grid_points)))
    return [(jax.tree_util.tree_map(np.asarray, resp), info._asdict()) for resp, info in out]


def scan_wavelengths(opts: VerifyOptions):
    """(count,) wavelengths of the resonance scan, nm, or None without a scan."""
    if opts.scan is None:
        return None
    a, b, n = opts.scan
    return np.linspace(float(a), float(b), int(n))


#: largest violation of 0 <= T, R, |t_ij|^2 <= 1, A >= 0 and R + T + A = 1 an extrapolated response may show
#: before it is judged outside the asymptotic range (common practice, no source)
PHYSICAL_SLACK = 0.01


def physical_violation(resp) -> float:
    """How far a response leaves the physical range: max over wavelengths of the excess of T, R, the
    zero-order powers |t_ij|², |r_ij|² over [0, 1], of −A, and of |1 − R − T − A|. 0 for a real solve."""
    t2, r2 = np.abs(np.asarray(resp.t)) ** 2, np.abs(np.asarray(resp.r)) ** 2
    T, R, A = (np.asarray(x) for x in (resp.transmittance, resp.reflectance, resp.absorbance))
    parts = [T - 1, -T, R - 1, -R, -A, np.abs(1 - R - T - A), t2 - 1, r2 - 1]
    return float(max(np.max(p) for p in parts))


def best_estimate(spacings, responses) -> dict:
    """The verified response from solves at several spacings, and what its error bar is built from.

    Extrapolation to d → 0 (``extrapolated_response``) is used when its spectra stay physical
    (``physical_violation`` ≤ ``PHYSICAL_SLACK``); then the error bar compares it with the finest grid and,
    with three or more spacings, with the straight line through the two finest. Otherwise the grids are
    not yet in the asymptotic range: the finest grid is the estimate and its error bar is the first-order
    (Richardson) estimate of its own error, |finest − line through the two finest at d = 0|.

    Returns dict: ``response``, ``extrapolated`` (always the raw extrapolation), ``companions`` (responses
    whose goal differences from the estimate make the error bar), ``physical`` (bool), ``violation``.
    """
    order = np.argsort(spacings)
    finest = responses[int(order[0])]
    extrap = extrapolated_response(spacings, responses)
    lin2 = extrapolated_response([spacings[i] for i in order[:2]], [responses[i] for i in order[:2]])
    violation = physical_violation(extrap)
    if violation <= PHYSICAL_SLACK:
        companions = [finest] + ([lin2] if len(spacings) >= 3 else [])
        return {"response": extrap, "extrapolated": extrap, "companions": companions, "physical": True,
                "violation": violation}
    return {"response": finest, "extrapolated": extrap, "companions": [lin2], "physical": False,
            "violation": violation}


def _goal_rows(setup, goals_by_model: dict, fast_key: str, solver_keys, verified: dict,
               companions: list) -> dict:
    rows = {}
    for label, goal in zip(setup.labels, setup.spec.goals, strict=True):
        v0 = verified[label][0]
        err = max(abs(v0 - c[label][0]) for c in companions)
        if not math.isfinite(err):
            err = math.inf
        fast = goals_by_model[fast_key][label][0]
        rows[label] = {
            "metric": goal.metric, "sense": goal.sense, "target": goal.target, "unit": goal.unit,
            "fast": fast, "fast_met": goal.met(fast),
            "solver": {k: goals_by_model[k][label][0] for k in solver_keys},
            "verified": v0, "error_bar": err,
            "fast_minus_verified": fast - v0,
            "verdict": verdict(goal, v0, err),
        }
    return rows


def substrate_chain_length(design, model: ModelOptions) -> int:
    """Dipoles per rod for the rigorous-substrate row: the smallest odd N with L/N ≤ thickness for the
    longest rod (capped at ``AUTO_MAX_DIPOLES``), and never fewer than the checked model uses.

    Why: a point dipole at mid-height sees its image as if all its charge sat at its centre, which
    overstates the substrate coupling of a rod much longer than its thickness; chains with spacing no
    coarser than the thickness avoid that (see ``invdesign._interface``).
    """
    from ._simulate import AUTO_MAX_DIPOLES

    n = 1
    for e in design.elements:
        if e.shape == "rod":
            n = max(n, math.ceil(float(e.length) / float(e.thickness) - 1e-9))
    n = n + 1 if n % 2 == 0 else n
    floor = model.dipoles_per_rod if isinstance(model.dipoles_per_rod, int) else 1
    return int(max(min(n, AUTO_MAX_DIPOLES), floor))


def check_grids(design, opts: VerifyOptions) -> list:
    """Discretise the design at every requested spacing before any solve (cheap, NumPy); refuse spacings
    that round to the same grid or exceed the memory guard. Returns the ``DipoleGrid``s, coarsest first."""
    from ._dda_grid import discretise

    elements = jax.tree_util.tree_map(np.asarray, design.elements)
    grids = [discretise(elements, float(d), max_points=int(opts.max_grid_points))
             for d in sorted(opts.spacings_nm, reverse=True)]
    used = [g.spacing_nm for g in grids]
    if len({round(u, 9) for u in used}) != len(used):
        raise InvdesignError(
            f"verification.spacings_nm {list(opts.spacings_nm)} round to the grid spacings "
            f"{[round(u, 4) for u in used]} nm (each spacing is adjusted so the film thickness is a whole "
            f"number of layers); pick spacings that give distinct grids")
    return grids


def run_verify(design, spec, fab, model: ModelOptions, opts: VerifyOptions, *,
               incidence: Incidence | None = None, log=print) -> dict:
    """Judge a design's goals by the fast model and by the discretised solver; JSON-ready result.

    Args:
      design: ``Design``; spec: ``Spec`` (goals, band, channel); fab: ``FabDeck`` (recorded only).
      model: the fast model to check (its environment is used for the fast rows).
      opts: ``VerifyOptions``. log: a print-like function for progress lines.

    Returns:
      dict with ``goals`` (per goal: fast, per-spacing, extrapolated, error bar, verdict), ``solver``
      (per spacing: dipoles, spacing used, iterations, worst residual, seconds), ``resonance`` (if a scan
      was asked), ``responses`` (not JSON: the Response objects for plotting), ``wavelengths_nm``.
    """
    incidence = Incidence() if incidence is None else incidence
    if model.size_damping:
        raise InvdesignError("verify compares bulk-permittivity models; set model.size_damping=false "
                             "(the discretised solver has no size-damping option yet)")
    grids = check_grids(design, opts)
    log("verify: grids " + ", ".join(f"d={g.spacing_nm:.3g} nm ({int(g.counts.sum())} dipoles)"
                                     for g in grids))
    setup = evaluation_setup(spec, fab, design, ((model.dipoles_per_rod, model.correction),),
                             lambda wl: (), "verify")
    wl = setup.wavelengths
    t0 = time.perf_counter()
    fast = jax.tree_util.tree_map(np.asarray, simulate(design, wl, model=model, incidence=incidence))
    fast_key = f"fast ({_model_name(model)})"
    responses = {fast_key: fast}
    goals = {fast_key: exact_goals(fast, setup)}
    substrate_key = None
    if opts.substrate_row and model.environment == "averaged":
        # the same fast model with the rigorous substrate: how much the averaged medium itself moves the goals
        sub_model = dataclasses.replace(model, environment="interface",
                                        dipoles_per_rod=substrate_chain_length(design, model))
        substrate_key = f"fast ({_model_name(sub_model)})"
        responses[substrate_key] = jax.tree_util.tree_map(
            np.asarray, simulate(design, wl, model=sub_model, incidence=incidence))
        goals[substrate_key] = exact_goals(responses[substrate_key], setup)
    log(f"verify: fast model done in {time.perf_counter() - t0:.1f} s")
    spacings = [float(d) for d in opts.spacings_nm]
    solver_info, solver_resps, solver_keys = [], [], []
    scan_wl = scan_wavelengths(opts)
    scan_resps = []
    for d in sorted(spacings, reverse=True):
        ts = time.perf_counter()
        # the goal wavelengths and the resonance scan share one compiled solver per spacing
        solved = _solver_responses(design, [wl] if scan_wl is None else [wl, scan_wl], d, opts, incidence)
        resp, info = solved[0]
        if scan_wl is not None:
            scan_resps.append(solved[1][0])
        info = dict(info)
        info["seconds"] = round(time.perf_counter() - ts, 2)
        key = f"grid d={float(info.get('spacing_nm', d)):.3g} nm"
        responses[key] = resp
        goals[key] = exact_goals(resp, setup)
        solver_info.append({"requested_spacing_nm": d, **_jsonable(info)})
        solver_resps.append(resp)
        solver_keys.append(key)
        log(f"verify: grid d={float(info['spacing_nm']):.3g} nm: {info['n_dipoles']} dipoles, "
            f"{info['seconds']:.1f} s")
    used = [float(i.get("spacing_nm", i["requested_spacing_nm"])) for i in solver_info]
    est = best_estimate(used, solver_resps)
    responses[EXTRAPOLATED] = est["extrapolated"]
    verified = exact_goals(est["response"], setup)
    rows = _goal_rows(setup, goals, fast_key, solver_keys, verified,
                      [exact_goals(c, setup) for c in est["companions"]])
    if substrate_key is not None:
        for label, row in rows.items():
            row["fast_interface"] = goals[substrate_key][label][0]
    method = "linear in d" if len(used) == 2 else "quadratic in d (least squares)"
    if est["physical"]:
        basis = f"extrapolated to d → 0 ({method})"
    else:
        basis = (f"finest grid (d = {min(used):.3g} nm): the extrapolation ({method}) leaves the physical "
                 f"range by {est['violation']:.2g} (e.g. a power fraction above 1), so these grids are not "
                 f"yet in the asymptotic range; error bar = first-order estimate of the finest grid's "
                 f"error. Refine verification.spacings_nm for a firmer verdict")
    result = {"design_name": design.name, "spec": spec.name, "fab_deck": fab.name if fab else None,
              "fast_model": dataclasses.asdict(model), "spacings_nm": used,
              "extrapolation": method, "verified_basis": basis, "extrapolation_physical": est["physical"],
              "goals": rows, "solver": solver_info, "wavelengths_nm": wl.tolist(),
              "operating_nm": spec.operating_nm, "responses": responses,
              "balance_error_max": {k: float(np.max(np.abs(1 - r.transmittance - r.reflectance
                                                            - r.absorbance)))
                                    for k, r in responses.items() if k != EXTRAPOLATED}}
    if scan_wl is not None:
        result["resonance"] = _resonance_study(design, model, scan_wl, incidence, used, scan_resps, log)
    result["seconds"] = round(time.perf_counter() - t0, 2)
    return result


def _resonance_study(design, model, wl, incidence, used, resps, log) -> dict:
    """Resonance shift on the scan ``wl`` (n,) nm from the solver's scan responses ``resps`` (one per
    spacing in ``used``, coarsest first, as solved with the goal wavelengths)."""
    fast = simulate(design, wl, model=model, incidence=incidence)
    spacings = list(used)
    est = best_estimate(spacings, resps)
    ext = est["response"]
    out = {"scan_nm": wl.tolist(), "fast_extinction": extinction(fast).tolist(),
           "verified_extinction": extinction(ext).tolist(), "extrapolation_physical": est["physical"],
           "per_input": {}}
    for j, pol in enumerate(("x", "y")):
        lf, edge_f = resonance_nm(wl, extinction(fast)[:, j])
        lv, edge_v = resonance_nm(wl, extinction(ext)[:, j])
        out["per_input"][pol] = {"fast_nm": lf, "verified_nm": lv, "shift_nm": lf - lv,
                                 "at_scan_edge": bool(edge_f or edge_v)}
    log("verify: resonance scan done")
    return out


def _model_name(model: ModelOptions) -> str:
    env = getattr(model, "environment", "averaged")
    return f"{model.dipoles_per_rod} dipole(s)/rod, {model.correction}" + (
        "" if env == "averaged" else f", {env}")


def _jsonable(info: dict) -> dict:
    out = {}
    for k, v in info.items():
        if isinstance(v, (np.ndarray, jax.Array)):
            v = np.asarray(v).tolist()
        elif isinstance(v, np.generic):
            v = v.item()
        out[k] = v
    return out
