"""Shared test configuration."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import settings  # noqa: E402

# CI machines are small (2 cores); keep property tests short and deterministic.
settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
settings.register_profile("dev", max_examples=60, deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else "dev")


import pytest  # noqa: E402

import pinned_numbers  # noqa: E402


def pytest_collection_finish(session):
    # The comparisons to the last bit run scripts in a pinned subprocess (tests/pinned_numbers.py), about a
    # minute each on a cold cache; queue the ones this session's tests need now, so that they run on the
    # second core while the other tests run (most of them use one).
    wanted = {name for item in session.items for name in getattr(item, "fixturenames", ())}
    for fixture in pinned_numbers.PINNED_JOBS:
        if fixture in wanted:
            pinned_numbers.start_in_background(*_job(fixture))


def pytest_sessionfinish(session, exitstatus):
    pinned_numbers.stop_background()


def _job(fixture):
    name, script, args = pinned_numbers.job_of(fixture)
    return (name, script, *args)


def _finished(fixture):
    """The output folder of the pinned job ``fixture`` waits for, once it has finished (skips where none can run)."""
    if pinned_numbers.pinned_environment() is None:
        pytest.skip(pinned_numbers.WHY_NOT_PINNED)
    job = _job(fixture)
    pinned_numbers.background_result(*job)
    return pinned_numbers.job_folder(job[0])


@pytest.fixture(scope="session")
def pinned_regression():
    """Output folder of the pipeline's regression case run in the pinned environment."""
    return _finished("pinned_regression")


@pytest.fixture(scope="session")
def regenerated():
    """Output folder of the demo generator run in the pinned environment."""
    return _finished("regenerated")


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
