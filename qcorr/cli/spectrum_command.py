"""``qcorr spectrum``: topology + trajectory -> spectrum file (VDOS per group, VACF, diagnostics).

Parsing and plumbing only: reading is :mod:`qcorr.trajectory`, the estimator
:mod:`qcorr.spectrum`, normalisation and layout :mod:`qcorr.spectrum_file`,
checks :mod:`qcorr.diagnostics`.
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
                     help="threads for the Fourier transforms (count)")
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


def run(args: argparse.Namespace) -> int:
    """Run ``qcorr spectrum``; returns the exit status."""
    import MDAnalysis

    from qcorr import spectrum as est
    from qcorr import trajectory as trj
    from qcorr.constants import speed_of_light_cm_per_s
    from qcorr.spectrum_file import assemble_spectrum, group_table, raw_spectra

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

    accumulator = est.SegmentAccumulator(
        settings, plan.weights, plan.group_members, plan.n_components, args.threads,
        first_segment=first_seg, stop_segment=stop_seg,
    )
    # --molecular (issue 6): a second estimator over molecular channels, see qcorr.molecular
    from qcorr.molecular import pass_for_spectrum_command
    fd_step = window.timestep_ps if positions else None
    molecular = pass_for_spectrum_command(args, opened, channels, groups, settings, window,
                                          first_seg, stop_seg, first_sample, count_stop)
    # a frame block of a molecular run reads up to one longest MSD lag before its first
    # segment, for the earlier members of its displacement pairs (qcorr.molecular_file)
    read_from = first_sample if molecular is None else max(0, first_sample - molecular.lookback_frames)
    # stored velocities stay in the reader's single precision through the atomic estimator
    # (complex64 transforms, float64 sums; see SegmentAccumulator); the molecular pass
    # and finite differences work in float64
    precision = np.float32 if molecular is None else np.float64
    stats = trj.FrameStatistics()
    # the inputs' SHA-256 is computed in a background thread while the frames are read;
    # block I of N hashes the I-th of N byte ranges of each file (qcorr combine joins them)
    hashing = trj.start_describing_files(opened.files, block_index, block_count)
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
        input_files = hashing.result()
    except BaseException:
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
    finish(ds, args.output)
    return 0


def finish(ds, output: str) -> None:
    """Run the diagnostics, print them, store them, write the file (shared with ``combine``)."""
    from qcorr import diagnostics as diag
    from qcorr.spectrum_file import write_spectrum

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
