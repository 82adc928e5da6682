"""Shared test configuration."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import settings  # noqa: E402

# CI machines are small (2 cores); keep property tests short and deterministic.
settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
settings.register_profile("dev", max_examples=60, deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else "dev")
