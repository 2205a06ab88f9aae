"""Front selection, quality and the 3-objective plot on hand-made candidates (no physics).

Five candidates with objectives (insertion loss dB, min; band width nm, max; control power ratio, min):
A (1, 40, 1), B (2, 60, 1), C (2, 30, 2) dominated by A, D (0.5, 80, 0.5) infeasible, E (1.5, 50, 0.8).
Hand-derived hypervolume of {A, B, E} against the reference (3 dB, 20 nm, 2), maximised band negated, by
inclusion–exclusion of the three boxes: A 2·20·1 = 40, B 1·40·1 = 40, E 1.5·30·1.2 = 54; A∩B 20, A∩E 30,
B∩E 30, A∩B∩E 20; union 40 + 40 + 54 − 20 − 30 − 30 + 20 = 74.
"""

import dataclasses
from types import SimpleNamespace

import pytest

from invdesign._tradeoff import Objective, parse_front
from invdesign._tradeoff_io import plot_front, quality, select_front

NAMES = ("insertion_loss_db", "bandwidth_nm", "control_power_ratio")


def fake_setup(reference=(3.0, 20.0, 2.0)):
    objs = (Objective("insertion_loss_db", "min", "dB", 1.0, None),
            Objective("bandwidth_nm", "max", "nm", 10.0, 1.0),
            Objective("control_power_ratio", "min", "", 1.0, 1.0))
    front = dataclasses.replace(parse_front({}, 3), reference=reference)
    return SimpleNamespace(names=NAMES, objectives=objs, front=front,
                           base=SimpleNamespace(spec=SimpleNamespace(name="synthetic")))


def cand(values, feasible=True):
    goals = {} if feasible else {"leakage": {"pass": False, "sense": "<=", "target": 0.15, "unit": "",
                                            "achieved": 0.2, "at_resolution": "kelly/N=1", "miss": 0.05}}
    return {"objectives": dict(zip(NAMES, values, strict=True)), "feasible": feasible, "goals": goals,
            "rules": []}


CANDS = [cand((1, 40, 1)), cand((2, 60, 1)), cand((2, 30, 2)), cand((0.5, 80, 0.5), feasible=False),
         cand((1.5, 50, 0.8))]


def test_front_selection_and_hypervolume_hand_derived(tmp_path):
    ts = fake_setup()
    sel = select_front(ts, CANDS)
    assert sel["front"] == [0, 1, 4]
    assert sel["status"][2].startswith("dominated")
    assert sel["status"][3].startswith("infeasible: goal leakage")
    q = quality(ts, sel["F"])
    assert q["hypervolume"] == pytest.approx(74.0, rel=1e-14)
    assert q["reference"] == {"insertion_loss_db": 3.0, "bandwidth_nm": 20.0, "control_power_ratio": 2.0}
    # normalised by the box from the front's ideal (1, 60, 0.8) to the reference: 2 · 40 · 1.2 = 96
    assert q["hypervolume_normalised"] == pytest.approx(74.0 / 96.0, rel=1e-14)
    assert q["spacing"] >= 0
    sel["quality"] = q["hypervolume"]
    path = plot_front(ts, CANDS, sel, tmp_path / "front.png")
    assert path.stat().st_size > 0


def test_automatic_reference_is_stated_and_beyond_the_front():
    ts = fake_setup(reference=None)
    q = quality(ts, select_front(ts, CANDS)["F"])
    # worst front values 2 dB, 40 nm, 1 plus 0.1 x the front ranges (1 dB, 20 nm, 0.2): hand-derived
    assert q["reference"]["insertion_loss_db"] == pytest.approx(2.1, rel=1e-14)
    assert q["reference"]["bandwidth_nm"] == pytest.approx(38.0, rel=1e-14)
    assert q["reference"]["control_power_ratio"] == pytest.approx(1.02, rel=1e-14)
    assert "worst front value" in q["reference_rule"]
