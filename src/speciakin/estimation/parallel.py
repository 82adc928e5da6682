"""Where a batch of log-likelihood evaluations runs: here, local processes or Dask.

A batched log-likelihood takes an array ``theta`` of shape (n_sets, n_params)
and returns (n_sets,).  The evaluators below split the rows of one batch into
contiguous chunks, evaluate each chunk somewhere, and put the results back in
row order.  As long as the likelihood computes each row independently of the
other rows in its batch (the project's campaign likelihood does), the result
is bit-identical to a serial call, so a sampler run with the same seed gives
the same chain whatever the evaluator.

* :class:`SerialEvaluator` - calls the function in this process.
* :class:`ProcessEvaluator` - ``jobs`` local worker processes
  (``concurrent.futures.ProcessPoolExecutor``); the function is pickled once
  and handed to each worker by its initializer.
* :class:`DaskEvaluator` - the workers of an existing Dask distributed
  cluster at ``"tcp://host:port"``; the function is scattered to every worker
  once.

All three are context managers; :func:`make_evaluator` picks one.
"""

from __future__ import annotations

import pickle
from concurrent.futures import ProcessPoolExecutor
from typing import Callable

import numpy as np

from speciakin.errors import InputError, Location

__all__ = ["SerialEvaluator", "ProcessEvaluator", "DaskEvaluator", "make_evaluator", "split_rows"]

_WORKER_FUNCTION: Callable | None = None


def split_rows(n_rows: int, n_chunks: int) -> list[slice]:
    """Contiguous, nearly equal row slices covering ``range(n_rows)`` (no empty ones)."""
    n_chunks = max(1, min(int(n_chunks), int(n_rows)))
    edges = np.linspace(0, n_rows, n_chunks + 1).round().astype(int)
    return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]


def _pickle_function(function: Callable, option: str) -> bytes:
    try:
        return pickle.dumps(function)
    except (pickle.PicklingError, TypeError, AttributeError) as exc:
        raise InputError(f"the log-likelihood cannot be sent to worker processes: {exc}",
                         Location(key=option), None,
                         "a picklable function (defined at module level, not a lambda or closure)") from None


def _initialise_worker(payload: bytes) -> None:
    global _WORKER_FUNCTION
    _WORKER_FUNCTION = pickle.loads(payload)


def _evaluate_in_worker(theta: np.ndarray) -> np.ndarray:
    return np.asarray(_WORKER_FUNCTION(theta), dtype=float)


def _evaluate_with(function: Callable, theta: np.ndarray) -> np.ndarray:
    return np.asarray(function(theta), dtype=float)


class SerialEvaluator:
    """Evaluate each batch in the calling process."""

    description = "serial"

    def __init__(self, function: Callable) -> None:
        self.function = function

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        return np.asarray(self.function(theta), dtype=float)

    def close(self) -> None:
        pass

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class ProcessEvaluator(SerialEvaluator):
    """Split each batch over ``jobs`` local worker processes.

    Parameters
    ----------
    function
        Batched log-likelihood; must be picklable (module-level function or
        an instance of a module-level class).
    jobs
        Number of worker processes (>= 1).
    """

    def __init__(self, function: Callable, jobs: int) -> None:
        super().__init__(function)
        self.jobs = int(jobs)
        self.description = f"{self.jobs} local processes"
        payload = _pickle_function(function, "jobs")
        self._executor = ProcessPoolExecutor(max_workers=self.jobs, initializer=_initialise_worker,
                                             initargs=(payload,))

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        theta = np.asarray(theta, dtype=float)
        chunks = split_rows(theta.shape[0], self.jobs)
        if len(chunks) <= 1:
            futures = [self._executor.submit(_evaluate_in_worker, theta)]
        else:
            futures = [self._executor.submit(_evaluate_in_worker, theta[c]) for c in chunks]
        return np.concatenate([np.atleast_1d(f.result()) for f in futures])

    def close(self) -> None:
        self._executor.shutdown(wait=True, cancel_futures=True)


class DaskEvaluator(SerialEvaluator):
    """Split each batch over the workers of an existing Dask distributed cluster.

    Parameters
    ----------
    function
        Batched log-likelihood; must be picklable by cloudpickle.
    scheduler
        Scheduler address, e.g. ``"tcp://127.0.0.1:8786"``, or an existing
        ``distributed.Client`` (then it is not closed by :meth:`close`).
    timeout
        Seconds to wait for the connection [s].
    """

    def __init__(self, function: Callable, scheduler, timeout: float = 20.0) -> None:
        super().__init__(function)
        import distributed

        self._own_client = not isinstance(scheduler, distributed.Client)
        if self._own_client:
            address = str(scheduler)
            try:
                self._client = distributed.Client(address, timeout=timeout, set_as_default=False)
            except (OSError, TimeoutError, ValueError) as exc:
                raise InputError(f"cannot connect to the Dask scheduler: {exc}",
                                 Location(key="scheduler"), address,
                                 "the address of a running scheduler, e.g. tcp://host:8786") from None
        else:
            self._client = scheduler
        self.n_workers = max(1, len(self._client.scheduler_info().get("workers", {})))
        self.description = f"Dask cluster {self._client.scheduler.address} ({self.n_workers} workers)"
        (self._function_future,) = self._client.scatter([function], broadcast=True)

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        theta = np.asarray(theta, dtype=float)
        chunks = split_rows(theta.shape[0], self.n_workers)
        futures = [self._client.submit(_evaluate_with, self._function_future, theta[c], pure=False)
                   for c in chunks]
        return np.concatenate([np.atleast_1d(r) for r in self._client.gather(futures)])

    def close(self) -> None:
        if self._own_client:
            self._client.close()


def make_evaluator(function: Callable, jobs: int = 1, scheduler=None) -> SerialEvaluator:
    """Pick the evaluator: Dask when ``scheduler`` is given, processes when ``jobs > 1``.

    Raises
    ------
    InputError
        ``jobs`` is not a whole number >= 1.
    """
    if isinstance(jobs, bool) or not isinstance(jobs, (int, np.integer)) or jobs < 1:
        raise InputError("number of worker processes is not allowed", Location(key="jobs"), jobs,
                         "a whole number >= 1")
    if scheduler is not None:
        return DaskEvaluator(function, scheduler)
    if jobs > 1:
        return ProcessEvaluator(function, int(jobs))
    return SerialEvaluator(function)
