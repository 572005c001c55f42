"""The packaged JSON Schemas: valid draft 2020-12, matched by every JSON output, and strict enough.

The schemas describe the stable contract (../shared/contract.md, "JSON shapes"): keys the
contract names are required, the extras the tool prints today are typed, new keys may appear.
"""

from __future__ import annotations

import copy
import json
from importlib import resources

import jsonschema
import pytest
from jsonschema import Draft202012Validator

from ._cli import run, schema, strict_json, validate, validator
from .conftest import ISOTROPIC

SCHEMA_NAMES = ("limits", "probe", "keepout", "map", "compare", "assessment")
SCHEMA_DIR = resources.files("keepclear.fields") / "schemas"

# The example objects printed in the stable contract, "JSON shapes" (copied verbatim).
CONTRACT_EXAMPLES = {
    "limits": {
        "schema_version": 1,
        "frequency_hz": 2.45e9,
        "limits": [
            {
                "id": "icnirp-2020/general-public",
                "power_density_w_m2": 10.0,
                "e_v_m": None,
                "h_a_m": None,
                "averaging_time_s": 1800,
                "source": "ICNIRP 2020 guidelines, Table 5",
            }
        ],
    },
    "probe": {
        "schema_version": 1,
        "frequency_hz": 2.45e9,
        "points": [
            {
                "position_m": [1.0, 0.0, 1.0],
                "e_v_m": 0.0,
                "h_a_m": 0.0,
                "power_density_w_m2": 0.0,
                "peak_power_density_w_m2": 0.0,
                "quotients": {"icnirp-2020/general-public": 0.0},
            }
        ],
    },
    "keepout": {
        "schema_version": 1,
        "frequency_hz": 2.45e9,
        "average_power_w": 400.0,
        "keepout": [
            {
                "limit": "icnirp-2020/general-public",
                "limit_w_m2": 10.0,
                "distance_m": 3.9,
                "direction": [1.0, 0.0, 0.0],
            }
        ],
    },
}


def schema_files():
    return sorted(p.name for p in SCHEMA_DIR.iterdir() if p.name.endswith(".schema.json"))


def test_every_contract_schema_is_packaged():
    names = schema_files()
    for name in SCHEMA_NAMES:
        assert f"{name}.schema.json" in names


@pytest.mark.parametrize("filename", schema_files())
def test_schema_is_valid_draft_2020_12(filename):
    data = json.loads((SCHEMA_DIR / filename).read_text(encoding="utf-8"))
    assert data["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    Draft202012Validator.check_schema(data)
    assert data["properties"]["schema_version"] == {"const": 1}
    assert data["title"].startswith("keepclear ")


@pytest.mark.parametrize("name", sorted(CONTRACT_EXAMPLES))
def test_contract_examples_validate(name):
    validate(name, CONTRACT_EXAMPLES[name])


# ------------------------------------------------------------------ real outputs
@pytest.mark.parametrize("frequency_hz", ["1e4", "1e8", "9e8", "2.45e9", "5.8e9", "3e11", "1e12"])
def test_limits_json_validates(frequency_hz):
    result = run("limits", "--frequency-hz", frequency_hz, "--json")
    assert result.exit_code == 0, result.stderr
    validate("limits", strict_json(result.stdout))


SCENARIO_TEXTS = {
    "isotropic": ISOTROPIC,
    "dipole": """
        [[source]]
        antenna = "dipole"
        power_w = 20.0
        duty_cycle = 0.25
        axis = [1.0, 0.0, 0.0]
        [exposure]
        limits = ["icnirp-2020/general-public", "sc6-2015/controlled", "fda-1030.10/in-service"]
    """,
    "monopole": """
        [[source]]
        antenna = "monopole"
        power_w = 5.0
        position_m = [0.0, 0.0, 1.0]
        [exposure]
        limits = ["ieee-c95.1-2019/unrestricted", "fcc-1.1310/occupational"]
    """,
    "two sources, one never reaching the limit": """
        frequency_hz = 9.0e8
        [[source]]
        antenna = "isotropic"
        power_w = 1.0
        [[source]]
        antenna = "isotropic"
        power_w = 1.0e-6
        position_m = [3.0, 0.0, 0.0]
        [exposure]
        limits = ["icnirp-2020/occupational-local", "fda-1030.10/before-purchase"]
    """,
}


@pytest.mark.parametrize("case", sorted(SCENARIO_TEXTS))
def test_probe_and_keepout_json_validate(write_scenario, case):
    path = write_scenario(SCENARIO_TEXTS[case])
    probe = run("probe", path, "--at", "0.5,0,0", "--at=-2,1,0.25", "--at", "0,0,0", "--json")
    assert probe.exit_code == 0, probe.stderr
    validate("probe", strict_json(probe.stdout))
    keepout = run("keepout", path, "--json")
    assert keepout.exit_code == 0, keepout.stderr
    data = strict_json(keepout.stdout)
    validate("keepout", data)


def test_unreached_limit_has_null_direction_and_validates(write_scenario):
    # 1 uW isotropic: S = 1e-6/(4 pi r^2) reaches 10 W/m^2 only within 0.09 mm; the search starts
    # at 1 mm (OET 65 eq. (3), S = P G / 4 pi R^2), so the limit is reported as not reached.
    path = write_scenario('[[source]]\nantenna = "isotropic"\npower_w = 1.0e-6\n')
    data = strict_json(run("keepout", path, "--json").stdout)
    validate("keepout", data)
    assert all(k["direction"] is None and k["distance_m"] == 0.0 for k in data["keepout"])


# The bundled scenarios are validated against these schemas in test_scenarios_all.py.

# A small scenario with everything the larger outputs describe: a reflector, a shield, a named
# point, an option; and one with an enclosure (its leakage 5 cm from the walls).
WITH_OPTIONS = """
    name = "schema check: options"
    [[source]]
    id = "feed"
    antenna = "dipole"
    power_w = 30.0
    duty_cycle = 0.5
    position_m = [0.0, 0.0, 1.0]
    [[reflector]]
    point_m = [0.0, 0.0, 0.0]
    normal = [0.0, 0.0, 1.0]
    material = "concrete"
    [[shield]]
    center_m = [0.6, 0.0, 1.0]
    normal = [-1.0, 0.0, 0.0]
    width_m = 0.5
    height_m = 0.5
    shielding_db = 20.0
    [[point]]
    name = "desk"
    position_m = [1.0, 0.5, 1.2]
    [exposure]
    limits = ["icnirp-2020/general-public", "sc6-2015/uncontrolled"]
    [[option]]
    name = "half power"
    [[option.source]]
    id = "feed"
    power_w = 15.0
"""
WITH_ENCLOSURE = """
    name = "schema check: enclosure"
    [[source]]
    antenna = "isotropic"
    power_w = 500.0
    position_m = [0.0, 0.0, 1.0]
    [enclosure]
    center_m = [0.0, 0.0, 1.0]
    size_m = [0.5, 0.4, 0.3]
    metal = "mild-steel"
    thickness_m = 0.002
    [[enclosure.opening]]
    face = "+x"
    type = "slot"
    length_m = 0.03
    width_m = 0.001
    along = "z"
    offset_m = [0.0, 0.0]
"""
TINY_MAP = ["--pixels", "11"]


@pytest.mark.parametrize("text", [WITH_OPTIONS, WITH_ENCLOSURE], ids=["options", "enclosure"])
def test_assessment_json_validates(write_scenario, tmp_path, text):
    path = write_scenario(text)
    out = tmp_path / "out"
    result = run("assess", path, "--out", out, *TINY_MAP, "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    validate("assessment", data)
    on_disk = strict_json((out / "assessment.json").read_text(encoding="utf-8"))
    validate("assessment", on_disk)
    if data["comparison"] is not None:
        validate("compare", data["comparison"])
    assert sorted(p.name for p in out.iterdir()) == sorted(data["files"])


def test_compare_and_map_json_validate(write_scenario, tmp_path):
    path = write_scenario(WITH_OPTIONS)
    compare = run("compare", path, *TINY_MAP, "--json")
    assert compare.exit_code == 0, compare.stderr
    data = strict_json(compare.stdout)
    validate("compare", data)
    assert [o["rank"] for o in data["options"]] == [1, 2]
    result = run("map", path, *TINY_MAP, "--out", tmp_path / "maps", "--json")
    assert result.exit_code == 0, result.stderr
    validate("map", strict_json(result.stdout))


# ------------------------------------------------------- the schemas do reject
def _bad(name, mutate):
    doc = copy.deepcopy(CONTRACT_EXAMPLES[name])
    mutate(doc)
    with pytest.raises(jsonschema.ValidationError):
        validate(name, doc)


@pytest.mark.parametrize(
    ("name", "mutate"),
    [
        ("limits", lambda d: d.update(schema_version=2)),
        ("limits", lambda d: d["limits"][0].pop("e_v_m")),
        ("limits", lambda d: d["limits"][0].update(power_density_w_m2=-1.0)),
        ("limits", lambda d: d["limits"][0].update(power_density_w_m2="10")),
        ("limits", lambda d: d["limits"][0].update(id="ICNIRP general")),
        ("probe", lambda d: d.pop("points")),
        ("probe", lambda d: d["points"][0].update(position_m=[1.0, 0.0])),
        ("probe", lambda d: d["points"][0].update(e_v_m=-0.1)),
        ("probe", lambda d: d["points"][0].update(quotients={"icnirp-2020/general-public": None})),
        ("probe", lambda d: d["points"][0].update(quotients={})),
        ("probe", lambda d: d["points"][0].pop("peak_power_density_w_m2")),
        ("keepout", lambda d: d.pop("average_power_w")),
        ("keepout", lambda d: d["keepout"][0].update(distance_m=-3.9)),
        ("keepout", lambda d: d["keepout"][0].update(direction=[2.0, 0.0, 0.0])),
        ("keepout", lambda d: d["keepout"][0].update(direction="east")),
        ("keepout", lambda d: d["keepout"][0].pop("limit")),
        ("keepout", lambda d: d.update(keepout=[])),
    ],
)
def test_schema_rejects_broken_documents(name, mutate):
    _bad(name, mutate)


def test_schemas_allow_new_keys():
    # The contract "may grow": an added key must not break a validating consumer.
    doc = copy.deepcopy(CONTRACT_EXAMPLES["keepout"])
    doc["something_new"] = {"x": 1}
    doc["keepout"][0]["another"] = [1, 2]
    validate("keepout", doc)
    assert validator("probe").is_valid(CONTRACT_EXAMPLES["probe"])
    assert schema("limits")["$id"].startswith("urn:keepclear:schema:")


def test_the_enclosure_object_is_described_once():
    """``keepout --json`` and ``assessment.json`` carry the same ``"enclosure"`` object.

    JSON Schema files cannot share a definition here (each is packaged and read on its
    own), so the two copies are held equal.
    """
    assert schema("keepout")["$defs"]["enclosure"] == schema("assessment")["$defs"]["enclosure"]
