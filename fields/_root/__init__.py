"""keepclear: fields, power density and keep-out distances around 2.45 GHz sources.

The Python API.  Every function takes a validated scenario and returns a frozen,
documented result whose ``to_dict()`` is exactly the JSON object of the matching
command (``keepclear keepout --json`` and so on)::

    import keepclear as kc

    scenario = kc.load_scenario("scenarios/horn-bench-options.toml")
    report = kc.keepout(scenario)
    for k in report.distances:
        print(k.limit_id, k.distance_m)

An estimate, not a measurement: verify with a calibrated survey meter (see
``keepclear.fields.cautions``).
"""

from __future__ import annotations

from keepclear.fields.assessment import (
    AssessmentResult,
    ComparisonResult,
    FieldMap,
    GridSettings,
    KeepoutReport,
    LimitsResult,
    ProbeResult,
    ReadingsResult,
    assess,
    compare,
    field_map,
    keepout,
    limits,
    probe,
    readings,
)
from keepclear.fields.errors import InputError, LimitError, ResourceError, ScenarioError
from keepclear.fields.scenario import Scenario, load_scenario

__all__ = [
    "AssessmentResult",
    "ComparisonResult",
    "FieldMap",
    "GridSettings",
    "InputError",
    "KeepoutReport",
    "LimitError",
    "LimitsResult",
    "ProbeResult",
    "ReadingsResult",
    "ResourceError",
    "Scenario",
    "ScenarioError",
    "assess",
    "compare",
    "field_map",
    "keepout",
    "limits",
    "load_scenario",
    "probe",
    "readings",
]
