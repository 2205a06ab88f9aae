"""Writing a simulation's spectra to disk: CSV, JSON and a PNG plot (all written atomically)."""

import io
import json
import pathlib

import numpy as np

from ._atomic import atomic_savefig
from ._design import atomic_write_text

SAFETY_NOTE = (
    "Safety: the signal and control beams are lasers. Follow your lab's laser safety rules (eyewear rated "
    "for the wavelength and power, interlocks, beam enclosures, no eye-level beams). Fabrication uses "
    "hazardous resists, solvents, etchants and high-voltage beam tools: follow local codes, the tool "
    "owners' procedures and your lab safety officer. This software gives no safety advice of its own."
)


def spectra_table(resp) -> dict:
    """Columns of the spectra table, each (n_wl,) float: power fractions and |Jones entries|²."""
    t = np.asarray(resp.t)
    return {
        "wavelength_nm": np.asarray(resp.wavelengths_nm),
        "T_x": resp.transmittance[:, 0], "T_y": resp.transmittance[:, 1],
        "R_x": resp.reflectance[:, 0], "R_y": resp.reflectance[:, 1],
        "A_x": resp.absorbance[:, 0], "A_y": resp.absorbance[:, 1],
        "T0_xx": np.abs(t[:, 0, 0]) ** 2, "T0_yx": np.abs(t[:, 1, 0]) ** 2,
        "T0_xy": np.abs(t[:, 0, 1]) ** 2, "T0_yy": np.abs(t[:, 1, 1]) ** 2,
        "balance_error_x": 1 - resp.transmittance[:, 0] - resp.reflectance[:, 0] - resp.absorbance[:, 0],
        "balance_error_y": 1 - resp.transmittance[:, 1] - resp.reflectance[:, 1] - resp.absorbance[:, 1],
    }


def write_spectra(resp, out_dir, *, meta: dict) -> dict:
    """Write spectra.csv, spectra.json (with complex Jones matrices) into ``out_dir``; returns paths."""
    out = pathlib.Path(out_dir)
    cols = spectra_table(resp)
    buf = io.StringIO()
    names = list(cols)
    buf.write(",".join(names) + "\n")
    for row in zip(*(np.asarray(cols[n]) for n in names), strict=True):
        buf.write(",".join(f"{v:.10g}" for v in row) + "\n")
    atomic_write_text(out / "spectra.csv", buf.getvalue())
    doc = {
        "meta": meta,
        "conventions": "time exp(-i omega t); Jones matrices [output, input] in the x-y basis at normal "
                       "incidence (p-s in general); t into the substrate side, r back to the superstrate; "
                       "power fractions relative to the incident flux",
        "columns": {n: np.asarray(cols[n]).tolist() for n in names},
        "t_real": np.real(resp.t).tolist(), "t_imag": np.imag(resp.t).tolist(),
        "r_real": np.real(resp.r).tolist(), "r_imag": np.imag(resp.r).tolist(),
        "orders": np.asarray(resp.orders.indices).tolist(),
        "safety": SAFETY_NOTE,
    }
    atomic_write_text(out / "spectra.json", json.dumps(doc) + "\n")
    return {"csv": out / "spectra.csv", "json": out / "spectra.json"}


def plot_spectra(resp, path, *, title: str = "") -> pathlib.Path:
    """PNG of T, R, A for both input polarisations and the cross-polarised |t_yx|², |t_xy|²."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    cols = spectra_table(resp)
    wl = cols["wavelength_nm"]
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.2), constrained_layout=True)
    for pol, style in (("x", "-"), ("y", "--")):
        axes[0].plot(wl, cols[f"T_{pol}"], style, color="tab:blue", label=f"T ({pol} in)")
        axes[0].plot(wl, cols[f"R_{pol}"], style, color="tab:red", label=f"R ({pol} in)")
        axes[0].plot(wl, cols[f"A_{pol}"], style, color="tab:green", label=f"A ({pol} in)")
    axes[0].set(xlabel="vacuum wavelength (nm)", ylabel="power fraction", ylim=(-0.02, 1.02),
                title="total transmittance, reflectance, absorbance")
    axes[0].legend(fontsize=8, ncol=2)
    axes[1].plot(wl, cols["T0_yx"], color="tab:purple", label="|t_yx|² (x in, y out)")
    axes[1].plot(wl, cols["T0_xy"], "--", color="tab:orange", label="|t_xy|² (y in, x out)")
    axes[1].axhline(0.25, color="0.5", lw=0.8, ls=":", label="0.25: single-sheet ceiling")
    axes[1].set(xlabel="vacuum wavelength (nm)", ylabel="zero-order power", ylim=(0, None),
                title="cross-polarised transmission")
    axes[1].legend(fontsize=8)
    if title:
        fig.suptitle(title)
    return atomic_savefig(fig, path)
