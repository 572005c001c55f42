"""Hypothesis profiles shared by the property and fuzz tests.

``ci`` (the default) is fast and deterministic, so a CI run is reproducible; ``long``
runs ten times the examples of every test, at random, for a deeper fuzz run::

    KEEPCLEAR_HYPOTHESIS_PROFILE=long .venv/bin/python -m pytest tests/test_properties.py \
        tests/test_fuzz.py -q

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


def examples(n: int) -> int:
    """The example count of a test: ``n`` in CI, more in the long profile."""
    return n * _SCALE[PROFILE]
