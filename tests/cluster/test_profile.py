"""The profile file a study carries, read back with Snakemake's own profile parser.

The reference is Snakemake (9.x): its ``ProfileConfigFileParser`` turns the profile into the
command-line options the plugin then reads, so the check is on what Snakemake will actually do.
"""

from __future__ import annotations

import yaml
from cluster_studies import make_study
from snakemake.profiles import ProfileConfigFileParser

from studyflow.cluster.profile import job_requests, runtime_min, write_profile
from studyflow.cluster.settings import cluster_settings
from studyflow.spec import load_study


def _write(tmp_path, cluster, resources=None):
    study = load_study(make_study(tmp_path, [1, 2], cluster, resources))
    return study, write_profile(study, cluster_settings(study))


def test_resources_map_to_the_plugins_resources_per_step(tmp_path):
    study, run = _write(tmp_path, {"batch": 4, "partition": "short", "account": "cfd01", "qos": "low", "sbatch": "--exclusive"},
                        {"cores": 2, "memory_mb": 1500, "time_min": 10})
    assert run.profile_dir == study.root / "profiles" / "slurm"
    with open(run.profile_dir / "config.yaml") as fh:
        parsed = ProfileConfigFileParser().parse(fh)
    assert parsed["executor"] == "slurm"
    assert parsed["group-components"] == ["sf_batch=4"]
    # 10 min step limit + 10 % + 1 min start-up = 12 min (profile.runtime_min).
    assert sorted(parsed["set-resources"]) == sorted([
        "sf_solve:cpus_per_task=2", "sf_solve:mem_mb=1500", "sf_solve:runtime=12",
        "sf_solve:slurm_partition=short", "sf_solve:slurm_account=cfd01", "sf_solve:slurm_extra='--exclusive'"])
    assert parsed["set-threads"] == ["sf_solve=2"]
    assert "slurm-no-account" not in parsed
    assert parsed["slurm-qos"] == "low"
    # The driver's own --cores comes first; the cluster's come later and win (argparse keeps the last).
    assert run.args[run.args.index("--cores") + 1] == "2"
    assert run.config == ("step_runner=studyflow.cluster.batchstep",)


def test_no_batch_no_groups_and_no_account(tmp_path):
    _, run = _write(tmp_path, {"partition": "short"})
    content = yaml.safe_load((run.profile_dir / "config.yaml").read_text())
    assert "group-components" not in content
    assert content["slurm-no-account"] is True
    assert run.config == ()  # one job per case: the plain step runner


def test_profile_is_rewritten_only_when_it_changes(tmp_path):
    study, run = _write(tmp_path, {"batch": 2})
    path = run.profile_dir / "config.yaml"
    before = path.stat().st_mtime_ns
    write_profile(study, cluster_settings(study))
    assert path.stat().st_mtime_ns == before


def test_runtime_leaves_room_after_the_step_limit():
    assert runtime_min(None) is None
    assert runtime_min(60.0) == 3  # ceil(1.1) + 1
    assert runtime_min(3 * 60.0) == 5  # ceil(3.3) + 1


def test_batch_job_request_sums_the_wall_time(tmp_path):
    # Snakemake lays a group's jobs out in layers that fit --cores; with one case per layer the
    # group's runtime is the sum (snakemake 9 jobs.py GroupJob.resources: additive "runtime").
    study = load_study(make_study(tmp_path, [1], {"batch": 4, "partition": "short"},
                                  {"cores": 2, "memory_mb": 800, "time_min": 3}, post=True))
    (flags,) = job_requests(study, cluster_settings(study))
    assert flags == ["--cpus-per-task", "2", "--mem", "800", "-t", str(4 * 2 * 5), "-p", "short"]
