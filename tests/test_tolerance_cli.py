"""``invdesign tolerance`` as a user runs it: files written with the safety note, and bad input refused
with the key named (exit status 2, no traceback) before any compiling."""

import json

from helpers import PAIR_DESIGN, assert_refused, run_cli

DESIGN = PAIR_DESIGN
SMALL = ["spec=heron_1310", "fab=ebl_fine", "model=fast", "spec.band.count=5", "spec.band.start_nm=1290",
         "spec.band.stop_nm=1330", "spec.goals.4.target=20", "samples=24", "drivers.samples=8", "batch=8"]


def _run(*args, timeout=900):
    return run_cli("tolerance", *args, timeout=timeout)


def test_tolerance_run_writes_everything(tmp_path):
    design = tmp_path / "pair.json"
    design.write_text(json.dumps(DESIGN))
    out = tmp_path / "run"
    done = _run(f"design={design}", *SMALL, f"hydra.run.dir={out}")
    assert done.returncode == 0, done.stderr
    for name in ("tolerance.json", "samples.csv", "histograms.png", "sensitivity.png", "design.json",
                 "run_config.yaml"):
        assert (out / name).is_file(), name
    doc = json.loads((out / "tolerance.json").read_text())
    assert doc["yield"]["samples"] == 24
    assert doc["yield"]["interval"]["method"] == "clopper_pearson"
    assert doc["run"]["fab_deck"] == "ebl_fine" and "no source" in doc["run"]["tolerance_label"]
    assert "laser" in done.stdout.lower() and "laser" in doc["safety"].lower()
    assert "yield" in done.stdout


def _refused(args, message):
    assert_refused("tolerance", args, message)


def test_bad_input_is_refused_by_key(tmp_path):
    design = tmp_path / "pair.json"
    design.write_text(json.dumps(DESIGN))
    _refused(["spec=heron_1310"], "design is missing: give design=PATH")
    _refused([f"design={tmp_path / 'nope.json'}"], "not found")
    _refused([f"design={design}", "confidence.method=bayes"],
             "tolerance.confidence.method = 'bayes' is not valid; use one of: clopper_pearson, wilson")
    _refused([f"design={design}", "samples=1"], "tolerance.samples must be at least 2")
    _refused([f"design={design}", "spec.environment.substrate_index=1.5"], "differs from spec.environment")
    _refused([f"design={design}", "fab.tolerance.width_nm.global=-1"],
             "fab.tolerance.width_nm.global must be at least 0")
