"""Time the collection of N finished trivial cases (default 100, 1,000 and 10,000) and print a table.

Each case has a JSON metrics file, a CSV wall profile and a log residual history, like a small
solver's output. Columns: the first collection (reads every output, writes every record), a
repeat with nothing changed (records reused), the table build alone, and writing the tables.

    python benchmarks/bench_collect.py [N ...]
"""

from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

import yaml

from studyflow.collect import collect_study, write_tables
from studyflow.design import build_design
from studyflow.spec import load_study


def make(root: Path, n: int):
    points = max(1, n // 4)
    study = {
        "title": "Collection benchmark (invented)", "template": "template",
        "parameters": [{"kind": "lhs", "samples": points, "seed": 1, "ranges": {"Re": {"low": 1e3, "high": 1e5}}}],
        "mesh": {"levels": 4, "ratio": 2, "counts": {"nx": 8, "ny": 4}},
        "steps": [{"name": "solve", "run": ["true"]}],
        "quantities": {
            "drag": {"from": "json", "file": "metrics.json", "key": "drag.cd"},
            "cf": {"from": "csv", "file": "wall.csv", "column": "cf", "coord_column": "x"},
            "res": {"from": "log", "file": "solve.log", "pattern": r"res=(\S+)", "match": "all"},
        },
        "iteration": {"residuals": ["res"], "tolerance": 1e-6},
    }
    (root / "template").mkdir(parents=True)
    (root / "template" / "in.txt").write_text("{{ Re }}\n")
    (root / "study.yaml").write_text(yaml.safe_dump(study))
    s = load_study(root / "study.yaml")
    log = "".join(f"it {i} res={10.0 ** -i:.3e}\n" for i in range(1, 21))
    wall = "x,cf\n" + "".join(f"{i / 10},{0.01 / (1 + i)}\n" for i in range(11))
    for k, c in enumerate(build_design(s).cases):
        d = root / "cases" / c.id
        (d / ".studyflow").mkdir(parents=True)
        (d / ".studyflow" / "case.json").write_text(json.dumps({"case": c.id, "point": c.point.id, "level": c.level,
                                                                "params": c.params}))
        (d / ".studyflow" / "solve.status.json").write_text('{"state": "ok", "wall_s": 0.2}')
        (d / ".studyflow" / "solve.done").write_text("{}")
        (d / "metrics.json").write_text(json.dumps({"drag": {"cd": 0.5 + k * 1e-6}}))
        (d / "wall.csv").write_text(wall)
        (d / "solve.log").write_text(log)
    return s


def main(sizes: list[int]) -> None:
    print(f"{'cases':>7} {'first s':>8} {'reuse s':>8} {'write s':>8} {'rows':>8} {'ms/case first':>14}")
    for n in sizes:
        with tempfile.TemporaryDirectory() as tmp:
            s = make(Path(tmp) / "bench", n)
            t0 = time.perf_counter()
            tables = collect_study(s)
            t1 = time.perf_counter()
            collect_study(s)
            t2 = time.perf_counter()
            write_tables(s.root, tables)
            t3 = time.perf_counter()
            cases = len(tables.cases)
            print(f"{cases:>7} {t1 - t0:>8.2f} {t2 - t1:>8.2f} {t3 - t2:>8.2f} {len(tables.results):>8} "
                  f"{1000 * (t1 - t0) / cases:>14.2f}")


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [100, 1000, 10000])
