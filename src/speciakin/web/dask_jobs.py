"""Jobs on a Dask distributed cluster, behind the same interface as :class:`~speciakin.web.jobs.JobBoard`.

The cluster is a ``LocalCluster`` started at the first job, or an existing
scheduler given by address (``speciakin web --scheduler ADDRESS``, as for
``speciakin sample``).  Progress travels from the worker to the page through
a distributed ``Variable`` per job, cancellation through a distributed
``Event``; a monitor thread on the server copies the progress into the
:class:`~speciakin.web.jobs.Job` the page reads.  The worker reads and writes
the campaign folder by its path, so the workers must see the same files (a
local cluster, or a shared file system).
"""

from __future__ import annotations

import threading
import time
from pathlib import Path
from typing import Any

from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web.jobs import Feedback, Job, JobBoard, perform

__all__ = ["DaskJobBoard", "remote_job"]

_POLL_S = 0.5


def _names(job_id: str) -> tuple[str, str]:
    return f"speciakin-job-progress-{job_id}", f"speciakin-job-cancel-{job_id}"


def remote_job(kind: str, campaign: str, settings: dict[str, Any], job_id: str) -> tuple[str, str, str, list[str]]:
    """Run one job on a worker; returns (state, message, folder, stages) with state "done", "cancelled" or
    "failed", the result folder relative to the campaign ("" when none was made) and every stage the work
    reported (the server's poll may have missed the last ones)."""
    from distributed import Event, Variable

    progress_name, cancel_name = _names(job_id)
    cancel, shown = Event(cancel_name), Variable(progress_name)
    job = Job(job_id, kind, "", "", settings, cancel=cancel)
    feedback = Feedback(Path(campaign), cancel, shown.set)
    state, message = perform(job, Path(campaign), feedback)
    return state, message, feedback.shown["folder"], list(feedback.shown["stages"])


class DaskJobBoard(JobBoard):
    """A :class:`JobBoard` whose jobs run on a Dask cluster.

    Parameters
    ----------
    scheduler
        Address of an existing scheduler, or None for a local cluster started at the first job.
    workers
        Workers of the local cluster (one thread each).
    """

    def __init__(self, scheduler: str | None = None, workers: int = 1) -> None:
        super().__init__(workers=1)
        self._address = scheduler
        self._n_workers = workers
        self._client = None
        self._cluster = None
        self._client_lock = threading.Lock()

    def client(self):
        """The Dask client, connecting (or starting the local cluster) on first use.

        Raises
        ------
        InputError
            The scheduler cannot be reached.
        """
        with self._client_lock:
            if self._client is None:
                import distributed

                try:
                    if self._address:
                        self._client = distributed.Client(self._address, timeout=20, set_as_default=False)
                    else:
                        self._cluster = distributed.LocalCluster(n_workers=self._n_workers, threads_per_worker=1,
                                                                 processes=True, dashboard_address=None)
                        self._client = distributed.Client(self._cluster, set_as_default=False)
                except (OSError, TimeoutError, ValueError) as exc:
                    raise InputError(f"cannot connect to the Dask scheduler: {exc}", Location(key="--scheduler"),
                                     self._address, "the address of a running scheduler, e.g. tcp://host:8786")
            return self._client

    def _start(self, job: Job, campaign: Path) -> None:
        threading.Thread(target=self._follow, args=(job, campaign), daemon=True,
                         name=f"speciakin-job-{job.id}").start()

    def _follow(self, job: Job, campaign: Path) -> None:
        from distributed import Event, Variable

        try:
            client = self.client()
            progress_name, cancel_name = _names(job.id)
            shown, cancel = Variable(progress_name, client=client), Event(cancel_name, client=client)
            if job.cancel.is_set():
                cancel.set()
            future = client.submit(remote_job, job.kind, str(campaign), job.settings, job.id,
                                   pure=False, key=f"speciakin-job-{job.id}")
            job.state = "running"
            while not future.done():
                if job.cancel.is_set() and not cancel.is_set():
                    cancel.set()
                try:
                    job.show(shown.get(timeout=_POLL_S))
                except TimeoutError:
                    continue
                time.sleep(_POLL_S)
            job.state, job.message, folder, stages = future.result()
            job.folder = folder or job.folder
            job.stages = stages or job.stages
            self._after(job)
            shown.delete()
        except SpeciakinError as exc:
            job.state, job.message = "failed", str(exc)
        except Exception as exc:  # a bug or a lost worker: the page says so instead of hanging
            job.state, job.message = "failed", f"unexpected error ({type(exc).__name__}): {exc}"
        finally:
            job.finished = time.time()

    def shutdown(self) -> None:
        super().shutdown()
        if self._client is not None:
            self._client.close()
        if self._cluster is not None:
            self._cluster.close()
