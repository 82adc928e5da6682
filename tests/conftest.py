"""Shared test configuration."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import settings  # noqa: E402

# CI machines are small (2 cores); keep property tests short and deterministic.
settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
settings.register_profile("dev", max_examples=60, deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else "dev")


import pytest  # noqa: E402


@pytest.fixture(scope="session")
def reduced_demo_fit_window(tmp_path_factory):
    """The regression case's fit and window (tests/pipeline/regression_case.py), made once per session.

    ``{"work": folder, "case": campaign folder, "out": output folder}``; the demo report's checks
    read it (the regression guard runs the case itself, in the pinned instruction set of
    ``tests/pinned_numbers.py``).  Read it only: a test that writes copies the folder first.
    """
    from pipeline.regression_case import fit_and_window

    work = tmp_path_factory.mktemp("regression-case")
    out = fit_and_window(work)
    return {"work": work, "case": work / "case", "out": out}
