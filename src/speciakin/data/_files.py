"""Atomic output files for the data layer (see :mod:`speciakin._io`)."""

from speciakin._io import atomic_write_bytes as write_bytes_atomically

__all__ = ["write_bytes_atomically"]
