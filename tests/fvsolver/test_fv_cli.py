"""The command line: files written, exit codes, messages, version."""

from __future__ import annotations

import csv
import json
import subprocess
import sys

import meshio
import numpy as np

from studyflow.fvsolver import __version__


def _run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "studyflow.fvsolver", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=120)


def test_version():
    p = _run("--version")
    assert p.returncode == 0 and p.stdout.strip() == f"studyflow-fv {__version__}"


def test_plate_case_writes_fields_metrics_and_history(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text('[case]\nkind = "plate"\nreynolds = 1.0e4\n[mesh]\nnx = 32\nny = 16\n', encoding="utf-8")
    p = _run(str(case))
    assert p.returncode == 0, p.stderr
    # every iteration printed, with the imbalance columns
    lines = [ln for ln in p.stdout.splitlines() if "iter" in ln and "mass" in ln]
    assert len(lines) >= 3
    m_backend = json.loads((tmp_path / "metrics.json").read_text(encoding="utf-8"))["solver"]["linear_solver"]
    assert p.stdout.splitlines()[-1].startswith("converged: ") and f" LU by {m_backend}, " in p.stdout
    with open(tmp_path / "history.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert set(rows[0]) >= {"iteration", "mass_imbalance", "xmom_imbalance", "ymom_imbalance", "newton_update"}
    assert max(float(rows[-1][k]) for k in ("mass_imbalance", "xmom_imbalance", "ymom_imbalance")) <= 1e-10
    m = json.loads((tmp_path / "metrics.json").read_text(encoding="utf-8"))
    assert m["converged"] is True and m["cells"] == 32 * 16 and m["iterations"] == len(rows) - 1
    # the drag at every iterate of the final mesh; the last row is the converged value itself
    with open(tmp_path / "monitors.csv", encoding="utf-8") as fh:
        mon = list(csv.DictReader(fh))
    assert [r["iteration"] for r in mon] == [r["iteration"] for r in rows]
    assert float(mon[-1]["drag.cd"]) == m["drag"]["cd"]
    assert abs(float(mon[-1]["drag.cd"]) - float(mon[-2]["drag.cd"])) < 1e-8 * m["drag"]["cd"]
    assert m["wall_time_s"] > 0 and len(m["cf"]["x"]) == len(m["cf"]["values"]) > 5
    assert set(m["stations"]) >= {"x", "cf", "delta_star", "theta", "shape_factor"}
    mesh = meshio.read(tmp_path / "fields.vtu")
    assert {"u", "v", "p", "wall_shear"} <= set(mesh.cell_data)
    quads = mesh.cell_data["u"][0]
    assert len(quads) == 32 * 16 and np.all(np.isfinite(quads))
    tau = mesh.cell_data["wall_shear"][1]  # the line cells along the wall
    assert np.all(tau > 0)  # the plate drags the flow back everywhere (attached layer)


def test_bad_case_file_exit_code_and_message(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text('[case]\nkind = "plate"\n[mesh]\nnx = 32\nny = 0\n', encoding="utf-8")
    p = _run(str(case))
    assert p.returncode == 3
    assert "mesh.ny" in p.stderr and "(got 0)" in p.stderr and str(case) in p.stderr
    assert not (tmp_path / "history.csv").exists()


def test_not_converged_exit_code_keeps_outputs(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text('[case]\nkind = "cavity"\n[mesh]\nnx = 16\nny = 16\n[solve]\nmax_iterations = 1\n'
                    'coarse_levels = 0\n', encoding="utf-8")
    p = _run(str(case))
    assert p.returncode == 4, p.stdout + p.stderr
    assert "not_converged" in p.stderr
    for name in ("history.csv", "metrics.json", "fields.vtu"):
        assert (tmp_path / name).exists()
    assert json.loads((tmp_path / "metrics.json").read_text())["converged"] is False


def test_usage_error():
    assert _run().returncode == 2
