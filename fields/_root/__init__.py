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

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the names, for type checkers and readers; imported on first use
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

#: The module each name of the API comes from.  ``import keepclear`` alone imports none of
#: them (PEP 562 module ``__getattr__``), so the command line starts without numpy, scipy,
#: matplotlib or scikit-rf; the first use of a name imports its module.
_HOMES = {
    **dict.fromkeys(("InputError", "LimitError", "ResourceError", "ScenarioError"), "errors"),
    **dict.fromkeys(("Scenario", "load_scenario"), "scenario"),
}


def __getattr__(name: str) -> Any:
    if name not in __all__:
        raise AttributeError(f"module 'keepclear' has no attribute {name!r}")
    module = importlib.import_module(f"keepclear.fields.{_HOMES.get(name, 'assessment')}")
    value = getattr(module, name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
