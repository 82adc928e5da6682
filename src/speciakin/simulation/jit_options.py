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

A driver (:func:`driver_kernel`: ``batch_tasks`` and ``run_one``) calls
functions compiled on their own, whose code numba links into the driver's
library: optimised in the callee's own library already, it was optimised
again by numba's full module passes in each driver above it (about 4.4 s
of LLVM time each in the demo's cold compile, each linking the whole
kernel).  A driver's library runs numba's cheap module passes only (its
always-inline inliner and the reference-count pruning); its own functions
still get numba's function passes, and the code linked into it is the
callee's optimised code.  No fast-math: the same floating-point operations,
outputs equal to the last bit.  The segment drivers (``integrate_smooth``,
``integrate_segment``) keep the full passes: with them as drivers too the
demo's likelihood took 3-4 % longer (docs/simulation.md, Caching).
"""

from __future__ import annotations

from types import MethodType

from numba import njit
from numba.core.compiler import Compiler

__all__ = ["leaf_kernel", "driver_kernel", "KERNEL_OPTIONS", "DRIVER_OPTIONS"]

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


def _cheap_module_passes(library):
    """A driver library's ``_optimize_final_module``: numba's cheap module passes only (module notes)."""
    from numba.core import config
    from numba.core.codegen import remove_redundant_nrt_refct

    codegen = library._codegen
    try:
        manager = codegen._module_pass_manager(loop_vectorize=codegen._loopvect, slp_vectorize=False,
                                               opt=codegen._opt_level, cost="cheap")
    except (AttributeError, TypeError):  # another numba's internals: its full passes, as for any function
        return type(library)._optimize_final_module(library)
    if isinstance(manager, tuple):  # numba's new pass manager: (module pass manager, pass builder)
        manager[0].run(library._final_module, manager[1])
    else:
        manager.run(library._final_module)
    if not config.LLVM_REFPRUNE_PASS:
        library._final_module = remove_redundant_nrt_refct(library._final_module)
    return None


class DriverCompiler(Compiler):
    """numba's compiler whose library for the function runs only the cheap module passes."""

    def compile_extra(self, func):
        if self.state.library is None:
            # made as numba's lowering would make it, with the lighter module passes
            library = self.state.targetctx.codegen().create_library(func.__qualname__)
            library.enable_object_caching()
            library._optimize_final_module = MethodType(_cheap_module_passes, library)
            self.state.library = library
        return super().compile_extra(func)


#: njit options of a driver (module notes).
DRIVER_OPTIONS = {"pipeline_class": DriverCompiler}


def driver_kernel(func=None, **options):
    """``numba.njit`` (on-disk cache on) for a driver: its library is not optimised again as a whole.

    Usable bare or with extra njit options (``@driver_kernel(nogil=True)``).
    """
    def wrap(f):
        return njit(**KERNEL_OPTIONS, **DRIVER_OPTIONS, **options)(f)

    return wrap(func) if func is not None else wrap
