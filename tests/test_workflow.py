"""Tests of the Snakemake workflow (workflow/, config/) run as a user runs it.

Every run happens in a temporary copy of the repository's tracked files (what a fresh
clone holds), with ``python -m snakemake`` in a subprocess, so the repository itself is
never written to.  The real runs are marked ``slow``.

What is checked, and against what:

* the README's demo command (parsed from README.md) fills ``results/``, and the merged
  table equals the tables made by calling the ``qcorr`` commands directly on the same
  inputs, with the options read from the sheet here, independently of the workflow's
  own translation (``workflow/rules/common.smk``); frame blocks must give the
  single-job result to rounding (issue 7);
* a second run does nothing; touching one trajectory reruns only that system's jobs
  and the merge;
* ``snakemake -n`` and ``--lint`` are clean; the HTML report builds;
* bad sheets stop before any job with a message naming the row and the column; no
  value in the sheet reaches a shell unquoted;
* the workflow works as a module of a host workflow, driven by the host's config.
"""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
import sysconfig
import time
from pathlib import Path

import pandas as pd
import pytest

from qcorr.cli import main as qcorr_main

REPO = Path(__file__).resolve().parents[1]
RUN_TIMEOUT_S = 900  # hard limit per snakemake call; the demo itself takes about a minute


# ----------------------------------------------------------------------------- helpers


def tracked_files() -> list[str]:
    """Files a fresh clone holds (git ls-files), or the workflow's folders without git."""
    try:
        listed = subprocess.run(["git", "ls-files", "-z"], cwd=REPO, capture_output=True,
                                check=True, timeout=60).stdout.decode().split("\0")
        return [f for f in listed if f and (REPO / f).is_file()]
    except (OSError, subprocess.CalledProcessError):
        return [str(p.relative_to(REPO)) for folder in ("workflow", "config", "resources")
                for p in (REPO / folder).rglob("*") if p.is_file()]


def fresh_copy(destination: Path) -> Path:
    """Copy the tracked files (and the demo data, tracked or not yet) to *destination*."""
    files = set(tracked_files())
    files |= {str(p.relative_to(REPO)) for p in (REPO / "resources" / "demo").rglob("*")
              if p.is_file() and "_offsets" not in p.name}
    for name in sorted(files):
        target = destination / name
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(REPO / name, target)
    return destination


def console_script_path() -> str:
    """PATH with the directories pip puts console scripts in (``qcorr``) in front, so the
    rules' ``shell:`` finds the qcorr of the Python running the tests."""
    folders = [sysconfig.get_path("scripts"), str(Path(sys.executable).parent)]
    user = sysconfig.get_path("scripts", f"{os.name}_user")
    if user:
        folders.append(user)
    return os.pathsep.join([*dict.fromkeys(folders), os.environ.get("PATH", "")])


def snakemake(args: list[str], cwd: Path, timeout: float = RUN_TIMEOUT_S):
    """Run ``python -m snakemake ARGS`` in *cwd*; return the CompletedProcess."""
    env = {**os.environ, "PATH": console_script_path()}
    return subprocess.run([sys.executable, "-m", "snakemake", *args], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=timeout, check=False)


def explain(result) -> str:
    return f"exit {result.returncode}\n--- stdout\n{result.stdout[-4000:]}\n--- stderr\n{result.stderr[-6000:]}"


def readme_commands() -> list[str]:
    """The two commands of the README's 'Start' section (bash code blocks, in order)."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    start = text.split("## Start", 1)[1].split("\n## ", 1)[0]
    return [block.strip() for block in re.findall(r"```bash\n(.*?)```", start, flags=re.DOTALL)]


def demo_sheet() -> pd.DataFrame:
    return pd.read_csv(REPO / "config" / "systems.tsv", sep="\t", comment="#", dtype=str,
                       keep_default_na=False)


def job_counts(output: str) -> dict[str, int]:
    """Rule -> job count from Snakemake's 'Job stats' table."""
    counts = {}
    block = output.split("Job stats:", 1)[-1] if "Job stats:" in output else ""
    for line in block.splitlines():
        parts = line.split()
        if len(parts) == 2 and parts[1].isdigit() and parts[0] != "total":
            counts[parts[0]] = int(parts[1])
    return counts


KEY_COLUMNS = ["system", "group", "method", "property", "temperature_K", "basis"]


def assert_tables_equal(got: pd.DataFrame, expected: pd.DataFrame, rtol: float) -> None:
    assert list(got.columns) == list(expected.columns)
    got = got.sort_values(KEY_COLUMNS).reset_index(drop=True)
    expected = expected.sort_values(KEY_COLUMNS).reset_index(drop=True)
    assert len(got) == len(expected) > 0
    # rounding noise is relative to the row's own scale (a standard error that is 0 in
    # exact arithmetic comes out as ~1e-16 x the value); per-system rows are ~1e-21 J/K,
    # so one absolute tolerance for a whole column would not do
    values = [c for c in ("classical", "quantum", "correction") if c in expected.columns]
    scale = expected[values].abs().max(axis=1).fillna(0.0).to_numpy()
    for column in got.columns:
        if pd.api.types.is_numeric_dtype(expected[column]):
            a, b = got[column].to_numpy(dtype=float), expected[column].to_numpy(dtype=float)
            assert (pd.isna(a) == pd.isna(b)).all(), column
            both = ~pd.isna(b)
            allowed = rtol * (abs(b[both]) + scale[both])
            assert (abs(a[both] - b[both]) <= allowed).all(), (
                column, float(max(abs(a[both] - b[both]) - allowed)))
        else:
            assert got[column].astype(object).fillna("").tolist() == expected[column].astype(object).fillna("").tolist(), column


# ----------------------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def demo_copy(tmp_path_factory) -> Path:
    return fresh_copy(tmp_path_factory.mktemp("fresh_clone"))


@pytest.fixture(scope="module")
def demo_run(demo_copy):
    """The README's demo command, run in a fresh copy (the pip part is done: we run in the
    installed test environment)."""
    first = readme_commands()[0]
    install, run = (part.strip() for part in first.split("&&"))
    assert install == 'pip install -e ".[workflow]"'
    argv = shlex.split(run)
    assert argv[0] == "snakemake"
    started = time.monotonic()
    result = snakemake(argv[1:], demo_copy)
    assert result.returncode == 0, explain(result)
    return demo_copy, result, time.monotonic() - started


# ----------------------------------------------------------------------------- quick checks


def test_readme_has_exactly_the_two_commands_and_ci_runs_the_test_one():
    commands = readme_commands()
    assert commands == ['pip install -e ".[workflow]" && snakemake --cores 2',
                        'pip install -e ".[test]" && python -m pytest']
    ci = (REPO / ".ci" / "run").read_text(encoding="utf-8")
    assert re.search(r'pip install (--quiet )?-e "\.\[test\]"', ci)
    assert re.search(r"python3? -m pytest", ci)
    pyproject = (REPO / "pyproject.toml").read_text(encoding="utf-8")
    for extra in ("workflow", "test"):
        line = re.search(rf"^{extra} = \[(.*?)\]", pyproject, flags=re.MULTILINE | re.DOTALL)
        assert line and "snakemake>=9.14.8" in line.group(1), extra


def test_snakefile_requires_snakemake_9_14_8():
    text = (REPO / "workflow" / "Snakefile").read_text(encoding="utf-8")
    assert 'min_version("9.14.8")' in text


def test_every_rule_declares_log_benchmark_threads_resources():
    for smk in (REPO / "workflow" / "rules").glob("*.smk"):
        text = smk.read_text(encoding="utf-8")
        for rule in re.split(r"\n(?=rule )", text)[1:]:
            name = rule.split(":", 1)[0]
            for directive in ("log:", "benchmark:", "threads:", "resources:", "mem_mb=",
                              "runtime="):
                assert f"    {directive}" in rule or f"        {directive}" in rule, \
                    f"{smk.name} {name} lacks {directive}"
            shell = rule.split("shell:", 1)[1]
            # every substituted path or value is quoted (':q'), except wildcards that the
            # schema restricts to digits/safe characters and {threads}
            for field in re.findall(r"\{([^}]+)\}", shell):
                assert field.endswith(":q") or field in ("threads", "wildcards.block_index",
                                                         "wildcards.block_count"), \
                    f"{smk.name} {name}: unquoted {{{field}}}"


def test_no_software_deployment_is_promised():
    """Issue 15: a conda environment cannot be built or tested here (no conda channel is
    reachable), and one that pip-installs an unpublished qcorr cannot work; so no rule
    declares one, the catalog claims none, and the README says jobs use the environment
    Snakemake runs in."""
    for smk in [REPO / "workflow" / "Snakefile", *(REPO / "workflow" / "rules").glob("*.smk")]:
        assert "conda:" not in smk.read_text(encoding="utf-8"), smk.name
    assert not (REPO / "workflow" / "envs").exists()
    catalog = (REPO / ".snakemake-workflow-catalog.yml").read_text(encoding="utf-8")
    for flag in ("conda", "apptainer", "apptainer+conda"):
        assert re.search(rf"^\s*{re.escape(flag)}: false$", catalog, flags=re.MULTILINE), flag
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    assert "software-deployment-method conda" not in readme
    assert "environment Snakemake runs in" in readme


def test_snakefmt_is_clean():
    """The catalog's formatting check (snakefmt); skipped where snakefmt is not installed."""
    snakefmt = shutil.which("snakefmt")
    if snakefmt is None:
        pytest.skip("snakefmt is not installed (pip install snakefmt)")
    result = subprocess.run([snakefmt, "--check", "workflow"], cwd=REPO, capture_output=True,
                            text=True, timeout=120, check=False)
    assert result.returncode == 0, explain(result)


def test_dry_run_and_lint_are_clean(demo_copy):
    dry = snakemake(["-n", "--cores", "2"], demo_copy, timeout=300)
    assert dry.returncode == 0, explain(dry)
    counts = job_counts(dry.stdout + dry.stderr)
    sheet = demo_sheet()
    assert counts.get("harmonic_properties") == len(sheet)
    assert counts.get("plots") == len(sheet)
    lint = snakemake(["--lint"], demo_copy, timeout=300)
    # the one lint allowed: no rule declares a conda environment or container, on purpose
    # (issue 15: qcorr is on no channel yet, so such an environment could not install it)
    items = re.findall(r"^\s+\* (.+?):?$", lint.stdout + lint.stderr, flags=re.MULTILINE)
    assert set(items) <= {"Specify a conda environment or container for each rule."}, \
        explain(lint)
    rules_linted = re.findall(r"^Lints for rule (\w+)", lint.stdout + lint.stderr,
                              flags=re.MULTILINE)
    assert "Congratulations" in lint.stdout + lint.stderr or len(rules_linted) == len(items), \
        explain(lint)
    assert not (demo_copy / "results").exists()


# ----------------------------------------------------------------------------- the demo run


def direct_tables(copy: Path, out: Path) -> pd.DataFrame:
    """Call the qcorr commands directly, one system after the other, single job each."""
    out.mkdir()
    sheet = demo_sheet()
    tables = []
    for _, row in sheet.iterrows():
        sid = row["system"]
        spectrum = out / f"{sid}.nc"
        argv = ["spectrum", "--topology", str(copy / row["topology"]), "--trajectory",
                *[str(copy / t.strip()) for t in row["trajectory"].split(";") if t.strip()],
                "--temperature", row["temperature_K"], "--output", str(spectrum),
                "--progress", "never"]
        if row.get("segment_ps", ""):
            argv += ["--segment-ps", row["segment_ps"]]
        for column, option in (("groups", "--group"), ("constraints", "--constraints"),
                               ("constraints_per_molecule", "--constraints-per-molecule")):
            for item in row.get(column, "").split(";"):
                if item.strip():
                    name, _, value = item.partition("=")
                    argv += [option, f"{name.strip()}={value.strip()}"]
        liquid = row.get("liquid", "").strip().lower() == "true"
        if liquid:
            argv.append("--molecular")
        assert qcorr_main(argv) == 0, sid
        extra = [t.strip() for t in row.get("temperatures_K", "").split(";") if t.strip()]
        table = out / f"{sid}_harmonic.csv"
        assert qcorr_main(["properties", str(spectrum), "--system", sid, "--quiet",
                           "--temperatures", row["temperature_K"], *extra,
                           "--output", str(table)]) == 0
        tables.append(table)
        if liquid:
            table = out / f"{sid}_2pt.csv"
            argv = ["liquid", str(spectrum), "--system", sid, "--output", str(table)]
            if row.get("symmetry_number", ""):
                argv += ["--symmetry-number", row["symmetry_number"]]
            assert qcorr_main(argv) == 0
            tables.append(table)
        if row.get("ensemble", ""):  # issue 13: corrected observables from the run's energy file
            corrected = out / f"{sid}_corrected.csv"
            argv = ["corrected", str(spectrum), "--system", sid, "--ensemble", row["ensemble"],
                    "--output", str(corrected), "--quiet"]
            if row.get("energy_file", ""):
                argv += ["--energy-file", str(copy / row["energy_file"]), "--energy-format", row["energy_format"]]
            if liquid:
                argv += ["--two-phase-table", str(table)]
            for item in row.get("reference_values", "").split(";"):
                if item.strip():
                    argv += ["--reference", item.strip()]
            assert qcorr_main(argv) == 0
            tables.append(corrected)
    merged = out / "merged.csv"
    assert qcorr_main(["merge", *map(str, tables), "--output", str(merged)]) == 0
    return pd.read_csv(merged)


@pytest.mark.slow
def test_demo_fills_results(demo_run):
    copy, _, seconds = demo_run
    print(f"demo run took {seconds:.0f} s")
    results = copy / "results"
    assert (results / "corrected_properties.csv").stat().st_size > 0
    assert (results / "corrected_properties.json").stat().st_size > 0
    for sid in demo_sheet()["system"]:
        for figure in ("spectrum", "cumulative"):
            path = results / "plots" / f"{sid}_{figure}.svg"
            assert path.read_bytes().lstrip().startswith((b"<?xml", b"<svg")), path
        assert (results / "spectra" / f"{sid}.nc").is_file()
        assert (copy / "logs" / "harmonic_properties" / f"{sid}.log").is_file()
        assert (results / "benchmarks" / "harmonic_properties" / f"{sid}.tsv").is_file()
    # issue 15: a job's log is not a terminal, so the frame loop writes heartbeat lines
    # (one per tenth of the frames, with the rate and the time left) instead of a bar
    logs = sorted((copy / "logs").glob("spectrum*/**/*.log"))
    assert logs
    for log in logs:
        beats = [line for line in log.read_text().splitlines()
                 if re.match(r"qcorr: frames \d+/\d+ \(\d+ %\), [0-9.]+ frames/s, about "
                             r"\d+:\d\d:\d\d left$", line)]
        assert 5 <= len(beats) <= 11, (log, beats)
    # temporary frame-block files are removed once combined
    assert not list((results / "spectrum_blocks").rglob("*.nc")) if (
        results / "spectrum_blocks").exists() else True


@pytest.mark.slow
def test_merged_table_equals_direct_commands(demo_run, tmp_path):
    """Same inputs through the commands directly; blocks vs one job equal to rounding
    (relative 1e-9: sums over segments in another order)."""
    copy, _, _ = demo_run
    workflow_table = pd.read_csv(copy / "results" / "corrected_properties.csv")
    assert_tables_equal(workflow_table, direct_tables(copy, tmp_path / "direct"), rtol=1e-9)


@pytest.mark.slow
def test_merged_table_equals_the_python_api(demo_run):
    """Issue 12: the library gives the workflow's table (CLI, workflow and API agree): each
    demo system through VibrationalSpectrum + harmonic_properties / two_phase_properties
    with the sheet's settings, merged with merge_tables; blocks vs one job to rounding."""
    import MDAnalysis as mda

    import qcorr

    copy, _, _ = demo_run
    workflow_table = pd.read_csv(copy / "results" / "corrected_properties.csv")
    tables = []
    for _, row in demo_sheet().iterrows():
        universe = mda.Universe(str(copy / row["topology"]),
                                *[str(copy / p.strip()) for p in row["trajectory"].split(";")])
        groups = dict(item.strip().split("=", 1) for item in row["groups"].split(";")
                      if item.strip())
        liquid = row["liquid"].strip().lower() == "true"
        temperature = float(row["temperature_K"])
        spectrum = qcorr.VibrationalSpectrum(
            universe, temperature=temperature, groups=groups, segment_ps=float(row["segment_ps"]),
            molecular=liquid).run().results.spectrum
        extra = [float(t) for t in row["temperatures_K"].split(";") if t.strip()]
        tables.append(qcorr.harmonic_properties(spectrum, system=row["system"],
                                                temperatures_K=[temperature, *extra]))
        two_phase = None
        if liquid:
            two_phase = qcorr.two_phase_properties(
                spectrum, system=row["system"], symmetry_number=int(row["symmetry_number"]))
            tables.append(two_phase)
        if row.get("ensemble", ""):  # issue 13: corrected observables from the run's energy file
            energy = qcorr.read_energy_file(copy / row["energy_file"], row["energy_format"])
            tables.append(qcorr.corrected_properties(spectrum, ensemble=row["ensemble"], system=row["system"],
                                                     energy_series=energy, two_phase_table=two_phase))
    api = qcorr.merge_tables(tables)
    assert_tables_equal(workflow_table, api.astype({"note": str}), rtol=1e-9)


@pytest.mark.slow
def test_second_run_does_nothing_and_touch_reruns_only_dependents(demo_run):
    copy, _, _ = demo_run
    again = snakemake(["--cores", "2"], copy)
    assert again.returncode == 0, explain(again)
    assert "Nothing to be done" in again.stdout + again.stderr

    sheet = demo_sheet()
    touched = sheet.iloc[0]
    others = [sid for sid in sheet["system"] if sid != touched["system"]]
    outputs = {p: p.stat().st_mtime_ns for p in (copy / "results").rglob("*") if p.is_file()}
    trajectory = copy / touched["trajectory"].split(";")[0].strip()
    later = time.time() + 2
    os.utime(trajectory, (later, later))
    rerun = snakemake(["--cores", "2"], copy)
    assert rerun.returncode == 0, explain(rerun)
    counts = job_counts(rerun.stdout + rerun.stderr)
    assert counts.get("harmonic_properties") == 1 and counts.get("plots") == 1
    assert counts.get("merge_tables") == 1
    assert counts.get("spectrum", 0) + counts.get("combine_blocks", 0) == 1
    for path, mtime in outputs.items():
        if path.suffix == ".tsv" and "benchmarks" in path.parts:
            continue
        changed = path.stat().st_mtime_ns != mtime
        if any(sid in path.name for sid in others):
            assert not changed, f"{path} was remade although it does not depend on {trajectory}"
        if touched["system"] in path.name and path.parent.name in ("spectra", "plots"):
            assert changed, f"{path} was not remade"


def embedded_pages(report_html: str) -> list[str]:
    """The HTML results a Snakemake report embeds (base64 data URIs), decoded."""
    import base64

    pages = []
    for blob in re.findall(r"data:text/html[^,\"']*;base64,([A-Za-z0-9+/=]+)", report_html):
        pages.append(base64.b64decode(blob).decode("utf-8", errors="replace"))
    return pages


def assert_report_shows_the_table(report: Path, table: pd.DataFrame) -> None:
    """The report embeds the rounded, sortable table with a row of every system."""
    html = report.read_text(encoding="utf-8", errors="replace")
    assert "corrected_properties" in html and "cumulative" in html
    pages = [p for p in embedded_pages(html) if 'class="sortable"' in p]
    assert len(pages) == 1, "the report holds no (or more than one) rounded table"
    rows = re.findall(r"<tr><td>([^<]+)</td><td>([^<]+)</td><td>([^<]+)</td>", pages[0])
    assert {r[0] for r in rows} == set(table["system"])
    assert ("copper_100K", "total", "harmonic") in rows


@pytest.mark.slow
def test_report_builds(demo_run):
    copy, _, _ = demo_run
    result = snakemake(["--report", "results/report.html"], copy)
    assert result.returncode == 0, explain(result)
    table = pd.read_csv(copy / "results" / "corrected_properties.csv")
    assert_report_shows_the_table(copy / "results" / "report.html", table)


@pytest.mark.slow
def test_report_after_the_readme_install_in_a_fresh_environment(tmp_path):
    """Issue 15: right after the README's install command in a new virtual environment
    (nothing else installed), the demo runs and 'snakemake --report' builds a report that
    shows the table's rows (it once stopped: pygments was missing)."""
    import venv

    copy = fresh_copy(tmp_path / "clone")
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(with_pip=True).create(env_dir)
    bindir = env_dir / ("Scripts" if os.name == "nt" else "bin")
    install, run = (part.strip() for part in readme_commands()[0].split("&&"))
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    env["PATH"] = os.pathsep.join([str(bindir), env.get("PATH", "")])
    env["VIRTUAL_ENV"] = str(env_dir)
    steps = [shlex.split(install), shlex.split(run),
             ["snakemake", "--report", "results/report.html"]]
    for argv in steps:
        argv[0] = str(bindir / argv[0])
        result = subprocess.run(argv, cwd=copy, env=env, capture_output=True, text=True,
                                timeout=RUN_TIMEOUT_S, check=False)
        assert result.returncode == 0, explain(result)
    table = pd.read_csv(copy / "results" / "corrected_properties.csv")
    assert_report_shows_the_table(copy / "results" / "report.html", table)


# ----------------------------------------------------------------------------- bad sheets


def sheet_with(copy: Path, rows: list[dict], name: str) -> str:
    path = copy / "config" / name
    pd.DataFrame(rows).to_csv(path, sep="\t", index=False)
    return f"config/{name}"


def copper_row(**changes) -> dict:
    row = demo_sheet().iloc[0]
    base = {"system": row["system"], "topology": row["topology"],
            "trajectory": row["trajectory"], "temperature_K": row["temperature_K"]}
    base.update(changes)
    return base


BAD_SHEETS = {
    "missing file": ([copper_row(trajectory="resources/demo/nowhere.trr")],
                     "row 1", "'trajectory'", "does not exist"),
    "unsafe id": ([copper_row(system="cu;touch INJECTED")], "row 1", "'system'",
                  "not a safe identifier"),
    "temperature not above zero": ([copper_row(system="second"),
                                    copper_row(temperature_K="0")],
                                   "row 2", "'temperature_K'", "> 0"),
    "empty selection": ([copper_row(groups="oxygen=name OW")], "row 1", "'groups'",
                        "matches no atom"),
    "unknown column": ([copper_row(colour="blue")], "header row", "'colour'",
                       "unknown column"),
    "unknown 2PT choice": ([copper_row(hard_sphere_entropy="guess")], "row 1",
                           "'hard_sphere_entropy'", "guess"),
    "energy file without format": ([copper_row(ensemble="nvt", energy_file="resources/demo/README.md")],
                                   "row 1", "'energy_format'", "give the format"),
    "series of one run": ([copper_row(ensemble="nvt", series="alone")], "row 1", "'series'",
                          "has one run"),
    "unknown gas system": ([copper_row(ensemble="npt", gas_system="vapour")], "row 1",
                           "'gas_system'", "not the id of another system"),
    # issue 11: NaN was taken as an empty cell (the default); blocks are checked against the
    # segments of the frame window when the workflow loads (the trajectory is opened)
    "segment_ps nan": ([copper_row(segment_ps="nan")], "row 1", "'segment_ps'", "not a finite number"),
    "more blocks than segments": ([copper_row(segment_ps="2", blocks="1000")], "row 1", "'blocks'",
                                  "1000 blocks but the frame window holds only"),
}


def test_baseline_columns_reach_the_commands(demo_copy, tmp_path):
    """Issue 13: the sheet's ensemble, energy-file, series, pair and reference columns become
    'qcorr corrected', 'qcorr series' and 'qcorr vaporisation' jobs with those options (dry run;
    the files' contents are not read before the jobs run)."""
    energy = "resources/demo/README.md"  # stands in for an energy file: only its existence is checked
    rows = [copper_row(system="cu_a", ensemble="npt", energy_file=energy, energy_format="lammps-log",
                       lammps_units="metal", pressure_bar="1", series="cu_series", gas_system="cu_gas",
                       reference_values="isobaric_heat_capacity=24.44:CRC Handbook",
                       vaporisation_reference="337.4,1.2:made-up source"),
            copper_row(system="cu_b", temperature_K="310", ensemble="npt", energy_file=energy,
                       energy_format="gromacs-edr", series="cu_series", classical_values="energy=-330"),
            copper_row(system="cu_gas", ensemble="nvt", energy_file=energy, energy_format="ase")]
    name = sheet_with(demo_copy, rows, "baselines.tsv")
    try:
        dry = snakemake(["-n", "-p", "--forceall", "--cores", "1", "--config", f"systems={name}"],
                        demo_copy, timeout=300)
    finally:
        (demo_copy / name).unlink()
    assert dry.returncode == 0, explain(dry)
    lines = (dry.stdout + dry.stderr).splitlines()
    corrected = {line.split("--system ")[1].split()[0]: line for line in lines if "qcorr corrected " in line}
    assert set(corrected) == {"cu_a", "cu_b", "cu_gas"}, explain(dry)
    for text in ("--ensemble npt", f"--energy-file {energy}", "--energy-format lammps-log",
                 "--lammps-units metal", "--pressure 1",
                 "--reference 'isobaric_heat_capacity=24.44:CRC Handbook'"):
        assert text in corrected["cu_a"], text
    assert "--classical-value energy=-330" in corrected["cu_b"] and "--lammps-units" not in corrected["cu_b"]
    series = [line for line in lines if "qcorr series " in line]
    assert len(series) == 1 and "cu_a_corrected.csv" in series[0] and "cu_b_corrected.csv" in series[0]
    pair = [line for line in lines if "qcorr vaporisation " in line]
    assert len(pair) == 1 and "--name cu_a+cu_gas" in pair[0] and "--reference '337.4,1.2:made-up source'" in pair[0]


def test_liquid_choices_reach_qcorr_liquid(demo_copy, tmp_path):
    """The sheet's 2PT columns (issue 6 item 4) become 'qcorr liquid' options; defaults are
    the published forms (Lin, Blanco, Goddard 2003).  A liquid may be split into frame
    blocks: each block job gets --molecular, and 'qcorr combine' joins them."""
    sheet = demo_sheet()
    water = sheet[sheet["liquid"].astype(str).str.lower() == "true"].iloc[0].to_dict()
    chosen = dict(water, system="water_choices", hard_sphere_entropy="constant-volume",
                  rotational_fluidicity="same-as-translation", diffusion_from="msd", blocks=2)
    rows = [{k: ("" if pd.isna(v) else v) for k, v in row.items()} for row in (water, chosen)]
    name = sheet_with(demo_copy, rows, "liquid_choices.tsv")
    try:
        dry = snakemake(["-n", "-p", "--forceall", "--cores", "1", "--config", f"systems={name}"],
                        demo_copy, timeout=300)
    finally:
        (demo_copy / name).unlink()
    assert dry.returncode == 0, explain(dry)
    commands = [line for line in (dry.stdout + dry.stderr).splitlines()
                if "qcorr liquid " in line]
    assert len(commands) == 2, explain(dry)
    default = next(c for c in commands if f"--system {water['system']} " in c)
    custom = next(c for c in commands if "--system water_choices " in c)
    for text in ("--hard-sphere-entropy published", "--rotational-fluidicity from-rotation",
                 "--diffusion-from auto"):
        assert text in default
    for text in ("--hard-sphere-entropy constant-volume",
                 "--rotational-fluidicity same-as-translation", "--diffusion-from msd"):
        assert text in custom
    lines = (dry.stdout + dry.stderr).splitlines()
    block_jobs = [line for line in lines if "qcorr spectrum " in line and "--block " in line]
    assert len(block_jobs) == 2 and all("--molecular" in line for line in block_jobs), explain(dry)
    assert {line.split("--block ")[1].split()[0] for line in block_jobs} == {"1-of-2", "2-of-2"}
    assert any("qcorr combine " in line and "water_choices" in line for line in lines), explain(dry)


@pytest.mark.slow
@pytest.mark.parametrize("case", list(BAD_SHEETS))
def test_bad_sheet_fails_before_any_job(demo_copy, tmp_path, case):
    rows, row_text, column_text, reason = BAD_SHEETS[case]
    copy = fresh_copy(tmp_path / "copy") if (demo_copy / "results").exists() else demo_copy
    sheet = sheet_with(copy, rows, f"bad_{case.replace(' ', '_')}.tsv")
    result = snakemake(["--cores", "1", "--config", f"systems={sheet}"], copy, timeout=300)
    assert result.returncode != 0
    message = [line for line in (result.stdout + result.stderr).splitlines()
               if line.startswith("systems sheet")]
    assert message, explain(result)
    assert row_text in message[0] and column_text in message[0] and reason in message[0]
    assert sheet in message[0]
    assert not (copy / "results").exists() and not (copy / "logs").exists()
    assert not list(copy.rglob("INJECTED*"))


@pytest.mark.slow
def test_sheet_values_cannot_inject_shell_commands(tmp_path):
    """Paths and selections full of shell syntax reach qcorr as literal arguments."""
    copy = fresh_copy(tmp_path / "copy")
    row = demo_sheet().iloc[0]
    evil_dir = copy / "evil $(touch INJECTED_A) `touch INJECTED_B`"
    evil_dir.mkdir()
    topology = evil_dir / "top;touch INJECTED_C;.pdb"
    trajectory = evil_dir / "traj'$(touch INJECTED_D)'.trr"
    shutil.copy(copy / row["topology"], topology)
    shutil.copy(copy / row["trajectory"].split(";")[0], trajectory)
    rows = [
        copper_row(system="evil_paths", topology=str(topology.relative_to(copy)),
                   trajectory=str(trajectory.relative_to(copy)), segment_ps=row["segment_ps"]),
        copper_row(system="evil_selection", groups="all=all' && touch INJECTED_E | $(touch INJECTED_F) `touch INJECTED_G` '",
                   segment_ps=row["segment_ps"]),
    ]
    sheet = sheet_with(copy, rows, "evil.tsv")
    config = copy / "config" / "evil.yaml"
    config.write_text(f"systems: {sheet}\nspectrum:\n  check_selections: false\n")
    result = snakemake(["results/spectra/evil_paths.nc", "results/spectra/evil_selection.nc",
                        "--cores", "2", "--keep-going", "--configfile", str(config)], copy)
    assert not list(copy.rglob("INJECTED*")), explain(result)
    assert (copy / "results" / "spectra" / "evil_paths.nc").is_file(), explain(result)
    # the selection arrived verbatim and was refused by qcorr (not run by a shell)
    log = (copy / "logs" / "spectrum" / "evil_selection.log").read_text()
    assert "qcorr: error:" in log
    assert not (copy / "results" / "spectra" / "evil_selection.nc").exists()


# ----------------------------------------------------------------------------- as a module


@pytest.mark.slow
def test_use_as_module_from_a_host_workflow(tmp_path):
    host = tmp_path / "host"
    row = demo_sheet().iloc[0]
    data = host / "data"
    data.mkdir(parents=True)
    shutil.copy(REPO / row["topology"], data / "topology.pdb")
    shutil.copy(REPO / row["trajectory"].split(";")[0], data / "trajectory.trr")
    (host / "config").mkdir()
    (host / "config" / "crystal.tsv").write_text(
        "system\ttopology\ttrajectory\ttemperature_K\tsegment_ps\n"
        f"crystal\tdata/topology.pdb\tdata/trajectory.trr\t{row['temperature_K']}\t"
        f"{row['segment_ps']}\n")
    (host / "config" / "config.yaml").write_text(
        "qcorr:\n  systems: config/crystal.tsv\n  plots:\n    format: png\n")
    (host / "Snakefile").write_text(f'''
configfile: "config/config.yaml"


# the host's own target, its first rule (Snakemake's default target), with no
# default_target directive: the module must not take it over (issue 15)
rule host_results:
    input:
        "results/qcorr/plots/crystal_spectrum.png",
        "results/row_count.txt",


module qcorr_workflow:
    snakefile:
        "{REPO / "workflow" / "Snakefile"}"
    config:
        config["qcorr"]
    pathvars:
        results="results/qcorr",
        logs="logs/qcorr",
        benchmarks="benchmarks/qcorr",


use rule * from qcorr_workflow as qcorr_*


rule count_rows:
    input:
        rules.qcorr_merge_tables.output.table,
    output:
        "results/row_count.txt",
    run:
        import pandas

        with open(output[0], "w") as handle:
            handle.write(str(len(pandas.read_csv(input[0]))))
''')
    result = snakemake(["--cores", "2"], host)
    assert result.returncode == 0, explain(result)
    # issue 15: the module never becomes the host's default target, and says nothing
    assert (host / "results" / "row_count.txt").is_file(), explain(result)
    assert "warning" not in result.stderr.lower() and "localrules" not in result.stderr, \
        explain(result)
    table = pd.read_csv(host / "results" / "qcorr" / "corrected_properties.csv")
    assert set(table["system"]) == {"crystal"}
    assert int((host / "results" / "row_count.txt").read_text()) == len(table)
    assert (host / "results" / "qcorr" / "plots" / "crystal_spectrum.png").is_file()
    assert (host / "logs" / "qcorr" / "spectrum" / "crystal.log").is_file()
    assert (host / "benchmarks" / "qcorr" / "spectrum" / "crystal.tsv").is_file()


# ----------------------------------------------------------------------------- deployment


@pytest.mark.slow
def test_deployed_with_snakedeploy_gives_the_same_table(demo_run, tmp_path):
    """Issue 15: a user sets the workflow up in a directory of their own the Snakemake way
    (``snakedeploy deploy-workflow``: the workflow becomes a module, config/ is copied) and
    gets the same table as the repository's own run.

    The clone is local here (no network), and snakedeploy's local provider writes the
    module's path relative to the clone; the test gives the clone's absolute path in its
    place, which is what ``github("OWNER/qcorr", path="workflow/Snakefile", tag=...)``
    resolves to for a published release.
    """
    snakedeploy = shutil.which("snakedeploy")
    if snakedeploy is None:
        pytest.fail("snakedeploy is not installed (it is in the test extras)")
    copy, _, _ = demo_run
    clone = fresh_copy(tmp_path / "qcorr")
    user = tmp_path / "my_project"
    result = subprocess.run([snakedeploy, "deploy-workflow", str(clone), str(user),
                             "--tag", "v0.1.0"],
                            capture_output=True, text=True, timeout=300, check=False)
    assert result.returncode == 0, explain(result)
    assert (user / "config" / "config.yaml").is_file()
    snakefile = user / "workflow" / "Snakefile"
    text = snakefile.read_text(encoding="utf-8")
    assert re.search(r"^module \w+:", text, flags=re.MULTILINE) and "use rule * from" in text
    text, replaced = re.subn(r'snakefile:\s*\n\s*"workflow/Snakefile"',
                             f'snakefile:\n        "{clone / "workflow" / "Snakefile"}"', text)
    assert replaced == 1, text
    snakefile.write_text(text, encoding="utf-8")
    # the user's own sheet: the demo crystal at 100 K, its files given by absolute path
    sheet = demo_sheet()
    sheet = sheet[sheet["system"] == "copper_100K"].copy()
    for column in ("topology", "trajectory"):
        sheet[column] = [";".join(str(clone / p.strip()) for p in cell.split(";"))
                         for cell in sheet[column]]
    sheet.to_csv(user / "config" / "systems.tsv", sep="\t", index=False)
    result = snakemake(["--cores", "2"], user)
    assert result.returncode == 0, explain(result)
    deployed = pd.read_csv(user / "results" / "corrected_properties.csv")
    ours = pd.read_csv(copy / "results" / "corrected_properties.csv")
    ours = ours[ours["system"] == "copper_100K"]
    assert_tables_equal(deployed, ours, rtol=1e-12)


def test_license_and_citation_file():
    """Issue 15: the LICENSE pyproject names, and a CITATION.cff (Citation File Format
    1.2.0) that names the methods to cite."""
    import tomllib

    import yaml

    pyproject = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))
    assert pyproject["project"]["license"]["text"] == "MIT"
    assert (REPO / "LICENSE").read_text(encoding="utf-8").startswith("MIT License")
    citation = yaml.safe_load((REPO / "CITATION.cff").read_text(encoding="utf-8"))
    assert citation["cff-version"] == "1.2.0"
    for key in ("message", "title", "authors", "license", "version", "references"):
        assert citation.get(key), key
    assert citation["version"] == pyproject["project"]["version"]
    assert citation["license"] == "MIT"
    cited = {(ref["journal"], ref["volume"], ref["start"]) for ref in citation["references"]
             if "journal" in ref}
    assert ("The Journal of Chemical Physics", 79, 2375) in cited  # Berens et al. 1983
    assert ("The Journal of Chemical Physics", 119, 11792) in cited  # Lin et al. 2003
    assert ("The Journal of Physical Chemistry B", 114, 8191) in cited  # Lin et al. 2010
