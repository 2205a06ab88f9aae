"""Writing an optimisation run's results: design.json, metrics.json, history.csv and three PNG plots.

All files are written atomically. ``metrics.json`` holds: the verdict (feasible or not, and why), every goal
with its target, achieved worst-case value and pass/fail, every figure of merit at the operating
wavelength, the exact rule check, the convergence report, the runner-up (best infeasible) with what it
misses, the run's settings and timing, and the safety note.
"""

import io
import json
import math
import pathlib

import numpy as np

from ._atomic import atomic_savefig
from ._design import atomic_write_text
from ._metrics import channel_amplitudes, intensity, modulation_depth
from ._optimize import history_columns, metrics_at_operating, misses
from ._spectra_io import SAFETY_NOTE


def _clean(x):
    """JSON-safe copy: non-finite floats become strings ('inf', 'nan')."""
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, (np.floating, float)):
        return float(x) if math.isfinite(float(x)) else str(float(x))
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def candidate_summary(setup, c) -> dict | None:
    """The JSON part of an evaluated candidate."""
    if c is None:
        return None
    out = {"start": c.get("start"), "loss": c.get("loss"), "feasible": c["feasible"],
           "rules_ok": c["rules_ok"],
           "goals_ok": c["goals_ok"], "flagged": c.get("flagged", False), "goals": c["goals"],
           "rules_violated": c["rules"], "misses": misses(c)}
    if c.get("design") is not None:
        out["design"] = c["design"].to_dict()
        out["figures_at_operating_nm"] = metrics_at_operating(setup, c["response"])
    if c.get("report") is not None:
        out["convergence"] = c["report"]
    return out


def write_history(setup, history: np.ndarray, path) -> None:
    buf = io.StringIO()
    buf.write(",".join(history_columns(setup)) + "\n")
    for row in history:
        buf.write(",".join(str(int(v)) if i == 0 else f"{v:.10g}" for i, v in enumerate(row)) + "\n")
    atomic_write_text(path, buf.getvalue())


def write_outputs(setup, result: dict, final: dict, out_dir, *, meta: dict, plot: bool = True) -> dict:
    """Write every output file of a run; returns {kind: path}."""
    out = pathlib.Path(out_dir)
    best = final["best_feasible"] or final["best_infeasible"]
    paths = {}
    doc = {
        "verdict": "feasible" if final["best_feasible"] else "no feasible design found",
        "feasible": final["best_feasible"] is not None,
        "accept_flagged_override": setup.opts.accept_flagged,
        "operating_nm": setup.spec.operating_nm,
        "goals": (best or {}).get("goals", {}),
        "best_feasible": candidate_summary(setup, final["best_feasible"]),
        "best_infeasible": candidate_summary(setup, final["best_infeasible"]),
        "candidates": [{"start": c["start"], "loss": c["loss"], "feasible": c["feasible"],
                        "misses": misses(c)} for c in final["candidates"]],
        "run": meta,
        "safety": SAFETY_NOTE,
    }
    atomic_write_text(out / "metrics.json", json.dumps(_clean(doc), indent=2) + "\n")
    paths["metrics"] = out / "metrics.json"
    write_history(setup, result["history"], out / "history.csv")
    paths["history"] = out / "history.csv"
    if best is not None and best.get("design") is not None:
        best["design"].to_json(out / "design.json")
        paths["design"] = out / "design.json"
        if plot:
            paths["spectra_png"] = plot_spectra(setup, best, out / "spectra.png")
            paths["phase_png"] = plot_phase(setup, best, out / "phase.png")
            paths["cell_png"] = plot_cell(setup, best, out / "cell.png")
    return paths


def _save(fig, path):
    return atomic_savefig(fig, path)


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _model_color(k: int):
    """One colour per robust model, the same in every plot of a run."""
    import matplotlib

    return matplotlib.colormaps["tab10"](k % 10)


def finish_depth_axes(ax, spec) -> None:
    """Depth target, operating wavelength, labels and legend of a modulation-depth-vs-wavelength panel."""
    depth = spec.depth_target()
    if depth is not None:
        ax.axhline(depth, color="0.4", ls=":", lw=0.8, label=f"depth target {depth:g}")
    ax.axvline(spec.operating_nm, color="0.7", lw=0.8)
    ax.set(xlabel="vacuum wavelength (nm)", ylabel="peak-to-peak depth M", ylim=(0, None),
           title=f"modulation depth at rho = {spec.rho:g}")
    ax.legend(fontsize=7)


def plot_spectra(setup, c, path):
    """|T_xx|², |T_xy|² and the modulation depth M against wavelength, at each robust resolution."""
    plt = _plt()
    spec = setup.spec
    wl = setup.wavelengths
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.2), constrained_layout=True)
    for k, (n, resp) in enumerate(c["responses"].items()):
        color = _model_color(k)
        J = np.asarray(resp.t if spec.matrix == "t" else resp.r)
        axes[0].plot(wl, np.abs(J[:, 0, 0]) ** 2, ".-", ms=3, color=color, label=n)
        axes[0].plot(wl, np.abs(J[:, 0, 1]) ** 2, ".--", ms=3, color=color)
        a, b = channel_amplitudes(J, spec.signal, spec.control, spec.analyzer)
        axes[1].plot(wl, np.asarray(modulation_depth(a, b, spec.rho)), ".-", ms=3, color=color, label=n)
    axes[0].axhline(0.25, color="0.5", lw=0.8, ls=":", label="0.25 single-sheet cross-pol ceiling")
    axes[0].set(xlabel="vacuum wavelength (nm)", ylabel="zero-order power",
                title=f"solid |{spec.matrix}_xx|², dashed |{spec.matrix}_xy|² (dots: optimised samples)")
    axes[0].legend(fontsize=7)
    finish_depth_axes(axes[1], spec)
    fig.suptitle(f"{spec.name}: {'feasible' if c['feasible'] else 'NOT feasible'} design")
    return _save(fig, path)


def plot_phase(setup, c, path):
    """Detected intensity I(φ) at the operating wavelength, with the signal-only level."""
    plt = _plt()
    spec = setup.spec
    phi = np.linspace(-np.pi, np.pi, 361)
    fig, ax = plt.subplots(figsize=(6, 4), constrained_layout=True)
    for k, (n, resp) in enumerate(c["responses"].items()):
        J = np.asarray(resp.t if spec.matrix == "t" else resp.r)[setup.i0]
        a, b = channel_amplitudes(J, spec.signal, spec.control, spec.analyzer)
        ax.plot(np.degrees(phi), np.asarray(intensity(a, b, spec.rho, phi)), color=_model_color(k),
                label=f"I(φ), {n}")
        ax.axhline(float(np.abs(a) ** 2), ls=":", lw=0.8, color=_model_color(k))
    ax.set(xlabel="control phase φ (deg)", ylabel="detected intensity / incident signal",
           title=f"I(φ) at {spec.operating_nm:g} nm, rho = {spec.rho:g} (dotted: signal alone)")
    ax.legend(fontsize=8)
    return _save(fig, path)


def plot_cell(setup, c, path):
    """The unit cell drawn to scale (nm) with each rod's dimensions, plus neighbouring images in grey."""
    plt = _plt()
    from matplotlib.patches import Polygon, Rectangle

    from ._geometry import footprint

    p = c["design"].params
    a1, a2 = np.asarray(p.a1, float), np.asarray(p.a2, float)
    fig, ax = plt.subplots(figsize=(6, 6), constrained_layout=True)
    px, py = a1[0], a2[1]
    ax.add_patch(Rectangle((-px / 2, -py / 2), px, py, fill=False, ls="--", color="0.4"))
    for i in (-1, 0, 1):
        for j in (-1, 0, 1):
            shift = i * a1 + j * a2
            for k, e in enumerate(p.elements):
                poly = footprint(e) + shift
                main = i == 0 and j == 0
                ax.add_patch(Polygon(poly, closed=True, color="goldenrod" if main else "0.85",
                                     alpha=1.0 if main else 0.6))
                if main:
                    cx, cy = np.asarray(e.center, float)
                    dims = f"{float(e.length):g} × {float(e.width):g} × {float(e.thickness):g} nm"
                    ax.annotate(f"rod {k}\n{dims}"
                                f"\n{float(e.angle_deg):g}°", (cx, cy), ha="center", va="center", fontsize=7)
    ax.set_xlim(-0.8 * px, 0.8 * px)
    ax.set_ylim(-0.8 * py, 0.8 * py)
    ax.set_aspect("equal")
    ax.set(xlabel="x (nm)", ylabel="y (nm)",
           title=f"cell {px:g} × {py:g} nm (to scale; grey: periodic images)")
    return _save(fig, path)
