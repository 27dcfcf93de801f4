"""Dispatch overhead of studyflow + Snakemake against the same commands through ``xargs -P``.

    python benchmarks/bench_dispatch.py                  # 100, 1,000 and 10,000 trivial cases
    python benchmarks/bench_dispatch.py 100 1000 --work 0.2 --work-cases 1000

For each size N it builds a study of N one-step cases (a shell command that writes one file),
then times, on ``--cores`` cores:

* ``xargs``      the same N commands run by ``xargs -P <cores>`` (no bookkeeping at all);
* ``run``        ``studyflow run`` from nothing (render, plan, Snakemake, step runner);
* ``overhead``   (run - xargs) / N: what studyflow adds per case, start-up included; a
                 least-squares line through all sizes splits it into a cost paid once per run
                 and a cost per case;
* ``no-op``      a second ``run`` when nothing changed (render + plan, no engine);
* ``plan``       ``studyflow plan`` alone, all cases up to date;
* ``1 changed``  ``run`` after one parameter value of one case changed.

With ``--work S`` it also runs ``--work-cases`` cases that each sleep S seconds, and reports
studyflow's time over xargs' (goal: within 1.15x). Results are printed as a table; the study
folders are made under ``benchmarks/out/`` (removed afterwards unless ``--keep``).
Not part of the test suite: it takes minutes at 10,000 cases.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from studyflow import api  # noqa: E402

COMMAND = "echo {{ x }} > out.txt"


def make_study(root: Path, n: int, sleep: float) -> Path:
    if root.exists():
        shutil.rmtree(root)
    (root / "tpl").mkdir(parents=True)
    (root / "tpl" / "note.txt").write_text("x = {{ x }}\n")
    cmd = (f"sleep {sleep}; " if sleep else "") + COMMAND
    points = "\n".join(f"      - {{id: c{i:05d}, x: {i}}}" for i in range(n))
    (root / "study.yaml").write_text(f"""\
title: dispatch benchmark
template: tpl
parameters:
  - kind: table
    points:
{points}
steps:
  - name: solve
    run: [sh, -c, "{cmd}"]
    reads: [note.txt]
    writes: [out.txt]
""")
    return root


def time_xargs(root: Path, n: int, sleep: float, cores: int) -> float:
    work = root.parent / (root.name + "-xargs")
    if work.exists():
        shutil.rmtree(work)
    dirs = []
    for i in range(n):
        d = work / f"c{i:05d}"
        d.mkdir(parents=True)
        dirs.append(str(d))
    cmd = (f"sleep {sleep}; " if sleep else "") + 'cd "$1" && echo "${1##*c}" > out.txt'
    t = time.perf_counter()
    subprocess.run(["xargs", "-P", str(cores), "-n", "1", "sh", "-c", cmd, "sh"],
                   input="\n".join(dirs).encode(), check=True)
    elapsed = time.perf_counter() - t
    shutil.rmtree(work)
    return elapsed


def timed(fn) -> tuple[float, object]:
    t = time.perf_counter()
    out = fn()
    return time.perf_counter() - t, out


def bench(n: int, cores: int, sleep: float, keep: bool) -> dict[str, float]:
    root = make_study(HERE / "out" / f"dispatch-{n}-{sleep:g}", n, sleep)
    row: dict[str, float] = {"cases": n}
    row["xargs"] = time_xargs(root, n, sleep, cores)
    row["run"], out = timed(lambda: api.run(root, cores=cores, progress=False, collect=False))
    assert len(out.done) == n, f"only {len(out.done)} of {n} cases done"
    row["overhead_ms"] = 1000.0 * (row["run"] - row["xargs"]) / n
    row["noop"], out = timed(lambda: api.run(root, cores=cores, progress=False, collect=False))
    assert not out.cases
    row["plan"], _ = timed(lambda: api.plan(root))
    text = (root / "study.yaml").read_text()
    (root / "study.yaml").write_text(text.replace("{id: c00000, x: 0}", "{id: c00000, x: -1}"))
    row["one_changed"], out = timed(lambda: api.run(root, cores=cores, progress=False, collect=False))
    assert [c.case for c in out.cases] == ["c00000--m0"]
    if not keep:
        shutil.rmtree(root)
    return row


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[100, 1000, 10000])
    ap.add_argument("--cores", type=int, default=2)
    ap.add_argument("--work", type=float, default=0.2, help="seconds of work per case for the ratio run (0: skip)")
    ap.add_argument("--work-cases", type=int, default=1000)
    ap.add_argument("--keep", action="store_true", help="keep the study folders")
    args = ap.parse_args()
    print(f"# {args.cores} cores; load average {os.getloadavg()[0]:.2f} at start", flush=True)
    head = f"{'cases':>7} {'xargs s':>9} {'run s':>9} {'ms/case':>9} {'no-op s':>9} {'plan s':>8} {'1 changed s':>12}"
    print(head)
    print("-" * len(head))
    rows = []
    for n in args.sizes:
        r = bench(n, args.cores, 0.0, args.keep)
        rows.append(r)
        print(f"{n:7d} {r['xargs']:9.2f} {r['run']:9.2f} {r['overhead_ms']:9.1f} {r['noop']:9.2f} "
              f"{r['plan']:8.2f} {r['one_changed']:12.2f}", flush=True)
    if len(rows) >= 2:
        # run - xargs = fixed + per_case * N, least squares: the start-up paid once per run
        # (mostly the workflow engine importing itself) and the cost that grows with the cases
        xs = [float(r["cases"]) for r in rows]
        ys = [r["run"] - r["xargs"] for r in rows]
        mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
        slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
        print(f"\noverhead over xargs = {my - slope * mx:.2f} s once + {1000 * slope:.2f} ms per case "
              "(least-squares line through the rows above)")
    if args.work > 0:
        r = bench(args.work_cases, args.cores, args.work, args.keep)
        print(f"\n{args.work_cases} cases of {args.work:g} s on {args.cores} cores: xargs {r['xargs']:.1f} s, "
              f"studyflow {r['run']:.1f} s, ratio {r['run'] / r['xargs']:.3f} (goal <= 1.15)")
    print(f"# load average {os.getloadavg()[0]:.2f} at end")
    return 0


if __name__ == "__main__":
    sys.exit(main())
