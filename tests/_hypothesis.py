"""Hypothesis profiles shared by the property and fuzz tests.

``ci`` (the default) is fast and deterministic, so a CI run is reproducible; ``long``
runs ten times the examples of every test, at random, for a deeper fuzz run::

    KEEPCLEAR_HYPOTHESIS_PROFILE=long .venv/bin/python -m pytest -q tests/test_field.py \
        tests/test_keepout_search.py tests/test_aperture.py tests/test_reflection.py \
        tests/test_shield.py tests/test_scenario_input.py tests/test_maps.py \
        tests/test_assess.py tests/test_cli.py

The strategies live in ``tests/_property_strategies.py`` and ``tests/_fuzz_strategies.py``;
the tests that use them sit in the test module of the area they test.

Each test states its CI example count with ``@settings(max_examples=examples(n))``.
"""

from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

_SLOW_OK = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much]

settings.register_profile(
    "ci", deadline=None, derandomize=True, print_blob=True, suppress_health_check=_SLOW_OK
)
settings.register_profile(
    "long", deadline=None, derandomize=False, print_blob=True, suppress_health_check=_SLOW_OK
)

#: Example-count multiplier per profile.
_SCALE = {"ci": 1, "long": 10}

PROFILE = os.environ.get("KEEPCLEAR_HYPOTHESIS_PROFILE", "ci")
if PROFILE not in _SCALE:
    raise RuntimeError(
        f"KEEPCLEAR_HYPOTHESIS_PROFILE={PROFILE!r}: use one of {', '.join(sorted(_SCALE))}"
    )
settings.load_profile(PROFILE)


def examples(n: int, long: int | None = None) -> int:
    """The example count of a test: ``n`` in CI, ``long`` (default ten times ``n``) in the
    long profile.

    A test whose examples are costly keeps a small CI count and states its deep count.
    """
    if PROFILE == "long" and long is not None:
        return long
    return n * _SCALE[PROFILE]
