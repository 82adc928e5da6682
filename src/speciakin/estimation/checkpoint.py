"""Crash-safe checkpoints of an ensemble-sampler run (HDF5 via h5py).

A checkpoint holds everything needed to continue a run exactly where it
stopped: the chain and log-posterior so far, the accepted-move counts, the
state of the sampler's random number generator after the last completed
step, the run settings (parameter names, walkers, seed, thinning, and for a
run that stops when converged its stop rule) and the convergence checks made
so far (:mod:`speciakin.estimation.stopping`).

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
from speciakin.errors import InputError, Location

__all__ = ["Checkpoint", "write_checkpoint", "read_checkpoint", "CHECKPOINT_FORMAT"]

#: Format tag stored in every checkpoint file; bumped on incompatible change.
CHECKPOINT_FORMAT = "speciakin-ensemble-checkpoint-1"


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
        (n_walkers,) accepted proposals so far (all steps, not only stored).
    random_state
        numpy RandomState state tuple after the last stored step.
    settings
        JSON-ready run settings (parameter names, n_walkers, seed, thin_by,
        ...); used to refuse resuming a different run.
    stop_checks
        JSON-ready convergence checks made so far (dicts of
        :class:`speciakin.estimation.stopping.StopCheck`); empty for a run of
        fixed length and in files written before checks existed.
    """

    chain: np.ndarray
    log_prob: np.ndarray
    accepted: np.ndarray
    random_state: tuple
    settings: dict = field(default_factory=dict)
    stop_checks: list = field(default_factory=list)

    @property
    def iteration(self) -> int:
        return int(self.chain.shape[0])


def write_checkpoint(path: str | os.PathLike, checkpoint: Checkpoint) -> None:
    """Write ``checkpoint`` to ``path`` atomically (temp file, fsync, rename)."""
    with atomic_path(path) as tmp:
        name, keys, pos, has_gauss, cached = checkpoint.random_state
        with h5py.File(tmp, "w") as fh:
            fh.attrs["format"] = CHECKPOINT_FORMAT
            fh.attrs["settings"] = json.dumps(checkpoint.settings)
            fh.attrs["stop_checks"] = json.dumps(checkpoint.stop_checks)
            fh.create_dataset("chain", data=np.asarray(checkpoint.chain, dtype=float))
            fh.create_dataset("log_prob", data=np.asarray(checkpoint.log_prob, dtype=float))
            fh.create_dataset("accepted", data=np.asarray(checkpoint.accepted, dtype=float))
            rs = fh.create_group("random_state")
            rs.attrs["name"] = str(name)
            rs.create_dataset("keys", data=np.asarray(keys, dtype=np.uint32))
            rs.attrs["pos"] = int(pos)
            rs.attrs["has_gauss"] = int(has_gauss)
            rs.attrs["cached_gaussian"] = float(cached)
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
            if fh.attrs.get("format") != CHECKPOINT_FORMAT:
                raise InputError("not a sampler checkpoint", where, fh.attrs.get("format"),
                                 f"format {CHECKPOINT_FORMAT}")
            settings = json.loads(fh.attrs["settings"])
            stop_checks = json.loads(fh.attrs["stop_checks"]) if "stop_checks" in fh.attrs else []
            chain = fh["chain"][...]
            log_prob = fh["log_prob"][...]
            accepted = fh["accepted"][...]
            rs = fh["random_state"]
            random_state = (str(rs.attrs["name"]), rs["keys"][...].astype(np.uint32),
                            int(rs.attrs["pos"]), int(rs.attrs["has_gauss"]),
                            float(rs.attrs["cached_gaussian"]))
    except OSError as exc:
        raise InputError(f"checkpoint file cannot be read: {exc}", where, None,
                         "an HDF5 checkpoint written by speciakin") from None
    except KeyError as exc:
        raise InputError(f"checkpoint file is incomplete: missing {exc}", where, None,
                         "an HDF5 checkpoint written by speciakin") from None
    return Checkpoint(chain, log_prob, accepted, random_state, settings, stop_checks)
