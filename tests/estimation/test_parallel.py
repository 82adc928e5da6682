"""Splitting likelihood batches over processes or a Dask cluster changes nothing in the chain.

Reference: the serial run with the same seed (the split only changes where
each row of a batch is computed, so the chains must be bit-identical).
"""

import numpy as np
import pytest

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError
from speciakin.estimation.parallel import DaskEvaluator, ProcessEvaluator, SerialEvaluator, make_evaluator, split_rows
from speciakin.estimation.sampling import sample_posterior

PRIORS = [Prior("normal", {"mean": 0.0, "sd": 2.0}), Prior("uniform", {"lower": -5.0, "upper": 5.0}),
          Prior("lognormal", {"log_mean": 0.0, "log_sd": 1.0})]
NAMES = ["a", "b", "c"]


def row_log_likelihood(theta):
    """Row-wise target with transcendental functions (invented test function)."""
    a, b, c = theta[:, 0], theta[:, 1], theta[:, 2]
    return -0.5 * (a - np.sin(b)) ** 2 / 0.09 - 0.5 * (b - 1.0) ** 2 / 0.25 - 0.5 * (np.log(c) - 0.2 * a) ** 2 / 0.04


def run(n_steps=60, **kwargs):
    return sample_posterior(row_log_likelihood, NAMES, PRIORS, [0.8, 1.0, 1.2], [0.3, 0.5, 0.2],
                            n_walkers=10, n_steps=n_steps, seed=42, progress=False, **kwargs)


def test_split_rows_covers_every_row_once():
    for n_rows, n_chunks in [(10, 3), (5, 8), (1, 2), (16, 2)]:
        slices = split_rows(n_rows, n_chunks)
        covered = np.concatenate([np.arange(n_rows)[s] for s in slices])
        assert np.array_equal(covered, np.arange(n_rows))
        assert len(slices) == min(n_rows, n_chunks)


def test_process_evaluator_returns_rows_in_order():
    theta = np.random.default_rng(0).uniform(0.5, 1.5, size=(7, 3))
    with ProcessEvaluator(row_log_likelihood, 2) as evaluator:
        got = evaluator(theta)
    assert np.array_equal(got, SerialEvaluator(row_log_likelihood)(theta))


def test_two_processes_give_the_serial_chain():
    serial = run()
    parallel = run(jobs=2)
    assert parallel.evaluator == "2 local processes"
    assert np.array_equal(serial.chain, parallel.chain)
    assert np.array_equal(serial.log_prob, parallel.log_prob)


@pytest.mark.parametrize("processes", [False, pytest.param(True, marks=pytest.mark.slow)])
def test_dask_cluster_gives_the_serial_chain(processes):
    distributed = pytest.importorskip("distributed")
    serial = run(n_steps=15)
    with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1, processes=processes,
                                  protocol="tcp",
                                  dashboard_address=None) as cluster:
        result = run(n_steps=15, scheduler=cluster.scheduler_address)
    assert "Dask cluster" in result.evaluator
    assert np.array_equal(serial.chain, result.chain)


def test_unpicklable_likelihood_with_processes_is_a_clear_error():
    with pytest.raises(InputError, match="cannot be sent to worker processes"):
        make_evaluator(lambda theta: theta[:, 0], jobs=2)


@pytest.mark.parametrize("jobs", [0, -1, 1.5, True])
def test_bad_jobs(jobs):
    with pytest.raises(InputError, match="number of worker processes"):
        make_evaluator(row_log_likelihood, jobs=jobs)


def test_unreachable_scheduler_is_a_clear_error():
    with pytest.raises(InputError, match="cannot connect to the Dask scheduler"):
        DaskEvaluator(row_log_likelihood, "tcp://127.0.0.1:9", timeout=1.0)
