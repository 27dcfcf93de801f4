"""The cluster: block: defaults, and every bad key reported with file, key path and value."""

from __future__ import annotations

import pytest
from cluster_studies import make_study

from studyflow.cluster.settings import cluster_settings
from studyflow.errors import StudySpecError
from studyflow.spec import load_study


def _study(tmp_path, cluster):
    return load_study(make_study(tmp_path, [1], cluster))


def test_defaults_without_a_cluster_block(tmp_path):
    s = cluster_settings(_study(tmp_path, None))
    assert (s.executor, s.batch, s.partition, s.account, s.jobs) == ("slurm", None, None, None, 100)
    # The plugin's own default first-poll delay (snakemake-executor-plugin-slurm 2.8.0 source:
    # init_seconds_before_status_checks default=40).
    assert s.first_check_s == 40


def test_all_problems_at_once_with_file_key_and_value(tmp_path):
    study = _study(tmp_path, {"batch": 5, "partiton": "short", "account": "a b", "status_command": "qstat",
                              "options": {"keep-going": False}})
    with pytest.raises(StudySpecError) as info:
        cluster_settings(study)
    text = str(info.value)
    problems = {p.key: p for p in info.value.problems}
    assert set(problems) == {"cluster.partiton", "cluster.account", "cluster.status_command", "cluster.options"}
    assert "known keys" in problems["cluster.partiton"].message and "partition" in problems["cluster.partiton"].message
    assert problems["cluster.account"].value == "a b"
    assert problems["cluster.status_command"].value == "qstat"
    assert "keep-going" in problems["cluster.options"].message
    assert "study.yaml" in text


def test_batch_is_checked_by_the_study_schema(tmp_path):
    with pytest.raises(StudySpecError) as info:
        _study(tmp_path, {"batch": 0})
    assert any(p.key == "cluster.batch" for p in info.value.problems)


def test_sbatch_flags_the_plugin_sets_itself_are_refused(tmp_path):
    # The plugin refuses these in slurm_extra (snakemake-executor-plugin-slurm 2.8.0,
    # validation.py get_forbidden_slurm_options) only when it submits, so they are caught here.
    for flags, word in (("--qos=low", "cluster.qos"), ("-p short", "cluster.partition"),
                        ("--mem=4G", "memory_mb"), ("-t 10", "time_min")):
        with pytest.raises(StudySpecError) as info:
            cluster_settings(_study(tmp_path, {"sbatch": flags}))
        (problem,) = info.value.problems
        assert problem.key == "cluster.sbatch" and problem.value == flags and word in problem.message
    assert cluster_settings(_study(tmp_path, {"sbatch": "--exclusive --mail-type=FAIL"})).sbatch
