"""The posterior store: crash-safe checkpoint and finished result in one HDF5 file.

A checkpoint holds everything needed to continue a run exactly where it
stopped: the chain and log-posterior so far, the accepted-move counts, the
state of the sampler's random number generator after the last completed
step, and the run settings (parameter names, walkers, seed, thinning).  When
the run is finished the same file also holds the result (group ``result``:
JSON metadata of the summary and diagnostics, and the acceptance fractions),
as a sampler backend keeps chain and state together; the chain is stored once.
For a run that stops when converged, the settings hold its stop rule and the
file holds the convergence checks made so far
(:mod:`speciakin.estimation.stopping`).

Layout (format tag ``speciakin.posterior/1``)::

    attrs: format, settings (JSON), stop_checks (JSON)
    chain (n_stored, n_walkers, n_params), log_prob (n_stored, n_walkers)
    accepted (n_walkers,)  random_state/ keys (624,) + attrs name, pos, has_gauss, cached_gaussian
                   (the sampler's state: present in every file the sampler wrote, so it can be resumed)
    result/        (finished runs only) acceptance_fraction (n_walkers,) + attrs metadata (JSON)

:meth:`speciakin.estimation.posterior_result.PosteriorResult.save` adds the
``result`` group to the sampler's file of the same chain; a result saved
where there is no such file is written without the sampler's state (it loads,
but cannot be resumed).  Files of the earlier result-only layout (format tag
``speciakin-posterior-1``: chain, log_prob, acceptance_fraction and the
metadata as attributes) are read as such a finished result.

Each write goes to a temporary file in the same folder, is flushed and
fsync'ed, and then renamed over the previous checkpoint (``os.replace`` is
atomic on POSIX and Windows), so a kill at any moment leaves either the old
or the new checkpoint, never a torn file.
"""

from __future__ import annotations

import json
import os

from dataclasses import dataclass, field
from pathlib import Path

import h5py
import numpy as np

from speciakin._io import atomic_path
from speciakin._json import format_tag
from speciakin.errors import InputError, Location

__all__ = ["Checkpoint", "write_checkpoint", "read_checkpoint", "CHECKPOINT_FORMAT"]

#: Format tag stored in every posterior file; bumped on incompatible change.
CHECKPOINT_FORMAT = format_tag("posterior", 1)
#: Tags of earlier files with the same layout (read, so that an interrupted run still resumes).
EARLIER_FORMATS = ("speciakin-ensemble-checkpoint-1",)
#: Tag of the earlier result-only layout (read as a finished result without the sampler's state).
EARLIER_RESULT_FORMAT = "speciakin-posterior-1"


@dataclass
class Checkpoint:
    """State of a sampler run after ``iteration`` stored steps.

    Attributes
    ----------
    chain
        (iteration, n_walkers, n_params) stored positions.
    log_prob
        (iteration, n_walkers) log-posterior of the stored positions.
    accepted
        (n_walkers,) accepted proposals so far (all steps, not only stored);
        None in a file holding a result without the sampler's state.
    random_state
        numpy RandomState state tuple after the last stored step; None in a
        file holding a result without the sampler's state (not resumable).
    settings
        JSON-ready run settings (parameter names, n_walkers, seed, thin_by,
        ...); used to refuse resuming a different run.
    result
        None while the run is unfinished; then ``{"metadata": dict,
        "acceptance_fraction": array}`` of the finished result.
    stop_checks
        JSON-ready convergence checks made so far (dicts of
        :class:`speciakin.estimation.stopping.StopCheck`); empty for a run of
        fixed length and in files written before checks existed.
    """

    chain: np.ndarray
    log_prob: np.ndarray
    accepted: np.ndarray | None
    random_state: tuple | None
    settings: dict = field(default_factory=dict)
    result: dict | None = None
    stop_checks: list = field(default_factory=list)

    @property
    def iteration(self) -> int:
        return int(self.chain.shape[0])

    @property
    def resumable(self) -> bool:
        """True when the file holds the sampler's state (a run can continue from it)."""
        return self.random_state is not None and self.accepted is not None


def write_checkpoint(path: str | os.PathLike, checkpoint: Checkpoint) -> None:
    """Write ``checkpoint`` to ``path`` atomically (temp file, fsync, rename)."""
    with atomic_path(path) as tmp:
        with h5py.File(tmp, "w") as fh:
            fh.attrs["format"] = CHECKPOINT_FORMAT
            fh.attrs["settings"] = json.dumps(checkpoint.settings)
            fh.attrs["stop_checks"] = json.dumps(checkpoint.stop_checks)
            fh.create_dataset("chain", data=np.asarray(checkpoint.chain, dtype=float))
            fh.create_dataset("log_prob", data=np.asarray(checkpoint.log_prob, dtype=float))
            if checkpoint.resumable:
                name, keys, pos, has_gauss, cached = checkpoint.random_state
                fh.create_dataset("accepted", data=np.asarray(checkpoint.accepted, dtype=float))
                rs = fh.create_group("random_state")
                rs.attrs["name"] = str(name)
                rs.create_dataset("keys", data=np.asarray(keys, dtype=np.uint32))
                rs.attrs["pos"] = int(pos)
                rs.attrs["has_gauss"] = int(has_gauss)
                rs.attrs["cached_gaussian"] = float(cached)
            if checkpoint.result is not None:
                group = fh.create_group("result")
                group.attrs["metadata"] = json.dumps(checkpoint.result["metadata"])
                group.create_dataset("acceptance_fraction",
                                     data=np.asarray(checkpoint.result["acceptance_fraction"], dtype=float))
            fh.flush()


def read_checkpoint(path: str | os.PathLike) -> Checkpoint:
    """Read a checkpoint written by :func:`write_checkpoint`.

    Raises
    ------
    InputError
        The file is missing, is not HDF5 or is not a speciakin checkpoint.
    """
    path = Path(path)
    where = Location(file=str(path))
    if not path.exists():
        raise InputError("checkpoint file not found", where, None, "an existing checkpoint to resume")
    try:
        with h5py.File(path, "r") as fh:
            tag = fh.attrs.get("format")
            if tag == EARLIER_RESULT_FORMAT:
                return _earlier_result(fh)
            if tag not in (CHECKPOINT_FORMAT, *EARLIER_FORMATS):
                raise InputError("not a sampler checkpoint", where, tag, f"format {CHECKPOINT_FORMAT}")
            settings = json.loads(fh.attrs["settings"])
            stop_checks = json.loads(fh.attrs["stop_checks"]) if "stop_checks" in fh.attrs else []
            chain = fh["chain"][...]
            log_prob = fh["log_prob"][...]
            accepted = random_state = None
            if "random_state" in fh:
                accepted = fh["accepted"][...]
                rs = fh["random_state"]
                random_state = (str(rs.attrs["name"]), rs["keys"][...].astype(np.uint32),
                                int(rs.attrs["pos"]), int(rs.attrs["has_gauss"]),
                                float(rs.attrs["cached_gaussian"]))
            result = None
            if "result" in fh:
                result = {"metadata": json.loads(fh["result"].attrs["metadata"]),
                          "acceptance_fraction": fh["result"]["acceptance_fraction"][...]}
    except OSError as exc:
        raise InputError(f"checkpoint file cannot be read: {exc}", where, None,
                         "an HDF5 checkpoint written by speciakin") from None
    except KeyError as exc:
        raise InputError(f"checkpoint file is incomplete: missing {exc}", where, None,
                         "an HDF5 checkpoint written by speciakin") from None
    return Checkpoint(chain, log_prob, accepted, random_state, settings, result=result, stop_checks=stop_checks)


def _earlier_result(fh) -> Checkpoint:
    """A file of the earlier result-only layout as a finished result without the sampler's state."""
    meta = json.loads(fh.attrs["metadata"])
    settings = {key: meta.get(key) for key in ("parameter_names", "n_walkers", "thin_by", "seed", "proposal")}
    return Checkpoint(fh["chain"][...], fh["log_prob"][...], None, None, settings,
                      result={"metadata": meta, "acceptance_fraction": fh["acceptance_fraction"][...]},
                      stop_checks=list(meta.get("stop_checks") or []))
