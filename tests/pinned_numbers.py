"""The same numbers to the last bit on every x86-64 machine: one instruction set for every compiled path.

Compiled code chooses its instructions by the machine it runs on: numba compiles the simulation kernel
for the host CPU, and OpenBLAS (linear algebra of numpy and scipy) and numpy's own SIMD loops pick their
kernels at run time.  Results therefore differ in the last bits from one machine to another, and an
adaptive integrator, a least-squares path or a draw near a specification limit can carry that further.
Measured on a host with AVX-512 (AMD Zen 4) against the AVX2 host the stored copies were made on: the
demo's noise-free curves (``truth.json``) about 1e-12 relative apart; the pipeline's regression case
(fit with profiles, 16-draw window) up to 1e-4 in profile points, the other of two equal starts chosen
as best, one of 16 draws on the other side of a limit.  Run with :func:`pinned_environment` (numba's
target ``haswell``, OpenBLAS's ``Haswell`` kernels, numpy's dispatch above x86-64-v3 switched off) the
Zen 4 host reproduced the stored copies exactly.

The comparisons to the last bit (the demo generator's byte-identical output, the pipeline's regression
copy) run in a subprocess with this environment, and so do the scripts that write those copies.  It
changes nothing the program does for a user, whose numbers may differ from another machine's in the
last bits.
"""

from __future__ import annotations

import os
import platform
import subprocess
import sys
from pathlib import Path

__all__ = ["pinned_environment", "run_pinned", "PINNED_MARK", "WHY_NOT_PINNED"]

#: Set in the pinned environment (a script re-run in it sees it and does not re-run itself again).
PINNED_MARK = "SPECIAKIN_PINNED_NUMBERS"
#: Why a comparison to the last bit cannot run on a machine :func:`pinned_environment` gives None for.
WHY_NOT_PINNED = ("the stored copies are of x86-64 with AVX2 and FMA (haswell); this machine cannot run "
                  "that instruction set, so its last bits cannot be compared")

#: numpy's dispatch targets up to this one stay (x86-64-v3: AVX2 and FMA).
_NUMPY_KEEP = "X86_V3"


def _numpy_targets_above_v3() -> list[str]:
    """numpy's SIMD dispatch targets of this machine above x86-64-v3 (to switch off)."""
    from numpy._core._multiarray_umath import __cpu_dispatch__, __cpu_features__

    targets = list(__cpu_dispatch__)
    above = targets[targets.index(_NUMPY_KEEP) + 1:] if _NUMPY_KEEP in targets else []
    return [t for t in above if __cpu_features__.get(t)]


def pinned_environment() -> dict[str, str] | None:
    """``os.environ`` with the instruction set pinned to x86-64-v3 / haswell; None where it cannot be
    (not x86-64, or a CPU without AVX2 and FMA)."""
    if platform.machine().lower() not in ("x86_64", "amd64"):
        return None
    from numpy._core._multiarray_umath import __cpu_features__

    if not (__cpu_features__.get("AVX2") and __cpu_features__.get("FMA3")):
        return None
    env = dict(os.environ)
    env.update({"NUMBA_CPU_NAME": "haswell", "NUMBA_CPU_FEATURES": "", "OPENBLAS_CORETYPE": "Haswell",
                PINNED_MARK: "1"})
    off = _numpy_targets_above_v3()
    if off:
        env["NPY_DISABLE_CPU_FEATURES"] = " ".join(off)
    else:
        env.pop("NPY_DISABLE_CPU_FEATURES", None)
    return env


def run_pinned(script: Path, *args: str) -> subprocess.CompletedProcess:
    """Run ``python script args`` in the pinned environment; raises with its output when it fails."""
    env = pinned_environment()
    if env is None:
        raise RuntimeError(WHY_NOT_PINNED)
    done = subprocess.run([sys.executable, str(script), *args], env=env, capture_output=True, text=True)
    if done.returncode != 0:
        raise RuntimeError(f"{script.name} {' '.join(args)} failed (exit {done.returncode}):\n"
                           f"{done.stdout[-3000:]}\n{done.stderr[-3000:]}")
    return done
