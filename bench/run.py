"""Run every benchmark in this folder (``bench_*.py``) in turn; each prints its own figures.

Usage: ``python bench/run.py [name ...]`` (names without the ``bench_`` prefix, e.g. ``fit``).
Benchmarks print figures and never fail on a target: targets are read, not asserted.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    scripts = sorted(HERE.glob("bench_*.py"))
    if argv:
        scripts = [s for s in scripts if s.stem.removeprefix("bench_") in argv]
    failed = []
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        started = time.perf_counter()
        code = subprocess.call([sys.executable, str(script)], cwd=HERE.parent)
        print(f"--- {script.stem}: {time.perf_counter() - started:.0f} s, exit {code}", flush=True)
        if code:
            failed.append(script.stem)
    if failed:
        print(f"benchmarks that crashed: {', '.join(failed)}")
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
