"""Time ``pack`` and ``audit`` on an invented study of many small cases; prints a table.

    python benchmarks/bench_bundle.py [--points 100] [--levels 3]

Case outputs are written directly (the toy formula of tests/bundle/bundle_support.py), so the
timings are those of the bundle itself: hashing, archiving, safe unpacking, re-rendering,
comparing, re-computing the uncertainty table, plus a re-run of a 5-case sample.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests" / "bundle"))

from bundle_support import STUDY, make_toy  # noqa: E402


def fabricate(case_dir: Path, n: int, k: float) -> None:
    phi = k * (1 + 0.5 / n**2)
    (case_dir / "metrics.json").write_text(json.dumps({"drag": {"cd": phi}}))
    (case_dir / "history.csv").write_text("iteration,res\n" + "".join(f"{i},{10.0**-i!r}\n" for i in range(5)))
    (case_dir / "fields.vtu").write_text(f'<VTKFile n="{n}"/>\n')
    (case_dir / "logs").mkdir(exist_ok=True)
    (case_dir / "logs" / "solve.log").write_text(f"toysolve: n = {n}, k = {k}, phi = {phi!r}\n")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=100)
    ap.add_argument("--levels", type=int, default=3)
    args = ap.parse_args()

    from studyflow.analysis import assess_study
    from studyflow.bundle import RerunChoice, audit, pack
    from studyflow.collect import collect_study, write_tables
    from studyflow.design import build_design
    from studyflow.render import render_study
    from studyflow.spec import load_study
    from studyflow.workflow import signature as sig

    with tempfile.TemporaryDirectory(prefix="bench-bundle-") as tmp:
        base = Path(tmp)
        toy = make_toy(base / "work")
        ks = ", ".join(f"{1 + i / args.points:.6f}" for i in range(args.points))
        toy.study_file.write_text(STUDY.replace("values: {k: [1.0, 2.5]}", f"values: {{k: [{ks}]}}")
                                  .replace("levels: 3", f"levels: {args.levels}"))
        os.environ["PATH"] = f"{toy.bin_dir}{os.pathsep}{os.environ['PATH']}"
        study = load_study(toy.study_file)
        design = build_design(study)
        render_study(study, design)
        for c in design.cases:
            d = study.cases_dir / c.id
            fabricate(d, int(c.mesh.sizes["n"]), float(c.params["k"]))
            sig.write_json_atomic(sig.status_path(str(d), "solve"), {"state": "ok", "reason": None, "wall_s": 0.0})
            sig.write_json_atomic(sig.marker_path(str(d), "solve"), {"signature": "bench"})
        write_tables(study.root, collect_study(study))
        assess_study(study.file, write=True)

        rows = []
        t = time.perf_counter()
        packed = pack(toy.study_dir, base / "b.tar.gz")
        rows.append(("pack", time.perf_counter() - t, f"{packed.files} files, {packed.bytes / 1e6:.1f} MB"))
        t = time.perf_counter()
        rep = audit(packed.archive, into=base / "a")
        rows.append(("audit (no re-run)", time.perf_counter() - t, "pass" if rep.ok else f"FAIL {rep.failures[:2]}"))
        t = time.perf_counter()
        rep = audit(base / "a", rerun=RerunChoice("sample", n=5, seed=1), engine="direct")
        rows.append(("audit, re-run 5 (direct)", time.perf_counter() - t, "pass" if rep.ok else "FAIL"))
        print(f"{len(design.cases)} cases ({args.points} points x {args.levels} levels)")
        print(f"{'step':<28}{'seconds':>10}  result")
        for name, sec, note in rows:
            print(f"{name:<28}{sec:>10.2f}  {note}")


if __name__ == "__main__":
    main()
