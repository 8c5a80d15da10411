"""``qcorr spectrum``: topology + trajectory -> spectrum file (VDOS per group, VACF, diagnostics).

Parsing only: the files are opened by :func:`qcorr.reading.universe.open_trajectory`, the
spectrum is computed by :class:`qcorr.spectra.analysis.VibrationalSpectrum` and written by
its ``save``.
"""

from __future__ import annotations

import argparse

from qcorr.cli.option_types import count, finite_number, frame_index

NAME = "spectrum"
HELP = "trajectory with velocities (or positions) -> vibrational density of states file (NetCDF)"
DESCRIPTION = (
    "Compute the mass-weighted velocity spectrum (vibrational density of states, VDOS) of "
    "one or more atom groups from an MD trajectory, normalised so that its integral over "
    "wavenumber equals each group's degrees of freedom, plus the normalised velocity "
    "autocorrelation function and diagnostics. Frames are streamed; the trajectory is never "
    "held in memory."
)

#: smallest frame-window work (atoms x frames read) split over worker processes by --threads;
#: measured (benchmarks/bench_reading_cost.py, docs/performance.md "Reading cost", 2 idle
#: cores): with reading as cheap as it now is, two processes were slower than one on the
#: water run up to 6.5e6 atom-frames and on 4,000 atoms x 1,300 frames (5.2e6), and level
#: or faster on 1,000 atoms x 16,000 frames (1.6e7: 3.87 vs 3.97 s) and 250 x 18,000
#: (4.5e6: 2.59 vs 2.95 s); the fixed costs of the calling process are not shared
PROCESS_MIN_ATOM_FRAMES = 16_000_000
#: parts per process when a job is split: one, since every part re-reads the frames of
#: the segment that straddles its start (half a segment with the default overlap) and the
#: worker server is started at once (qcorr.spectra.worker_server); measured in
#: docs/performance.md ("Reading cost", issue 16)
PARTS_PER_PROCESS = 1


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
                         "true/false are converted; for LAMMPS dumps give dt=MD time step (not the "
                         "dump interval) in the LAMMPS time unit (fs for real, ps for metal)")
    io.add_argument("--lammps-units", choices=("real", "metal"), default=None,
                    help="LAMMPS unit style of a dump trajectory: real = A, fs, A/fs; "
                         "metal = A, ps, A/ps (MDAnalysis does not convert dump units)")
    io.add_argument("--frame-spacing", type=float, default=None, metavar="PS", help="time between saved frames "
                    "in ps; required for formats without time stamps (DCD, XYZ, ...), else checked against them")

    frames = parser.add_argument_group("frames")
    frames.add_argument("--start", type=frame_index, default=None, metavar="N",
                        help="first trajectory frame used (0-based frame index); None: the first")
    frames.add_argument("--stop", type=frame_index, default=None, metavar="N",
                        help="frame index to stop before; None: the end of the trajectory")
    frames.add_argument("--step", type=count, default=1, metavar="N",
                        help="use every N-th frame (frames), the time step becomes N times longer")
    frames.add_argument("--velocities-from", choices=("stored", "positions"), default="stored",
                        help="stored: velocities saved in the trajectory (A/ps after MDAnalysis' "
                             "unit conversion); positions: forward differences of positions, "
                             "spectrum divided by the difference's power transfer sinc^2(pi nu dt) "
                             "and the expected rounding noise of the positions subtracted")
    frames.add_argument("--position-precision", type=float, default=None, metavar="ANGSTROM", help="rounding "
                        "step of stored positions in A (read from XTC files, else detected or 0)")

    system = parser.add_argument_group("system")
    system.add_argument("--temperature", type=finite_number, required=True, metavar="K",
                        help="temperature of the simulation in kelvin, used in 2/kT")
    system.add_argument("--allow-temperature-mismatch", action="store_true", help="compute even if a group's "
                        "kinetic temperature differs from --temperature by more than a factor of 2 (K/K)")
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
    est.add_argument("--segment-ps", type=finite_number, default=5.0, metavar="PS",
                     help="segment length in ps (rounded to an even number of frames); the "
                          "resolution is 1/segment length")
    est.add_argument("--overlap", type=finite_number, default=0.5, metavar="FRACTION",
                     help="fraction of a segment shared by consecutive segments, 0 <= f < 1")
    est.add_argument("--taper", choices=("hann", "none"), default="hann",
                     help="taper applied to each segment before the transform")

    run = parser.add_argument_group("running")
    run.add_argument("--block", default=None, metavar="I-of-N",
                     help="compute only block I (1-based) of N contiguous frame blocks; "
                          "join the N block files with 'qcorr combine'")
    run.add_argument("--threads", type=count, default=1, metavar="N",
                     help="cores to use (count): a long frame window (at least 1.6e7 atom-frames) "
                          "is split over N processes in parts of whole segments, joined as "
                          "'qcorr combine' joins blocks (equal to one process up to rounding); "
                          "a shorter one uses N FFT threads")
    run.add_argument("--progress", choices=("auto", "always", "never"), default="auto",
                     help="progress bar on stderr: auto = only on a terminal")


def run(args: argparse.Namespace) -> int:
    """Run ``qcorr spectrum``; returns the exit status."""
    if args.threads > 1:  # workers' imports on another core while this process imports and opens
        from qcorr.spectra.worker_server import start_worker_server

        start_worker_server()
    from qcorr.cli.spectrum_report import write_with_report
    from qcorr.reading.options import parse_block, parse_key_values, parse_option_value
    from qcorr.reading.universe import open_trajectory
    from qcorr.safe_write import check_output
    from qcorr.spectra.analysis import VibrationalSpectrum, check_settings

    block = parse_block(args.block)
    check_settings(temperature=args.temperature, segment_ps=args.segment_ps, overlap=args.overlap,
                   taper=args.taper, velocities_from=args.velocities_from, molecules=args.molecules,
                   block=block, fft_threads=args.threads, position_precision=args.position_precision,
                   frame_spacing_ps=args.frame_spacing)
    check_output(args.output, "--output", [args.topology, *args.trajectory])
    reader_options = {k: parse_option_value(v)
                      for k, v in parse_key_values(args.reader_option, "--reader-option").items()}
    masses = parse_key_values(args.mass, "--mass")
    groups = parse_key_values(args.group, "--group")
    constraints = parse_key_values(args.constraints, "--constraints")
    per_molecule = parse_key_values(args.constraints_per_molecule, "--constraints-per-molecule")
    opened = open_trajectory(args.topology, args.trajectory, topology_format=args.topology_format,
                             trajectory_format=args.trajectory_format, reader_options=reader_options,
                             lammps_units=args.lammps_units, frame_spacing_ps=args.frame_spacing)
    frames = len(range(*slice(args.start, args.stop, max(1, args.step)).indices(opened.n_frames)))
    atom_frames = opened.universe.atoms.n_atoms * frames // block[1]
    processes = args.threads if args.threads >= 2 and atom_frames >= PROCESS_MIN_ATOM_FRAMES else 1
    spectrum = VibrationalSpectrum(
        opened.universe, args.temperature, groups=groups, constraints=constraints,
        constraints_per_molecule=per_molecule, masses_by_type=masses,
        exclude_massless=args.exclude_massless, velocities_from=args.velocities_from,
        segment_ps=args.segment_ps, overlap=args.overlap, taper=args.taper,
        molecular=args.molecular, molecules=args.molecules, lammps_units=args.lammps_units,
        position_precision=args.position_precision, frame_spacing_ps=args.frame_spacing,
        allow_temperature_mismatch=args.allow_temperature_mismatch, block=block,
        fft_threads=1 if processes > 1 else args.threads, input_files=opened.files,
        reader_options=reader_options, command_line=getattr(args, "command_line", "qcorr spectrum"),
        progress=args.progress)
    if processes > 1:
        spectrum.run(args.start, args.stop, args.step, backend="multiprocessing", n_workers=processes,
                     n_parts=PARTS_PER_PROCESS * processes)
    else:
        spectrum.run(args.start, args.stop, args.step)
    write_with_report(spectrum.results.spectrum, spectrum.results.diagnostics, args.output, spectrum.save)
    return 0
