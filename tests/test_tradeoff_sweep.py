"""Parallel sweeps on Hydra's launcher plugins: a tiny tradeoff sweep over film thickness runs through the
joblib launcher and through submitit's local executor, ``gather`` makes one table of it (keeping finished
jobs when another never finished), and the SLURM launcher config composes with its site settings.

Each job compiles its own model (tens of seconds); the sweeps are two jobs of a one-rod cell on five
wavelengths with a handful of steps, so the fronts are not converged: these tests check the plumbing.
"""

import json
import pathlib
import subprocess
import sys

import pytest

from invdesign._sweep_summary import gather

ROOT = pathlib.Path(__file__).resolve().parent.parent
TINY = ["spec=heron_1310", "fab=ebl_fine", "cell=lone_tilt", "spec.band.count=5", "spec.band.start_nm=1290",
        "spec.band.stop_nm=1330", "robust.resolutions=[1]", "robust.corrections=[kelly]",
        "report.resolutions=[1]", "report.corrections=[kelly]", "optimizer.steps=6", "optimizer.starts=1",
        "front.divisions=2", "front.steps=3", "front.feasibility_steps=6", "quiet=true", "plot=false",
        "+cell.thickness_nm=30,40"]


def _invdesign(*args, timeout=900):
    return subprocess.run([sys.executable, "-m", "invdesign.cli", *args], cwd=ROOT, capture_output=True,
                          text=True, timeout=timeout)


def _check_sweep(sweep: pathlib.Path):
    for job in ("0", "1"):
        doc = json.loads((sweep / job / "front.json").read_text())
        assert doc["run"]["spec"] == "heron_1310"
        assert "laser" in doc["safety"].lower()
    table = gather(sweep)
    assert table["varying"] == ["cell.thickness_nm"]
    assert [(r["job"], r["cell.thickness_nm"], r["status"]) for r in table["rows"]] == [
        ("0", "30", "tradeoff"), ("1", "40", "tradeoff")]
    return table


@pytest.mark.slow
def test_joblib_sweep_then_gather_keeps_finished_jobs(tmp_path):
    sweep = tmp_path / "sweep"
    done = _invdesign("tradeoff", "-m", "hydra/launcher=twin_core", *TINY, f"hydra.sweep.dir={sweep}")
    assert done.returncode == 0, done.stderr[-3000:]
    _check_sweep(sweep)
    # a job that never finished (as after a kill: no result file was ever renamed into place) is listed as
    # unfinished and the finished one is kept
    (sweep / "1" / "front.json").unlink()
    out = tmp_path / "gathered"
    done = _invdesign("gather", f"sweep={sweep}", f"hydra.run.dir={out}", timeout=300)
    assert done.returncode == 0, done.stderr
    rows = (out / "summary.csv").read_text().strip().splitlines()
    assert rows[0].startswith("job,cell.thickness_nm,status")
    assert rows[1].startswith("0,30,tradeoff") and rows[2].startswith("1,40,unfinished")


@pytest.mark.slow
def test_submitit_local_sweep(tmp_path):
    sweep = tmp_path / "sweep"
    done = _invdesign("tradeoff", "-m", "hydra/launcher=local_queue", *TINY, f"hydra.sweep.dir={sweep}")
    assert done.returncode == 0, done.stderr[-3000:]
    _check_sweep(sweep)
    assert any((sweep / ".submitit").rglob("*_result.pkl"))  # the jobs really ran through submitit


def test_slurm_launcher_config_composes(tmp_path):
    done = _invdesign("tradeoff", "hydra/launcher=slurm_cluster", "hydra.launcher.partition=short",
                      "hydra.launcher.account=lab42", "--cfg", "hydra", timeout=300)
    assert done.returncode == 0, done.stderr
    text = done.stdout
    assert "_target_: hydra_plugins.hydra_submitit_launcher.submitit_launcher.SlurmLauncher" in text
    assert "partition: short" in text and "account: lab42" in text and "gpus_per_node: null" in text


def test_gather_refuses_a_folder_without_jobs(tmp_path):
    done = _invdesign("gather", f"sweep={tmp_path}", f"hydra.run.dir={tmp_path / 'g'}", timeout=300)
    assert done.returncode == 2 and "no job folders" in done.stderr
    done = _invdesign("gather", f"hydra.run.dir={tmp_path / 'g'}", timeout=300)
    assert done.returncode == 2 and "sweep is missing" in done.stderr
