"""Keep numba's on-disk cache of the kernel in step with its sources.

numba checks only the source file of the cached function itself; a change
in a function it calls from another module (for example the water formula)
would leave a stale compiled copy in use.  This guard hashes the sources of
every kernel module and clears this package's cache entries when the hash
changes, before anything is loaded from the cache.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

KERNEL_MODULES = ("jit_options", "water_kernel", "speciation_kernel", "rhs_kernel", "rodas_tableau", "lu_kernel", "segment_kernel",
                  "integrator_kernel", "batch_kernel")
_STAMP = "speciakin_kernel_sources.sha256"


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
    here = Path(__file__).parent
    digest = hashlib.sha256()
    for name in KERNEL_MODULES + ("../chemistry/water",):
        digest.update((here / f"{name}.py").read_bytes())
    # the chemistry constants feed the water kernel
    text = digest.hexdigest()
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
