"""Time and peak memory of the bundled solver against mesh size; prints a table.

    python benchmarks/bench_solver.py                      # plate 64x32 .. 256x128, cavity 32^2 .. 128^2
    python benchmarks/bench_solver.py --large              # adds the 512 x 256 plate
    python benchmarks/bench_solver.py --linear-solver both  # each size with MUMPS and with SuperLU

Each case runs in its own child process (so the peak resident memory, from getrusage, belongs
to that case alone) through the solver's Python entry point, with the Newton update tolerance
1e-10 on top of the imbalance tolerance. Reported per case: the sparse LU backend, wall time,
the share of it spent in sparse LU factorisations and solves (over the whole mesh sequence, as
the solver's metrics record it), LU factorisations, iterations, peak memory; then the growth
exponent b of time ~ cells^b fitted by least squares on log-log axes, per case kind and backend.

Goals (issue 3, 2-core machine): 128x64 plate < 1 s, 256x128 plate < 5 s within 0.7 GB,
128x128 cavity < 4 s. The machine's load (os.getloadavg) is printed with the table, because
on a shared machine wall time is not CPU time.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time

import numpy as np

CHILD = r"""
import json, resource, sys, time
from studyflow.fvsolver import config, run
kind, nx, ny, ls = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
cfg = config.parse({"case": {"kind": kind}, "mesh": {"nx": nx, "ny": ny},
                    "solve": {"update_tolerance": 1e-10, "linear_solver": ls}}, "<bench>")
t0 = time.perf_counter(); c0 = time.process_time()
res = run.solve(cfg, log=lambda s: None)
wall = time.perf_counter() - t0; cpu = time.process_time() - c0
peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"kind": kind, "nx": nx, "ny": ny, "cells": nx * ny, "status": res.outcome.status,
                  "backend": res.metrics["solver"]["linear_solver"], "wall": wall, "cpu": cpu,
                  "linear": res.metrics["linear_seconds"], "factorisations": res.metrics["factorisations"],
                  "iterations": res.outcome.iterations, "peak_mb": peak_kb / 1024.0,
                  "sequence": res.metrics["sequence"]}))
"""

def run_child(code: str, kind: str, nx: int, ny: int, backend: str) -> dict:
    p = subprocess.run([sys.executable, "-c", code, kind, str(nx), str(ny), backend], capture_output=True,
                       text=True, timeout=3600)
    if p.returncode != 0:
        raise RuntimeError(p.stderr)
    return json.loads(p.stdout.strip().splitlines()[-1])


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--large", action="store_true", help="also the 512 x 256 plate")
    ap.add_argument("--repeat", type=int, default=1, help="runs per size; the fastest is kept")
    ap.add_argument("--linear-solver", default="auto", choices=("auto", "mumps", "superlu", "both"),
                    help="sparse LU backend (the case file's solve.linear_solver); both: each size twice")
    args = ap.parse_args()
    sizes = [("plate", 64, 32), ("plate", 128, 64), ("plate", 192, 96), ("plate", 256, 128)]
    if args.large:
        sizes.append(("plate", 512, 256))
    sizes += [("cavity", 32, 32), ("cavity", 64, 64), ("cavity", 128, 128)]
    print(f"load average before: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    backends = ("mumps", "superlu") if args.linear_solver == "both" else (args.linear_solver,)
    rows = []
    for kind, nx, ny in sizes:
        for backend in backends:
            best = None
            for _ in range(args.repeat):
                r = run_child(CHILD, kind, nx, ny, backend)
                if best is None or r["wall"] < best["wall"]:
                    best = r
            best["lu_share"] = best["linear"] / max(best["wall"], 1e-9)
            rows.append(best)
            print(f"  {kind:6s} {nx:4d} x {ny:<4d} {best['backend']:7s} done in {best['wall']:.2f} s", flush=True)
    head = f"{'case':8s} {'mesh':>10s} {'cells':>7s} {'LU by':>7s} {'status':>10s} {'wall s':>7s} {'cpu s':>7s} " \
           f"{'LU+solve':>8s} {'LUs':>4s} {'iters':>5s} {'peak MB':>8s}"
    print()
    print(head)
    print("-" * len(head))
    for r in rows:
        print(f"{r['kind']:8s} {r['nx']:>4d} x {r['ny']:<4d} {r['cells']:7d} {r['backend']:>7s} {r['status']:>10s} {r['wall']:7.2f} "
              f"{r['cpu']:7.2f} {100 * r['lu_share']:7.0f}% {r['factorisations']:4d} {r['iterations']:5d} "
              f"{r['peak_mb']:8.0f}")
    print()
    for kind in ("plate", "cavity"):
        for backend in sorted({r["backend"] for r in rows}):
            sel = [r for r in rows if r["kind"] == kind and r["backend"] == backend]
            if len(sel) >= 2:
                b = np.polyfit(np.log([r["cells"] for r in sel]), np.log([r["cpu"] for r in sel]), 1)[0]
                bw = np.polyfit(np.log([r["cells"] for r in sel]), np.log([r["wall"] for r in sel]), 1)[0]
                print(f"{kind} ({backend}): CPU time ~ cells^{b:.2f}, wall time ~ cells^{bw:.2f}"
                      " (least squares, log-log)")
    goals = {("plate", 128, 64): 1.0, ("plate", 256, 128): 5.0, ("cavity", 128, 128): 4.0}
    print()
    for r in rows:
        g = goals.get((r["kind"], r["nx"], r["ny"]))
        if g is not None:
            mem = " and peak <= 700 MB" if (r["kind"], r["nx"]) == ("plate", 256) else ""
            ok = r["wall"] <= g and (not mem or r["peak_mb"] <= 700)
            print(f"goal {r['kind']} {r['nx']}x{r['ny']} ({r['backend']}) < {g:g} s{mem}: wall {r['wall']:.2f} s, cpu {r['cpu']:.2f} s,"
                  f" {r['peak_mb']:.0f} MB -> {'met' if ok else 'NOT met'}")
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
