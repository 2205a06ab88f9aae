"""The work behind each CLI command: config in, files out. Configs are read here and nowhere deeper."""

import json
import pathlib
import time

import numpy as np
from omegaconf import OmegaConf

from ._design import Design, atomic_write_text
from ._errors import InvdesignError
from ._simulate import Incidence, ModelOptions
from ._simulate import simulate as _simulate
from ._spectra_io import SAFETY_NOTE, plot_spectra, write_spectra


def build_model(cfg) -> ModelOptions:
    """ModelOptions from the ``model`` config group."""
    return ModelOptions(dipoles_per_rod=int(cfg.dipoles_per_rod), correction=str(cfg.correction))


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
