"""Interleaved A/B timing of the demo likelihood of two versions of the package.

The figures of issue 16, side by side for two versions: the demo campaign's
log-likelihood (the objective ``speciakin fit`` builds) of one parameter set
on one core (``like1``) and of 64 sets over all cores (``like64``, per call
of 64 sets).  The timing is ``ab_kernel.py``'s: each version in its own
worker processes (its own export of ``src/`` and compiled-code cache),
outputs compared first, then alternating blocks A B, B A, ...; printed are
the best and median of each version, the median of the paired ratios B/A
of the wall and the CPU times, and the load average before and after each
workload.  (An earlier form loaded both versions into one process, where
two identical copies were timed up to 2.26x apart; see ``ab_kernel.py``.)
Where the time goes, run by run: ``bench_demo_likelihood.py``.

A version is a git revision (``HEAD``, ``main``, a commit) or ``WORKTREE``.
``--cache DIR`` keeps each version's export and compiled code in DIR for the
next run (``ab_kernel.py --keep``).

Run:  .venv/bin/python benchmarks/ab_demo_likelihood.py main HEAD [--rounds 12] [--cache DIR]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import ab_kernel  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("a", help="version A: a git revision or WORKTREE")
    parser.add_argument("b", help="version B: a git revision or WORKTREE")
    parser.add_argument("--rounds", type=int, default=12, help="pairs of blocks per workload (default 12)")
    parser.add_argument("--processes", type=int, default=3, help="worker processes per version (default 3)")
    parser.add_argument("--cache", help="folder that keeps the exported copies and their compiled code")
    args = parser.parse_args()
    argv = [args.a, args.b, "--workloads", "like1,like64", "--rounds", str(args.rounds),
            "--processes", str(args.processes)]
    if args.cache:
        argv += ["--keep", args.cache]
    sys.argv = [str(HERE / "ab_kernel.py")] + argv
    ab_kernel.main()


if __name__ == "__main__":
    main()
