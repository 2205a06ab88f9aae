"""``invdesign optimize`` as a user runs it: outputs written, and a run killed with SIGKILL (which cannot be
caught) and resumed ends at the same design as a run never interrupted (issue requirement: to 1e-9).

A small problem keeps it to tens of seconds per process: one tilted rod, 5 wavelengths, one model, two
starts, a depth goal at the edge of what the leakage ceiling allows (so no early stop),
checkpoints every 2 steps.
"""

import json
import os
import pathlib
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

ROOT = pathlib.Path(__file__).resolve().parent.parent
SMALL = ["spec=heron_1310", "fab=ebl_fine", "cell=lone_tilt", "spec.band.count=5", "spec.band.start_nm=1290",
         "spec.band.stop_nm=1330", "optimizer.steps=14", "optimizer.starts=2", "checkpoint.every=2",
         "robust.resolutions=[1]", "robust.corrections=[kelly]", "report.resolutions=[1,3]",
         "report.corrections=[kelly]", "quiet=true", "plot=false",
         "spec.goals.0.target=1.54"]  # depth 1.54 at leakage <= 0.15 (identity limit 1.549): no early stop


def _cmd(*args):
    return [sys.executable, "-m", "invdesign.cli", "optimize", *args]


def _final_state(run_dir):
    with np.load(run_dir / "checkpoints" / "latest.npz") as z:
        return z["a_best_u"], z["a_history"]


@pytest.mark.slow
def test_sigkill_and_resume_ends_at_the_same_design(tmp_path):
    ref, cut = tmp_path / "ref", tmp_path / "cut"
    done = subprocess.run(_cmd(*SMALL, f"hydra.run.dir={ref}"), cwd=ROOT, capture_output=True, text=True,
                          timeout=900)
    assert done.returncode == 0, done.stderr
    for name in ("design.json", "metrics.json", "history.csv", "run_config.yaml"):
        assert (ref / name).is_file(), name
    _, history = _final_state(ref)
    assert len(history) == 14  # every step ran: the kill below lands mid-run
    assert "laser" in done.stdout.lower()

    proc = subprocess.Popen(_cmd(*SMALL, f"hydra.run.dir={cut}"), cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    ckpt = cut / "checkpoints" / "latest.npz"
    deadline = time.monotonic() + 900
    step = 0
    while time.monotonic() < deadline and proc.poll() is None:
        if ckpt.is_file():
            try:
                with np.load(ckpt) as z:
                    step = json.loads(bytes(z["header"]).decode())["step"]
            except (OSError, ValueError, KeyError):  # pragma: no cover - only if a read races a replace
                step = 0
            if 4 <= step < 14:
                break
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be killed; raise optimizer.steps"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    assert not (cut / "design.json").exists()

    resumed = subprocess.run(_cmd(f"resume={cut}", "quiet=true", "plot=false"), cwd=ROOT,
                             capture_output=True, text=True, timeout=900)
    assert resumed.returncode == 0, resumed.stderr
    u_ref, h_ref = _final_state(ref)
    u_cut, h_cut = _final_state(cut)
    np.testing.assert_allclose(u_cut, u_ref, rtol=0, atol=1e-9)
    np.testing.assert_allclose(h_cut, h_ref, rtol=0, atol=1e-9)
    assert json.loads((cut / "design.json").read_text()) == json.loads((ref / "design.json").read_text())
