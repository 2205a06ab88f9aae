"""The fab deck's tolerance block: the shipped decks parse, and every mistake names the key.

The shipped σ values are typical values (common practice, no source); these tests check only their form.
"""

import copy
import pathlib

import pytest
from omegaconf import OmegaConf

from invdesign._errors import SpecError
from invdesign._spec import parse_fab
from invdesign._tolerance import SOURCES, sigmas, source_name

CONF = pathlib.Path(__file__).resolve().parent.parent / "conf"
FAB = {"name": "f", "label": "typical values (common practice, no source)", "thickness_nm": 30.0,
       "width_nm": {"min": 40.0, "max": 120.0}, "length_nm": {"min": 60.0, "max": 400.0},
       "min_gap_nm": 20.0, "max_aspect": 8.0, "corner_radius_nm": 10.0, "grid_nm": 1.0,
       "angle_step_deg": 0.5, "period_nm": {"min": 250.0, "max": 900.0},
       "tolerance": {"label": "typical values (common practice, no source)",
                     "width_nm": {"global": 2.0, "local": 1.5}, "position_nm": {"local": 1.0},
                     "thickness_nm": {"global": 1.0}}}


def with_tol(**changes):
    doc = copy.deepcopy(FAB)
    for k, v in changes.items():
        if v is None:
            doc["tolerance"].pop(k, None)
        else:
            doc["tolerance"][k] = v
    return doc


@pytest.mark.parametrize("name", sorted(p.stem for p in (CONF / "fab").glob("*.yaml")))
def test_shipped_decks_have_a_labelled_tolerance_block(name):
    tol = parse_fab(OmegaConf.load(CONF / "fab" / f"{name}.yaml")).tolerance
    assert tol is not None
    assert "typical values" in tol.label and "no source" in tol.label
    s = sigmas(tol)
    assert set(s) == {source_name(x) for x in SOURCES}
    assert all(v > 0 for v in s.values())


def test_values_and_defaults():
    fab = parse_fab(FAB)
    tol = fab.tolerance
    assert tol.get("width_nm", "global") == 2.0 and tol.get("width_nm", "local") == 1.5
    assert tol.get("thickness_nm", "local") == 0.0       # not given: 0
    assert tol.get("length_nm", "global") == 0.0         # quantity not given: 0
    assert tol.combined("width_nm") == pytest.approx(2.5)  # sqrt(2² + 1.5²) = 2.5 exactly
    assert sigmas(tol, 2.0)["width_nm.local"] == 3.0
    no_block = copy.deepcopy(FAB)
    del no_block["tolerance"]
    assert parse_fab(no_block).tolerance is None


@pytest.mark.parametrize("changes, match", [
    ({"width_nm": {"global": -1.0}}, r"fab.tolerance.width_nm.global must be at least 0"),
    ({"width_nm": {"globl": 1.0}},
     r"fab.tolerance.width_nm: unknown key 'globl'; valid keys are: global, local"),
    ({"position_nm": {"global": 1.0, "local": 1.0}}, r"fab.tolerance.position_nm.global: a common shift"),
    ({"angle": {"local": 1.0}}, r"fab.tolerance: unknown key 'angle'"),
    ({"label": None}, r"fab.tolerance.label is missing"),
    # sqrt(7² + 4²) = 8.06 nm > 0.2 × 40 nm
    ({"width_nm": {"global": 7.0, "local": 4.0}},
     r"fab.tolerance.width_nm: the combined 1σ .* give at most 8 nm"),
    ({"thickness_nm": {"global": "two"}}, r"fab.tolerance.thickness_nm.global must be a finite number"),
    ({"length_nm": 2.0}, r"fab.tolerance.length_nm must be a mapping"),
])
def test_mistakes_name_the_key(changes, match):
    with pytest.raises(SpecError, match=match):
        parse_fab(with_tol(**changes))
