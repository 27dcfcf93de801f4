# studyflow's packaged rules: one rule per step of the study, wildcard `case`.
# Declarative only: each rule's inputs, output and shell command come from
# studyflow.workflow.rules_support; the step itself is run by studyflow.workflow.runstep.
#
#   snakemake --cores 2 --config study=studies/NAME          (from the repository root)
#   studyflow run studies/NAME                               (the driver; passes explicit targets)

import sys
from pathlib import Path

try:
    import studyflow  # noqa: F401
except ImportError:  # a source checkout that is not installed: the package is three folders up
    sys.path.insert(0, str(Path(workflow.current_basedir).resolve().parents[2]))

from studyflow.errors import StudyflowError
from studyflow.workflow import rules_support as _sf

try:
    _SF = _sf.setup(config)
except StudyflowError as _err:
    sys.stderr.write(f"studyflow: {_err}\n")
    raise SystemExit(_err.exit_code)

wildcard_constraints:
    case=r"[A-Za-z0-9][A-Za-z0-9._-]*",
    batch=r"b[0-9]+",

# The default target (every case's last step) lives in the including Snakefile, because Snakemake
# takes the default target from the main file only: `rule all: input: STUDYFLOW.all_targets`.
STUDYFLOW = _SF

for _step in _SF.steps:
    rule:
        name: _SF.rule_name(_step)
        input: _SF.inputs(_step)
        output: _SF.output(_step)
        threads: _SF.threads(_step)
        resources: **_SF.resources(_step)
        retries: _SF.retries
        group: _SF.group(_step)
        params: step=_step.name
        # Evaluated when the job runs, so it must not depend on the loop variable: the step's
        # name comes in through params (fixed when the rule is defined).
        shell: _SF.shell_command

# A local batch: one job runs the pending steps of many cases (the driver's --batch; runbatch.py).
rule:
    name: "sf__cases"
    input: _SF.batch_input
    output: _SF.batch_output
    threads: _SF.batch_threads
    resources: **_SF.batch_resources
    shell: _SF.batch_command
