"""Shared test settings: a deterministic hypothesis profile and a fixed terminal width."""

from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

# Rich and typer wrap to the terminal width; pin it so CLI output does not
# depend on where the tests run.
os.environ["COLUMNS"] = "120"

settings.register_profile(
    "ci",
    derandomize=True,
    max_examples=40,
    deadline=None,
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile("ci")
