"""The command line as a user meets it: outputs written, mistakes reported in one line, no traceback."""

import json
import pathlib
import subprocess
import sys

ROOT = pathlib.Path(__file__).resolve().parent.parent


def run(*args, cwd=ROOT):
    return subprocess.run([sys.executable, "-m", "invdesign.cli", *args], cwd=cwd, capture_output=True,
                          text=True, timeout=600)


def test_simulate_writes_spectra_plot_and_design(tmp_path):
    out = tmp_path / "run"
    res = run("simulate", "design=examples/kestrel_cross_pair.json", "wavelengths.count=21",
              f"hydra.run.dir={out}")
    assert res.returncode == 0, res.stderr
    for name in ("spectra.csv", "spectra.json", "spectra.png", "design.json", "config.yaml"):
        assert (out / name).is_file(), name
    doc = json.loads((out / "spectra.json").read_text())
    assert len(doc["columns"]["wavelength_nm"]) == 21
    assert "laser" in doc["safety"].lower()
    header = (out / "spectra.csv").read_text().splitlines()[0]
    assert header.startswith("wavelength_nm,T_x,T_y")
    assert "laser safety" in res.stdout


def test_bad_design_is_one_clear_message(tmp_path):
    bad = tmp_path / "bad.json"
    doc = json.loads((ROOT / "examples/kestrel_cross_pair.json").read_text())
    doc["elements"][0]["width"] = -3
    bad.write_text(json.dumps(doc))
    res = run("simulate", f"design={bad}", f"hydra.run.dir={tmp_path / 'r'}")
    assert res.returncode == 2
    assert "elements[0].width must be positive" in res.stderr
    assert "Traceback" not in res.stderr + res.stdout


def test_unknown_command_and_bad_model_option(tmp_path):
    res = run("levitate")
    assert res.returncode == 2 and "unknown command 'levitate'" in res.stderr
    res = run("simulate", "model.correction=magic", f"hydra.run.dir={tmp_path / 'r'}")
    assert res.returncode == 2 and "model.correction must be one of" in res.stderr
    assert "Traceback" not in res.stderr
