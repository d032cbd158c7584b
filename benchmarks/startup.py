"""Start-up time of ``trimtab --help`` against a bare interpreter start, in the same run.

Prints the median wall time of each over a few runs and their ratio, and which heavy libraries
``--help`` imported (it should import none of scipy, cvxpy, matplotlib, pandas). Run:

    python benchmarks/startup.py [--runs 7]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

HEAVY = ("scipy", "cvxpy", "matplotlib", "pandas")


def _time(command: list[str], runs: int) -> float:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _heavy_imports() -> list[str]:
    probe = "import sys, trimtab.cli; print(' '.join(sorted(m for m in sys.modules if '.' not in m)))"
    loaded = subprocess.run([sys.executable, "-c", probe], check=True, capture_output=True, text=True).stdout.split()
    return [name for name in HEAVY if name in loaded]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    args = parser.parse_args()
    bare = _time([sys.executable, "-c", "pass"], args.runs)
    help_ = _time([sys.executable, "-m", "trimtab.cli", "--help"], args.runs)
    version = _time([sys.executable, "-m", "trimtab.cli", "--version"], args.runs)
    print(f"bare interpreter (python -c pass): {bare:.3f} s (median of {args.runs})")
    print(f"trimtab --help:                    {help_:.3f} s  ratio {help_ / bare:.1f}x")
    print(f"trimtab --version:                 {version:.3f} s  ratio {version / bare:.1f}x")
    heavy = _heavy_imports()
    print("heavy libraries imported by --help: " + (", ".join(heavy) if heavy else "none"))


if __name__ == "__main__":
    main()
