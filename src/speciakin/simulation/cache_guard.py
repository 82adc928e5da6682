"""The kernel's compiled-code cache: one location, kept in step with the sources.

**One location.**  numba writes compiled kernels to ``NUMBA_CACHE_DIR`` when it
is set, else beside the sources (or a user folder when those are read-only),
so ``make``, the ``speciakin`` command and a Python session could each compile
once into their own place.  :func:`choose_cache_dir` (called when
``speciakin.simulation`` is imported, before any kernel module) sets
``NUMBA_CACHE_DIR`` to one per-user folder (:func:`default_cache_dir`) when the
caller has not set it; numba keeps the binaries of each source folder apart
inside it, so several copies of the package do not collide.

**Kept in step.**  numba checks only the source file of the cached function
itself; a change in a function it calls from another module (for example the
water formula) would leave a stale compiled copy in use.
:func:`refresh_kernel_cache` hashes the sources of every kernel module and
clears this package's cache entries when the hash changes, before anything is
loaded from the cache; other changes (the Python layers around the kernel)
recompile nothing.

**Cold start.**  :func:`is_cached` tells whether a compiled function (or one
compiled variant of it) has an entry on disk, so that the caller can say once
that it compiles.
"""

from __future__ import annotations

import hashlib
import os
import sys
from pathlib import Path

#: Kernel modules of this folder (every module with compiled code and the constants it reads).
KERNEL_MODULES = ("jit_options", "layout", "status", "water_kernel", "speciation_kernel", "profile_kernel", "rhs_kernel",
                  "rodas_tableau", "lu_kernel", "smooth_rhs_kernel", "rosenbrock_kernel", "held_ramp_kernel",
                  "segment_kernel", "integrator_kernel", "batch_kernel", "sensitivity_terms",
                  "sensitivity_kernel")
#: Sources outside this folder whose formulas the kernel compiles (paths relative to the package).
SHARED_SOURCES = ("chemistry/water.py", "chemistry/microstate_formulas.py")
_STAMP = "speciakin_kernel_sources.sha256"
#: Rough duration of a cold compile on a quiet two-core machine [s], to the first parallel
#: likelihood, of a kernel variant with the free-pH path or the held-pH ramp's (the demo: 48-51 s,
#: the paths compiled side by side, ``split_compile``, and the drivers not optimised again,
#: ``jit_options.driver_kernel``), and of the variant with neither (held pH at one temperature,
#: logged pH: 45-50 s), load 1.1-3; docs/simulation.md (``benchmarks/bench_compile.py [--demo]``).
COLD_COMPILE_SECONDS = 55
COLD_COMPILE_SECONDS_NO_PATHS = 50


def default_cache_dir() -> Path:
    """Per-user cache folder of compiled kernels.

    ``$XDG_CACHE_HOME/speciakin/numba`` (default ``~/.cache``) on Linux and
    other Unix systems, ``~/Library/Caches/speciakin/numba`` on macOS,
    ``%LOCALAPPDATA%\\speciakin\\numba`` on Windows.
    """
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Caches"
    else:
        base = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    return base / "speciakin" / "numba"


def choose_cache_dir() -> str:
    """Use :func:`default_cache_dir` unless ``NUMBA_CACHE_DIR`` is set; returns the folder in use."""
    folder = os.environ.get("NUMBA_CACHE_DIR")
    if not folder:
        folder = str(default_cache_dir())
        os.environ["NUMBA_CACHE_DIR"] = folder
        if "numba" in sys.modules:
            # numba read its configuration at import: tell it too (kernels not yet decorated use it)
            from numba.core import config
            config.CACHE_DIR = folder
    return folder


def kernel_sources_digest() -> str:
    """SHA-256 of the kernel's sources (this folder's kernel modules and the shared formulas)."""
    here = Path(__file__).parent
    digest = hashlib.sha256()
    for name in KERNEL_MODULES:
        digest.update((here / f"{name}.py").read_bytes())
    for rel in SHARED_SOURCES:
        digest.update((here.parent / rel).read_bytes())
    return digest.hexdigest()


def refresh_kernel_cache(cache_path: str | os.PathLike) -> bool:
    """Delete cached kernel binaries when any kernel source changed.

    Parameters
    ----------
    cache_path
        numba's cache folder of this package.

    Returns
    -------
    bool
        True when stale entries were removed.
    """
    text = kernel_sources_digest()
    folder = Path(cache_path)
    stamp = folder / _STAMP
    try:
        if stamp.exists() and stamp.read_text().strip() == text:
            return False
        removed = False
        if folder.is_dir():
            for f in folder.iterdir():
                if f.suffix in (".nbi", ".nbc") and f.name.split(".")[0] in KERNEL_MODULES:
                    f.unlink(missing_ok=True)
                    removed = True
        folder.mkdir(parents=True, exist_ok=True)
        tmp = folder / f".{_STAMP}.{os.getpid()}"
        tmp.write_text(text)
        os.replace(tmp, stamp)
        return removed
    except OSError:
        # a read-only or shared cache folder: numba falls back to compiling
        return False


def is_cached(dispatcher, last_arg_type=None) -> bool:
    """True when the compiled function ``dispatcher`` has an index on disk (or caching is off).

    With ``last_arg_type`` (a numba type, or a tuple of them for the last
    arguments), only when the index holds a compiled variant whose last
    argument(s) have that type (``batch_kernel.batch_tasks`` is compiled per
    ``free_ph`` and ``held_ramp``: None or True each).
    """
    cache = getattr(dispatcher, "_cache", None)
    cache_file = getattr(cache, "_cache_file", None)
    index = getattr(cache_file, "_index_path", None)
    if index is None or not getattr(cache, "_enabled", True):
        return True
    if not os.path.exists(index):
        return False
    if last_arg_type is None:
        return True
    last = tuple(last_arg_type) if isinstance(last_arg_type, tuple) else (last_arg_type,)
    try:
        # numba's index: {(argument types, machine, source hashes): data file}
        entries = cache_file._load_index()
    except Exception:  # an index numba itself could not read: it recompiles and says nothing either
        return True
    return any(len(key[0]) >= len(last) and tuple(key[0][-len(last):]) == last for key in entries)
