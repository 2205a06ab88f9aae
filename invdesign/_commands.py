"""The work behind each CLI command: config in, files out. Configs are read here and nowhere deeper."""

import dataclasses
import json
import math
import pathlib
import time

import numpy as np
from omegaconf import OmegaConf

from ._design import Design, atomic_write_text
from ._errors import InvdesignError
from ._interface import DEFAULT_TOLERANCE
from ._simulate import Incidence, ModelOptions
from ._simulate import simulate as _simulate
from ._spectra_io import SAFETY_NOTE, plot_spectra, write_spectra


def build_model(cfg) -> ModelOptions:
    """ModelOptions from the ``model`` config group."""
    n = cfg.dipoles_per_rod
    n = "auto" if str(n) == "auto" else int(n)
    damping = cfg.get("size_damping", False)
    coefficient = cfg.get("size_damping_coefficient", 1.0)
    if not isinstance(damping, bool):
        raise InvdesignError(f"model.size_damping must be true or false, got {damping!r}")
    if isinstance(coefficient, int) and not isinstance(coefficient, bool):
        coefficient = float(coefficient)
    tol = cfg.get("interface_tolerance", DEFAULT_TOLERANCE)
    if isinstance(tol, int) and not isinstance(tol, bool):
        tol = float(tol)
    return ModelOptions(dipoles_per_rod=n, correction=str(cfg.correction), size_damping=damping,
                        size_damping_coefficient=coefficient,
                        environment=str(cfg.get("environment", "averaged")), interface_tolerance=tol)


def build_wavelengths(cfg) -> np.ndarray:
    """Wavelength grid (nm) from {start_nm, stop_nm, count}."""
    start, stop, count = float(cfg.start_nm), float(cfg.stop_nm), int(cfg.count)
    if not (0 < start < stop) or count < 2:
        raise InvdesignError(f"wavelengths: need 0 < start_nm < stop_nm and count ≥ 2, got start_nm={start}, "
                             f"stop_nm={stop}, count={count}")
    return np.linspace(start, stop, count)


def _run_dir() -> pathlib.Path:
    from hydra.core.hydra_config import HydraConfig

    return pathlib.Path(HydraConfig.get().runtime.output_dir)


def simulate(cfg) -> None:
    """``invdesign simulate design=PATH``: spectra, plot and a copy of the design into the run folder."""
    design = Design.from_json(pathlib.Path(str(cfg.design)).expanduser())
    wl = build_wavelengths(cfg.wavelengths)
    model = build_model(cfg.model)
    inc = Incidence(float(cfg.incidence.polar_deg), float(cfg.incidence.azimuth_deg))
    t0 = time.perf_counter()
    resp = _simulate(design, wl, model=model, incidence=inc)
    elapsed = time.perf_counter() - t0
    out = _run_dir()
    meta = {"design": str(cfg.design), "name": design.name, "model": OmegaConf.to_container(cfg.model),
            "incidence": OmegaConf.to_container(cfg.incidence), "seconds": round(elapsed, 3)}
    paths = write_spectra(resp, out, meta=meta)
    design.to_json(out / "design.json")
    atomic_write_text(out / "config.yaml", OmegaConf.to_yaml(cfg))
    if cfg.plot:
        paths["png"] = plot_spectra(resp, out / "spectra.png", title=design.name or str(cfg.design))
    balance = np.max(np.abs(1 - resp.transmittance - resp.reflectance - resp.absorbance))
    t_cross = np.abs(resp.t[:, 1, 0]) ** 2
    i = int(np.argmax(t_cross))
    print(f"simulated {len(wl)} wavelengths, {len(design.elements)} elements in {elapsed:.2f} s "
          f"(model: {model.dipoles_per_rod} dipole(s)/rod, {model.correction} correction)")
    print(f"peak cross-polarised transmission |t_yx|^2 = {t_cross[i]:.4f} at {wl[i]:.1f} nm; "
          f"max |1 - T - R - A| = {balance:.2e}")
    for kind, p in paths.items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)
    return None


def _dump(obj) -> str:
    return json.dumps(obj, indent=2)


def optimize(cfg) -> None:
    """``invdesign optimize spec=NAME fab=NAME cell=NAME`` (or ``resume=RUN_DIR``): a verified design."""
    from . import _optimize as opt
    from ._optimize_io import write_outputs
    from ._spec import parse_cell, parse_fab, parse_spec

    t_start = time.perf_counter()
    resume = cfg.get("resume")
    out, plain = _load_or_save_config(cfg, "optimize")
    spec = parse_spec(plain.get("spec"))
    fab = parse_fab(plain.get("fab"))
    cell = parse_cell(plain.get("cell"))
    opts = opt.parse_run_options(plain, fab, plain.get("model", {}))
    setup = opt.build_setup(spec, fab, cell, opts)
    vopts = None
    if plain.get("verify", False) not in (True, False):
        raise InvdesignError(f"verify must be true or false, got {plain.get('verify')!r}")
    if plain.get("verify", False):
        from ._verify import parse_verify_options

        vopts = parse_verify_options(plain.get("verification"), spec.operating_nm)
    quiet = bool(plain.get("quiet", False))
    print(f"optimize: spec '{spec.name}' ({len(spec.goals)} goals at {spec.operating_nm:g} nm), fab deck "
          f"'{fab.name}' ({fab.label}), cell '{cell.name}' ({len(setup.family.names)} free parameters), "
          f"{opts.starts} starts, {opts.optimizer}, up to {opts.steps} steps")
    from ._convergence import model_label

    print("goals must hold under every model of the robust set: "
          + ", ".join(model_label(n, c) for n, c in opts.models)
          + (f" (several resolutions: deck min gap {fab.min_gap_nm:g} nm < "
             f"{opt.ROBUST_GAP_THRESHOLD_NM:g} nm)"
             if len(opts.resolutions) > 1 else ""))
    if opts.environment == "interface":
        need = math.ceil(fab.length_max_nm / min(fab.thickness_nm) - 1e-9)
        need += 1 - need % 2
        if max(opts.resolutions) < need:
            print(f"note: with model.environment=interface a rod needs chains with spacing about its "
                  f"thickness "
                  f"(a single dipole overstates its image coupling); this deck allows rods up to "
                  f"{fab.length_max_nm:g} nm on {min(fab.thickness_nm):g} nm films, i.e. about N = {need}, "
                  f"but the robust set stops at N = {max(opts.resolutions)}: set "
                  f"robust.resolutions=[{need}] (slower) or read the results as indicative only")
    fab_robust = None
    if opts.fab_robust is not None:
        fr = opts.fab_robust
        fab_robust = {**dataclasses.asdict(fr), "sigma_used": opt.fab_draws(setup)[1],
                      "tolerance_label": fab.tolerance.label, "copies_model": model_label(*opts.models[0])}
        what = "mean" if fr.statistic == "mean" else f"{fr.quantile:g}-quantile"
        print(f"fab-robust loss: {what} over {fr.samples} fabricated copies (deck sigma x{fr.sigma_scale:g}, "
              f"seed {fr.seed}, fixed for the run) under {fab_robust['copies_model']}")
    if resume:
        print(f"resuming from {out}")
    try:
        result = opt.run(setup, out, quiet=quiet)
    except opt.Interrupted as err:
        print(f"optimize: {err}. Continue with: invdesign optimize resume={out}")
        raise SystemExit(130) from None
    final = opt.finish(setup, result)
    meta = {"run_dir": str(out), "fingerprint": setup.fingerprint, "steps": result["steps"],
            "stopped": result["stopped"], "optimise_seconds": round(result["seconds"], 2),
            "total_seconds": round(time.perf_counter() - t_start, 2), "resolutions": list(opts.resolutions),
            "robust_models": [f"{c}/N={n}" for n, c in opts.models],
            "correction": opts.correction, "optimizer": opts.optimizer, "starts": opts.starts,
            "seed": opts.seed,
            "free_parameters": setup.family.describe(), "fab_deck": fab.name, "fab_label": fab.label,
            "spec": spec.name, "cell": cell.name, "fab_robust": fab_robust}
    paths = write_outputs(setup, result, final, out, meta=meta, plot=bool(plain.get("plot", True)))
    _print_verdict(setup, final, result)
    if vopts is not None:
        paths.update(_verify_final(setup, final, fab, plain, vopts, out))
    for kind, p in paths.items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)


def _verify_final(setup, final, fab, plain, vopts, out) -> dict:
    """``optimize verify=true``: the discretised-solver check of the returned design, into out/verify/."""
    chosen = final["best_feasible"] or final["best_infeasible"]
    if chosen is None or chosen.get("design") is None:
        print("verify: no design to verify")
        return {}
    which = "best feasible" if final["best_feasible"] else "best infeasible"
    print(f"\nverify: checking the {which} design with the discretised solver at d = "
          f"{', '.join(f'{d:g}' for d in vopts.spacings_nm)} nm")
    model = build_model(OmegaConf.create(plain.get("model", {})))
    sub = out / "verify"
    sub.mkdir(exist_ok=True)
    found = run_verification(chosen["design"], setup.spec, fab, model, vopts, sub,
                             meta={"design": str(out / "design.json"), "which": which,
                                   "spec": setup.spec.name, "fab_deck": fab.name},
                             plot=bool(plain.get("plot", True)))
    return {f"verify {k}": v for k, v in found.items()}


def _print_verdict(setup, final, result) -> None:
    from ._convergence import format_report
    from ._optimize import misses

    best = final["best_feasible"]
    print(f"\n{result['steps']} steps ({result['stopped']}) in {result['seconds']:.1f} s")
    if best is None:
        print("NO FEASIBLE DESIGN: no start met every goal and rule after snapping and re-checking.")
        best = final["best_infeasible"]
        if best is None:
            return
        print("best infeasible design (written as design.json) misses:")
        for m in misses(best):
            print(f"  - {m}")
    else:
        print("FEASIBLE design (snapped to the grid, exact rules and a fresh simulation re-checked):")
    for label, g in best["goals"].items():
        unit = f" {g['unit']}" if g["unit"] else ""
        print(f"  {label:<22} {g['sense']} {g['target']:<8g} achieved {g['achieved']:.4g}{unit} "
              f"(worst: {g['at_resolution']})  {'pass' if g['pass'] else 'FAIL'}")
    if best.get("report"):
        print("convergence report:")
        print(format_report(best["report"]))
    if final["best_feasible"] is not None and final["best_infeasible"] is not None:
        print("best infeasible candidate misses: " + "; ".join(misses(final["best_infeasible"])))


def _load_or_save_config(cfg, command: str):
    """(run folder, plain config): a new run's folder and config, or a resumed run's saved ones."""
    resume = cfg.get("resume")
    if resume:
        out = pathlib.Path(str(resume)).expanduser()
        saved = out / "run_config.yaml"
        if not saved.is_file():
            raise InvdesignError(f"resume={resume}: no run_config.yaml in that folder; give the folder of an "
                                 f"earlier 'invdesign {command}' run (runs/{command}/<timestamp>)")
        plain = OmegaConf.to_container(OmegaConf.load(saved), resolve=True)
        plain["quiet"], plain["plot"] = bool(cfg.get("quiet", False)), bool(cfg.get("plot", True))
        return out, plain
    out = _run_dir()
    plain = OmegaConf.to_container(cfg, resolve=True)
    plain["resume"] = None
    atomic_write_text(out / "run_config.yaml", OmegaConf.to_yaml(OmegaConf.create(plain)))
    return out, plain


def tradeoff(cfg) -> None:
    """``invdesign tradeoff objectives=[...] spec=NAME fab=NAME cell=NAME``: a fab-checked Pareto front."""
    from . import _optimize as opt
    from ._spec import parse_cell, parse_fab, parse_spec
    from ._tradeoff import build_tradeoff, evaluate_front, run_front
    from ._tradeoff_io import write_front

    t_start = time.perf_counter()
    out, plain = _load_or_save_config(cfg, "tradeoff")
    spec = parse_spec(plain.get("spec"))
    fab = parse_fab(plain.get("fab"))
    cell = parse_cell(plain.get("cell"))
    opts = opt.parse_run_options(plain, fab, plain.get("model", {}))
    ts = build_tradeoff(spec, fab, cell, opts, plain.get("objectives"), plain.get("front"))
    from ._convergence import model_label

    print(f"tradeoff: spec '{spec.name}', objectives {', '.join(o.label() for o in ts.objectives)}; "
          f"constraints: {', '.join(g.describe() for g in ts.base.spec.goals) or 'none'}")
    print(f"  fab deck '{fab.name}', cell '{cell.name}' ({len(ts.base.family.names)} free parameters), "
          f"{len(ts.weights)} weight vectors (divisions {ts.front.divisions}), batch of {ts.rows} rows; "
          f"robust models: {', '.join(model_label(n, c) for n, c in opts.models)}")
    if plain.get("resume"):
        print(f"resuming from {out}")
    try:
        state = run_front(ts, out, quiet=bool(plain.get("quiet", False)))
    except opt.Interrupted as err:
        print(f"tradeoff: {err}. Continue with: invdesign tradeoff resume={out}")
        raise SystemExit(130) from None
    cands = evaluate_front(ts, state, with_report=bool(plain.get("report_each_point", True)))
    meta = {"run_dir": str(out), "fingerprint": ts.fingerprint, "spec": spec.name, "fab_deck": fab.name,
            "cell": cell.name, "robust_models": [model_label(n, c) for n, c in opts.models],
            "sweep_seconds": round(float(state.get("seconds", 0.0)), 2),
            "total_seconds": round(time.perf_counter() - t_start, 2), "seed": opts.seed,
            "starts": opts.starts, "anchor_steps": opts.steps, "point_steps": ts.front.steps}
    res = write_front(ts, state, cands, out, meta=meta, plot=bool(plain.get("plot", True)))
    q = res["quality"]
    print(f"\nfront: {q['points']} non-dominated feasible point(s) of {len(cands)} checked candidates "
          f"({len(ts.weights)} lattice points) "
          f"({int(state['evaluations'])} value-and-gradient evaluations, "
          f"{time.perf_counter() - t_start:.1f} s in all)")
    for p in res["front"]:
        vals = ", ".join(f"{n} {v:.4g}" for n, v in p["objectives"].items())
        tag = " (knee)" if p["knee"] else "       "
        print(f"  point {p['point']:2d}{tag}  {vals}  -> {p['design_json']}")
    if q["hypervolume"] is not None:
        sp = "n/a" if q["spacing"] is None else f"{q['spacing']:.4g}"
        ref = ", ".join(f"{n} {v:.4g}" for n, v in q["reference"].items())
        print(f"hypervolume {q['hypervolume']:.6g} ({q['hypervolume_units']}; normalised "
              f"{q['hypervolume_normalised']:.4g}) against reference [{ref}]; spacing {sp}")
    else:
        print("NO FEASIBLE POINT: every lattice point misses a constraint or a rule (see front.json)")
    for kind, p in res["paths"].items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)


def export(cfg) -> None:
    """``invdesign export design=PATH layout=NAME [fab=NAME] [force=true]``: GDSII/OASIS plus a traveller."""
    from ._layout import format_violation, plan_layout, refuse_unless_forced
    from ._layout_options import LayoutError, parse_layout
    from ._layout_traveller import exposure, plot_cell, traveller_text
    from ._layout_write import write_layout
    from ._spec import parse_fab

    if not cfg.get("design"):
        raise LayoutError("design=PATH is required: the design file to export (e.g. "
                          "design=runs/optimize/<timestamp>/design.json or examples/kestrel_cross_pair.json)")
    force = cfg.get("force", False)
    if not isinstance(force, bool):
        raise LayoutError(f"force must be true or false, got {force!r}")
    stem = str(cfg.get("stem", "layout"))
    if not stem or "/" in stem or stem.startswith("."):
        raise LayoutError(f"stem must be a plain file name without '/' or a leading '.', got {stem!r}")
    path = pathlib.Path(str(cfg.design)).expanduser()
    design = Design.from_json(path)
    fab = parse_fab(OmegaConf.to_container(cfg.fab, resolve=True))
    opts = parse_layout(OmegaConf.to_container(cfg.layout, resolve=True))
    _note_deck_mismatch(path, fab.name)
    plan = plan_layout(design, fab, opts)
    refuse_unless_forced(plan, force)
    out = _run_dir()
    files = write_layout(plan, out, stem=stem)
    png = None
    if cfg.get("plot", True):
        plot_cell(plan, out / "cell.png")
        png = "cell.png"
    design.to_json(out / "design.json")
    atomic_write_text(out / "config.yaml", OmegaConf.to_yaml(cfg))
    atomic_write_text(out / "traveller.md", traveller_text(plan, files, design_path=str(path), forced=force,
                                                           png=png))
    exp = exposure(plan)
    fw, fh = plan.field_um
    print(f"export: '{design.name or path.name}' under fab deck '{fab.name}' and layout '{opts.name}': "
          f"{plan.n1} x {plan.n2} cells ({fw:.2f} x {fh:.2f} um), {len(plan.elements)} shapes per cell, "
          f"grid {plan.grid_nm:g} nm; beam-on estimate {exp['seconds']:.4g} s")
    if plan.violations:
        print(f"WRITTEN DESPITE {len(plan.violations)} VIOLATION(S) (force=true); listed in traveller.md:")
        for v in plan.violations:
            print(f"  - {format_violation(v)}")
    written = {**files, "traveller": out / "traveller.md", **({"png": out / png} if png else {})}
    for kind, p in written.items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)


def _note_deck_mismatch(design_path: pathlib.Path, fab_name: str) -> None:
    """Say so when the design comes from an optimise run made for a different fab deck."""
    saved = design_path.parent / "run_config.yaml"
    if not saved.is_file():
        return
    try:
        made_for = OmegaConf.load(saved).get("fab", {}).get("name")
    except Exception:  # an unreadable neighbour file is no reason to stop an export
        return
    if made_for and made_for != fab_name:
        print(f"note: this design was optimised for fab deck '{made_for}'; exporting under '{fab_name}' "
              f"(pass fab={made_for} to use that deck)")


def tolerance(cfg) -> None:
    """``invdesign tolerance design=PATH fab=NAME spec=NAME [samples=N]``: yield under the fab's errors."""
    from . import _tolerance as tol
    from ._spec import parse_fab, parse_spec
    from ._tolerance_io import write_outputs

    t_start = time.perf_counter()
    plain = OmegaConf.to_container(cfg, resolve=True)
    opts = tol.parse_study_options(plain)
    spec = parse_spec(plain.get("spec"))
    fab = parse_fab(plain.get("fab"))
    if fab.tolerance is None:
        raise InvdesignError(f"fab deck '{fab.name}' has no tolerance block; add one to "
                             f"conf/fab/{fab.name}.yaml (tolerance: {{label, width_nm: {{global, local}}, "
                             f"length_nm, position_nm: {{local}}, angle_deg, thickness_nm}}, 1-sigma values) "
                             f"or pick another deck")
    path = pathlib.Path(opts.design).expanduser()
    design = Design.from_json(path)
    model = build_model(cfg.model)
    sigma = tol.sigmas(fab.tolerance, opts.sigma_scale)
    ev = tol.make_evaluator(design, spec, fab, model, batch=opts.batch)
    out = _run_dir()
    atomic_write_text(out / "run_config.yaml", OmegaConf.to_yaml(cfg))
    design.to_json(out / "design.json")
    _note_deck_mismatch(path, fab.name)
    print(f"tolerance: '{design.name or path.name}' against spec '{spec.name}' ({len(spec.goals)} goals) "
          f"under fab deck '{fab.name}' (sigma: {fab.tolerance.label}; x{opts.sigma_scale:g}), "
          f"{opts.samples} samples, model {model.dipoles_per_rod} dipole(s)/rod, {model.correction}")
    result = tol.study(ev, sigma, samples=opts.samples, seed=opts.seed, level=opts.level, method=opts.method,
                       driver_samples=opts.driver_samples)
    meta = {"design": str(path), "design_name": design.name, "spec": spec.name, "fab_deck": fab.name,
            "tolerance_label": fab.tolerance.label, "sigma_scale": opts.sigma_scale, "sigma_used": sigma,
            "corner_radius_sigma_nm": {"global": fab.tolerance.get("corner_radius_nm", "global"),
                                       "local": fab.tolerance.get("corner_radius_nm", "local")},
            "model": {"dipoles_per_rod": model.dipoles_per_rod, "correction": model.correction},
            "samples": opts.samples, "seed": opts.seed, "seconds": round(time.perf_counter() - t_start, 2)}
    paths = write_outputs(result, ev, out, meta=meta, plot=bool(plain.get("plot", True)))
    _print_tolerance(result, ev)
    for kind, p in paths.items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)


def _print_tolerance(result, ev) -> None:
    y = result["yield"]
    ci = y["interval"]
    print(f"\nyield {100 * y['fraction']:.1f} % ({y['passed']} of {y['samples']} samples; "
          f"{100 * ci['level']:g} % {ci['method'].replace('_', '-')} interval {100 * ci['low']:.1f}–"
          f"{100 * ci['high']:.1f} %); touching elements in {y['bridged_samples']} samples; nominal design "
          f"{'passes' if y['nominal_passes'] else 'FAILS'}")
    print(f"  {'goal':<22} {'target':<12} {'nominal':>10} {'pass %':>7} {'linear σ':>10} {'MC σ':>10}  "
          f"largest source")
    for label, g in result["goals"].items():
        lin = g["linear"]
        print(f"  {label:<22} {g['sense'] + ' ' + format(g['target'], 'g'):<12} {g['nominal']:>10.4g} "
              f"{100 * g['pass_fraction']:>7.1f} {lin['sigma_linear']:>10.3g} "
              f"{lin['sigma_monte_carlo']:>10.3g}  {lin['largest_source']}"
              + ("" if lin["quantity"] == g["metric"] else f"  (spread of {lin['quantity']})"))
    blame = {k: v for k, v in result["drivers"]["failures_by_source_linear"].items() if v}
    if blame:
        print("failed goals by dominant source (first-order model): "
              + ", ".join(f"{k} {v}" for k, v in sorted(blame.items(), key=lambda kv: -kv[1])))
    rem = result["drivers"]["removal"]
    if rem:
        gains = sorted(rem["yield_gain_if_removed"].items(), key=lambda kv: -kv[1])
        print(f"yield gain if one source were removed ({rem['samples']} samples, same draws): "
              + ", ".join(f"{k} {100 * v:+.1f} %" for k, v in gains))


def gather(cfg) -> None:
    """``invdesign gather sweep=DIR``: one table and plot of a multirun sweep's jobs."""
    from ._sweep_summary import gather as _gather
    from ._sweep_summary import write_summary

    if not cfg.get("sweep"):
        raise InvdesignError("sweep is missing: give the folder of a multirun sweep, e.g. "
                             "invdesign gather sweep=runs/tradeoff-sweep/<timestamp>")
    table = _gather(str(cfg.sweep))
    paths = write_summary(table, _run_dir(), plot=bool(cfg.get("plot", True)))
    done = sum(r["status"] != "unfinished" for r in table["rows"])
    print(f"gathered {len(table['rows'])} job(s) of {table['sweep']} ({done} finished); varying: "
          f"{', '.join(table['varying']) or 'nothing'}")
    for r in table["rows"]:
        print("  " + ", ".join(f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}" for k, v in r.items()))
    for kind, p in paths.items():
        print(f"wrote {kind}: {p}")


def run_verification(design, spec, fab, model, vopts, out_dir, *, meta: dict, plot: bool = True) -> dict:
    """``run_verify``, then verify.json/.md/.png into ``out_dir``; prints the table."""
    from ._verify import run_verify
    from ._verify_io import resonance_lines, solver_lines, table_lines, write_outputs

    result = run_verify(design, spec, fab, model, vopts)
    paths = write_outputs(result, spec, out_dir, meta=meta, plot=plot)
    print("\n".join(["", f"verified values: {result['verified_basis']}", *table_lines(result), "",
                     *solver_lines(result)]))
    if result.get("resonance"):
        print("\n".join(["", "resonance (largest zero-order extinction):", *resonance_lines(result)]))
    return paths


def verify(cfg) -> None:
    """``invdesign verify design=PATH spec=NAME``: fast model vs the discretised solver, goal by goal."""
    from ._spec import parse_fab, parse_spec
    from ._tolerance import check_design
    from ._verify import parse_verify_options

    plain = OmegaConf.to_container(cfg, resolve=True)
    spec = parse_spec(plain.get("spec"))
    fab = parse_fab(plain.get("fab"))
    vopts = parse_verify_options(plain.get("verification"), spec.operating_nm)
    if not plain.get("design"):
        raise InvdesignError("design is missing: give a design file, e.g. "
                             "invdesign verify design=runs/optimize/<timestamp>/design.json spec=heron_1310")
    path = pathlib.Path(str(plain["design"])).expanduser()
    design = Design.from_json(path)
    check_design(design, spec)
    model = build_model(cfg.model)
    out = _run_dir()
    atomic_write_text(out / "run_config.yaml", OmegaConf.to_yaml(cfg))
    design.to_json(out / "design.json")
    print(f"verify: '{design.name or path.name}' against spec '{spec.name}' ({len(spec.goals)} goals), fast "
          f"model {model.dipoles_per_rod} dipole(s)/rod ({model.correction}) vs the discretised solver at "
          f"d = {', '.join(f'{d:g}' for d in vopts.spacings_nm)} nm")
    meta = {"design": str(path), "spec": spec.name, "fab_deck": fab.name}
    paths = run_verification(design, spec, fab, model, vopts, out, meta=meta,
                             plot=bool(plain.get("plot", True)))
    for kind, p in paths.items():
        print(f"wrote {kind}: {p}")
    print(SAFETY_NOTE)
