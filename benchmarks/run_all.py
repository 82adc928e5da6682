"""Run every benchmark script in this folder, one after the other (``make bench``).

Each script prints its own figures and ratios measured side by side in one run.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

SCRIPTS = ["bench_speciation.py", "bench_kernel.py", "bench_accuracy.py", "bench_demo_likelihood.py", "bench_import.py",
           "bench_fit.py", "bench_posterior_window.py", "nist_table.py"]


def main() -> int:
    here = Path(__file__).resolve().parent
    failed = []
    for name in SCRIPTS:
        print(f"\n===== {name} =====", flush=True)
        code = subprocess.call([sys.executable, str(here / name)])
        if code:
            failed.append(name)
    if failed:
        print("failed: " + ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
