"""Shared test set-up: hypothesis profiles.

``ci`` (the default) keeps the property tests quick and repeatable: few
examples, the same ones on every run. ``long`` explores many more random
machines; choose it with ``SUPPLYCFG_HYPOTHESIS_PROFILE=long``.
"""

import os

from hypothesis import HealthCheck, settings

settings.register_profile(
    "ci",
    max_examples=50,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile(
    "long",
    max_examples=1000,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile(os.environ.get("SUPPLYCFG_HYPOTHESIS_PROFILE", "ci"))
