"""Clear errors before a cluster run when the scheduler, its settings or the plugin are missing.

``data/scontrol_show_config.txt`` is the output of ``scontrol show config`` of SLURM 22.05.8
(Debian 12) on the test cluster of scripts/slurm-local.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from studyflow.cluster import preflight
from studyflow.cluster.settings import ClusterSettings
from studyflow.errors import WorkflowError

DATA = Path(__file__).parent / "data"


def test_missing_scheduler_commands_are_named(monkeypatch, tmp_path):
    monkeypatch.setenv("PATH", str(tmp_path))
    with pytest.raises(WorkflowError) as info:
        preflight.check_scheduler(ClusterSettings())
    text = str(info.value)
    assert "sbatch" in text and "squeue" in text and "login node" in text


def test_missing_plugin_names_the_extra(monkeypatch):
    real = preflight.importlib.util.find_spec
    monkeypatch.setattr(preflight.importlib.util, "find_spec",
                        lambda name, *a: None if name == "snakemake_executor_plugin_slurm" else real(name, *a))
    with pytest.raises(WorkflowError) as info:
        preflight.require_plugin("slurm")
    assert "studyflow[cluster]" in str(info.value) and "snakemake-executor-plugin-slurm" in str(info.value)


def test_reads_scontrol_config():
    cfg = preflight.parse_config((DATA / "scontrol_show_config.txt").read_text())
    assert cfg["AccountingStorageType"] == "accounting_storage/none"
    assert preflight.seconds(cfg["MinJobAge"]) == 300
    assert preflight.seconds("1h") == 3600 and preflight.seconds("45") == 45


def _fake_scheduler(monkeypatch, config_text: str):
    monkeypatch.setattr(preflight, "require_commands", lambda executor="slurm": None)
    monkeypatch.setattr(preflight, "require_plugin", lambda executor="slurm": "2.8.0")

    def query(argv):
        if argv[:2] == ["scontrol", "show"]:
            return config_text
        return "local*\nbig\n"

    monkeypatch.setattr(preflight, "_query", query)


def test_squeue_chosen_without_accounting(monkeypatch):
    _fake_scheduler(monkeypatch, (DATA / "scontrol_show_config.txt").read_text())
    info = preflight.check_scheduler(ClusterSettings(first_check_s=40, partition="local"))
    assert (info.status_command, info.accounting, info.min_job_age_s) == ("squeue", False, 300)


def test_min_job_age_too_short_for_squeue_is_refused(monkeypatch):
    # The plugin falls back from squeue to sacct when MinJobAge < 3 x its first-poll delay
    # (snakemake-executor-plugin-slurm 2.8.0, __init__.py check_active_jobs); without accounting
    # that polls forever, so it is refused up front.
    text = (DATA / "scontrol_show_config.txt").read_text().replace("MinJobAge               = 300 sec",
                                                                   "MinJobAge               = 100 sec")
    _fake_scheduler(monkeypatch, text)
    with pytest.raises(WorkflowError) as info:
        preflight.check_scheduler(ClusterSettings(first_check_s=40))
    assert "MinJobAge" in str(info.value) and "120" in str(info.value)


def test_unknown_partition_is_refused(monkeypatch):
    _fake_scheduler(monkeypatch, (DATA / "scontrol_show_config.txt").read_text())
    with pytest.raises(WorkflowError) as info:
        preflight.check_scheduler(ClusterSettings(partition="gpu"))
    assert "'gpu'" in str(info.value) and "local" in str(info.value)


def test_cli_run_without_scheduler_renders_and_submits_nothing(monkeypatch, tmp_path, capsys):
    from cluster_studies import make_study

    from studyflow.cli import main
    from studyflow.errors import EXIT_WORKFLOW

    study = make_study(tmp_path, [1, 2], {"batch": 2})
    monkeypatch.setenv("PATH", str(tmp_path / "empty"))
    assert main(["run", str(study), "--executor", "slurm"]) == EXIT_WORKFLOW
    assert "sbatch" in capsys.readouterr().err
    assert not (study / "cases").exists()  # checked before anything was rendered
    assert not (study / "profiles").exists()
