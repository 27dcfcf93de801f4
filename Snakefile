# Thin wiring: the rules ship inside the package (studyflow/workflow/rules/studyflow.smk).
#   snakemake --cores 2 --config study=studies/NAME
include: "studyflow/workflow/rules/studyflow.smk"

localrules: all

rule all:
    default_target: True
    input: STUDYFLOW.all_targets
