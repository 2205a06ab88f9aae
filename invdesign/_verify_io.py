"""Writing a verification: verify.json, verify.md (the side-by-side table) and verify.png (overlay)."""

import json
import math
import pathlib

import numpy as np

from ._atomic import atomic_savefig
from ._design import atomic_write_text
from ._metrics import channel_amplitudes, modulation_depth
from ._optimize_io import finish_depth_axes
from ._spectra_io import SAFETY_NOTE

EXTRAPOLATED = "extrapolated (d → 0)"


def _fmt(v) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a" if v is None else ("inf" if v > 0 else "-inf") if not math.isnan(v) else "nan"
    return f"{v:.4g}"


def table_lines(result: dict) -> list[str]:
    """The side-by-side table of every goal as Markdown lines (also printed to the terminal)."""
    solver_keys = [k for k in next(iter(result["goals"].values()))["solver"]]
    first = next(iter(result["goals"].values()))
    sub = "fast_interface" in first
    head = ["goal", "target", "fast"] + (["fast, rigorous substrate"] if sub else []) + solver_keys
    head += ["verified", "± error bar", "fast − verified", "verdict"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for label, g in result["goals"].items():
        unit = f" {g['unit']}" if g["unit"] else ""
        cells = [label, f"{g['sense']} {g['target']:g}{unit}",
                 _fmt(g["fast"]) + ("" if g["fast_met"] else " (fails)")]
        if sub:
            cells.append(_fmt(g["fast_interface"]))
        cells += [_fmt(g["solver"][k]) for k in solver_keys]
        cells += [_fmt(g["verified"]), _fmt(g["error_bar"]), _fmt(g["fast_minus_verified"]),
                  g["verdict"]]
        lines.append("| " + " | ".join(cells) + " |")
    return lines


def solver_lines(result: dict) -> list[str]:
    lines = ["| grid spacing (nm) | dipoles | max \\|m\\|kd | iterations (max) | worst residual | seconds |",
             "|---|---|---|---|---|---|"]
    for s in result["solver"]:
        it = int(np.max(s["iterations"]))
        res = float(np.max(s["residual"]))
        lines.append(f"| {_fmt(s['spacing_nm'])} | {s['n_dipoles']} | {_fmt(float(np.max(s['mkd_max'])))} | "
                     f"{it} | {res:.1e} | {_fmt(s['seconds'])} |")
    return lines


def resonance_lines(result: dict) -> list[str]:
    res = result.get("resonance")
    if not res:
        return []
    lines = ["| input | fast (nm) | verified (nm) | shift fast − verified (nm) |", "|---|---|---|---|"]
    for pol, r in res["per_input"].items():
        edge = " (at scan edge: a bound only)" if r["at_scan_edge"] else ""
        lines.append(f"| {pol} | {r['fast_nm']:.1f} | {r['verified_nm']:.1f} | {r['shift_nm']:+.1f}{edge} |")
    return lines


def markdown(result: dict) -> str:
    parts = [f"# Verification of '{result['design_name']}' against spec '{result['spec']}'", "",
             f"Fast model: {result['fast_model']}. Discretised solver at spacings "
             f"{', '.join(f'{d:.3g}' for d in result['spacings_nm'])} nm. Verified values: "
             f"{result['verified_basis']}. Verdict: a goal is 'met' only if it holds over the whole "
             f"interval verified value ± error bar.", "", "## Goals", ""]
    parts += table_lines(result)
    parts += ["", "## Solver runs", ""] + solver_lines(result)
    bal = result.get("balance_error_max", {})
    if bal:
        parts += ["", "Largest |1 − R − T − A| over the band: "
                  + ", ".join(f"{k}: {v:.1e}" for k, v in bal.items())]
    if result.get("resonance"):
        parts += ["", "## Resonance (largest zero-order extinction 1 − |t_ii|²)", ""]
        parts += resonance_lines(result)
    parts += ["", SAFETY_NOTE, ""]
    return "\n".join(parts)


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def plot_overlay(result: dict, spec, path) -> pathlib.Path:
    """|t_xx|², |t_xy|² and modulation depth of every model on one set of axes per quantity."""
    plt = _plt()
    wl = np.asarray(result["wavelengths_nm"])
    resp = result["responses"]
    n_panels = 3 if result.get("resonance") else 2
    fig, axes = plt.subplots(1, n_panels, figsize=(5.2 * n_panels, 4.2), constrained_layout=True)
    solver_keys = [k for k in resp if k.startswith("grid")]
    shades = plt.get_cmap("Blues")(np.linspace(0.45, 0.9, max(len(solver_keys), 1)))
    style = {k: dict(color="k", lw=1.8) for k in resp if k.startswith("fast")}
    style.update({k: dict(color="tab:green", lw=1.4) for k in resp
                  if k.startswith("fast") and "interface" in k})
    style.update({k: dict(color=c, lw=1.0) for k, c in zip(solver_keys, shades, strict=True)})
    style[EXTRAPOLATED] = dict(color="tab:red", lw=1.6, ls="--")
    names = {k: k for k in resp}
    if not result["extrapolation_physical"]:
        names[EXTRAPOLATED] = EXTRAPOLATED + ": unphysical, not used"
        style[EXTRAPOLATED] = dict(color="tab:red", lw=0.8, ls="--", alpha=0.5)
    for key, r in resp.items():
        J = np.asarray(r.t if spec.matrix == "t" else r.r)
        axes[0].plot(wl, np.abs(J[:, 0, 0]) ** 2, **style[key], label=names[key])
        axes[0].plot(wl, np.abs(J[:, 0, 1]) ** 2, **{**style[key], "ls": ":"})
        a, b = channel_amplitudes(J, spec.signal, spec.control, spec.analyzer)
        axes[1].plot(wl, np.asarray(modulation_depth(a, b, spec.rho)), **style[key], label=names[key])
    axes[0].set(xlabel="vacuum wavelength (nm)", ylabel="zero-order power",
                title=f"|{spec.matrix}_xx|² (solid/dashed), |{spec.matrix}_xy|² (dotted)")
    axes[0].legend(fontsize=7)
    finish_depth_axes(axes[1], spec)
    if n_panels == 3:
        res = result["resonance"]
        scan = np.asarray(res["scan_nm"])
        for j, (pol, ls) in enumerate((("x", "-"), ("y", "--"))):
            axes[2].plot(scan, np.asarray(res["fast_extinction"])[:, j], color="k", ls=ls,
                         label=f"fast, {pol} input")
            axes[2].plot(scan, np.asarray(res["verified_extinction"])[:, j], color="tab:red", ls=ls,
                         label=f"verified, {pol} input")
        axes[2].set(xlabel="vacuum wavelength (nm)", ylabel="1 − |t_ii|²", title="resonance scan")
        axes[2].legend(fontsize=7)
    basis = "extrapolated d → 0" if result["extrapolation_physical"] else \
        f"finest grid d = {min(result['spacings_nm']):.3g} nm (extrapolation unphysical)"
    fig.suptitle(f"{result['design_name']}: fast model vs discretised solver (verified = {basis})")
    return atomic_savefig(fig, path)


def write_outputs(result: dict, spec, out_dir, *, meta: dict, plot: bool = True) -> dict:
    out = pathlib.Path(out_dir)
    doc = {k: v for k, v in result.items() if k != "responses"}
    doc["meta"] = meta
    doc["spectra"] = {k: {"t_real": np.real(r.t).tolist(), "t_imag": np.imag(r.t).tolist()}
                      for k, r in result["responses"].items()}
    doc["conventions"] = ("time exp(-i omega t); Jones matrices [output, input] in the x-y basis; t into the "
                          "substrate side; goals judged exactly as invdesign optimize judges them")
    doc["safety"] = SAFETY_NOTE
    atomic_write_text(out / "verify.json", json.dumps(doc, indent=1, default=float) + "\n")
    atomic_write_text(out / "verify.md", markdown(result))
    paths = {"json": out / "verify.json", "table": out / "verify.md"}
    if plot:
        paths["plot"] = plot_overlay(result, spec, out / "verify.png")
    return paths
