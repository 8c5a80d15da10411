"""Cost of the streaming spectrum estimator relative to a bare MDAnalysis read.

Writes a generated trajectory (argon-like atoms at 300 K whose velocities follow a seeded
first-order autoregressive process, positions drifting with them) to a
temporary directory as a GROMACS TRR file with velocities, then times in
separate subprocesses:

* ``read``        : ``for ts in u.trajectory: u.atoms.velocities`` (the floor);
* ``accumulate``  : the same loop feeding :class:`qcorr.spectra.estimator.SegmentAccumulator`;
* ``read_timestep``: the same with ``ts.velocities`` (no per-frame copy);
* ``command_loop``: the per-frame work of ``qcorr spectrum`` (its trajectory stream,
  centre-of-mass removal and checks, feeding the accumulator), timed like ``read``;
* ``command``     : the full ``qcorr spectrum`` command, if it is installed, timed as a
  whole process from outside -- compared with the ``read`` child process timed the
  same way (interpreter start, imports and opening included on both sides);

and prints wall and CPU time per frame, their ratios, and the peak resident memory
of the accumulator loop at 1x and 4x frames (4x reads the same file four times in a
row, so no extra disk is needed).  Targets (issue 2): time ratio <= 1.3 and
memory 4x / 1x <= 1.1.  This is a measurement, not a test: it prints, it does not
assert.

Run ``python benchmarks/bench_spectrum.py --help`` for the options.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

TARGET_TIME_RATIO = 1.3
TARGET_MEMORY_RATIO = 1.1


def write_trajectory(
    directory: Path, n_atoms: int, n_frames: int, timestep_ps: float
) -> tuple[Path, Path]:
    """Write ``system.pdb`` and ``run.trr`` (positions + velocities, Angstrom and Angstrom/ps)."""
    import MDAnalysis as mda

    rng = np.random.default_rng(20261202)
    u = mda.Universe.empty(
        n_atoms,
        n_residues=n_atoms,
        atom_resindex=np.arange(n_atoms),
        trajectory=True,
        velocities=True,
    )
    for name, value in (("names", "AR"), ("types", "AR"), ("elements", "Ar"), ("resnames", "ARG")):
        u.add_TopologyAttr(name, [value] * n_atoms)
    u.add_TopologyAttr("masses", np.full(n_atoms, 39.948))
    box = 3.4 * n_atoms ** (1.0 / 3.0) * 1.2
    u.dimensions = [box, box, box, 90.0, 90.0, 90.0]
    # sqrt(kT/m) for argon at 300 K in Angstrom/ps, so that `qcorr spectrum --temperature 300`
    # sees a consistent kinetic temperature
    from qcorr import constants

    u_A2_per_ps2 = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2
    sigma = float(np.sqrt(constants.boltzmann_J_per_K * 300.0 / u_A2_per_ps2 / 39.948))
    a = float(np.exp(-5.0 * timestep_ps))  # velocity memory ~0.2 ps
    kick = sigma * np.sqrt(1.0 - a * a)
    v = rng.standard_normal((n_atoms, 3)) * sigma
    x = rng.random((n_atoms, 3)) * box
    pdb = directory / "system.pdb"
    trr = directory / "run.trr"
    u.atoms.positions = x
    with warnings.catch_warnings():  # PDB writer notes default occupancies etc.; irrelevant here
        warnings.simplefilter("ignore", UserWarning)
        u.atoms.write(pdb)
    with mda.Writer(str(trr), n_atoms) as writer:
        for i in range(n_frames):
            u.atoms.positions = x
            u.atoms.velocities = v
            u.trajectory.ts.time = i * timestep_ps
            u.trajectory.ts.dt = timestep_ps
            writer.write(u.atoms)
            x = x + v * timestep_ps
            v = a * v + kick * rng.standard_normal((n_atoms, 3))
    return pdb, trr


def child(mode: str, pdb: str, trr: str, repeats: int, segment_frames: int, workers: int) -> None:
    """Run one timed loop in this (fresh) process and print a JSON line.

    Modes: ``read`` (``u.atoms.velocities``, the floor), ``read_timestep``
    (``ts.velocities``, no per-frame copy), ``accumulate`` (``read`` feeding the
    accumulator), ``command_loop`` (the per-frame work of ``qcorr spectrum``: its
    trajectory stream in single precision, centre-of-mass removal and checks included,
    feeding the accumulator).  Only the loop is timed, the same way in every mode.
    """
    import MDAnalysis as mda

    from qcorr.spectra.estimator import SegmentAccumulator
    from qcorr.spectra.segments import SpectrumSettings

    u = mda.Universe(pdb, [trr] * repeats) if repeats > 1 else mda.Universe(pdb, trr)
    atoms = u.atoms
    n_frames = len(u.trajectory)
    if mode == "command_loop":
        from qcorr.reading.masses import massive_atoms
        from qcorr.reading.stream import FrameStatistics, stream_velocities
        from qcorr.reading.time_axis import frame_window
        from qcorr.reading.universe import open_trajectory

        opened = open_trajectory(pdb, [trr] * repeats)
        channels = massive_atoms(opened.universe)
        window = frame_window(opened)
        settings = SpectrumSettings(window.timestep_ps, segment_frames, 0.5, "hann")
        acc = SegmentAccumulator(
            settings, channels.masses, np.ones((1, channels.masses.size), bool), workers=workers
        )
    wall0, cpu0 = time.perf_counter(), time.process_time()
    if mode == "read":
        for _ in u.trajectory:
            _ = atoms.velocities  # the read being timed
    elif mode == "read_timestep":
        for ts in u.trajectory:
            _ = ts.velocities
    elif mode == "command_loop":
        stats = FrameStatistics()
        for v in stream_velocities(
            opened, channels, window, 0, window.n_frames, statistics=stats, dtype=np.float32
        ):
            acc.add_frame(v)
        acc.result()
    else:
        settings = SpectrumSettings(u.trajectory.dt, segment_frames, 0.5, "hann")
        acc = SegmentAccumulator(
            settings, atoms.masses, np.ones((1, atoms.n_atoms), bool), workers=workers
        )
        for _ in u.trajectory:
            acc.add_frame(atoms.velocities)
        acc.result()
    wall, cpu = time.perf_counter() - wall0, time.process_time() - cpu0
    peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux
    print(
        json.dumps(
            {
                "mode": mode,
                "frames": n_frames,
                "wall_s": wall,
                "cpu_s": cpu,
                "peak_MiB": peak_kib / 1024.0,
            }
        )
    )


def run_child(args: argparse.Namespace, mode: str, pdb: Path, trr: Path, repeats: int) -> dict:
    """Run :func:`child` in a fresh process; adds the whole process' wall and CPU time."""
    cmd = [
        sys.executable,
        __file__,
        "--child",
        mode,
        "--pdb",
        str(pdb),
        "--trr",
        str(trr),
        "--repeats",
        str(repeats),
        "--segment-frames",
        str(args.segment_frames),
        "--threads",
        str(args.threads),
    ]
    wall0 = time.perf_counter()
    usage0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    usage1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    result = json.loads(out.strip().splitlines()[-1])
    result["process_wall_s"] = time.perf_counter() - wall0
    result["process_cpu_s"] = (usage1.ru_utime + usage1.ru_stime) - (usage0.ru_utime + usage0.ru_stime)
    return result


def run_command(args: argparse.Namespace, pdb: Path, trr: Path, directory: Path) -> dict | None:
    exe = shutil.which("qcorr")
    if exe is None:
        return None
    probe = subprocess.run([exe, "spectrum", "--help"], capture_output=True, text=True, check=False)
    if probe.returncode != 0:
        return None
    segment_ps = args.segment_frames * args.timestep_ps
    cmd = [
        exe,
        "spectrum",
        "--topology",
        str(pdb),
        "--trajectory",
        str(trr),
        "--temperature",
        "300",
        "--output",
        str(directory / "spectrum.nc"),
        "--segment-ps",
        f"{segment_ps:g}",
        "--threads",
        str(args.threads),
        "--progress",
        "never",
    ]
    wall0 = time.perf_counter()
    usage0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    done = subprocess.run(cmd, capture_output=True, text=True, check=False)
    usage1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    wall = time.perf_counter() - wall0
    if done.returncode != 0:
        print(f"qcorr spectrum failed ({done.returncode}): {done.stderr.strip()[-300:]}")
        return None
    cpu = (usage1.ru_utime + usage1.ru_stime) - (usage0.ru_utime + usage0.ru_stime)
    return {"wall_s": wall, "cpu_s": cpu, "peak_MiB": usage1.ru_maxrss / 1024.0}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--atoms", type=int, default=2000, help="atoms in the generated system")
    parser.add_argument(
        "--frames", type=int, default=10000, help="frames in the generated trajectory"
    )
    parser.add_argument("--timestep-ps", type=float, default=0.002, help="time between frames, ps")
    parser.add_argument(
        "--segment-frames", type=int, default=1000, help="frames per spectrum segment (even)"
    )
    parser.add_argument("--threads", type=int, default=1, help="FFT threads")
    parser.add_argument(
        "--workdir",
        type=Path,
        default=None,
        help="directory for the generated files (default: a temporary one, removed)",
    )
    parser.add_argument("--skip-memory", action="store_true", help="skip the 4x-frames memory run")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--pdb", help=argparse.SUPPRESS)
    parser.add_argument("--trr", help=argparse.SUPPRESS)
    parser.add_argument("--repeats", type=int, default=1, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(args.child, args.pdb, args.trr, args.repeats, args.segment_frames, args.threads)
        return 0

    own_dir = args.workdir is None
    directory = Path(tempfile.mkdtemp(prefix="qcorr-bench-")) if own_dir else args.workdir
    directory.mkdir(parents=True, exist_ok=True)
    try:
        t0 = time.perf_counter()
        pdb, trr = write_trajectory(directory, args.atoms, args.frames, args.timestep_ps)
        size_mb = trr.stat().st_size / 2**20
        print(
            f"generated {args.atoms} atoms x {args.frames} frames ({size_mb:.0f} MiB TRR) "
            f"in {time.perf_counter() - t0:.1f} s; segment {args.segment_frames} frames, "
            f"50 % overlap, Hann, {args.threads} FFT thread(s); load average "
            f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs"
        )
        read = run_child(args, "read", pdb, trr, 1)
        read_ts = run_child(args, "read_timestep", pdb, trr, 1)
        acc = run_child(args, "accumulate", pdb, trr, 1)
        loop = run_child(args, "command_loop", pdb, trr, 1)
        n = read["frames"]

        def line(label: str, r: dict) -> None:
            print(
                f"{label:<34}: {1e6 * r['wall_s'] / n:8.1f} us/frame wall, "
                f"{1e6 * r['cpu_s'] / n:8.1f} us/frame CPU"
            )

        def ratio(label: str, r: dict, floor: dict, key: str = "") -> None:
            print(
                f"  ratio {label}: {r[key + 'wall_s'] / floor[key + 'wall_s']:.3f} wall, "
                f"{r[key + 'cpu_s'] / floor[key + 'cpu_s']:.3f} CPU   "
                f"(target ratio <= {TARGET_TIME_RATIO})"
            )

        print("loop only (frames read and processed; same timer in every line):")
        line("bare read, u.atoms.velocities", read)
        line("bare read, ts.velocities", read_ts)
        line("read + accumulator", acc)
        line("qcorr spectrum's frame loop", loop)
        ratio("accumulator / bare read", acc, read)
        ratio("qcorr loop / bare read", loop, read)
        ratio("qcorr loop / ts.velocities read", loop, read_ts)
        command = run_command(args, pdb, trr, directory)
        print("whole process (interpreter start, imports, opening, writing; timed from outside):")
        print(
            f"{'bare read process':<34}: {read['process_wall_s']:8.2f} s wall, "
            f"{read['process_cpu_s']:8.2f} s CPU"
        )
        if command is None:
            print("qcorr spectrum: not available, full command not timed")
        else:
            print(
                f"{'qcorr spectrum process':<34}: {command['wall_s']:8.2f} s wall, "
                f"{command['cpu_s']:8.2f} s CPU"
            )
            print(
                f"  ratio command / bare read process: "
                f"{command['wall_s'] / read['process_wall_s']:.3f} wall, "
                f"{command['cpu_s'] / read['process_cpu_s']:.3f} CPU   "
                f"(target ratio <= {TARGET_TIME_RATIO})"
            )
        if not args.skip_memory:
            big = run_child(args, "accumulate", pdb, trr, 4)
            print(
                f"peak memory accumulator loop: {acc['peak_MiB']:.0f} MiB at 1x "
                f"({n} frames), {big['peak_MiB']:.0f} MiB at 4x ({big['frames']} frames)"
            )
            print(
                f"memory 4x / 1x: {big['peak_MiB'] / acc['peak_MiB']:.3f}   "
                f"(target memory 4x / 1x <= {TARGET_MEMORY_RATIO})"
            )
    finally:
        if own_dir:
            shutil.rmtree(directory, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
