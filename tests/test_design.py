"""Design file: round trip, validation messages naming element and field, periodic overlap checks."""

import json

import numpy as np
import pytest

from invdesign._design import Design
from invdesign._errors import DesignError


def base_doc():
    return {
        "format": "invdesign.design", "version": 1, "length_unit": "nm",
        "lattice": {"a1": [320.0, 0.0], "a2": [0.0, 320.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": {"au": {"model": "drude", "eps_inf": 9.5, "omega_p_ev": 8.95, "gamma_ev": 0.069}},
        "elements": [
            {"shape": "rod", "material": "au", "center": [0.0, -60.0], "length": 180.0, "width": 50.0,
             "thickness": 40.0, "angle_deg": 0.0},
            {"shape": "disk", "material": "au", "center": [0.0, 80.0], "diameter": 90.0, "thickness": 40.0},
            {"shape": "sphere", "material": "au", "center": [120.0, 0.0], "radius": 20.0},
        ],
    }


def test_round_trip(tmp_path):
    d = Design.from_json(base_doc())
    path = tmp_path / "cell.json"
    d.to_json(path)
    again = Design.from_json(path)
    assert again.to_dict() == d.to_dict()
    assert json.loads(path.read_text())["format"] == "invdesign.design"


def test_centres_outside_the_cell_are_wrapped():
    doc = base_doc()
    doc["elements"][2]["center"] = [120.0 + 320.0, -640.0]
    d = Design.from_json(doc)
    assert np.allclose(np.asarray(d.elements[2].center), [120.0, 0.0])


@pytest.mark.parametrize(
    "mutate, expected",
    [
        (lambda d: d["elements"][0].update(width=-5.0), "elements[0].width must be positive"),
        (lambda d: d["elements"][1].pop("diameter"), "elements[1] (disk): missing 'diameter'"),
        (lambda d: d["elements"][0].update(material="ag"), "elements[0].material 'ag' is not defined"),
        (lambda d: d["elements"][0].update(shape="star"), "elements[0].shape must be one of"),
        (lambda d: d["elements"][0].update(lenght=3.0), "unknown key 'lenght'"),
        (lambda d: d["lattice"].update(a2=[640.0, 0.0]), "parallel"),
        (lambda d: d.update(version=7), "'version' 7 is not supported"),
        (lambda d: d["environment"].update(substrate_index="glass"), "environment.substrate_index"),
        (lambda d: d["materials"]["au"].update(model="magic"), "au"),
    ],
)
def test_each_mistake_is_named(mutate, expected):
    doc = base_doc()
    mutate(doc)
    with pytest.raises(DesignError) as err:
        Design.from_json(doc)
    assert expected in str(err.value)


def test_overlap_between_elements():
    doc = base_doc()
    doc["elements"][1]["center"] = [60.0, -40.0]
    with pytest.raises(DesignError, match="elements 0 .* and 1 .* overlap"):
        Design.from_json(doc)


def test_overlap_across_the_periodic_boundary():
    # a rod near the cell edge touches the next cell's copy of the disk
    doc = base_doc()
    doc["elements"] = [doc["elements"][0], doc["elements"][1]]
    doc["elements"][0]["center"] = [0.0, -140.0]
    doc["elements"][1]["center"] = [0.0, 150.0]
    with pytest.raises(DesignError, match="across the periodic boundary"):
        Design.from_json(doc)


def test_element_larger_than_cell_overlaps_its_image():
    doc = base_doc()
    doc["elements"] = [doc["elements"][0]]
    doc["elements"][0]["length"] = 330.0
    with pytest.raises(DesignError, match="its own periodic image"):
        Design.from_json(doc)


def test_missing_file_and_bad_json(tmp_path):
    with pytest.raises(DesignError, match="not found"):
        Design.from_json(tmp_path / "nope.json")
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    with pytest.raises(DesignError, match="not valid JSON"):
        Design.from_json(bad)


def test_several_problems_are_reported_together():
    doc = base_doc()
    doc["elements"][0]["width"] = 0.0
    doc["elements"][2]["radius"] = -1.0
    with pytest.raises(DesignError) as err:
        Design.from_json(doc)
    assert "elements[0].width" in str(err.value) and "elements[2].radius" in str(err.value)
