"""Spec, fab deck and cell parsing: every mistake is refused with the key and what would be valid.

Check values here are rules of the configuration format (ours) and two facts from outside:
* the identity M = 4·sqrt(L) (derived in invdesign/_metrics.py's docstring: I_max − I_min = 4ρ|a||b|,
  L = ρ²|b|²/|a|²), so M = 1 needs L ≥ (1/4)² = 0.0625 — hand-derived;
* the zero-order rule: the first diffraction order of a square lattice of period p in a medium of index n
  appears at λ = n·p at normal incidence (grating equation, e.g. Born & Wolf, Principles of Optics, §8.6),
  so a band starting at 1250 nm on n = 1.45 glass allows p < 1250/1.45 = 862.07 nm.
"""

import copy
import os
import pathlib
import subprocess
import sys

import pytest
from omegaconf import OmegaConf

from invdesign import SpecError
from invdesign._spec import (
    check_setup,
    parse_cell,
    parse_fab,
    parse_spec,
    zero_order_period_limit,
)

ROOT = pathlib.Path(__file__).resolve().parent.parent
CONF = ROOT / "conf"

SPEC = {
    "name": "t", "operating_nm": 1310.0, "band": {"start_nm": 1250.0, "stop_nm": 1370.0, "count": 13},
    "environment": {"superstrate_index": 1.0, "substrate_index": 1.45}, "material": "gold_rakic1998",
    "goals": [{"metric": "modulation_depth", "sense": ">=", "target": 1.0},
              {"metric": "leakage", "sense": "<=", "target": 0.08}],
}
FAB = {"name": "f", "label": "typical values (common practice, no source)", "thickness_nm": 40.0,
       "width_nm": {"min": 40.0, "max": 120.0}, "length_nm": {"min": 60.0, "max": 400.0},
       "min_gap_nm": 20.0, "max_aspect": 8.0, "corner_radius_nm": 10.0, "grid_nm": 1.0,
       "period_nm": {"min": 250.0, "max": 900.0}}
CELL = {"family": "lone_tilt", "period_nm": [500.0, 500.0],
        "start": {"length": 200.0, "width": 60.0, "angle_deg": 30.0}}


def changed(base, path, value):
    doc = copy.deepcopy(base)
    node = doc
    for k in path[:-1]:
        node = node[k]
    if value is KeyError:
        del node[path[-1]]
    else:
        node[path[-1]] = value
    return doc


def test_valid_inputs_parse():
    spec = parse_spec(SPEC)
    assert spec.goals[0].scale == 1.0 and spec.rho == 1.0 and spec.signal == (1.0, 0.0)
    wl, i0 = spec.wavelengths()
    assert wl[i0] == 1310.0 and len(wl) == 13
    fab, cell = parse_fab(FAB), parse_cell(CELL)
    check_setup(spec, fab, cell)


@pytest.mark.parametrize("name", sorted(p.stem for p in (CONF / "spec").glob("*.yaml")))
def test_shipped_specs_parse(name):
    parse_spec(OmegaConf.load(CONF / "spec" / f"{name}.yaml"))


@pytest.mark.parametrize("name", sorted(p.stem for p in (CONF / "fab").glob("*.yaml")))
def test_shipped_decks_parse_and_say_typical(name):
    fab = parse_fab(OmegaConf.load(CONF / "fab" / f"{name}.yaml"))
    assert "typical values" in fab.label and "no source" in fab.label


@pytest.mark.parametrize("name", sorted(p.stem for p in (CONF / "cell").glob("*.yaml")))
def test_shipped_cells_parse(name):
    parse_cell(OmegaConf.load(CONF / "cell" / f"{name}.yaml"))


def test_identity_refusal_names_the_numbers():
    bad = changed(SPEC, ["goals", 1, "target"], 0.05)
    with pytest.raises(SpecError) as err:  # parse_spec builds no model: the refusal comes at once
        parse_spec(bad)
    msg = str(err.value)
    assert "0.0625" in msg and "0.05" in msg and "spec.goals" in msg
    # the other direction: a leakage floor forces a depth above a depth ceiling
    other = changed(SPEC, ["goals"], [{"metric": "modulation_depth", "sense": "<=", "target": 0.5},
                                      {"metric": "leakage", "sense": ">=", "target": 0.04}])
    with pytest.raises(SpecError, match="0.8"):  # 4*sqrt(0.04) = 0.8 > 0.5
        parse_spec(other)
    # just at the floor is allowed (common practice, no source: ~8 % at 100 % is typical of real devices)
    parse_spec(changed(SPEC, ["goals", 1, "target"], 0.0625))


@pytest.mark.parametrize("path,value,needle", [
    (["colour"], "red", "unknown key 'colour'"),
    (["operating_nm"], KeyError, "spec.operating_nm is missing"),
    (["operating_nm"], 1500.0, "outside spec.band"),
    (["band", "count"], 1, "spec.band.count must be at least 2"),
    (["band", "start_nm"], 1400.0, "must be below"),
    (["material"], "unobtainium", "not a built-in material"),
    (["band"], {"start_nm": 100.0, "stop_nm": 1370.0, "count": 13}, "spec.material"),
    (["goals", 0, "metric"], "loudness", "spec.goals[0].metric"),
    (["goals", 0, "sense"], ">", "use one of: >=, <=, ="),
    (["goals", 0, "sense"], "=", "tolerance"),
    (["goals", 0, "weight"], -1.0, "spec.goals[0].weight must be > 0"),
    (["goals", 1, "target"], -0.1, "cannot be negative"),
    (["goals"], [], "non-empty list"),
    (["beams"], {"rho": 0.0}, "spec.beams.rho must be > 0"),
    (["channel"], {"signal": [0.0, 0.0]}, "zero vector"),
    (["channel"], {"matrix": "q"}, "use one of: t, r"),
])
def test_bad_spec_is_refused_with_the_key(path, value, needle):
    with pytest.raises(SpecError) as err:
        parse_spec(changed(SPEC, path, value))
    assert needle in str(err.value)


def test_contradictory_goals_refused():
    doc = changed(SPEC, ["goals"], [{"metric": "insertion_loss_db", "sense": ">=", "target": 5.0},
                                    {"metric": "insertion_loss_db", "sense": "<=", "target": 3.0}])
    with pytest.raises(SpecError, match="contradict"):
        parse_spec(doc)


def test_band_and_depth_needs_of_goals():
    bw = {"metric": "bandwidth_nm", "sense": ">=", "target": 200.0}
    with pytest.raises(SpecError, match="does not fit"):  # 1310 ± 100 leaves 1250–1370
        parse_spec(changed(SPEC, ["goals"], SPEC["goals"] + [bw]))
    no_depth = [{"metric": "control_power_ratio", "sense": "<=", "target": 2.0}]
    with pytest.raises(SpecError, match="needs the depth"):
        parse_spec(changed(SPEC, ["goals"], no_depth))
    drift = [{"metric": "phase_drift_deg", "sense": "<=", "target": 10.0}]
    with pytest.raises(SpecError, match="window_nm"):
        parse_spec(changed(SPEC, ["goals"], drift))
    coarse = changed(SPEC, ["goals"], SPEC["goals"] + [dict(bw, target=12.0)])
    with pytest.raises(SpecError, match="raise spec.band.count"):  # 10 nm spacing, 12 nm window
        parse_spec(coarse)


@pytest.mark.parametrize("path,value,needle", [
    (["width_nm", "min"], 200.0, "min (200) is larger than max (120)"),
    (["corner_radius_nm"], 30.0, "below twice fab.corner_radius_nm"),
    (["thickness_nm"], [], "fab.thickness_nm"),
    (["min_gap_nm"], 0.0, "fab.min_gap_nm must be > 0"),
    (["max_aspect"], 0.5, "fab.max_aspect must be at least 1"),
    (["grid_nm"], 50.0, "coarser than the smallest width"),
    (["label"], KeyError, "fab.label is missing"),
    (["beam_current"], 2.0, "unknown key 'beam_current'"),
])
def test_bad_deck_is_refused_with_the_key(path, value, needle):
    with pytest.raises(SpecError) as err:
        parse_fab(changed(FAB, path, value))
    assert needle in str(err.value)


@pytest.mark.parametrize("path,value,needle", [
    (["family"], "hexagon", "use one of: free_rods, lone_tilt, pivot_pair"),
    (["start", "length"], KeyError, "cell.start.length is missing"),
    (["start", "height"], 3.0, "unknown key 'height'"),
    (["free"], ["colour"], "cell.free must be a list from"),
    (["period_nm"], [500.0], "cell.period_nm must be a list of two numbers"),
    (["angle_range_deg"], [10.0, -10.0], "lo < hi"),
])
def test_bad_cell_is_refused_with_the_key(path, value, needle):
    with pytest.raises(SpecError) as err:
        parse_cell(changed(CELL, path, value))
    assert needle in str(err.value)


def test_free_rods_cell_checks():
    rods = {"family": "free_rods", "period_nm": [480.0, 480.0],
            "rods": [{"center": [0.0, 0.0], "length": 200.0, "width": 60.0, "fixed": ["colour"]}]}
    with pytest.raises(SpecError, match=r"cell.rods\[0\].fixed"):
        parse_cell(rods)
    with pytest.raises(SpecError, match="belong to the named families"):
        parse_cell(dict(rods, start={}))


def test_cross_checks_of_spec_deck_and_cell():
    spec, fab = parse_spec(SPEC), parse_fab(FAB)
    assert zero_order_period_limit(spec) == pytest.approx(1250.0 / 1.45, rel=1e-12)
    with pytest.raises(SpecError, match="zero-order rule"):
        check_setup(spec, fab, parse_cell(changed(CELL, ["period_nm"], [870.0, 870.0])))
    with pytest.raises(SpecError, match="not a film of fab deck"):
        check_setup(spec, fab, parse_cell(changed(CELL, ["thickness_nm"], 35.0)))
    with pytest.raises(SpecError, match="fab.length_nm"):
        check_setup(spec, fab, parse_cell(changed(CELL, ["start", "length"], 500.0)))
    with pytest.raises(SpecError, match="zero-order limit"):
        check_setup(spec, parse_fab(changed(FAB, ["period_nm"], {"min": 870.0, "max": 900.0})),
                    parse_cell(CELL))


def test_cli_refuses_impossible_spec_at_once(tmp_path):
    """End to end: the command exits with status 2 and the numbers, before compiling anything."""
    conf = tmp_path / "conf"
    import shutil

    shutil.copytree(CONF, conf)
    bad = OmegaConf.load(CONF / "spec" / "heron_1310.yaml")
    bad.goals[1].target = 0.03  # depth 0.8 needs leakage (0.8/4)^2 = 0.04
    OmegaConf.save(bad, conf / "spec" / "impossible.yaml")
    env = dict(os.environ, INVDESIGN_CONF=str(conf))
    proc = subprocess.run([sys.executable, "-m", "invdesign.cli", "optimize", "spec=impossible",
                           f"hydra.run.dir={tmp_path / 'run'}"], capture_output=True, text=True, env=env,
                          cwd=tmp_path, timeout=300)
    assert proc.returncode == 2, proc.stderr
    assert "0.04" in proc.stderr and "0.03" in proc.stderr and "M = 4*sqrt(L)" in proc.stderr
    # refused before any optimisation: no step was printed and no checkpoint was written
    assert "step" not in proc.stdout and not (tmp_path / "run" / "checkpoints").exists()
