"""The demo workflow on a real SLURM cluster, through Snakemake's SLURM executor plugin (issue 7).

These tests need a running SLURM cluster whose jobs see this Python environment.
In CI, ``.ci/run`` starts a single-node cluster with ``.ci/slurm/start.sh`` (Debian's
slurmctld, slurmd and munge on localhost) and stops it afterwards.

* Without a cluster the tests are skipped with the reason, unless the environment
  variable ``CI`` is set (non-empty, not ``false``/``0``): then a missing cluster is
  a failure, so that CI cannot pass by skipping them.  A cluster other than the
  throwaway one (its slurm.conf says ``ClusterName=qcorrci``) counts as missing: the
  tests submit jobs and the CI profile names the test cluster's partition.
* The workflow runs with the CI-only global profile ``.ci/slurm/profile.yaml``
  (``executor: slurm``; job status from ``squeue``, since the test cluster keeps no
  accounting database and ``sacct`` cannot answer), wrapped in ``timeout -k`` so
  that a hung run is killed; jobs left behind are cancelled by their job name.
* The check: the merged property table of the SLURM run equals, cell by cell, that
  of a local run (``--cores``) of the same workflow on the same inputs, and every
  job that was not a local rule ran as a SLURM job that completed.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import sysconfig
import uuid
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

REPO = Path(__file__).resolve().parents[1]
PROFILE_DIR = REPO / ".ci" / "slurm"
SNAKEFILE = REPO / "workflow" / "Snakefile"

#: ClusterName in the slurm.conf written by .ci/slurm/start.sh
TEST_CLUSTER_NAME = "qcorrci"
#: hard limit for one Snakemake run, s (the demo takes about a minute on 2 cores)
RUN_LIMIT_S = 900
#: grace period after SIGTERM before SIGKILL (Snakemake may ignore SIGTERM while it waits)
KILL_AFTER_S = 30

pytestmark = pytest.mark.slurm


def ci_is_set() -> bool:
    """True when the CI environment variable is set (CI=true in CI)."""
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")


def cluster_problem() -> str | None:
    """Why no usable SLURM cluster is reachable, or None when one is."""
    for tool in ("sinfo", "sbatch", "squeue", "scancel", "scontrol"):
        if shutil.which(tool) is None:
            return f"the SLURM client command {tool!r} is not installed"
    try:
        states = subprocess.run(
            ["sinfo", "--noheader", "--format=%T"],
            check=False,
            capture_output=True,
            text=True,
            timeout=20,
        )
    except subprocess.TimeoutExpired:
        return "'sinfo' did not answer within 20 s (is slurmctld running?)"
    if states.returncode != 0:
        said = (states.stderr or states.stdout).strip().splitlines() or ["no message"]
        return f"'sinfo' failed: {said[-1]}"
    usable = {"idle", "mixed", "allocated", "completing"}
    found = [s.strip().rstrip("*~#") for s in states.stdout.split()]
    if not usable.intersection(found):
        return f"no SLURM node is up (node states: {', '.join(found) or 'none'})"
    config = subprocess.run(
        ["scontrol", "show", "config"],
        check=False,
        capture_output=True,
        text=True,
        timeout=20,
    )
    settings = dict(
        (part.strip() for part in line.split("=", 1))
        for line in config.stdout.splitlines()
        if "=" in line
    )
    if settings.get("ClusterName") != TEST_CLUSTER_NAME:
        return (
            f"the running cluster {settings.get('ClusterName', '?')!r} is not the throwaway test "
            f"cluster (ClusterName={TEST_CLUSTER_NAME}) that .ci/slurm/start.sh makes; these "
            "tests submit jobs and the CI profile names its partition, so they run only there"
        )
    return None


@pytest.fixture(scope="module")
def slurm_cluster() -> None:
    """Skip (developer machine) or fail (CI set) when no SLURM cluster is usable."""
    problem = cluster_problem()
    if problem is None:
        return
    if ci_is_set():
        pytest.fail(
            f"CI is set but no SLURM cluster is usable: {problem}. .ci/run starts one with "
            ".ci/slurm/start.sh; see its output above the test log."
        )
    pytest.skip(
        f"no SLURM cluster: {problem} (start one as root with .ci/slurm/start.sh; "
        "set CI=true to make this a failure)"
    )


def cancel_jobs(name_prefix: str) -> None:
    """Cancel every job of ours still queued or running (job names start with the prefix)."""
    listing = subprocess.run(
        ["squeue", "--noheader", "--format=%i %j"],
        check=False,
        capture_output=True,
        text=True,
        timeout=30,
    )
    ids = [
        line.split()[0]
        for line in listing.stdout.splitlines()
        if len(line.split()) == 2 and line.split()[1].startswith(name_prefix)
    ]
    if ids:
        subprocess.run(["scancel", *ids], check=False, capture_output=True, timeout=30)


def our_jobs(name_prefix: str) -> list[tuple[str, str]]:
    """(job id, state) of every job whose name starts with the prefix, finished ones included.

    Finished jobs stay visible to squeue for MinJobAge seconds (600 on the test cluster).
    """
    listing = subprocess.run(
        ["squeue", "--noheader", "--states=all", "--format=%i %j %T"],
        capture_output=True,
        text=True,
        timeout=30,
        check=True,
    )
    jobs = []
    for line in listing.stdout.splitlines():
        fields = line.split()
        if len(fields) == 3 and fields[1].startswith(name_prefix):
            jobs.append((fields[0], fields[2]))
    return jobs


def console_script_path() -> str:
    """PATH with the console-script folders of the Python running the tests in front.

    The rules call ``qcorr``; the jobs (local, or SLURM jobs, which inherit the
    submitting environment) must find the one installed for this Python.
    """
    folders = [sysconfig.get_path("scripts"), str(Path(sys.executable).parent)]
    return os.pathsep.join([*dict.fromkeys(folders), os.environ.get("PATH", "")])


def run_limited(command: list[str], cwd: Path, log: Path) -> subprocess.CompletedProcess:
    """Run a command under ``timeout -k`` (SIGTERM at the limit, SIGKILL after the grace period)."""
    wrapped = ["timeout", "-k", str(KILL_AFTER_S), str(RUN_LIMIT_S), *command]
    with open(log, "w") as out:
        result = subprocess.run(
            wrapped,
            check=False,
            cwd=cwd,
            env={**os.environ, "PATH": console_script_path()},
            stdout=out,
            stderr=subprocess.STDOUT,
            text=True,
            timeout=RUN_LIMIT_S + KILL_AFTER_S + 30,
        )
    if result.returncode == 124:
        pytest.fail(f"{' '.join(command[:3])} hit the {RUN_LIMIT_S} s limit; log: {log}")
    return result


def tail(path: Path, lines: int = 60) -> str:
    return "\n".join(path.read_text(errors="replace").splitlines()[-lines:])


def prepare_workdir(path: Path) -> Path:
    """A working directory with a copy of config/ and the demo inputs reachable as resources/."""
    path.mkdir(parents=True)
    shutil.copytree(REPO / "config", path / "config")
    (path / "resources").symlink_to(REPO / "resources", target_is_directory=True)
    return path


#: the workflow's merged property table (relative to the working directory); the test
#: asks for this target only, so figures and the report (tested in test_workflow.py) are skipped
MERGED_TABLE = "results/corrected_properties.csv"


def merged_table(workdir: Path) -> pd.DataFrame:
    """Read the merged property table; empty cells become NaN so number columns stay numeric."""
    path = workdir / MERGED_TABLE
    assert path.is_file(), f"the run did not write {path}"
    return pd.read_csv(path)


def test_batch_job_sees_this_python(slurm_cluster, tmp_path):
    """A batch job runs and imports qcorr from this environment (what the job step needs)."""
    out = tmp_path / "job.out"
    result = subprocess.run(
        [
            "timeout", "-k", "10", "120",
            "sbatch", "--wait", "--quiet", f"--output={out}", "--time=2", "--mem=200",
            f"--wrap={sys.executable} -c 'import qcorr; print(qcorr.__version__)'",
        ],
        check=False,
        capture_output=True,
        text=True,
        timeout=150,
    )  # fmt: skip
    assert result.returncode == 0, f"sbatch --wait failed: {result.stderr.strip()}"
    import qcorr

    assert out.read_text().strip() == qcorr.__version__


@pytest.mark.slow
def test_demo_workflow_on_slurm_equals_local_run(slurm_cluster, tmp_path):
    """The demo through the SLURM executor gives the same merged table as a local run."""
    if not SNAKEFILE.exists():
        pytest.fail(f"{SNAKEFILE} is missing")
    cores = str(min(2, os.cpu_count() or 1))
    common = [
        sys.executable,
        "-m",
        "snakemake",
        MERGED_TABLE,
        "--snakefile",
        str(SNAKEFILE),
        "--show-failed-logs",
    ]

    local_dir = prepare_workdir(tmp_path / "local")
    local_log = tmp_path / "local.log"
    local = run_limited(
        [*common, "--directory", str(local_dir), "--cores", cores], local_dir, local_log
    )
    assert local.returncode == 0, f"local run failed:\n{tail(local_log)}"

    cluster_dir = prepare_workdir(tmp_path / "cluster")
    cluster_log = tmp_path / "cluster.log"
    prefix = f"qcorrtest{uuid.uuid4().hex[:8]}"
    try:
        cluster = run_limited(
            [
                *common,
                "--directory", str(cluster_dir),
                "--profile", str(PROFILE_DIR),
                "--slurm-jobname-prefix", prefix,
                "--max-threads", cores,  # requests above the node's CPUs would be refused
            ],
            cluster_dir,
            cluster_log,
        )  # fmt: skip
    finally:
        cancel_jobs(prefix)
    assert cluster.returncode == 0, f"SLURM run failed:\n{tail(cluster_log)}"

    jobs = our_jobs(prefix)
    assert jobs, (
        f"no SLURM job named {prefix}* was seen; did the run use the cluster?\n{tail(cluster_log)}"
    )
    not_completed = [job for job in jobs if job[1] != "COMPLETED"]
    assert not not_completed, f"SLURM jobs not completed: {not_completed}"
    assert "SLURM run ID" in cluster_log.read_text(), "the run did not use the SLURM executor"

    local_table = merged_table(local_dir)
    cluster_table = merged_table(cluster_dir)
    assert len(local_table) > 0
    assert {"system", "group", "property", "quantum"} <= set(local_table.columns)
    assert list(cluster_table.columns) == list(local_table.columns)
    assert len(cluster_table) == len(local_table) > 0
    # Same code, same inputs, same settings: the two runs must agree to rounding
    # (floating-point sums may be ordered differently, e.g. in threaded FFTs).  Text cells
    # must be equal; empty cells empty in both; numbers equal to 1e-12 of the largest
    # number in the same row (a correction that nearly cancels is judged on the scale of
    # the classical and quantum values it came from).
    numeric = local_table.select_dtypes("number").columns
    text = [c for c in local_table.columns if c not in numeric]
    pd.testing.assert_frame_equal(cluster_table[text].astype(object).fillna(""), local_table[text].astype(object).fillna(""))
    a = cluster_table[numeric].to_numpy(dtype=float)
    b = local_table[numeric].to_numpy(dtype=float)
    assert (np.isnan(a) == np.isnan(b)).all(), "empty cells differ between the runs"
    scale = np.nanmax(np.abs(b), axis=1, initial=0.0)[:, None]
    difference = np.where(np.isnan(b), 0.0, np.abs(a - b))
    worst = np.unravel_index(np.argmax(difference - 1e-12 * scale), difference.shape)
    assert (difference <= 1e-12 * scale).all(), (
        f"row {worst[0]} column {numeric[worst[1]]!r}: SLURM {a[worst]!r} vs local {b[worst]!r}"
    )
