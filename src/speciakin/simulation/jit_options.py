"""Compilation options shared by the kernel modules.

Functions that only read and write arrays they are given (every right-hand
side, Jacobian, speciation and linear-algebra routine) are compiled without
numba's reference-counting runtime (:func:`leaf_kernel`).  With the runtime,
each array that crosses a call boundary or is unpacked from a tuple costs an
atomic increment and decrement; the right-hand side receives about fifty
arrays in its tuples, so this bookkeeping cost more than the arithmetic (a
held-pH right-hand side under a temperature ramp: 2.9 us with it, 1.3 us
without, measured on the bundled demo).  Such functions cannot create
arrays; the integrators, which allocate their work arrays once per
segment, keep the runtime.
"""

from __future__ import annotations

from numba import njit

__all__ = ["leaf_kernel", "KERNEL_OPTIONS"]

#: Options of every compiled kernel function (on-disk cache on).
KERNEL_OPTIONS = {"cache": True}


def leaf_kernel(func=None, **options):
    """``numba.njit`` for a function that allocates no arrays (no reference counting).

    Usable bare (``@leaf_kernel``) or with extra njit options
    (``@leaf_kernel(inline="always")``).
    """
    def wrap(f):
        return njit(**KERNEL_OPTIONS, _nrt=False, **options)(f)

    return wrap(func) if func is not None else wrap
