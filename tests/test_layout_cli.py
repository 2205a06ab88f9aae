"""``invdesign export`` as a user meets it: one command to GDSII + OASIS + traveller, refusal on a broken
design unless forced, and one clear message for a mistake (exit status 2, no traceback)."""

import json
import pathlib
import subprocess
import sys

import pytest
from test_layout import BROKEN, HERON

klayout_db = pytest.importorskip("klayout.db")

ROOT = pathlib.Path(__file__).resolve().parent.parent


def run(*args):
    return subprocess.run([sys.executable, "-m", "invdesign.cli", "export", *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=600)


def test_export_writes_gds_oas_traveller_and_drawing(tmp_path):
    design = tmp_path / "design.json"
    design.write_text(json.dumps(HERON))
    out = tmp_path / "run"
    res = run(f"design={design}", "layout=field100", "fab=ebl_fine", f"hydra.run.dir={out}")
    assert res.returncode == 0, res.stderr
    for name in ("layout.gds", "layout.oas", "traveller.md", "cell.png", "design.json", "config.yaml"):
        assert (out / name).is_file(), name
    for name in ("layout.gds", "layout.oas"):
        ly = klayout_db.Layout()
        ly.read(str(out / name))
        assert {c.name for c in ly.each_cell()} >= {"heron_1310_cell", "heron_1310_field"}
    text = (out / "traveller.md").read_text()
    # 100 µm field / 517 nm period: floor(100000 / 517) = 193 cells each way
    assert "193 × 193 = 37249 cells" in text
    assert "t = Σ_k D_k · A_k / I" in text and "Total beam-on time" in text
    assert "No violations" in text
    for caution in ("resists", "solvents", "etch gases", "high-voltage", "laser safety", "tool owners",
                    "safety officer"):
        assert caution in text, caution
    assert "| 1 | rod | gold_rakic1998 | 123, 0 | 328 × 93 | 55 |" in text
    assert "laser safety" in res.stdout


def test_broken_design_is_refused_before_anything_is_written(tmp_path):
    design = tmp_path / "broken.json"
    design.write_text(json.dumps(BROKEN))
    out = tmp_path / "run"
    res = run(f"design={design}", "layout=field100", f"hydra.run.dir={out}")
    assert res.returncode == 2
    assert "min_gap: rods 0 and 1: 10 nm (limit 20 nm)" in res.stderr
    assert "width_min: rod 1: 30 nm (limit 40 nm)" in res.stderr
    assert "force=true" in res.stderr and "Traceback" not in res.stderr + res.stdout
    assert not (out / "layout.gds").exists() and not (out / "traveller.md").exists()


def test_forced_export_lists_every_violation_in_the_traveller(tmp_path):
    design = tmp_path / "broken.json"
    design.write_text(json.dumps(BROKEN))
    out = tmp_path / "run"
    res = run(f"design={design}", "layout=field100", "force=true", "layout.field.size_um=[150,150]",
              f"hydra.run.dir={out}")
    assert res.returncode == 0, res.stderr
    text = (out / "traveller.md").read_text()
    assert "WRITTEN WITH force=true DESPITE 3 RULE VIOLATION(S)" in text
    for line in ("- min_gap: rods 0 and 1: 10 nm (limit 20 nm)", "- width_min: rod 1: 30 nm (limit 40 nm)",
                 "- write_field: field:"):
        assert line in text, line
    assert (out / "layout.gds").stat().st_size > 0


def test_mistakes_are_one_clear_message(tmp_path):
    res = run(f"hydra.run.dir={tmp_path / 'a'}")
    assert res.returncode == 2 and "design=PATH is required" in res.stderr
    res = run("design=examples/kestrel_cross_pair.json", "layout.field.cells=[0,3]",
              "layout.field.size_um=null", f"hydra.run.dir={tmp_path / 'b'}")
    assert res.returncode == 2 and "layout.field.cells" in res.stderr
    res = run("design=examples/kestrel_cross_pair.json", "layout.rods.tolerance_nm=-1",
              f"hydra.run.dir={tmp_path / 'c'}")
    assert res.returncode == 2 and "layout.rods.tolerance_nm must be > 0" in res.stderr
    assert "Traceback" not in res.stderr
