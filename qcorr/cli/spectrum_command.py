"""``qcorr spectrum``: topology + trajectory -> spectrum file (VDOS per group, VACF, diagnostics).

Parsing and plumbing only: reading is :mod:`qcorr.reading.trajectory`, the estimator
:mod:`qcorr.spectra.estimator`, normalisation and layout :mod:`qcorr.spectra.spectrum_file`,
checks :mod:`qcorr.spectra.diagnostics`.
"""

from __future__ import annotations

import argparse
import json
import re
import sys
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from qcorr import __version__
from qcorr.errors import ConfigError, QcorrWarning, SamplingError

NAME = "spectrum"
HELP = "trajectory with velocities (or positions) -> vibrational density of states file (NetCDF)"
DESCRIPTION = (
    "Compute the mass-weighted velocity spectrum (vibrational density of states, VDOS) of "
    "one or more atom groups from an MD trajectory, normalised so that its integral over "
    "wavenumber equals each group's degrees of freedom, plus the normalised velocity "
    "autocorrelation function and diagnostics. Frames are streamed; the trajectory is never "
    "held in memory."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``qcorr spectrum`` (each help text gives the unit)."""
    io = parser.add_argument_group("input and output")
    io.add_argument("--topology", required=True, metavar="FILE",
                    help="topology file MDAnalysis reads (TPR, PSF, PRMTOP, GRO, PDB, LAMMPS data, ...)")
    io.add_argument("--trajectory", required=True, nargs="+", metavar="FILE",
                    help="one or more trajectory files, read in order as one trajectory")
    io.add_argument("--output", required=True, metavar="FILE.nc",
                    help="spectrum file to write (NetCDF-4); written only when everything succeeded")
    io.add_argument("--topology-format", metavar="FMT", default=None,
                    help="MDAnalysis topology format name; None: guessed from the file suffix")
    io.add_argument("--trajectory-format", metavar="FMT", default=None,
                    help="MDAnalysis trajectory format name; None: guessed from the suffix "
                         "(.lammpstrj/.lammpsdump/.dump are read as LAMMPSDUMP)")
    io.add_argument("--reader-option", action="append", default=[], metavar="KEY=VALUE",
                    help="keyword passed to MDAnalysis.Universe (repeatable); numbers and "
                         "true/false are converted; for LAMMPS dumps give dt=MD time step in "
                         "the LAMMPS time unit (fs for real, ps for metal)")
    io.add_argument("--lammps-units", choices=("real", "metal"), default=None,
                    help="LAMMPS unit style of a dump trajectory: real = A, fs, A/fs; "
                         "metal = A, ps, A/ps (MDAnalysis does not convert dump units)")

    frames = parser.add_argument_group("frames")
    frames.add_argument("--start", type=int, default=None, metavar="N",
                        help="first trajectory frame used (0-based frame index); None: the first")
    frames.add_argument("--stop", type=int, default=None, metavar="N",
                        help="frame index to stop before; None: the end of the trajectory")
    frames.add_argument("--step", type=int, default=1, metavar="N",
                        help="use every N-th frame (frames), the time step becomes N times longer")
    frames.add_argument("--velocities-from", choices=("stored", "positions"), default="stored",
                        help="stored: velocities saved in the trajectory (A/ps after MDAnalysis' "
                             "unit conversion); positions: forward differences of positions, "
                             "spectrum divided by the difference's power transfer sinc^2(pi nu dt)")

    system = parser.add_argument_group("system")
    system.add_argument("--temperature", type=float, required=True, metavar="K",
                        help="temperature of the simulation in kelvin, used in 2/kT")
    system.add_argument("--group", action="append", default=[], metavar="NAME=SELECTION",
                        help="named atom group from an MDAnalysis selection string (repeatable); "
                             "the group 'total' (all atoms with mass) is always added")
    system.add_argument("--constraints", action="append", default=[], metavar="NAME=COUNT",
                        help="holonomic constraints in group NAME (count, dimensionless; repeatable); "
                             "for 'total' the sum over disjoint groups is used when not given")
    system.add_argument("--constraints-per-molecule", action="append", default=[], metavar="NAME=COUNT",
                        help="constraints per residue (molecule) of group NAME, e.g. 3 for rigid water")
    system.add_argument("--mass", action="append", default=[], metavar="TYPE=AMU",
                        help="mass of every atom of this atom type in u (g/mol), replacing the "
                             "topology's or guessed mass (repeatable)")
    system.add_argument("--exclude-massless", action="store_true",
                        help="exclude every atom of zero mass (virtual sites) whatever its name; "
                             "without it only zero-mass atoms named like virtual sites (M, MW, EPW, "
                             "EP1, LP1, VS, DUM...) are excluded and other zero masses are an error")
    system.add_argument("--molecular", action="store_true",
                        help="add translation/rotation/vibration spectra per group of whole "
                             "molecules, principal moments and the MSD self-diffusion "
                             "(input for 'qcorr liquid', 2PT)")
    system.add_argument("--molecules", choices=("residue", "fragment"), default="residue",
                        help="with --molecular: a molecule is a residue, or a bonded fragment")

    est = parser.add_argument_group("estimator")
    est.add_argument("--segment-ps", type=float, default=5.0, metavar="PS",
                     help="segment length in ps (rounded to an even number of frames); the "
                          "resolution is 1/segment length")
    est.add_argument("--overlap", type=float, default=0.5, metavar="FRACTION",
                     help="fraction of a segment shared by consecutive segments, 0 <= f < 1")
    est.add_argument("--taper", choices=("hann", "none"), default="hann",
                     help="taper applied to each segment before the transform")

    run = parser.add_argument_group("running")
    run.add_argument("--block", default=None, metavar="I-of-N",
                     help="compute only block I (1-based) of N contiguous frame blocks; "
                          "join the N block files with 'qcorr combine'")
    run.add_argument("--threads", type=int, default=1, metavar="N",
                     help="cores to use (count): a long frame window (at least 2e7 atom-frames) "
                          "is split over N worker processes and joined as 'qcorr combine' "
                          "joins blocks (equal to one process up to rounding)")
    run.add_argument("--progress", choices=("auto", "always", "never"), default="auto",
                     help="progress bar on stderr: auto = only on a terminal")


def parse_block(text: str | None) -> tuple[int, int]:
    """``"I-of-N"`` -> (0-based I, N); ``None`` -> (0, 1)."""
    if text is None:
        return 0, 1
    match = re.fullmatch(r"\s*(\d+)\s*-of-\s*(\d+)\s*", text)
    if not match:
        raise ConfigError(f"--block {text!r}: expected I-of-N, e.g. 2-of-8")
    index, count = int(match.group(1)), int(match.group(2))
    if count < 1 or not 1 <= index <= count:
        raise ConfigError(f"--block {text!r}: I must be between 1 and N")
    return index - 1, count


@dataclass
class ChannelPlan:
    """What the spectrum estimator sums: one weight per channel, group membership, components.

    For atomic spectra the channels are the massive atoms, weights their masses (u) and
    the values their velocities (3 components).  The molecular decomposition (issue 6)
    replaces this plan by one whose channels are molecular translation/rotation/vibration
    velocities; it plugs in at :func:`build_channel_plan`.
    """

    weights: np.ndarray
    group_members: np.ndarray
    n_components: int = 3


def build_channel_plan(args: argparse.Namespace, channels, groups) -> ChannelPlan:
    """Channel list for the estimator (hook for ``--molecular``)."""
    return ChannelPlan(
        weights=channels.masses,
        group_members=np.array([g.members for g in groups], dtype=bool),
        n_components=3,
    )


def _check_arguments(args: argparse.Namespace) -> None:
    if not np.isfinite(args.temperature) or args.temperature <= 0:
        raise ConfigError(f"--temperature {args.temperature:g}: must be a positive number of kelvin")
    if not np.isfinite(args.segment_ps) or args.segment_ps <= 0:
        raise ConfigError(f"--segment-ps {args.segment_ps:g}: must be a positive number of ps")
    if args.threads < 1:
        raise ConfigError(f"--threads {args.threads}: must be at least 1")
    out = Path(args.output).resolve()
    for name in [args.topology, *args.trajectory]:
        if Path(name).resolve() == out:
            raise ConfigError(f"--output {args.output} is also an input file; choose another name")
    check_output_writable(args.output)


def check_output_writable(output: str) -> None:
    """Fail before the frame loop if the output's directory (or its nearest existing parent) is not writable."""
    import os

    parent = Path(output).resolve().parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not os.access(parent, os.W_OK | os.X_OK):
        raise ConfigError(f"--output {output}: cannot write in '{parent}'; choose a writable directory")


#: smallest frame-window work (massive atoms x frames read) split over worker processes;
#: below it (about 2.5 s of reading), starting the processes costs more than it saves
PROCESS_MIN_ATOM_FRAMES = 20_000_000
#: sub-blocks per process when a job is split over processes (finer pieces balance the
#: spawned workers' start-up against this process, which starts at once)
SUB_BLOCKS_PER_PROCESS = 4


def run(args: argparse.Namespace) -> int:
    """Run ``qcorr spectrum``; returns the exit status."""
    finish(compute(args), args.output)
    return 0


def process_split(threads: int, n_segments: int, block_count: int, atom_frames: int) -> tuple[int, int]:
    """(processes, sub-blocks) for one job; (1, 1) when *threads* < 2 or the work is small.

    The job's frames are split like ``--block``: block I of N cut into S sub-blocks is
    blocks (I-1)S+1 .. IS of NS (:func:`qcorr.spectra.estimator.block_range` nests exactly), which
    needs NS <= the window's *n_segments*.
    """
    if threads < 2 or atom_frames < PROCESS_MIN_ATOM_FRAMES:
        return 1, 1
    pieces = min(SUB_BLOCKS_PER_PROCESS * threads, n_segments // block_count)
    processes = min(threads, pieces)
    return (processes, pieces) if processes > 1 else (1, 1)


def compute(args: argparse.Namespace, *, worker: bool = False):
    """The spectrum dataset of ``qcorr spectrum`` (before diagnostics and writing).

    With ``--threads T >= 2`` and a long enough frame window the job's segments are
    split over T worker processes (:func:`_compute_in_processes`); *worker* marks such
    a process (it neither splits again nor hashes the inputs).
    """
    import MDAnalysis

    from qcorr.constants import speed_of_light_cm_per_s
    from qcorr.reading import trajectory as trj
    from qcorr.spectra import estimator as est
    from qcorr.spectra.spectrum_file import assemble_spectrum, group_table, raw_spectra

    _check_arguments(args)
    block_index, block_count = parse_block(args.block)
    reader_options = {k: trj.parse_option_value(v)
                      for k, v in trj.parse_key_values(args.reader_option, "--reader-option").items()}
    masses_by_type = trj.parse_key_values(args.mass, "--mass")
    selections = trj.parse_key_values(args.group, "--group")
    constraints = trj.parse_key_values(args.constraints, "--constraints")
    per_molecule = trj.parse_key_values(args.constraints_per_molecule, "--constraints-per-molecule")

    opened = trj.open_trajectory(
        args.topology, args.trajectory,
        topology_format=args.topology_format, trajectory_format=args.trajectory_format,
        reader_options=reader_options, lammps_units=args.lammps_units,
    )
    trj.apply_masses_by_type(opened.universe, masses_by_type)
    channels = trj.massive_atoms(opened.universe, exclude_massless=args.exclude_massless,
                                 topology_name=f"topology '{args.topology}'")
    if channels.note:
        warnings.warn(channels.note, QcorrWarning, stacklevel=1)
    groups = trj.select_groups(opened.universe, channels, selections)
    trj.assign_degrees_of_freedom(groups, constraints, per_molecule)
    plan = build_channel_plan(args, channels, groups)

    window = trj.frame_window(opened, args.start, args.stop, args.step)
    positions = args.velocities_from == "positions"
    n_samples = window.n_frames - (1 if positions else 0)
    segment_frames = est.segment_frames_for(args.segment_ps, window.timestep_ps)
    settings = est.SpectrumSettings(window.timestep_ps, segment_frames, args.overlap, args.taper)
    n_segments = len(est.segment_starts(n_samples, settings))
    if n_segments == 0:
        raise SamplingError(
            f"fewer frames than one segment: the frame window of '{args.trajectory[0]}' gives "
            f"{n_samples} velocity samples ({n_samples * window.timestep_ps:g} ps at "
            f"{window.timestep_ps:g} ps), a --segment-ps {args.segment_ps:g} segment needs "
            f"{segment_frames}; shorten --segment-ps or use more frames"
        )
    first_seg, stop_seg = est.block_range(n_segments, block_index, block_count)
    first_sample, stop_sample = est.frames_needed(first_seg, stop_seg, settings)
    if block_index + 1 < block_count:
        next_first, _ = est.block_range(n_segments, block_index + 1, block_count)
        count_stop = next_first * settings.hop_frames
    else:
        count_stop = stop_sample
    processes, pieces = (1, 1) if worker else process_split(
        args.threads, n_segments, block_count, len(channels.indices) * (stop_sample - first_sample))
    if processes > 1:
        return _compute_in_processes(args, processes, pieces, block_index, block_count,
                                     (first_seg, stop_seg), opened.files)

    accumulator = est.SegmentAccumulator(
        settings, plan.weights, plan.group_members, plan.n_components, args.threads,
        first_segment=first_seg, stop_segment=stop_seg,
    )
    # --molecular (issue 6): a second estimator over molecular channels, see qcorr.spectra.molecular
    from qcorr.spectra.molecular import pass_for_spectrum_command
    fd_step = window.timestep_ps if positions else None
    molecular = pass_for_spectrum_command(args, opened, channels, groups, settings, window,
                                          first_seg, stop_seg, first_sample, count_stop)
    # a frame block of a molecular run reads up to one longest MSD lag before its first
    # segment, for the earlier members of its displacement pairs (qcorr.spectra.molecular_file)
    read_from = first_sample if molecular is None else max(0, first_sample - molecular.lookback_frames)
    # stored velocities stay in the reader's single precision through the atomic estimator
    # (complex64 transforms, float64 sums; see SegmentAccumulator); the molecular pass
    # and finite differences work in float64
    precision = np.float32 if molecular is None else np.float64
    stats = trj.FrameStatistics()
    # the inputs' SHA-256 is computed in a background thread while the frames are read;
    # block I of N hashes the I-th of N byte ranges of each file (qcorr combine joins them)
    hashing = None if worker else trj.start_describing_files(opened.files, block_index, block_count)
    try:
        for sample, velocities in enumerate(trj.stream_velocities(
            opened, channels, window, read_from, stop_sample,
            source=args.velocities_from, count_from=first_sample, count_stop=count_stop,
            statistics=stats, progress_mode=args.progress, dtype=precision,
        ), start=read_from):
            if sample >= first_sample:
                accumulator.add_frame(velocities)
            if molecular is not None:
                molecular.add_frame(velocities, opened.universe.trajectory.ts, sample=sample,
                                    finite_difference_timestep_ps=fd_step)
        powers = accumulator.result()
        input_files = [] if hashing is None else hashing.result()
    except BaseException:
        if hashing is not None:
            hashing.cancel()
        raise

    raw = raw_spectra(powers.power, powers.frequency_Hz, args.temperature,
                      finite_difference_timestep_ps=window.timestep_ps if positions else None)
    wavenumber = powers.frequency_Hz / speed_of_light_cm_per_s
    attrs = {
        "qcorr_file_kind": "spectrum",
        "qcorr_format_version": 1,
        "Conventions": "CF-1.11",
        "title": "vibrational density of states from mass-weighted velocities",
        "references": "S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003); "
                      "P. D. Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967)",
        "temperature_K": float(args.temperature),
        "timestep_ps": float(window.timestep_ps),
        "frames_used": int(stop_sample - first_sample + (1 if positions else 0)),
        "frame_start": int(window.start),
        "frame_stop": int(window.stop),
        "frame_step": int(window.step),
        "segment_frames": int(settings.segment_frames),
        "segment_length_ps": float(settings.segment_ps),
        "segment_overlap": float(settings.overlap),
        "taper": settings.taper,
        "resolution_wavenumber": float(settings.resolution_Hz / speed_of_light_cm_per_s),
        "nyquist_wavenumber": float(settings.nyquist_Hz / speed_of_light_cm_per_s),
        "velocity_source": "finite_difference" if positions else "stored",
        "finite_difference_correction": (
            "forward differences of minimum-image displacements; spectrum divided by "
            "sinc^2(pi nu dt) before normalisation; vacf is that of the differences, uncorrected"
            if positions else "none"
        ),
        "lammps_units": args.lammps_units or "",
        "reader_options": json.dumps(reader_options, sort_keys=True),
        "mass_overrides_u": json.dumps(masses_by_type, sort_keys=True),
        "excluded_atoms": channels.note,
        "input_files": json.dumps(input_files),
        "diagnostics": "[]",
        "qcorr_version": __version__,
        "mdanalysis_version": MDAnalysis.__version__,
        "command_line": getattr(args, "command_line", "qcorr spectrum"),
        "mean_box_volume_A3": stats.box_volume_sum_A3 / stats.frames if stats.frames else 0.0,
        "block_index": block_index + 1,
        "block_count": block_count,
        "worker_processes": 1,
        "segment_count_window": n_segments,
        "statistics_frames": stats.frames,
        "centre_of_mass_mv2_u_A2_per_ps2": stats.com_kinetic_sum / stats.frames if stats.frames else 0.0,
    }
    ds = assemble_spectrum(
        raw_segments=raw,
        correlation_segments=powers.correlation,
        wavenumber=wavenumber,
        lag_ps=powers.lag_ps,
        table=group_table(groups),
        segment_index=np.arange(first_seg, stop_seg),
        segment_first_frame=window.start + powers.segment_first_frame * window.step,
        attrs=attrs,
    )
    if molecular is not None:
        ds = molecular.add_variables(ds, finite_difference_timestep_ps=fd_step)
    return ds


def _compute_in_processes(args: argparse.Namespace, processes: int, pieces: int, block_index: int,
                          block_count: int, segment_range: tuple[int, int], files):
    """Block *block_index* of *block_count* computed in *pieces* sub-blocks by *processes* processes.

    Sub-block k is frame block ``block_index * pieces + k + 1`` of ``block_count *
    pieces``; together they make up exactly this job's block (see
    :func:`qcorr.spectra.estimator.block_range`), and they are joined as ``qcorr combine`` joins
    blocks (:func:`qcorr.spectra.spectrum_file.join_blocks`): equal to one process up to
    floating-point rounding.  This process and ``processes - 1`` spawned workers take
    the next sub-block from a shared counter whenever they are free, so this process
    (imports and trajectory ready) starts at once and the workers join as soon as they
    have started; the first error stops everyone taking more.  This process also
    computes the inputs' SHA-256 in a thread.

    Workers are spawned, not forked (a fork of a threaded process may hang), so a
    Python script that calls :func:`qcorr.cli.main` must do so under
    ``if __name__ == "__main__":`` (Python's rule for spawned processes, which import
    the main script again).  Progress bars are not shown while the work is split.
    """
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool

    from qcorr.reading import trajectory as trj
    from qcorr.spectra.spectrum_file import join_blocks

    total = block_count * pieces
    jobs = []
    for k in range(pieces):
        options = {key: value for key, value in vars(args).items() if not callable(value)}
        options.update(block=f"{block_index * pieces + k + 1}-of-{total}", threads=1,
                       progress="never")
        jobs.append(options)
    hashing = trj.start_describing_files(files, block_index, block_count)
    parts: list = [None] * pieces
    context = multiprocessing.get_context("spawn")
    counter = context.Value("i", 0)
    pool = ProcessPoolExecutor(processes - 1, mp_context=context, initializer=_share_counter,
                               initargs=(counter,))
    try:
        futures = [pool.submit(_take_sub_blocks, jobs) for _ in range(processes - 1)]
        _share_counter(counter)
        done = _take_sub_blocks(jobs)
        for future in futures:
            done += future.result()
        for k, part in done:
            parts[k] = part
        input_files = hashing.result()
    except BrokenProcessPool:
        hashing.cancel()
        raise ConfigError(
            f"--threads {args.threads}: a worker process stopped before it finished (out of memory, "
            "or qcorr was called from a Python script without an 'if __name__ == \"__main__\":' "
            "guard, which spawned workers need); use --threads 1 or fix that"
        ) from None
    except BaseException:
        hashing.cancel()
        raise
    finally:
        # the workers have returned everything (or failed); do not wait for their exit
        pool.shutdown(wait=False, cancel_futures=True)
    names = [f"sub-block {k + 1} of {pieces}" for k in range(pieces)]
    ds = join_blocks(parts, names, getattr(args, "command_line", "qcorr spectrum"), segment_range,
                     block_index + 1, block_count)
    ds.attrs["input_files"] = json.dumps(input_files)
    ds.attrs["worker_processes"] = processes
    return ds


#: the shared sub-block counter of :func:`_compute_in_processes` (set in every process)
_SUB_BLOCK_COUNTER = None


def _share_counter(counter) -> None:
    global _SUB_BLOCK_COUNTER
    _SUB_BLOCK_COUNTER = counter


def _take_sub_blocks(jobs: list[dict]) -> list:
    """Compute the next untaken sub-block until none is left; [(index, dataset), ...]."""
    counter, done = _SUB_BLOCK_COUNTER, []
    while True:
        with counter.get_lock():
            k = counter.value
            counter.value += 1
        if k >= len(jobs):
            return done
        try:
            done.append((k, _compute_sub_block(jobs[k])))
        except BaseException:
            with counter.get_lock():
                counter.value = len(jobs)  # nobody takes another one
            raise


def _compute_sub_block(options: dict):
    """One sub-block of :func:`_compute_in_processes` (its warnings were already given)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", QcorrWarning)
        return compute(argparse.Namespace(**options), worker=True)


def finish(ds, output: str) -> None:
    """Run the diagnostics, print them, store them, write the file (shared with ``combine``)."""
    from qcorr.spectra import diagnostics as diag
    from qcorr.spectra.spectrum_file import write_spectrum

    checks = diag.run_diagnostics(ds)
    ds.attrs["diagnostics"] = diag.to_json(checks)
    for check in checks:
        if check.status == "ok":
            print(f"qcorr: {check.check}: {check.message}", file=sys.stderr)
    diag.announce(checks)
    write_spectrum(ds, output)
    groups = ", ".join(
        f"{g} ({float(dof):g} dof, {float(t):.1f} K)"
        for g, dof, t in zip(ds["group"].values, ds["degrees_of_freedom"].values,
                             ds["kinetic_temperature"].values)
    )
    print(f"qcorr: wrote {output}: {ds.sizes['segment']} segments; groups {groups}", file=sys.stderr)
