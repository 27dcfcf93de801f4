"""Time ``studyflow report`` on synthetic studies of 100 and 1,000 cases (invented data).

Targets (issue 6): a 100-case study in under 30 s, a 1,000-case study in under 3 minutes.
Run: python benchmarks/bench_report.py [--sizes 100 1000] [--no-fields]
Prints one table row per size: cases, figures, tables, seconds to build, target and verdict.
"""

from __future__ import annotations

import argparse
import math
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "report"))  # the synthetic study writer of the report tests
sys.path.insert(0, str(ROOT))

from report_synthetic import write_study

from studyflow.report import build_report

TARGETS = {100: 30.0, 1000: 180.0}


def _cpu() -> float:
    """CPU seconds of this process and its finished children (the field renderer runs as a child)."""
    own, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100, 1000])
    ap.add_argument("--no-fields", action="store_true", help="skip the field pictures")
    ap.add_argument("--iterations", type=int, default=200, help="residual history length per case")
    args = ap.parse_args()
    rows = []
    for size in args.sizes:
        points = math.ceil(size / 3)  # three mesh levels per point
        n_re = math.ceil(points / 2)  # two louvre angles
        res = [10.0 ** (4 + 1.5 * (i / max(1, n_re - 1))) for i in range(n_re)]
        with tempfile.TemporaryDirectory(prefix="bench-report-") as tmp:
            t0 = time.perf_counter()
            root = write_study(Path(tmp) / "study", res=res, angles=[0.0, 4.0], iterations=args.iterations)
            made = time.perf_counter() - t0
            t0, c0 = time.perf_counter(), _cpu()
            result = build_report(root, fields=not args.no_fields)
            took, cpu = time.perf_counter() - t0, _cpu() - c0
            cases = sum(result.counts.values())
            size_mb = sum(p.stat().st_size for p in (root / "report").rglob("*") if p.is_file()) / 1e6
        target = TARGETS.get(size)
        verdict = "-" if target is None else ("ok" if took < target else "SLOW")
        rows.append((size, cases, len(result.figures), len(result.tables), made, took, cpu, size_mb, target,
                     verdict))
    print(f"load average at the end: {os.getloadavg()[0]:.1f} (wall time grows with other work on the machine)")
    print(f"{'size':>6} {'cases':>6} {'figures':>7} {'tables':>6} {'write s':>8} {'report s':>9} {'cpu s':>7} "
          f"{'MB':>7} {'target s':>8}  verdict")
    for size, cases, figs, tabs, made, took, cpu, mb, target, verdict in rows:
        print(f"{size:>6} {cases:>6} {figs:>7} {tabs:>6} {made:>8.1f} {took:>9.1f} {cpu:>7.1f} {mb:>7.1f} "
              f"{'-' if target is None else f'{target:.0f}':>8}  {verdict}")
    return 0 if all(r[-1] != "SLOW" for r in rows) else 1


if __name__ == "__main__":
    sys.exit(main())
