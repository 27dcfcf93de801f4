"""Exit codes and the exception types of the bundled solver.

The solver is its own program, so it does not use studyflow's exception types; its input
errors carry the same information (file, key, value, message).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

EXIT_CONVERGED = 0  # every residual fell below the tolerance
EXIT_USAGE = 2  # bad command line (argparse's own code)
EXIT_BAD_INPUT = 3  # the case file is missing, unreadable or invalid; nothing was computed
EXIT_NOT_CONVERGED = 4  # iteration limit reached; history, fields and metrics are still written
EXIT_DIVERGED = 5  # non-finite or exploding residuals; the history so far is written
EXIT_LINEAR = 6  # the sparse LU failed (singular Jacobian); the history so far is written


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


@dataclass(frozen=True)
class Issue:
    """One thing wrong with a case file."""

    file: str
    key: str
    value: Any
    message: str

    def __str__(self) -> str:
        where = f"{self.file}: {self.key}" if self.key else self.file
        return f"{where}: {self.message} (got {_show(self.value)})"


class CaseFileError(Exception):
    """The case file is invalid; carries every issue found, not only the first."""

    exit_code = EXIT_BAD_INPUT

    def __init__(self, issues: list[Issue] | Issue):
        self.issues = [issues] if isinstance(issues, Issue) else list(issues)
        super().__init__(str(self))

    def __str__(self) -> str:
        if len(self.issues) == 1:
            return str(self.issues[0])
        return "invalid case file:\n" + "\n".join(f"  - {i}" for i in self.issues)


class LinearSolverError(Exception):
    """A sparse LU backend could not factorise or solve."""


class SingularJacobian(LinearSolverError):
    """The Jacobian is (numerically) singular: the Newton step does not exist."""


class BackendUnavailable(LinearSolverError):
    """A sparse LU backend cannot be used on this machine; the message says why."""
