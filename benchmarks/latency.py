"""Latency of the command line: cold and warm wall time of `adlin demo`.

Cold: an empty compilation-cache directory (as on first use).  Warm: the same
directory again, so compiled programs come from the persistent cache.  Each
run is a fresh process, timed from start to exit (wall clock, and the CPU
time of the process).  The machine may be shared: the load average is printed
before and after, and min and median of each series are given.

Python bytecode: an installed package has its ``.pyc`` files, so a user's
second run does not compile adlin's sources again.  When this environment
forbids writing bytecode (``PYTHONDONTWRITEBYTECODE``), the timed processes get
a private bytecode directory (``PYTHONPYCACHEPREFIX`` in the temporary
directory), filled by one untimed run first; ``--bytecode env`` measures with
the environment as it is instead.

    python benchmarks/latency.py [--repeat 3] [--plots] [--phases] [--bytecode cached|env]

``--plots`` adds warm runs of ``adlin demo --plots DIR``; ``--phases`` adds one
warm run inside a process that counts what JAX does (programs, traces,
lowering, persistent-cache loads) through ``jax.monitoring``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

# One warm demo inside a process that listens to JAX's monitoring events.
PHASES_SCRIPT = r"""
import contextlib, io, json, sys, time
t0 = time.perf_counter()
import jax
t_jax = time.perf_counter()
import adlin
from adlin.cli.main import main
t_imp = time.perf_counter()
seconds, counts = {}, {}
def on_duration(name, secs, **kw):
    key = name.rsplit("/", 1)[-1]
    seconds[key] = seconds.get(key, 0.0) + secs
    counts[key] = counts.get(key, 0) + 1
def on_event(name, **kw):
    key = name.rsplit("/", 1)[-1]
    counts[key] = counts.get(key, 0) + 1
jax.monitoring.register_event_duration_secs_listener(on_duration)
jax.monitoring.register_event_listener(on_event)
with contextlib.redirect_stdout(io.StringIO()):
    status = main(["demo"])
t_end = time.perf_counter()
print(json.dumps({"status": status, "import_jax": t_jax - t0, "import_rest": t_imp - t_jax,
                  "demo": t_end - t_imp, "cpu": time.process_time(),
                  "seconds": seconds, "counts": counts}))
"""


def timed(cmd: list[str], env: dict[str, str]) -> tuple[float, float]:
    """Wall and CPU seconds (user + system) of one child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, env=env, check=True, stdout=subprocess.DEVNULL)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def series(runs: list[tuple[float, float]]) -> str:
    wall = [w for w, _ in runs]
    cpu = [c for _, c in runs]
    return (f"min {min(wall):5.2f} s  median {statistics.median(wall):5.2f} s  "
            f"(CPU median {statistics.median(cpu):5.2f} s)  runs {[round(w, 2) for w in wall]}")


def load() -> str:
    return " ".join(f"{v:.2f}" for v in os.getloadavg())


def phases(env: dict[str, str]) -> None:
    """Print what one warm demo spends its time on."""
    out = subprocess.run([sys.executable, "-c", PHASES_SCRIPT], env=env, check=True,
                         capture_output=True, text=True).stdout
    r = json.loads(out.strip().splitlines()[-1])
    s, n = r["seconds"], r["counts"]
    traces = f"{n.get('jaxpr_trace_duration', 0)} ({s.get('jaxpr_trace_duration', 0.0):.2f} s)"
    print(f"one warm run, inside the process: import jax {r['import_jax']:.2f} s, import adlin "
          f"and its CLI {r['import_rest']:.2f} s, the demo with the modules it imports "
          f"{r['demo']:.2f} s (process CPU {r['cpu']:.2f} s)")
    print(f"  programs {n.get('compile_requests_use_cache', 0)}, persistent-cache hits "
          f"{n.get('cache_hits', 0)} (load {s.get('cache_retrieval_time_sec', 0.0):.2f} s), "
          f"traces {traces}, "
          f"lowering {s.get('jaxpr_to_mlir_module_duration', 0.0):.2f} s, "
          f"backend compile or load {s.get('backend_compile_duration', 0.0):.2f} s")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--plots", action="store_true", help="also time warm `adlin demo --plots DIR`")
    ap.add_argument("--phases", action="store_true", help="also break one warm run down")
    ap.add_argument("--bytecode", choices=("cached", "env"), default="cached",
                    help="cached: timed processes may keep .pyc files (default); env: as set")
    args = ap.parse_args()
    exe = shutil.which("adlin")
    cmd = [exe, "demo"] if exe else [sys.executable, "-m", "adlin", "demo"]
    work = tempfile.mkdtemp(prefix="adlin-latency-")
    cache = os.path.join(work, "jax")
    figures = os.path.join(work, "figures")
    env = dict(os.environ, ADLIN_CACHE_DIR=cache)
    bytecode = "as the environment sets it"
    if args.bytecode == "cached" and (sys.flags.dont_write_bytecode
                                      or os.environ.get("PYTHONDONTWRITEBYTECODE")):
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = os.path.join(work, "pyc")
        # fill the private bytecode directory: one untimed run (JAX cache off)
        subprocess.run(cmd + ["--plots", figures], env=dict(env, ADLIN_CACHE_DIR=""),
                       check=True, stdout=subprocess.DEVNULL)
        bytecode = "cached in a private directory (filled by one untimed run)"
    print(f"command: {' '.join(cmd)}")
    print(f"python bytecode: {bytecode}")
    print(f"load average before: {load()} ({os.cpu_count()} CPUs)")
    try:
        cold = []
        for _ in range(args.repeat):
            shutil.rmtree(cache, ignore_errors=True)
            os.makedirs(cache)
            cold.append(timed(cmd, env))
        warm = [timed(cmd, env) for _ in range(args.repeat)]
        plots = []
        if args.plots:
            timed(cmd + ["--plots", figures], env)  # caches the figure programs
            plots = [timed(cmd + ["--plots", figures], env) for _ in range(args.repeat)]
        # the interpreter with adlin imported, the floor the runs are measured against
        floor = [timed([sys.executable, "-c", "import adlin"], env) for _ in range(args.repeat)]
        print(f"import adlin only      : {series(floor)}")
        print(f"adlin demo, cold       : {series(cold)}  (target < 15 s)")
        print(f"adlin demo, warm       : {series(warm)}  (target < 5 s)")
        if plots:
            print(f"adlin demo --plots warm: {series(plots)}")
        if args.phases:
            phases(env)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(f"load average after: {load()}")


if __name__ == "__main__":
    main()
