"""Runs every benchmark under tests/benchmarks/ in turn (`make benchmark`)."""
import glob
import os
import runpy
import sys

here = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, here)  # the benchmarks share timing.py
for path in sorted(glob.glob(os.path.join(here, "bench_*.py"))):
    print("=" * 78)
    print(os.path.basename(path))
    print("=" * 78, flush=True)
    sys.argv = [path]
    runpy.run_path(path, run_name="__main__")
    print(flush=True)
