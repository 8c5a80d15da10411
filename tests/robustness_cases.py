"""The bad inputs of the robustness catalogue (run by tests/test_robustness.py).

Adding a row: append a :class:`Case` to the list of its command below (sheet rows:
tests/robustness_sheet_cases.py).  A case names the
bad input, builds the command line from the made inputs (:mod:`robustness_inputs`: files
under ``in/``, an empty ``work/<case>/`` for outputs, the mounts ``full/``,
``nearly_full/``, ``read_only/``), may prepare the work directory (``setup``), and lists
the fragments its one error line must contain: the file, option, sheet cell or frame at
fault, and the words that say what to do.  Then regenerate docs/robustness.md:

    QCORR_WRITE_ROBUSTNESS=1 python -m pytest tests/test_robustness.py

A case whose fix is still pending elsewhere carries ``pending="why"``; its test is an
expected failure (strict: once the fix lands it fails until ``pending`` is removed).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from robustness_inputs import SPECTRUM_SETTINGS


@dataclass(frozen=True)
class Paths:
    """Where a case's inputs and outputs are."""

    root: Path
    work: Path

    def i(self, name: str) -> Path:
        """An input file."""
        return self.root / "in" / name

    def w(self, name: str) -> Path:
        """A path in the case's own work directory."""
        return self.work / name

    def m(self, mount: str, name: str) -> Path:
        """A path on one of the mounts (full, nearly_full, read_only)."""
        return self.root / mount / self.work.name / name


@dataclass(frozen=True)
class Case:
    """One bad input: how it is made, the command line, what its error line must name."""

    name: str
    what: str
    argv: Callable[[Paths], list]
    expect: tuple[str, ...] = ()
    setup: Callable[[Paths], None] | None = None
    needs_mounts: bool = False
    subprocess: bool = False  # run as a separate process (a crash may be a signal)
    pending: str = ""
    sheet: bool = False  # argv gives the sheet's text; read by qcorr.systems_sheet

    @property
    def command(self) -> str:
        return "sheet" if self.sheet else self.name.split("-", 1)[0]


# ----------------------------------------------------------------------------- builders


def spectrum(p: Paths, *extra, trajectory="dimers.trr", topology="dimers.gro", output="out.nc",
             settings=tuple(SPECTRUM_SETTINGS)) -> list:
    trajectories = trajectory if isinstance(trajectory, tuple) else (trajectory,)
    out = output if isinstance(output, Path) else p.w(output)
    return ["spectrum", "--topology", p.i(topology), "--trajectory", *(p.i(t) for t in trajectories),
            *settings, *extra, "--output", out]


def without(option: str, settings=tuple(SPECTRUM_SETTINGS)) -> tuple:
    """The spectrum settings without *option* and its value."""
    items = list(settings)
    at = items.index(option)
    return tuple(items[:at] + items[at + 2:])


def properties(p: Paths, *extra, spectrum="dimers.nc", output="table.csv") -> list:
    out = output if isinstance(output, Path) else p.w(output)
    return ["properties", p.i(spectrum), "--quiet", *extra, "--output", out]


def corrected(p: Paths, *extra, spectrum="dimers.nc", output="table.csv") -> list:
    """qcorr corrected of an NVT run with a classical heat capacity typed in (no energy file)."""
    out = output if isinstance(output, Path) else p.w(output)
    return ["corrected", p.i(spectrum), "--quiet", "--ensemble", "nvt", "--classical-value", "heat_capacity=50",
            *extra, "--output", out]


def liquid(p: Paths, *extra, spectrum="molecular.nc", output="table.csv") -> list:
    out = output if isinstance(output, Path) else p.w(output)
    return ["liquid", p.i(spectrum), "--quiet", *extra, "--output", out]


def merge(p: Paths, *tables, extra=(), output="all.csv") -> list:
    out = output if isinstance(output, Path) else p.w(output)
    return ["merge", *(p.i(t) for t in tables or ("dimers.csv", "again.csv")), *extra, "--output", out]


def plot(p: Paths, *extra, spectrum="dimers.nc", figure="spectrum.svg") -> list:
    out = figure if isinstance(figure, Path) else p.w(figure)
    return ["plot", p.i(spectrum), *extra, "--spectrum-figure", out]


def combine(p: Paths, *blocks, output="combined.nc") -> list:
    out = output if isinstance(output, Path) else p.w(output)
    return ["combine", *(p.i(b) for b in blocks), "--output", out]


def directory(name: str) -> Callable[[Paths], None]:
    return lambda p: p.w(name).mkdir()


def symlink(name: str, target: str = "kept.txt") -> Callable[[Paths], None]:
    def make(p: Paths) -> None:
        (p.w(target)).write_text("the user's file\n")
        p.w(name).symlink_to(p.w(target))
    return make


def dangling_symlink(name: str) -> Callable[[Paths], None]:
    return lambda p: p.w(name).symlink_to(p.w("nowhere"))


def fifo(name: str) -> Callable[[Paths], None]:
    import os

    return lambda p: os.mkfifo(p.w(name))


def device(name: str) -> Callable[[Paths], None]:
    """A character device like /dev/null (major 1, minor 3) made with mknod (root)."""
    import os
    import stat

    return lambda p: os.mknod(p.w(name), 0o666 | stat.S_IFCHR, os.makedev(1, 3))


def plain_file(name: str) -> Callable[[Paths], None]:
    return lambda p: p.w(name).write_text("a file, not a directory\n")


def output_cases(command: str, build: Callable[..., list], name: str, option: str = "--output") -> list[Case]:
    """The output-path cases every writing command shares (*build(p, output)*)."""
    cases = [
        Case(f"{command}-output-is-directory", "the output path is an existing directory",
             lambda p: build(p, p.w(name)), ("--output", name, "is a directory"), setup=directory(name)),
        Case(f"{command}-output-is-symlink", "the output path is a symbolic link to the user's file",
             lambda p: build(p, p.w(name)), ("--output", "symbolic link", "give the name of a new file"),
             setup=symlink(name)),
        Case(f"{command}-output-is-dangling-symlink", "the output path is a symbolic link to nothing",
             lambda p: build(p, p.w(name)), ("--output", "symbolic link"), setup=dangling_symlink(name)),
        Case(f"{command}-output-is-fifo", "the output path is a named pipe",
             lambda p: build(p, p.w(name)), ("--output", "FIFO"), setup=fifo(name)),
        Case(f"{command}-output-is-device", "the output path is a device node (like /dev/null)",
             lambda p: build(p, p.w(name)), ("--output", "device node"), setup=device(name)),
        Case(f"{command}-output-under-a-file", "a directory of the output path is a regular file",
             lambda p: build(p, p.w("afile") / name), ("--output", "not a directory"), setup=plain_file("afile")),
        Case(f"{command}-output-name-too-long", "the output file name is longer than the file system takes",
             lambda p: build(p, p.w("x" * 250 + ".out")), ("--output", "too long", "shorter")),
        Case(f"{command}-disk-full", "the output directory is on a full file system",
             lambda p: build(p, p.m("full", name)), ("--output", "No space left", "ENOSPC"), needs_mounts=True),
        Case(f"{command}-disk-nearly-full", "the output fits the free space check but not the disk",
             lambda p: build(p, p.m("nearly_full", name)), ("No space left", "ENOSPC", Path(name).stem),
             needs_mounts=True, subprocess=command == "spectrum"),
        Case(f"{command}-read-only", "the output directory is on a read-only file system",
             lambda p: build(p, p.m("read_only", name)), ("--output", "Read-only file system", "EROFS"),
             needs_mounts=True),
    ]
    return [Case(c.name, c.what, c.argv, tuple(option if f == "--output" else f for f in c.expect), c.setup,
                 c.needs_mounts, c.subprocess) for c in cases]


COMMAND_CASES: list[Case] = []


def S(*extra, **options) -> Callable[[Paths], list]:
    """A spectrum command line with *extra* options (see :func:`spectrum`)."""
    return lambda p: spectrum(p, *extra, **options)


def settings_with(option: str, value: str) -> tuple:
    """The spectrum settings with *option* set to *value*."""
    return (*without(option), option, value)


# ----------------------------------------------------------------------------- qcorr (no command)

COMMAND_CASES += [
    Case("qcorr-no-command", "no command at all", lambda p: [], ("COMMAND", "--help")),
    Case("qcorr-unknown-command", "a command qcorr does not have", lambda p: ["spectra"], ("'spectra'", "choose from")),
]

# ----------------------------------------------------------------------------- qcorr spectrum: options

COMMAND_CASES += [
    Case("spectrum-missing-output", "no --output", lambda p: spectrum(p)[:-2], ("--output", "required")),
    Case("spectrum-abbreviated-option", "an abbreviated option (--temp for --temperature)",
         S(settings=("--temp", "300", *without("--temperature")[0:])), ("--temp", "not abbreviated", "--temperature")),
    Case("spectrum-abbreviated-output", "--outp for --output (argparse would take it)",
         lambda p: spectrum(p)[:-2] + ["--outp", p.w("out.nc")], ("--output",)),
    Case("spectrum-unknown-option", "an option qcorr does not have", S("--segment", "1"), ("--segment", "unknown option")),
    Case("spectrum-stray-argument", "a stray word on the command line", S("extra"), ("extra",)),
    Case("spectrum-temperature-text", "--temperature abc", S(settings=settings_with("--temperature", "abc")),
         ("--temperature", "'abc'", "not a number")),
    Case("spectrum-temperature-nan", "--temperature nan", S(settings=settings_with("--temperature", "nan")),
         ("--temperature", "not a finite number")),
    Case("spectrum-temperature-inf", "--temperature inf", S(settings=settings_with("--temperature", "inf")),
         ("--temperature", "not a finite number")),
    Case("spectrum-temperature-zero", "--temperature 0", S(settings=settings_with("--temperature", "0")),
         ("--temperature 0", "positive")),
    Case("spectrum-temperature-negative", "--temperature -5", S(settings=settings_with("--temperature", "-5")),
         ("--temperature -5", "positive")),
    Case("spectrum-temperature-tiny", "--temperature 1e-300 (the velocities say 300 K)",
         S(settings=settings_with("--temperature", "1e-300")), ("--temperature 1e-300", "not representable")),
    Case("spectrum-temperature-huge", "--temperature 1e300", S(settings=settings_with("--temperature", "1e300")),
         ("--temperature 1e+300", "kinetic temperature")),
    Case("spectrum-temperature-celsius", "--temperature 27 (degrees Celsius for 300 K)",
         S(settings=settings_with("--temperature", "27")), ("--temperature 27", "in K")),
    Case("spectrum-segment-huge", "--segment-ps 1e308", S(settings=settings_with("--segment-ps", "1e308")),
         ("--segment-ps", "more than any trajectory")),
    Case("spectrum-segment-overflow", "--segment-ps 1e999 (not a double)",
         S(settings=settings_with("--segment-ps", "1e999")), ("--segment-ps", "not a finite number")),
    Case("spectrum-segment-zero", "--segment-ps 0", S(settings=settings_with("--segment-ps", "0")), ("--segment-ps", "positive")),
    Case("spectrum-segment-negative", "--segment-ps -1", S(settings=settings_with("--segment-ps", "-1")),
         ("--segment-ps", "positive")),
    Case("spectrum-segment-nan", "--segment-ps nan", S(settings=settings_with("--segment-ps", "nan")),
         ("--segment-ps", "not a finite number")),
    Case("spectrum-segment-tiny", "--segment-ps 1e-9 (shorter than one frame)",
         S(settings=settings_with("--segment-ps", "1e-9")), ("--segment-ps 1e-09", "at least 4 frames")),
    Case("spectrum-segment-longer-than-run", "--segment-ps 10 for a 2 ps trajectory",
         S(settings=settings_with("--segment-ps", "10")), ("fewer frames than one segment", "--segment-ps")),
    Case("spectrum-overlap-one", "--overlap 1", S("--overlap", "1"), ("--overlap", "0 <= overlap < 1")),
    Case("spectrum-overlap-negative", "--overlap -0.1", S("--overlap", "-0.1"), ("--overlap",)),
    Case("spectrum-overlap-nan", "--overlap nan", S("--overlap", "nan"), ("--overlap", "not a finite number")),
    Case("spectrum-start-negative", "--start -5 (Python's 'from the end')", S("--start", "-5"),
         ("--start", "negative", "counted from 0")),
    Case("spectrum-stop-negative", "--stop -1", S("--stop", "-1"), ("--stop", "negative")),
    Case("spectrum-start-beyond-end", "--start 5000 for 1000 frames", S("--start", "5000"),
         ("--start 5000", "holds 0 of its 1000 frames")),
    Case("spectrum-stop-before-start", "--start 600 --stop 500", S("--start", "600", "--stop", "500"),
         ("--start 600", "--stop 500")),
    Case("spectrum-step-zero", "--step 0", S("--step", "0"), ("--step", "at least 1")),
    Case("spectrum-step-negative", "--step -2", S("--step", "-2"), ("--step", "at least 1")),
    Case("spectrum-step-text", "--step two", S("--step", "two"), ("--step", "'two'")),
    Case("spectrum-threads-zero", "--threads 0", S("--threads", "0"), ("--threads", "at least 1")),
    Case("spectrum-block-zero", "--block 0-of-2", S("--block", "0-of-2"), ("--block", "between 1 and N")),
    Case("spectrum-block-beyond", "--block 3-of-2", S("--block", "3-of-2"), ("--block", "between 1 and N")),
    Case("spectrum-block-text", "--block half", S("--block", "half"), ("--block", "I-of-N")),
    Case("spectrum-block-more-than-segments", "--block 1-of-20 with 9 segments", S("--block", "1-of-20"),
         ("--block", "20 blocks", "9 segments")),
    Case("spectrum-taper-unknown", "--taper kaiser", S("--taper", "kaiser"), ("--taper", "'kaiser'")),
    Case("spectrum-progress-unknown", "--progress sometimes", S(settings=settings_with("--progress", "sometimes")),
         ("--progress", "'sometimes'")),
    Case("spectrum-velocities-from-unknown", "--velocities-from forces", S("--velocities-from", "forces"),
         ("--velocities-from", "'forces'")),
    Case("spectrum-lammps-units-unknown", "--lammps-units si", S("--lammps-units", "si"), ("--lammps-units", "'si'")),
]

# ----------------------------------------------------------------------------- qcorr spectrum: groups, masses, readers

COMMAND_CASES += [
    Case("spectrum-group-without-selection", "--group water (no '=')", S("--group", "water"), ("--group", "KEY=VALUE")),
    Case("spectrum-group-empty-name", "--group =all", S("--group", "=all"), ("--group", "KEY=VALUE")),
    Case("spectrum-group-twice", "the same --group name twice", S("--group", "a=all", "--group", "a=name OA"),
         ("--group", "'a' twice")),
    Case("spectrum-group-total", "--group total=... (a reserved name)", S("--group", "total=name OA"), ("--group", "total")),
    Case("spectrum-group-matches-nothing", "a selection that matches no atom", S("--group", "ions=name NA"),
         ("--group ions=", "selects no atom")),
    Case("spectrum-group-bad-selection", "a selection MDAnalysis cannot parse", S("--group", "x=name ("), ("--group", "x=")),
    Case("spectrum-constraints-negative", "--constraints total=-3", S("--constraints", "total=-3"), ("--constraints",)),
    Case("spectrum-constraints-text", "--constraints total=many", S("--constraints", "total=many"), ("--constraints",)),
    Case("spectrum-constraints-unknown-group", "--constraints for a group not defined", S("--constraints", "water=3"),
         ("--constraints", "water")),
    Case("spectrum-constraints-too-many", "more constraints than degrees of freedom", S("--constraints", "total=100"),
         ("--constraints", "total")),
    Case("spectrum-constraints-per-molecule-nan", "--constraints-per-molecule total=nan",
         S("--constraints-per-molecule", "total=nan"), ("--constraints-per-molecule",)),
    Case("spectrum-mass-text", "--mass O=heavy", S(settings=settings_with("--mass", "O=heavy")), ("--mass", "O")),
    Case("spectrum-mass-zero", "--mass O=0", S(settings=settings_with("--mass", "O=0")), ("--mass", "O")),
    Case("spectrum-mass-negative", "--mass O=-16", S(settings=settings_with("--mass", "O=-16")), ("--mass", "O")),
    Case("spectrum-mass-nan", "--mass O=nan", S(settings=settings_with("--mass", "O=nan")), ("--mass", "O")),
    Case("spectrum-mass-unknown-type", "--mass for an atom type no atom has", S("--mass", "ZZ=12"),
         ("--mass ZZ", "no atom has type")),
    Case("spectrum-masses-unknown", "atoms of unknown elements (no mass) and no --mass",
         S(settings=without("--mass"), topology="unknown_elements.gro"),
         ("unknown_elements.gro", "zero, negative or undefined mass", "--mass TYPE=AMU")),
    Case("spectrum-reader-option-dt-text", "--reader-option dt=abc", S("--reader-option", "dt=abc"),
         ("--reader-option dt=abc", "finite number > 0")),
    Case("spectrum-reader-option-dt-zero", "--reader-option dt=0", S("--reader-option", "dt=0"),
         ("--reader-option dt=0", "finite number > 0")),
    Case("spectrum-reader-option-dt-nan", "--reader-option dt=nan", S("--reader-option", "dt=nan"),
         ("--reader-option dt=nan", "finite number > 0")),
    Case("spectrum-reader-option-unknown", "a reader option no reader takes (misspelt dt)",
         S("--reader-option", "dtt=0.002"), ("--reader-option dtt", "would ignore it", "dt")),
    Case("spectrum-reader-option-convert-units", "--reader-option convert_units=false",
         S("--reader-option", "convert_units=false"), ("--reader-option convert_units", "not allowed")),
    Case("spectrum-reader-option-format", "the trajectory format given as a reader option",
         S("--reader-option", "format=XTC"), ("--reader-option format", "--trajectory-format")),
    Case("spectrum-reader-option-bool-text", "--reader-option refresh_offsets=often",
         S("--reader-option", "refresh_offsets=often"), ("--reader-option refresh_offsets", "true or false")),
    Case("spectrum-reader-option-no-value", "--reader-option dt (no '=')", S("--reader-option", "dt"),
         ("--reader-option", "KEY=VALUE")),
    Case("spectrum-reader-option-twice", "--reader-option dt given twice",
         S("--reader-option", "dt=0.002", "--reader-option", "dt=0.004"), ("--reader-option", "twice")),
    Case("spectrum-dt-over-stored-times", "--reader-option dt=0.004 on a TRR that stores its times (0.002 ps)",
         S("--reader-option", "dt=0.004"), ("dt=0.004", "time stamps")),
    Case("spectrum-topology-format-unknown", "--topology-format NOPE", S("--topology-format", "NOPE"),
         ("dimers.gro", "--topology-format")),
    Case("spectrum-trajectory-format-wrong", "a TRR read as --trajectory-format XYZ", S("--trajectory-format", "XYZ"),
         ("dimers.trr",)),
]

# ----------------------------------------------------------------------------- qcorr spectrum: files

COMMAND_CASES += [
    Case("spectrum-topology-missing", "the topology file does not exist", S(topology="nothing.gro"),
         ("nothing.gro", "does not exist")),
    Case("spectrum-trajectory-missing", "the trajectory file does not exist", S(trajectory="nothing.trr"),
         ("nothing.trr", "does not exist")),
    Case("spectrum-topology-is-directory", "the topology path is a directory", S(topology="other_run"),
         ("other_run", "is a directory")),
    Case("spectrum-topology-unreadable", "a topology that is not one", S(topology="broken.gro"),
         ("broken.gro", "cannot read")),
    Case("spectrum-topology-atom-count", "a topology with 6 atoms for an 8-atom trajectory", S(topology="six_atoms.gro"),
         ("six_atoms.gro", "dimers.trr")),
    Case("spectrum-trajectory-empty", "an empty (0-byte) trajectory file", S(trajectory="empty.trr"), ("empty.trr",)),
    Case("spectrum-trajectory-random-bytes", "a trajectory of random bytes", S(trajectory="random_bytes.trr"),
         ("random_bytes.trr", "cannot read")),
    Case("spectrum-trr-cut-in-header", "a TRR cut inside a frame header", S(trajectory="cut_in_header.trr"),
         ("cut_in_header.trr", "incomplete frame")),
    Case("spectrum-trr-cut-in-body", "a TRR cut inside a frame body", S(trajectory="cut_in_body.trr"),
         ("cut_in_body.trr", "truncated")),
    Case("spectrum-xtc-cut", "an XTC cut in the middle", S("--velocities-from", "positions", trajectory="cut.xtc"),
         ("cut.xtc", "incomplete frame")),
    Case("spectrum-dcd-cut", "a DCD cut in the middle", S("--velocities-from", "positions", trajectory="cut.dcd"),
         ("cut.dcd",)),
    Case("spectrum-dcd-default-header", "a DCD whose header keeps the writer's default time step (1 ps) for frames 2 fs apart",
         S("--velocities-from", "positions", trajectory="default_header.dcd"),
         ("default_header.dcd", "--frame-spacing")),
    Case("spectrum-dcd-default-header-long-segments", "the same DCD with segments long enough for its 1 ps header step",
         S("--velocities-from", "positions", settings=settings_with("--segment-ps", "100"), trajectory="default_header.dcd"),
         ("default_header.dcd", "--frame-spacing")),
    Case("spectrum-no-velocities", "a trajectory without velocities", S(trajectory="positions_only.trr"),
         ("frame 0", "positions_only.trr", "--velocities-from positions")),
    Case("spectrum-zero-velocities", "all velocities zero", S(trajectory="zero_velocities.trr"),
         ("zero_velocities.trr", "all zero")),
    Case("spectrum-irregular-times", "one frame 1 fs late", S(trajectory="jitter.trr"), ("frame 300", "jitter.trr")),
    Case("spectrum-nan-velocity", "a NaN velocity in frame 700", S(trajectory="nan_velocity.trr"),
         ("frame 700", "nan_velocity.trr", "NaN or Inf")),
    # a restarted run whose files repeat frames exactly is read as one trajectory (the repeats
    # are dropped and listed: tests/test_restarts.py), so it is not a bad input any more
    Case("spectrum-same-file-twice", "the same trajectory file given twice", S(trajectory=("dimers.trr", "dimers.trr")),
         ("dimers.trr", "twice")),
    Case("spectrum-lammps-cut", "a LAMMPS dump cut in the middle",
         S("--lammps-units", "real", "--reader-option", "dt=0.5", settings=without("--mass"), trajectory="cut.lammpstrj",
           topology="dimers.lammpstrj"), ("cut.lammpstrj", "incomplete frame")),
    Case("spectrum-lammps-without-units", "a LAMMPS dump without --lammps-units",
         S(trajectory="dimers.lammpstrj", topology="dimers.lammpstrj"), ("dimers.lammpstrj", "--lammps-units")),
    Case("spectrum-lammps-without-dt", "a LAMMPS dump without its MD time step",
         S("--lammps-units", "real", trajectory="dimers.lammpstrj", topology="dimers.lammpstrj"),
         ("--reader-option dt=", "fs for units real")),
    Case("spectrum-lammps-dt-is-frame-spacing", "a LAMMPS dump given the frame spacing (2 fs) as dt, not the MD step (0.5 fs)",
         S("--lammps-units", "real", "--reader-option", "dt=2", "--mass", "1=15.999", settings=without("--mass"),
           trajectory="dimers.lammpstrj", topology="dimers.lammpstrj"), ("dimers.lammpstrj", "not the dump interval")),
    Case("spectrum-output-is-input", "--output names the trajectory",
         lambda p: spectrum(p, output=p.i("dimers.trr")), ("--output", "also an input file")),
    Case("spectrum-output-empty", "--output ''", lambda p: spectrum(p)[:-1] + [""], ("--output", "empty")),
]
COMMAND_CASES += output_cases("spectrum", lambda p, out: spectrum(p, output=out), "out.nc")

# ----------------------------------------------------------------------------- qcorr combine

COMMAND_CASES += [
    Case("combine-blocks-of-different-runs", "block 1 of one run and block 2 of another run whose trajectory has the "
         "same name and size", lambda p: combine(p, "block1.nc", "other_run/block2.nc"),
         ("other_run/block2.nc", "another input", "same size", "different SHA-256")),
    Case("combine-missing-block", "block 2 of 2 missing", lambda p: combine(p, "block1.nc"), ("missing [2]",)),
    Case("combine-block-twice", "block 1 given twice", lambda p: combine(p, "block1.nc", "block1.nc"),
         ("repeated [1]",)),
    Case("combine-different-block-counts", "block 1 of 2 with block 2 of 3", lambda p: combine(p, "block1.nc", "block2_of_3.nc"),
         ("block2_of_3.nc", "block_count")),
    Case("combine-different-settings", "blocks made with different --segment-ps",
         lambda p: combine(p, "block1.nc", "block2_short_segments.nc"), ("block2_short_segments.nc",)),
    Case("combine-not-a-block", "a single-job spectrum file with a block", lambda p: combine(p, "dimers.nc", "block2.nc"),
         ("dimers.nc",)),
    Case("combine-block-missing-file", "a block file that does not exist", lambda p: combine(p, "block1.nc", "block9.nc"),
         ("block9.nc", "does not exist")),
    Case("combine-block-truncated", "a block file cut in half", lambda p: combine(p, "block1.nc", "truncated.nc"),
         ("truncated.nc", "truncated")),
    Case("combine-block-foreign", "a NetCDF file not made by qcorr", lambda p: combine(p, "block1.nc", "foreign.nc"),
         ("foreign.nc", "qcorr_file_kind")),
    Case("combine-block-is-table", "a property table given as a block", lambda p: combine(p, "block1.nc", "dimers.csv"),
         ("dimers.csv",)),
    Case("combine-output-is-block", "--output names a block file", lambda p: combine(p, "block1.nc", "block2.nc",
                                                                                    output=p.i("block2.nc")),
         ("--output", "also an input file")),
    *output_cases("combine", lambda p, out: combine(p, "block1.nc", "block2.nc", output=out), "combined.nc"),
]

# ----------------------------------------------------------------------------- qcorr properties

COMMAND_CASES += [
    Case("properties-spectrum-missing", "the spectrum file does not exist", lambda p: properties(p, spectrum="none.nc"),
         ("none.nc", "does not exist")),
    Case("properties-spectrum-truncated", "a spectrum file cut in half", lambda p: properties(p, spectrum="truncated.nc"),
         ("truncated.nc", "truncated")),
    Case("properties-spectrum-foreign", "a NetCDF file not made by qcorr", lambda p: properties(p, spectrum="foreign.nc"),
         ("foreign.nc", "qcorr_file_kind")),
    Case("properties-spectrum-is-table", "a table given as the spectrum", lambda p: properties(p, spectrum="dimers.csv"),
         ("dimers.csv",)),
    Case("properties-spectrum-is-trajectory", "a trajectory given as the spectrum",
         lambda p: properties(p, spectrum="dimers.trr"), ("dimers.trr",)),
    Case("properties-output-json", "--output ending in .json (the sidecar's name)",
         lambda p: properties(p, output="table.json"), ("--output", ".json")),
    Case("properties-output-is-spectrum", "--output names the spectrum file read",
         lambda p: properties(p, output=p.i("dimers.nc")), ("--output", "dimers.nc", "input")),
    Case("properties-sidecar-is-directory", "the sidecar path TABLE.json is a directory",
         lambda p: properties(p), ("table.json", "is a directory"), setup=directory("table.json")),
    Case("properties-temperature-tiny", "--temperatures 1e-300", lambda p: properties(p, "--temperatures", "1e-300"),
         ("--temperatures 1e-300", "double precision")),
    Case("properties-temperature-huge", "--temperatures 1e308", lambda p: properties(p, "--temperatures", "1e308"),
         ("--temperatures 1e+308", "double precision")),
    Case("properties-temperature-zero", "--temperatures 0", lambda p: properties(p, "--temperatures", "0"),
         ("--temperatures", "> 0 K")),
    Case("properties-temperature-negative", "--temperatures -10", lambda p: properties(p, "--temperatures", "-10"),
         ("--temperatures",)),
    Case("properties-temperature-nan", "--temperatures nan", lambda p: properties(p, "--temperatures", "nan"),
         ("--temperatures", "not a finite number")),
    Case("properties-temperature-text", "--temperatures warm", lambda p: properties(p, "--temperatures", "warm"),
         ("--temperatures", "'warm'")),
    Case("properties-unknown-property", "--properties enthalpy", lambda p: properties(p, "--properties", "enthalpy"),
         ("--properties", "enthalpy")),
    Case("properties-md-value-malformed", "--md-value total=75", lambda p: properties(p, "--md-value", "total=75"),
         ("--md-value", "GROUP:PROPERTY=VALUE")),
    Case("properties-md-value-nan", "--md-value total:heat_capacity=nan",
         lambda p: properties(p, "--md-value", "total:heat_capacity=nan"), ("--md-value", "finite")),
    Case("properties-md-value-unknown-group", "--md-value for a group not in the file",
         lambda p: properties(p, "--md-value", "water:heat_capacity=75"), ("--md-value", "water")),
    Case("properties-md-value-twice", "--md-value given twice for one property",
         lambda p: properties(p, "--md-value", "total:entropy=1", "total:entropy=2"), ("--md-value", "twice")),
    Case("properties-frozen-bond-negative", "--frozen-bond-wavenumbers total=-3657",
         lambda p: properties(p, "--frozen-bond-wavenumbers", "total=-3657"), ("--frozen-bond-wavenumbers", "positive")),
    Case("properties-frozen-bond-unknown-group", "--frozen-bond-wavenumbers water=3657",
         lambda p: properties(p, "--frozen-bond-wavenumbers", "water=3657"), ("--frozen-bond-wavenumbers", "water")),
    Case("properties-zero-frequency-threshold-negative", "--zero-frequency-threshold -1",
         lambda p: properties(p, "--zero-frequency-threshold", "-1"), ("--zero-frequency-threshold",)),
    Case("properties-system-blank", "--system ''", lambda p: properties(p, "--system", ""), ("--system",)),
    Case("properties-abbreviated-option", "--temp for --temperatures", lambda p: properties(p, "--temp", "300"),
         ("--temp", "not abbreviated", "--temperatures")),
    *output_cases("properties", lambda p, out: properties(p, output=out), "table.csv"),
]

# ----------------------------------------------------------------------------- qcorr corrected
COMMAND_CASES += [
    Case("corrected-energy-file-missing", "--energy-file that does not exist",
         lambda p: corrected(p, "--energy-file", p.i("none.csv"), "--energy-format", "openmm-csv"),
         ("none.csv",)),
    Case("corrected-classical-value-unknown", "--classical-value for a property qcorr has no baseline of",
         lambda p: corrected(p, "--classical-value", "viscosity=1"), ("--classical-value", "viscosity")),
    Case("corrected-reference-without-source", "--reference without its source",
         lambda p: corrected(p, "--reference", "heat_capacity=75.3"), ("--reference", "SOURCE")),
    *output_cases("corrected", lambda p, out: corrected(p, output=out), "table.csv"),
]

# ----------------------------------------------------------------------------- qcorr liquid

COMMAND_CASES += [
    Case("liquid-not-molecular", "a spectrum made without --molecular", lambda p: liquid(p, spectrum="dimers.nc"),
         ("dimers.nc", "--molecular")),
    Case("liquid-symmetry-zero", "--symmetry-number 0", lambda p: liquid(p, "--symmetry-number", "0"),
         ("--symmetry-number", ">= 1")),
    Case("liquid-symmetry-text", "--symmetry-number two", lambda p: liquid(p, "--symmetry-number", "two"),
         ("--symmetry-number",)),
    Case("liquid-viscosity-negative", "--viscosity -1", lambda p: liquid(p, "--viscosity", "-1"), ("--viscosity",)),
    Case("liquid-viscosity-nan", "--viscosity nan", lambda p: liquid(p, "--viscosity", "nan"),
         ("--viscosity", "not a finite number")),
    Case("liquid-volume-zero", "--volume 0", lambda p: liquid(p, "--volume", "0"), ("--volume",)),
    Case("liquid-md-energy-malformed", "--md-energy total", lambda p: liquid(p, "--md-energy", "total"),
         ("--md-energy", "GROUP=KJ_PER_MOL")),
    Case("liquid-unknown-group", "--groups water", lambda p: liquid(p, "--groups", "water"), ("water",)),
    Case("liquid-split-output-is-table", "--split-output is the table's own name",
         lambda p: liquid(p, "--split-output", p.w("table.csv")), ("--split-output", "another output")),
    Case("liquid-split-output-directory", "--split-output is a directory",
         lambda p: liquid(p, "--split-output", p.w("split.nc")), ("--split-output", "is a directory"),
         setup=directory("split.nc")),
    *output_cases("liquid", lambda p, out: liquid(p, output=out), "table.csv"),
]

# ----------------------------------------------------------------------------- qcorr merge

COMMAND_CASES += [
    Case("merge-table-cut-mid-row", "a table cut in the middle of its 8th row", lambda p: merge(p, "dimers.csv", "cut_mid_row.csv"),
         ("cut_mid_row.csv", "cut short or edited")),
    Case("merge-table-edited", "a table edited after qcorr wrote it", lambda p: merge(p, "dimers.csv", "edited.csv"),
         ("edited.csv", "cut short or edited")),
    Case("merge-table-without-sidecar", "a table without its JSON sidecar", lambda p: merge(p, "dimers.csv", "no_sidecar.csv"),
         ("no_sidecar.csv", "sidecar")),
    Case("merge-table-other-columns", "a table with a renamed column", lambda p: merge(p, "dimers.csv", "other_columns.csv"),
         ("other_columns.csv", "columns")),
    Case("merge-table-empty", "an empty (0-byte) table", lambda p: merge(p, "dimers.csv", "empty_table.csv"),
         ("empty_table.csv",)),
    Case("merge-table-binary", "a binary file named .csv", lambda p: merge(p, "dimers.csv", "binary_table.csv"),
         ("binary_table.csv",)),
    Case("merge-sidecar-not-json", "a sidecar that is not JSON", lambda p: merge(p, "dimers.csv", "bad_sidecar.csv"),
         ("bad_sidecar.json", "not valid JSON")),
    Case("merge-sidecar-foreign", "a sidecar of another kind", lambda p: merge(p, "dimers.csv", "foreign_sidecar.csv"),
         ("foreign_sidecar.json", "qcorr_file_kind")),
    Case("merge-same-rows-twice", "the same table twice (same system rows)", lambda p: merge(p, "dimers.csv", "dimers.csv"),
         ("repeats the row", "--system")),
    Case("merge-table-missing", "a table that does not exist", lambda p: merge(p, "dimers.csv", "none.csv"),
         ("none.csv", "does not exist")),
    Case("merge-table-is-spectrum", "a spectrum file given as a table", lambda p: merge(p, "dimers.csv", "dimers.nc"),
         ("dimers.nc",)),
    Case("merge-output-is-input", "--output names an input table", lambda p: merge(p, output=p.i("again.csv")),
         ("--output", "again.csv")),
    Case("merge-output-is-sidecar", "--output whose sidecar would be an input's sidecar",
         lambda p: merge(p, output=p.i("dimers.tsv")), ("--output", "dimers.tsv", "dimers.json")),
    Case("merge-summary-is-directory", "--summary-html is a directory",
         lambda p: merge(p, extra=("--summary-html", p.w("summary.html"))), ("--summary-html", "is a directory"),
         setup=directory("summary.html")),
    Case("merge-summary-same-as-output", "--summary-markdown names the merged table",
         lambda p: merge(p, extra=("--summary-markdown", p.w("all.csv"))), ("--summary-markdown", "all.csv",
                                                                              "another output")),
    Case("merge-summary-read-only", "--summary-markdown on a read-only file system",
         lambda p: merge(p, extra=("--summary-markdown", p.m("read_only", "summary.md"))),
         ("--summary-markdown", "EROFS"), needs_mounts=True),
    *output_cases("merge", lambda p, out: merge(p, output=out), "all.csv"),
]

# ----------------------------------------------------------------------------- qcorr plot

COMMAND_CASES += [
    Case("plot-nothing-to-draw", "neither figure asked for", lambda p: ["plot", p.i("dimers.nc")],
         ("--spectrum-figure", "nothing to draw")),
    Case("plot-unknown-format", "a figure named .jpg", lambda p: plot(p, figure="spectrum.jpg"), ("--spectrum-figure", ".jpg")),
    Case("plot-spectrum-missing", "the spectrum file does not exist", lambda p: plot(p, spectrum="none.nc"),
         ("none.nc", "does not exist")),
    Case("plot-spectrum-truncated", "a spectrum file cut in half", lambda p: plot(p, spectrum="truncated.nc"),
         ("truncated.nc",)),
    Case("plot-unknown-group", "--group water (not in the file)",
         lambda p: ["plot", p.i("dimers.nc"), "--group", "water", "--cumulative-figure", p.w("c.svg")], ("water",)),
    Case("plot-temperature-zero", "--temperature 0", lambda p: plot(p, "--temperature", "0"), ("--temperature",)),
    Case("plot-temperature-nan", "--temperature nan", lambda p: plot(p, "--temperature", "nan"),
         ("--temperature", "not a finite number")),
    Case("plot-max-wavenumber-negative", "--max-wavenumber -5", lambda p: plot(p, "--max-wavenumber", "-5"),
         ("--max-wavenumber",)),
    Case("plot-same-figure-twice", "both figures to one file",
         lambda p: plot(p, "--cumulative-figure", p.w("spectrum.svg")), ("--spectrum-figure", "--cumulative-figure")),
    Case("plot-figure-is-spectrum", "a figure path naming the spectrum file",
         lambda p: plot(p, figure=p.i("dimers.nc")), ("--spectrum-figure",)),
    Case("plot-basis-unknown", "--basis per_kg", lambda p: plot(p, "--basis", "per_kg"), ("--basis", "'per_kg'")),
    *output_cases("plot", lambda p, out: plot(p, figure=out if out.suffix == ".svg" else out.with_name(out.name + ".svg")),
                  "spectrum.svg", option="--spectrum-figure"),
]
