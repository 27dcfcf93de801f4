"""Running the bundled solver in-process for the fvsolver tests (a uniquely named helper module,
since several test folders have a conftest.py and ``from conftest import`` picks whichever came first)."""

from __future__ import annotations

from studyflow.fvsolver import config, run


def solve_case(data: dict):
    return run.solve(config.parse(data, "<test>"), log=lambda s: None)
