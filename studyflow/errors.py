"""Exceptions of studyflow, each with the exit code the command line returns for it.

Every error a user can cause is one of these; the command line catches ``StudyflowError``
once and prints ``str(error)``. Messages name the file, the key path and the bad value.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

# Exit codes scripts can rely on (documented in README.md).
EXIT_OK = 0
EXIT_CASES_FAILED = 1  # the command finished, but one or more cases failed (recorded with reasons)
EXIT_USAGE = 2  # bad command-line usage (argparse)
EXIT_INVALID_INPUT = 3  # study file, data file or other input is invalid; nothing was rendered or run
EXIT_TEMPLATE = 4  # a template failed to render
EXIT_WORKFLOW = 5  # the workflow engine could not start or stopped abnormally
EXIT_BUSY = 6  # another run holds the study
EXIT_ANALYSIS = 7  # the data cannot be assessed (too few levels, non-positive sizes, ...)
EXIT_AUDIT_FAILED = 8  # a reviewer audit found missing, altered or irreproducible files
EXIT_UNSAFE = 9  # refused for safety: path escape, link, device file, sandbox breach
EXIT_SYSTEM = 10  # the machine refused: disk full, permission denied, ... (nothing finished is lost)
EXIT_INTERRUPTED = 130  # stopped by SIGINT; finished cases are kept


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input: where it is and what is wrong."""

    file: str
    key: str
    value: Any
    message: str

    def __str__(self) -> str:
        where = f"{self.file}: {self.key}" if self.key else self.file
        return f"{where}: {self.message} (got {_show(self.value)})"


class StudyflowError(Exception):
    """Base of every error studyflow raises on purpose."""

    exit_code: int = EXIT_INVALID_INPUT


class InputError(StudyflowError):
    """An input file is invalid. Carries every problem found, not only the first."""

    exit_code = EXIT_INVALID_INPUT

    def __init__(self, problems: list[Problem] | Problem, headline: str | None = None):
        self.problems = [problems] if isinstance(problems, Problem) else list(problems)
        self.headline = headline
        super().__init__(str(self))

    def __str__(self) -> str:
        lines = [self.headline] if self.headline else []
        if len(self.problems) == 1 and not self.headline:
            return str(self.problems[0])
        lines += [f"  - {p}" for p in self.problems]
        return "\n".join(lines)


class StudySpecError(InputError):
    """The study file breaks the schema or refers to things that do not exist."""


class TemplateError(StudyflowError):
    """A case template failed to render (unknown variable, syntax error, sandbox refusal)."""

    exit_code = EXIT_TEMPLATE


class WorkflowError(StudyflowError):
    """The workflow engine could not be started or ended abnormally."""

    exit_code = EXIT_WORKFLOW


class StudyBusyError(StudyflowError):
    """Another run holds the study's lock."""

    exit_code = EXIT_BUSY


class CollectError(InputError):
    """A collector definition is invalid or a case output cannot be read as declared."""


class AnalysisError(StudyflowError):
    """Data cannot be assessed: too few levels, non-positive sizes, duplicates, non-finite values."""

    exit_code = EXIT_ANALYSIS


class UnsafePathError(StudyflowError):
    """A path, link or archive entry would leave the folder it must stay in."""

    exit_code = EXIT_UNSAFE


class AuditError(StudyflowError):
    """A reviewer audit could not be carried out or found the bundle not reproducible."""

    exit_code = EXIT_AUDIT_FAILED
