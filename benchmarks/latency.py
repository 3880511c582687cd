"""Latency of the command line: cold and warm wall time of `adlin demo`.

Cold: an empty compilation-cache directory (as on first use).  Warm: the same
directory again, so compiled programs come from the persistent cache.  Each
run is a fresh process, timed from start to exit.

    python benchmarks/latency.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time


def timed(cmd: list[str], env: dict[str, str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, env=env, check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    exe = shutil.which("adlin")
    cmd = [exe, "demo"] if exe else [sys.executable, "-m", "adlin", "demo"]
    cache = tempfile.mkdtemp(prefix="adlin-cache-")
    env = dict(os.environ, ADLIN_CACHE_DIR=cache)
    try:
        cold = []
        for _ in range(args.repeat):
            shutil.rmtree(cache, ignore_errors=True)
            os.makedirs(cache)
            cold.append(timed(cmd, env))
        warm = [timed(cmd, env) for _ in range(args.repeat)]
    finally:
        shutil.rmtree(cache, ignore_errors=True)
    # the interpreter and jax import alone, as the floor both are measured against
    floor = [timed([sys.executable, "-c", "import adlin"], env) for _ in range(args.repeat)]
    print(f"command: {' '.join(cmd)}")
    print(f"import adlin only : median {statistics.median(floor):6.2f} s  runs {[round(t, 2) for t in floor]}")
    print(f"adlin demo, cold  : median {statistics.median(cold):6.2f} s  runs {[round(t, 2) for t in cold]}"
          "  (target < 15 s)")
    print(f"adlin demo, warm  : median {statistics.median(warm):6.2f} s  runs {[round(t, 2) for t in warm]}"
          "  (target < 5 s)")


if __name__ == "__main__":
    main()
