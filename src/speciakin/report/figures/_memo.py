"""Figures drawn once per content: PNG bytes remembered by the values of the arguments.

A job draws some figures twice with the same numbers: the figures folder of
a step (``report.results.posterior_figures``, ``fit_figures``) and the report
built at the end (trace, corner and profile plots, the residuals), and a
process that renders the report of the same results again (``speciakin
web``, the test suite) draws every figure again.  :func:`remembered` keeps
the PNG bytes of the last :data:`MAX_REMEMBERED` calls of a figure function,
keyed by a SHA-256 digest of the function's name and the values (not the
identity) of its arguments, so a second call with equal numbers returns the
same bytes without drawing.  Arguments of a kind the digest does not know
(anything but numbers, text, None, arrays, lists, tuples, mappings and
dataclasses of them, such as :class:`speciakin.palette.SpeciesColors`) are
drawn every time.  A call that changes its arguments (a
:class:`~speciakin.palette.SpeciesColors` learning a new species) is not
remembered, so returning remembered bytes never skips such a change.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import threading
from collections import OrderedDict
from collections.abc import Mapping
from typing import Callable

import numpy as np

__all__ = ["remembered", "MAX_REMEMBERED"]

#: Figures remembered per figure function (PNG bytes of 50-300 kB each): enough for the runs of a
#: campaign drawn without bands (fit) and with bands (report).
MAX_REMEMBERED = 16


class _Unknown(Exception):
    """An argument whose value the digest cannot take."""


def _feed(digest, value) -> None:
    if value is None or isinstance(value, (bool, int, float, str, np.number, np.bool_)):
        digest.update(f"{type(value).__name__}:{value!r};".encode())
    elif isinstance(value, np.ndarray):
        if value.dtype == object:
            raise _Unknown
        digest.update(f"array:{value.dtype.str}:{value.shape};".encode())
        digest.update(np.ascontiguousarray(value).tobytes())
    elif isinstance(value, (list, tuple)):
        digest.update(f"{type(value).__name__}:{len(value)}[".encode())
        for item in value:
            _feed(digest, item)
        digest.update(b"]")
    elif isinstance(value, Mapping):
        digest.update(f"mapping:{len(value)}{{".encode())
        for key, item in value.items():  # in order: the order of the entries is drawn
            _feed(digest, key)
            _feed(digest, item)
        digest.update(b"}")
    elif dataclasses.is_dataclass(value) and not isinstance(value, type):
        digest.update(f"dataclass:{type(value).__module__}.{type(value).__qualname__}{{".encode())
        for item in dataclasses.fields(value):
            _feed(digest, item.name)
            _feed(digest, getattr(value, item.name))
        digest.update(b"}")
    else:
        raise _Unknown


def _key(name: str, args: tuple, kwargs: dict) -> str | None:
    digest = hashlib.sha256(name.encode())
    try:
        _feed(digest, list(args))
        _feed(digest, dict(sorted(kwargs.items())))
    except _Unknown:
        return None
    return digest.hexdigest()


def remembered(function: Callable[..., bytes]) -> Callable[..., bytes]:
    """``function`` (returning PNG bytes) with its last :data:`MAX_REMEMBERED` results kept by argument values."""
    cache: OrderedDict[str, bytes] = OrderedDict()
    lock = threading.Lock()
    name = f"{function.__module__}.{function.__qualname__}"

    @functools.wraps(function)
    def call(*args, **kwargs) -> bytes:
        key = _key(name, args, kwargs)
        if key is not None:
            with lock:
                if key in cache:
                    cache.move_to_end(key)
                    return cache[key]
        png = function(*args, **kwargs)
        if key is not None and _key(name, args, kwargs) == key:  # the call left its arguments as they were
            with lock:
                cache[key] = png
                while len(cache) > MAX_REMEMBERED:
                    cache.popitem(last=False)
        return png

    call.forget = cache.clear  # type: ignore[attr-defined]
    return call
