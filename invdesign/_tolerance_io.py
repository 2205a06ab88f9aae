"""Writing a tolerance study: tolerance.json, samples.csv, histograms.png and sensitivity.png (atomic).

``tolerance.json`` holds the yield with its binomial interval (method and level named), every goal's
nominal value, pass fraction and distribution over the samples, the linear-versus-Monte-Carlo spread of
its differentiable quantity with each source's share, what drives the failures, the error model and what
it leaves out, the inputs and the safety note.
"""

import io
import json
import pathlib

import numpy as np

from ._design import atomic_write_text
from ._optimize_io import _clean, _plt, _save
from ._spectra_io import SAFETY_NOTE
from ._tolerance import CORNER_RADIUS_NOTE

ERROR_MODEL = (
    "Gaussian, zero-mean fabrication errors with the fab deck's 1-sigma values: for each quantity a global "
    "(run-to-run) draw shared by every element plus a local (element-to-element) draw per element, all "
    "independent. Width (disk diameter), length, angle and film thickness take both; element centres take a "
    "local x and y draw. Each sample is an infinite perfect array of one perturbed cell, so local errors "
    "repeat in every cell (probably pessimistic for the zero order of a real array). A sample passes when "
    "it meets every goal of the spec (the optimiser's exact check, one model) and no two elements touch."
)
NOT_SAMPLED = {
    "corner_radius_nm": CORNER_RADIUS_NOTE,
    "position_nm.global": "a common shift of every element is a rigid translation of the periodic array "
                          "and leaves its zero-order response unchanged",
    "lattice": "the lattice vectors (stage calibration) are kept exact",
    "materials": "permittivities are kept at their nominal data",
}


def write_outputs(result: dict, ev, out_dir, *, meta: dict, plot: bool = True) -> dict:
    """Write the study's files into ``out_dir``; returns {kind: path}."""
    out = pathlib.Path(out_dir)
    doc = {k: v for k, v in result.items() if not k.startswith("_")}
    doc.update({"error_model": ERROR_MODEL, "not_sampled": NOT_SAMPLED, "run": meta, "safety": SAFETY_NOTE})
    atomic_write_text(out / "tolerance.json", json.dumps(_clean(doc), indent=2) + "\n")
    paths = {"tolerance": out / "tolerance.json"}
    paths["samples"] = write_samples(result, ev, out / "samples.csv")
    if plot:
        paths["histograms_png"] = plot_histograms(result, ev, out / "histograms.png")
        paths["sensitivity_png"] = plot_sensitivity(result, ev, out / "sensitivity.png")
    return paths


def write_samples(result: dict, ev, path) -> pathlib.Path:
    """One row per sample: every goal's exact value, whether the elements touch, and pass/fail."""
    arr = result["_arrays"]
    buf = io.StringIO()
    buf.write(",".join(["sample", *ev.labels, "bridged", "passed"]) + "\n")
    for s in range(arr["values"].shape[0]):
        row = [str(s)] + [f"{v:.10g}" for v in arr["values"][s]]
        row += [str(int(arr["bridged"][s])), str(int(arr["passed"][s]))]
        buf.write(",".join(row) + "\n")
    atomic_write_text(path, buf.getvalue())
    return pathlib.Path(path)


def _grid(n):
    cols = min(n, 3)
    return (n + cols - 1) // cols, cols


def plot_histograms(result: dict, ev, path):
    """Each goal's exact values over the samples, its target, the nominal value and the linear model."""
    plt = _plt()
    labels = ev.labels
    rows, cols = _grid(len(labels))
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 3.4 * rows), constrained_layout=True,
                             squeeze=False)
    vals = result["_arrays"]["values"]
    for gi, label in enumerate(labels):
        ax = axes.flat[gi]
        g = result["goals"][label]
        v = vals[:, gi][np.isfinite(vals[:, gi])]
        unit = f" ({g['unit']})" if g["unit"] else ""
        if v.size and np.ptp(v) > 0:
            ax.hist(v, bins=40, density=True, color="steelblue", alpha=0.75, label="Monte Carlo")
        elif v.size:
            ax.text(0.5, 0.5, f"every sample: {v[0]:.6g}", transform=ax.transAxes, ha="center")
        lin = g["linear"]
        if lin["quantity"] == g["metric"] and lin["sigma_linear"] > 0:
            x = np.linspace(*ax.get_xlim(), 200) if v.size else np.array([])
            s = lin["sigma_linear"]
            ax.plot(x, np.exp(-0.5 * ((x - lin["nominal"]) / s) ** 2) / (s * np.sqrt(2 * np.pi)), "k-",
                    lw=1, label="linear model")
        ax.axvline(g["target"], color="crimson", ls="--", lw=1.2,
                   label=f"target {g['sense']} {g['target']:g}")
        ax.axvline(g["nominal"], color="0.2", ls=":", lw=1.2, label="nominal design")
        ax.set(xlabel=f"{g['metric']}{unit}", ylabel="density",
               title=f"{label}: {100 * g['pass_fraction']:.1f} % pass")
        ax.legend(fontsize=7)
    for ax in list(axes.flat)[len(labels):]:
        ax.axis("off")
    y = result["yield"]
    ci = y["interval"]
    fig.suptitle(f"yield {100 * y['fraction']:.1f} % of {y['samples']} samples "
                 f"({100 * ci['level']:g} % {ci['method'].replace('_', '-')}: "
                 f"{100 * ci['low']:.1f}–{100 * ci['high']:.1f} %)")
    return _save(fig, path)


def plot_sensitivity(result: dict, ev, path):
    """Per goal: each source's linear 1σ contribution, the quadrature total and the Monte Carlo spread."""
    plt = _plt()
    labels = ev.labels
    rows, cols = _grid(len(labels))
    fig, axes = plt.subplots(rows, cols, figsize=(4.6 * cols, 3.6 * rows), constrained_layout=True,
                             squeeze=False)
    for gi, label in enumerate(labels):
        ax = axes.flat[gi]
        lin = result["goals"][label]["linear"]
        names = list(lin["per_source_sigma"])
        vals = [lin["per_source_sigma"][k] for k in names]
        y = np.arange(len(names) + 2)
        ax.barh(y[2:], vals, color="slategray")
        ax.barh([1], [lin["sigma_linear"]], color="darkorange")
        ax.barh([0], [lin["sigma_monte_carlo"]], color="steelblue")
        ax.set_yticks(y, ["Monte Carlo σ", "linear σ (quadrature)", *names], fontsize=7)
        unit = result["goals"][label]["unit"] if lin["quantity"] == result["goals"][label]["metric"] else ""
        ax.set(xlabel=f"1σ of {lin['quantity']}{' (' + unit + ')' if unit else ''}", title=label)
    for ax in list(axes.flat)[len(labels):]:
        ax.axis("off")
    fig.suptitle("linear sensitivity |∂q/∂p|·σ per error source, against the Monte Carlo spread")
    return _save(fig, path)
