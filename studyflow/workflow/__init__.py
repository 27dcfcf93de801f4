"""Workflow: step runner, staleness plan, run lock, Snakemake driver, packaged rules.

Kept free of imports on purpose: every Snakemake job starts ``python -m
studyflow.workflow.runstep``, and importing this package must stay cheap for it.
"""
