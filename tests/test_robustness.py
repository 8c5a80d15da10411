"""The robustness catalogue: every bad input of tests/robustness_cases.py and
tests/robustness_sheet_cases.py, run and classified.

Each case is run (in this process, or as a separate process where a crash could be a
signal) and classified:

* **clear**: a non-zero exit with exactly one ``qcorr: error:`` line (for the systems
  sheet: one ``systems sheet ...`` message) that holds every fragment the case expects
  (the file, option, row/column or frame at fault, and what to do), no other output on
  stderr but qcorr's own ``qcorr:`` lines, and nothing left behind or replaced: every
  file and directory under the inputs, the case's work directory and the mounts is as it
  was (type, size, modification time, inode, link target);
* **unclear**: a non-zero exit, but the message is missing, repeated, lacks an expected
  fragment, comes with other output, or something was left behind or replaced;
* **silent**: exit status 0 (a result was written or printed for an input that cannot
  give a trustworthy one);
* **crash**: an exception escaped (a traceback) or the process died of a signal.

Every case must be clear; cases whose fix is pending on another branch are expected
failures (strict).  ``QCORR_WRITE_ROBUSTNESS=1 python -m pytest tests/test_robustness.py``
writes docs/robustness.md; otherwise the last test checks that the committed page is
what this run gives.  The full-disk and read-only cases need tmpfs mounts (root); without
them they are skipped, or fail when the environment variable CI is set.
"""

from __future__ import annotations

import os
import re
import signal
import stat
import subprocess
import sys
import traceback
import warnings
from dataclasses import dataclass
from pathlib import Path

import pytest
import robustness_inputs
from robustness_cases import COMMAND_CASES, Case, Paths
from robustness_sheet_cases import SHEET_CASES

REPO = Path(__file__).resolve().parents[1]
DOCUMENT = REPO / "docs" / "robustness.md"
SCHEMA = REPO / "workflow" / "schemas" / "systems.schema.yaml"
CASES = [*COMMAND_CASES, *SHEET_CASES]
BY_NAME = {case.name: case for case in CASES}
CLASSES = ("clear", "unclear", "silent", "crash")
#: MDAnalysis' offset caches, written beside trajectories it reads (not qcorr's output)
_CACHE = re.compile(r"^\..*_offsets\.(npz|lock)$")


def ci_is_set() -> bool:
    """True when the CI environment variable is set (CI=true in CI; see tests/test_slurm.py)."""
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")


@dataclass
class Outcome:
    """What a case did: exit status, output, a crash, and what changed on disk."""

    exit: int | None
    stdout: str
    stderr: str
    crash: str
    changes: list[str]


@dataclass
class Row:
    """One line of the catalogue."""

    case: Case
    kind: str
    reason: str
    outcome: Outcome


RESULTS: dict[str, Row] = {}


@pytest.fixture(scope="module")
def catalogue_root(tmp_path_factory):
    """Inputs under ``in/``, mounts ``full/``, ``nearly_full/``, ``read_only/`` (or why not)."""
    root = tmp_path_factory.mktemp("robustness")
    robustness_inputs.make_inputs(root)
    problem = robustness_inputs.mount_filesystems(root)
    yield root, problem
    if problem is None:
        robustness_inputs.unmount_filesystems(root)


def unavailable(reason: str) -> None:
    """Skip (developer machine) or fail (CI set) a case that cannot be made here."""
    if ci_is_set():
        pytest.fail(f"CI is set but {reason}")
    pytest.skip(f"{reason} (set CI=true to make this a failure)")


# ----------------------------------------------------------------------------- running


def snapshot(*folders: Path) -> dict[str, tuple]:
    """Every entry under *folders* (not following links): type, size, mtime, inode, link target."""
    entries: dict[str, tuple] = {}
    for folder in folders:
        if not os.path.lexists(folder):
            continue
        for directory, names, files in os.walk(folder):
            for name in [*names, *files]:
                path = Path(directory) / name
                if _CACHE.match(name):
                    continue
                info = os.lstat(path)
                target = os.readlink(path) if stat.S_ISLNK(info.st_mode) else ""
                entries[str(path)] = (stat.S_IFMT(info.st_mode), info.st_size, info.st_mtime_ns, info.st_ino, target)
    return entries


def changes(before: dict, after: dict, root: Path) -> list[str]:
    """What appeared, disappeared or changed, as paths relative to *root*."""
    def rel(path: str) -> str:
        return os.path.relpath(path, root)
    out = [f"new {rel(p)}" for p in sorted(after.keys() - before.keys())]
    out += [f"gone {rel(p)}" for p in sorted(before.keys() - after.keys())]
    out += [f"changed {rel(p)}" for p in sorted(before.keys() & after.keys()) if before[p] != after[p]]
    return out


def run_in_process(argv: list[str], capfd) -> tuple[int | None, str, str, str]:
    """``qcorr.cli.main(argv)`` here; (exit, stdout, stderr, crash)."""
    from qcorr.cli import main

    capfd.readouterr()
    saved = warnings.showwarning
    crash = ""
    code: int | None = None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("always")
            code = main(argv)
    except SystemExit as err:  # --help and --version only
        code = err.code if isinstance(err.code, int) else 1
    except BaseException as err:  # noqa: BLE001 -- a crash is what is being looked for
        crash = f"traceback: {type(err).__name__}: {str(err).splitlines()[0] if str(err) else ''}"
        traceback.print_exc()
    finally:
        warnings.showwarning = saved
    out, err = capfd.readouterr()
    return code, out, err, crash


def run_in_subprocess(argv: list[str]) -> tuple[int | None, str, str, str]:
    """``python -c 'qcorr.cli.main'`` as its own process; a signal is a crash."""
    probe = "import sys\nfrom qcorr.cli import main\nsys.exit(main(sys.argv[1:]))\n"
    done = subprocess.run([sys.executable, "-c", probe, *argv], capture_output=True, text=True, timeout=900,
                          check=False)
    crash = ""
    if done.returncode < 0:
        crash = f"killed by {signal.Signals(-done.returncode).name}"
    elif "Traceback (most recent call last)" in done.stderr:
        crash = "traceback: " + done.stderr.strip().splitlines()[-1]
    return done.returncode, done.stdout, done.stderr, crash


def run_sheet(text: str | bytes, paths: Paths) -> tuple[int | None, str, str, str]:
    """Read a systems sheet as the workflow does when it loads (Snakemake exits 1 on a bad one)."""
    from snakemake.utils import validate

    from qcorr.systems_sheet import SheetError, read_systems_sheet

    sheet = paths.w("systems.tsv")
    sheet.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
    try:
        read_systems_sheet(sheet, SCHEMA, validate)
    except SheetError as err:
        return 1, "", f"{err}\n", ""
    except BaseException as err:  # noqa: BLE001
        return 1, "", traceback.format_exc(), f"traceback: {type(err).__name__}: {err}".splitlines()[0]
    return 0, "", "", ""


def run_case(case: Case, paths: Paths, capfd) -> Outcome:
    """Prepare, run and watch one case."""
    root = paths.root
    watched = [root / "in", paths.work, *(root / m for m in robustness_inputs.MOUNTS)]
    paths.work.mkdir()
    if case.setup is not None:
        try:
            case.setup(paths)
        except PermissionError as err:
            unavailable(f"the case's input cannot be made here ({err})")
    before = snapshot(*watched)
    argv = case.argv(paths)
    if case.sheet:
        code, out, err, crash = run_sheet(argv, paths)
        before.pop(str(paths.w("systems.tsv")), None)
        after = snapshot(*watched)
        after.pop(str(paths.w("systems.tsv")), None)
    else:
        argv = [os.fspath(a) for a in argv]
        runner = run_in_subprocess if case.subprocess else (lambda a: run_in_process(a, capfd))
        code, out, err, crash = runner(argv)
        after = snapshot(*watched)
    return Outcome(code, out, err, crash, changes(before, after, root))


def error_lines(case: Case, stderr: str) -> list[str]:
    prefixes = ("systems sheet", "config key 'systems'") if case.sheet else ("qcorr: error:",)
    return [line for line in stderr.splitlines() if line.startswith(prefixes)]


def classify(case: Case, outcome: Outcome) -> tuple[str, str]:
    """(class, why) of an outcome; see the module docstring."""
    if outcome.crash:
        return "crash", outcome.crash
    if outcome.exit == 0:
        return "silent", "exit status 0" + (f"; wrote {', '.join(outcome.changes)}" if outcome.changes else "")
    problems = []
    errors = error_lines(case, outcome.stderr)
    if len(errors) != 1:
        problems.append(f"{len(errors)} error lines")
    else:
        missing = [fragment for fragment in case.expect if fragment not in errors[0]]
        if missing:
            problems.append(f"does not say {', '.join(map(repr, missing))}")
    noise = [line for line in outcome.stderr.splitlines()
             if line.strip() and not line.startswith(("qcorr:", "systems sheet", "config key"))]
    if noise and not case.sheet:
        problems.append(f"other output: {noise[0].strip()[:100]}")
    if outcome.changes:
        problems.append("left behind or replaced: " + ", ".join(outcome.changes))
    return ("unclear", "; ".join(problems)) if problems else ("clear", "")


def test_the_classes_are_told_apart(tmp_path):
    """The classifier and the snapshot are the catalogue's checks; each class must be reachable."""
    case = Case("spectrum-example", "example", lambda p: [], ("--output", "directory"))
    line = "qcorr: error: --output 'x' is a directory; give a file name"

    def kind(exit=2, stderr=line + "\n", crash="", changed=()):
        return classify(case, Outcome(exit, "", stderr, crash, list(changed)))[0]

    assert kind() == "clear"
    assert kind(stderr="qcorr: note: read 3 files\n" + line + "\n") == "clear"  # qcorr's own lines
    assert kind(exit=0) == "silent"
    assert kind(crash="traceback: OSError: x") == "crash"
    assert kind(stderr="qcorr: error: --output 'x' cannot be written\n") == "unclear"  # names no reason
    assert kind(stderr=line + "\n" + line + "\n") == "unclear"  # two error lines
    assert kind(stderr="usage: qcorr ...\n" + line + "\n") == "unclear"  # other output
    assert kind(stderr="") == "unclear"  # no message
    assert kind(changed=["new work/.out.nc.x1y2z3ab.part"]) == "unclear"  # left behind
    # a symbolic link replaced by a regular file of the same name is seen (type and inode)
    target = tmp_path / "kept.txt"
    target.write_text("kept")
    (tmp_path / "out.nc").symlink_to(target)
    before = snapshot(tmp_path)
    (tmp_path / "new").write_text("x")
    os.replace(tmp_path / "new", tmp_path / "out.nc")
    assert changes(before, snapshot(tmp_path), tmp_path) == ["changed out.nc"]


def _param(case: Case):
    marks = [pytest.mark.xfail(strict=True, reason=case.pending)] if case.pending else []
    return pytest.param(case.name, marks=marks, id=case.name)


def test_case_names_are_unique_and_commands_known():
    assert len(BY_NAME) == len(CASES)
    assert {case.command for case in CASES} <= {"qcorr", "spectrum", "combine", "properties", "liquid", "corrected",
                                                "merge", "plot", "sheet"}


@pytest.mark.parametrize("name", [_param(case) for case in CASES])
def test_bad_input_is_refused_clearly(name, catalogue_root, capfd):
    root, mount_problem = catalogue_root
    case = BY_NAME[name]
    if case.needs_mounts and mount_problem:
        unavailable(f"the full-disk and read-only file systems cannot be mounted: {mount_problem}")
    outcome = run_case(case, Paths(root, root / "work" / name), capfd)
    kind, reason = classify(case, outcome)
    RESULTS[name] = Row(case, kind, reason, outcome)
    assert kind == "clear", f"{kind}: {reason}\n--- stderr\n{outcome.stderr[-3000:]}"


# ----------------------------------------------------------------------------- the document


def test_document_is_current(catalogue_root):
    """docs/robustness.md is what this run gives (written instead with QCORR_WRITE_ROBUSTNESS=1)."""
    root, _ = catalogue_root
    missing = [case.name for case in CASES if case.name not in RESULTS]
    if missing:
        pytest.skip(f"{len(missing)} cases did not run in this session (e.g. {missing[0]}); the document needs all")
    text = robustness_document([RESULTS[case.name] for case in CASES], root)
    if os.environ.get("QCORR_WRITE_ROBUSTNESS"):
        DOCUMENT.write_text(text, encoding="utf-8")
        return
    assert DOCUMENT.is_file(), "docs/robustness.md is missing: QCORR_WRITE_ROBUSTNESS=1 python -m pytest " \
                               "tests/test_robustness.py"
    committed = without_messages(DOCUMENT.read_text(encoding="utf-8"))
    assert committed == without_messages(text), (
        "docs/robustness.md is not what the catalogue gives now (rows, classes, exit statuses or "
        "leftovers differ); regenerate it with QCORR_WRITE_ROBUSTNESS=1 python -m pytest "
        "tests/test_robustness.py")


def without_messages(text: str) -> list[str]:
    """The page without the message column: messages quote library errors (HDF5, MDAnalysis)
    whose wording and byte counts change with the installed versions; everything else of a
    row (case, input, command, exit status, what was left behind, class) must match."""
    lines = []
    for line in text.splitlines():
        if line.startswith("| `"):
            cells = re.split(r"(?<!\\)\|", line)
            line = "|".join(cells[:5] + cells[6:])
        lines.append(line)
    return lines


def robustness_document(rows: list[Row], root: Path) -> str:
    from robustness_document import render

    return render(rows, root)


# ----------------------------------------------------------------------------- defined behaviour


@pytest.mark.parametrize("command, spectrum", [("properties", "one_segment.nc"),
                                               ("liquid", "one_segment_molecular.nc")])
def test_one_segment_spectrum_gives_empty_error_bars_with_a_note(command, spectrum, catalogue_root, tmp_path,
                                                                run_qcorr):
    """Issue 11: a spectrum of one segment has no standard error; every row with a value says so
    and leaves the standard-error cells of its quantum value and correction empty (an exact
    classical value, e.g. a zero-point energy of 0, keeps its standard error 0)."""
    import pandas as pd

    root, _ = catalogue_root
    table = tmp_path / "one.csv"
    code, _, err = run_qcorr(command, root / "in" / spectrum, "--quiet", "--output", table)
    assert code == 0, err
    rows = pd.read_csv(table, keep_default_na=False, na_values=[""])
    valued = rows[rows["quantum"].notna() | rows["correction"].notna()]
    assert len(valued) >= 5
    assert valued["quantum_se"].isna().all() and valued["correction_se"].isna().all()
    assert valued["note"].str.contains("one segment: no standard error").all()
    exact = valued[valued["classical_se"].notna()]
    assert (exact["classical_se"] == 0).all()
    assert "NaN" not in (table.with_suffix(".json")).read_text()  # JSON has no NaN (RFC 8259)
