"""Scaling benchmark: ``qcorr spectrum`` against the bare trajectory read and a plain in-memory FFT.

For synthetic GROMACS TRR trajectories (velocities stored) of growing length and
atom count, written into a temporary directory, this script measures

* the bare MDAnalysis read: open the trajectory, loop over all frames, take the
  velocities of all atoms (what any velocity analysis must at least do);
* the ``SegmentAccumulator`` of :mod:`qcorr.spectra.estimator` fed from that same loop
  (the library cost without file output);
* the full ``qcorr spectrum`` command, run in-process through
  :func:`qcorr.cli.main` (reading, spectra, diagnostics, NetCDF output);
* a straightforward in-memory implementation written plainly below: load all
  velocities into one ``(frames, atoms, 3)`` float64 array, remove the
  centre-of-mass velocity, weight by sqrt(mass), FFT the whole array along time
  (zero-padded to twice the length) and form the mass-weighted power spectrum and
  VACF (Wiener-Khinchin with zero padding; Press et al., Numerical Recipes, 3rd ed.
  (2007), sections 13.2 and 13.4);

each in its own subprocess, so that the peak resident memory
(``resource.getrusage(RUSAGE_SELF).ru_maxrss``) belongs to that measurement
alone.  Work time is measured inside the subprocess after the imports.  It then
measures scaling with frame blocks: the trajectory split into two frame blocks
(``qcorr spectrum --block 1-of-2`` and ``2-of-2``) run as two processes at the same
time, followed by ``qcorr combine``, against one process doing the whole
trajectory; and ``--threads 2``: one job whose frame window is split over the command's
process and one worker forked from a forkserver (its start-up and imports are part of the time).

The targets of issue 7 are printed beside the measured figures; they are not
asserted (this is not a test).  Results go to ``docs/performance.md`` together
with a description of the machine.

Usage::

    python benchmarks/bench_scaling.py            # full run, writes docs/performance.md (~5-10 min on 2 cores)
    python benchmarks/bench_scaling.py --quick    # small sizes, prints only (~1-2 min)

The synthetic velocities are independent AR(1) (discretely sampled
Ornstein-Uhlenbeck) processes per atom and component with the Maxwell variance
kT/m at 300 K, seeded; their content does not affect the timings, but it keeps the
kinetic temperature right so the command's diagnostics stay quiet.
"""

from __future__ import annotations

import argparse
import datetime
import json
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]

#: frame spacing of the synthetic trajectories, ps (an MD step of 2 fs, every 2nd step saved)
TIMESTEP_PS = 0.004
#: segment length given to ``qcorr spectrum --segment-ps``, ps (500 frames)
SEGMENT_PS = 2.0
#: temperature of the synthetic velocities and ``--temperature``, K
TEMPERATURE_K = 300.0
#: velocity correlation time of the synthetic AR(1) processes, ps
CORRELATION_TIME_PS = 0.1
#: atom names of the synthetic topology (a water-like O, H, H pattern; masses guessed by MDAnalysis)
ATOM_NAMES = ("OW", "HW1", "HW2")
#: seed of the synthetic velocities
SEED = 20261202


# --------------------------------------------------------------------------------------
# synthetic input
# --------------------------------------------------------------------------------------


def write_topology(path: Path, n_atoms: int, box_nm: float) -> None:
    """Write a GRO topology of ``n_atoms`` atoms named OW, HW1, HW2, ... (3-atom residues)."""
    lines = ["synthetic velocities for the scaling benchmark", f"{n_atoms:5d}"]
    for i in range(n_atoms):
        resid = (i // 3 + 1) % 100000
        lines.append(
            f"{resid:5d}{'SOL':<5s}{ATOM_NAMES[i % 3]:>5s}{(i + 1) % 100000:5d}"
            f"{0.0:8.3f}{0.0:8.3f}{0.0:8.3f}"
        )
    lines.append(f"{box_nm:10.5f}{box_nm:10.5f}{box_nm:10.5f}")
    path.write_text("\n".join(lines) + "\n")


def write_trajectory(path: Path, masses: np.ndarray, n_frames: int, seed: int) -> None:
    """Write a TRR trajectory (positions and velocities, float32) with AR(1) velocities.

    ``masses`` (g/mol) are the topology's, one per atom.

    Velocities are in nm/ps (GROMACS units); the variance per component is
    ``R T / m`` with ``R T`` in kJ/mol and ``m`` in g/mol, since 1 kJ/g = 1 (nm/ps)^2.
    """
    from MDAnalysis.lib.formats.libmdaxdr import TRRFile
    from scipy.constants import R  # molar gas constant, J/(mol K), CODATA via SciPy

    rng = np.random.default_rng(seed)
    n_atoms = masses.size
    sigma = np.sqrt(R * TEMPERATURE_K / 1000.0 / masses)[:, None]
    a = np.exp(-TIMESTEP_PS / CORRELATION_TIME_PS)
    kick = np.sqrt(1.0 - a * a)
    box_nm = 5.0
    box = (np.eye(3) * box_nm).astype(np.float32)
    positions = rng.random((n_atoms, 3)) * box_nm
    velocities = sigma * rng.standard_normal((n_atoms, 3))
    with TRRFile(str(path), "w") as trr:
        for frame in range(n_frames):
            trr.write(
                positions.astype(np.float32),
                velocities.astype(np.float32),
                None,
                box,
                frame,
                frame * TIMESTEP_PS,
                0.0,
                n_atoms,
            )
            positions += velocities * TIMESTEP_PS
            velocities *= a
            velocities += kick * sigma * rng.standard_normal((n_atoms, 3))


@dataclass(frozen=True)
class Case:
    n_atoms: int
    n_frames: int

    @property
    def stem(self) -> str:
        return f"atoms{self.n_atoms}_frames{self.n_frames}"


def make_case(workdir: Path, case: Case) -> tuple[Path, Path]:
    """Write (once) the topology and trajectory of a case; build MDAnalysis' frame offsets."""
    top = workdir / f"{case.stem}.gro"
    traj = workdir / f"{case.stem}.trr"
    if not traj.exists():
        import MDAnalysis as mda

        write_topology(top, case.n_atoms, 5.0)
        masses = mda.Universe(str(top)).atoms.masses.astype(float)  # as the readers guess them
        write_trajectory(traj, masses, case.n_frames, SEED + case.n_atoms + case.n_frames)
        # the first open writes the XDR offsets file next to the trajectory; do it here
        # so that no measurement pays for it
        mda.Universe(str(top), str(traj))
    return top, traj


# --------------------------------------------------------------------------------------
# measurements (each runs in a fresh subprocess: python bench_scaling.py --measure JSON)
# --------------------------------------------------------------------------------------


class Clock:
    """Wall time and CPU time (user + system, all threads of this process) since creation."""

    def __init__(self) -> None:
        self.start_wall = time.time()
        self._wall = time.perf_counter()
        self._cpu = time.process_time()

    def read(self, **extra) -> dict:
        seconds = time.perf_counter() - self._wall
        return {
            "seconds": seconds,
            "cpu_seconds": time.process_time() - self._cpu,
            "start": self.start_wall,
            "end": self.start_wall + seconds,
            **extra,
        }


def measure_read(top: str, traj: str) -> dict:
    import MDAnalysis as mda

    clock = Clock()
    u = mda.Universe(top, traj)
    atoms = u.atoms
    total = 0.0
    for _ts in u.trajectory:
        total += float(atoms.velocities[0, 0])  # touch the data so nothing is skipped
    return clock.read(frames=len(u.trajectory))


def measure_library(top: str, traj: str) -> dict:
    import MDAnalysis as mda

    from qcorr.spectra.estimator import SegmentAccumulator
    from qcorr.spectra.segments import SpectrumSettings, segment_frames_for

    clock = Clock()
    u = mda.Universe(top, traj)
    masses = u.atoms.masses.astype(float)
    settings = SpectrumSettings(
        timestep_ps=TIMESTEP_PS, segment_frames=segment_frames_for(SEGMENT_PS, TIMESTEP_PS)
    )
    accumulator = SegmentAccumulator(
        settings, masses, np.ones((1, masses.size), dtype=bool), n_components=3
    )
    share = masses / masses.sum()
    for _ts in u.trajectory:
        v = u.atoms.velocities.astype(np.float64)
        v -= share @ v  # centre-of-mass velocity removed, as the command does
        accumulator.add_frame(v)
    result = accumulator.result()
    return clock.read(segments=int(result.power.shape[1]))


def import_everything() -> None:
    """Import what the spectrum and combine commands import lazily, so no measurement times imports."""
    import h5netcdf  # noqa: F401
    import MDAnalysis  # noqa: F401
    import scipy.fft  # noqa: F401
    import xarray  # noqa: F401

    import qcorr.cli
    import qcorr.cli.combine_command
    import qcorr.cli.spectrum_command
    import qcorr.cli.spectrum_report
    import qcorr.spectra.analysis
    import qcorr.spectra.blocks

    qcorr.cli.build_parser()


def measure_command(top: str, traj: str, output: str, extra: list[str]) -> dict:
    import qcorr.cli

    argv = [
        "spectrum",
        "--topology", top,
        "--trajectory", traj,
        "--temperature", str(TEMPERATURE_K),
        "--segment-ps", str(SEGMENT_PS),
        "--progress", "never",
        "--output", output,
        *extra,
    ]  # fmt: skip
    import_everything()
    clock = Clock()
    status = qcorr.cli.main(argv)
    result = clock.read()
    if status != 0:
        raise SystemExit(f"qcorr {' '.join(argv)} exited with status {status}")
    return result


def measure_combine(blocks: list[str], output: str) -> dict:
    import qcorr.cli

    import_everything()
    clock = Clock()
    status = qcorr.cli.main(["combine", *blocks, "--output", output])
    result = clock.read()
    if status != 0:
        raise SystemExit(f"qcorr combine exited with status {status}")
    return result


def measure_hash(traj: str) -> dict:
    """SHA-256 of the trajectory file (FIPS 180-4, hashlib), read in 1 MiB blocks.

    The spectrum command records each input's SHA-256 for provenance (computed in a second
    thread while the frames are read; a frame-block job hashes only its share of the
    bytes): this is that part of its CPU time.
    """
    import hashlib

    clock = Clock()
    digest = hashlib.sha256()
    with open(traj, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return clock.read()


def measure_in_memory(top: str, traj: str) -> dict:
    """The plain in-memory implementation: every velocity in RAM, one FFT over the whole run."""
    import MDAnalysis as mda

    clock = Clock()
    u = mda.Universe(top, traj)
    masses = u.atoms.masses.astype(float)
    n_frames, n_atoms = len(u.trajectory), len(u.atoms)
    v = np.empty((n_frames, n_atoms, 3))
    for i, _ts in enumerate(u.trajectory):
        v[i] = u.atoms.velocities
    v -= np.einsum("a,fac->fc", masses / masses.sum(), v)[:, None, :]  # centre of mass at rest
    v *= np.sqrt(masses)[None, :, None]  # mass weighting
    transform = np.fft.rfft(v, n=2 * n_frames, axis=0)  # zero-padded: linear correlation
    power = (transform.real**2 + transform.imag**2).sum(axis=(1, 2))
    lag_sum = np.fft.irfft(power)[:n_frames]
    vacf = lag_sum / (n_frames - np.arange(n_frames))  # unbiased, u A^2/ps^2
    # one-sided periodogram on the n_frames-point grid = even bins of the padded transform
    spectrum = 2.0 * TIMESTEP_PS * power[::2] / n_frames
    return clock.read(spectrum_bins=int(spectrum.size), vacf_lags=int(vacf.size))


def run_measure(spec: dict) -> dict:
    if spec.get("cpus"):
        # run on these cores only (sched_setaffinity(2)); threads and worker processes inherit it
        os.sched_setaffinity(0, set(spec["cpus"]))
    kind = spec["kind"]
    if kind == "baseline":
        import_everything()
        result = {"seconds": 0.0, "cpu_seconds": 0.0}
    elif kind == "read":
        result = measure_read(spec["top"], spec["traj"])
    elif kind == "library":
        result = measure_library(spec["top"], spec["traj"])
    elif kind == "command":
        result = measure_command(spec["top"], spec["traj"], spec["output"], spec.get("extra", []))
    elif kind == "combine":
        result = measure_combine(spec["blocks"], spec["output"])
    elif kind == "in_memory":
        result = measure_in_memory(spec["top"], spec["traj"])
    elif kind == "hash":
        result = measure_hash(spec["traj"])
    else:
        raise SystemExit(f"unknown measurement {kind!r}")
    # ru_maxrss is in KiB on Linux (getrusage(2))
    result["peak_MiB"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    return result


# --------------------------------------------------------------------------------------
# driver
# --------------------------------------------------------------------------------------


def _environment(threads: int) -> dict:
    env = dict(os.environ)
    for key in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[key] = str(threads)
    return env


def launch(spec: dict, threads: int = 1) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, __file__, "--measure", json.dumps(spec)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=_environment(threads),
    )


def collect(process: subprocess.Popen) -> dict:
    out, err = process.communicate()
    if process.returncode != 0:
        raise SystemExit(f"measurement failed (exit {process.returncode}):\n{err.strip()}")
    return json.loads(out.strip().splitlines()[-1])


def measure(spec: dict, repeats: int, threads: int = 1) -> dict:
    """Run a measurement ``repeats`` times, one subprocess each.

    Keeps the shortest wall and CPU times (the runs least disturbed by other load)
    and the largest peak memory.
    """
    runs = [collect(launch(spec, threads)) for _ in range(repeats)]
    best = dict(min(runs, key=lambda r: r["seconds"]))
    best["cpu_seconds"] = min(r["cpu_seconds"] for r in runs)
    best["peak_MiB"] = max(r["peak_MiB"] for r in runs)
    return best


def machine_description() -> list[str]:
    import MDAnalysis
    import scipy

    import qcorr

    cpu = "unknown"
    with open("/proc/cpuinfo") as f:
        for line in f:
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    with open("/proc/meminfo") as f:
        mem_kib = int(next(line for line in f if line.startswith("MemTotal")).split()[1])
    try:
        commit = subprocess.run(
            ["git", "-C", str(REPO), "rev-parse", "--short", "HEAD"],
            capture_output=True, text=True, check=True,
        ).stdout.strip()  # fmt: skip
    except (OSError, subprocess.CalledProcessError):
        commit = "unknown"
    return [
        f"- CPU: {cpu}; {os.cpu_count()} logical cores available",
        f"- memory: {mem_kib / 1024**2:.1f} GiB",
        f"- OS: {platform.platform()}",
        (
            f"- Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, "
            f"MDAnalysis {MDAnalysis.__version__}, qcorr {qcorr.__version__} (commit {commit})"
        ),
    ]


def blocks_agreement(single: Path, combined: Path) -> str:
    """Largest relative difference of the VDOS between the one-job and the combined file."""
    import xarray as xr

    with xr.open_dataset(single) as a, xr.open_dataset(combined) as b:
        scale = float(np.abs(a["vdos"]).max())
        diff = float(np.abs(a["vdos"] - b["vdos"]).max()) / scale
    return f"max |VDOS difference| / max VDOS = {diff:.1e}"


def linear_fit(frames: list[int], seconds: list[float]) -> tuple[float, float, float]:
    """Least-squares ``seconds = fixed + per_frame * frames``; also the largest relative residual."""
    per_frame, fixed = np.polyfit(np.asarray(frames, float), np.asarray(seconds, float), 1)
    fitted = fixed + per_frame * np.asarray(frames, float)
    worst = float(np.max(np.abs(fitted - seconds) / np.asarray(seconds, float)))
    return float(fixed), float(per_frame), worst


def load_text() -> str:
    one, five, _ = os.getloadavg()
    return f"{one:.2f} (1 min), {five:.2f} (5 min)"


def fmt(x: float, digits: int = 2) -> str:
    return f"{x:.{digits}f}"


def verdict(ok: bool) -> str:
    return "met" if ok else "**missed**"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (~1-2 min); prints only")
    parser.add_argument(
        "--output",
        type=Path,
        default=None,
        help="Markdown report to write (default: docs/performance.md; none with --quick)",
    )
    parser.add_argument(
        "--repeats",
        type=int,
        default=None,
        help="runs of every measurement; the best is kept (default 1)",
    )
    parser.add_argument("--workdir", type=Path, default=None, help="keep the generated files here")
    parser.add_argument("--measure", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)

    if args.measure:
        print(json.dumps(run_measure(json.loads(args.measure))))
        return 0

    try:
        import qcorr.cli.combine_command
        import qcorr.cli.spectrum_command  # noqa: F401
    except ModuleNotFoundError as err:
        raise SystemExit(
            f"bench_scaling: error: needs the qcorr spectrum/combine commands ({err})"
        ) from err

    if args.quick:
        length_atoms, lengths = 300, (1000, 2000, 4000)
        atoms_frames, atom_counts = 2000, (100, 300, 1000)
        block_frames = 4000
        repeats = args.repeats or 1
        output = args.output
    else:
        length_atoms, lengths = 1000, (4000, 8000, 16000)
        atoms_frames, atom_counts = 8000, (250, 1000, 4000)
        block_frames = 32000
        repeats = args.repeats or 1
        output = args.output or REPO / "docs" / "performance.md"

    tmp = None
    if args.workdir is None:
        tmp = tempfile.TemporaryDirectory(prefix="qcorr-bench-")
        workdir = Path(tmp.name)
    else:
        workdir = args.workdir
        workdir.mkdir(parents=True, exist_ok=True)

    started = datetime.datetime.now(datetime.UTC)
    load_before = load_text()
    print(f"bench_scaling: files in {workdir}; load average {load_before}", flush=True)
    baseline = measure({"kind": "baseline"}, 1)
    print(
        f"  imports only (numpy, MDAnalysis, xarray, qcorr): peak {baseline['peak_MiB']:.0f} MiB",
        flush=True,
    )

    def one_case(case: Case, with_library: bool) -> dict:
        top, traj = make_case(workdir, case)
        common = {"top": str(top), "traj": str(traj)}
        row = {"case": case, "file_MiB": traj.stat().st_size / 1024**2}
        row["read"] = measure({"kind": "read", **common}, repeats)
        if with_library:
            row["library"] = measure({"kind": "library", **common}, repeats)
        row["command"] = measure(
            {"kind": "command", **common, "output": str(workdir / f"{case.stem}.nc")}, repeats
        )
        row["in_memory"] = measure({"kind": "in_memory", **common}, repeats)
        row["hash"] = measure({"kind": "hash", **common}, repeats)
        print(
            f"  {case.n_atoms:5d} atoms x {case.n_frames:6d} frames (CPU s): read "
            f"{row['read']['cpu_seconds']:.2f}"
            + (f", library {row['library']['cpu_seconds']:.2f}" if with_library else "")
            + f", spectrum {row['command']['cpu_seconds']:.2f}, in-memory "
            f"{row['in_memory']['cpu_seconds']:.2f}; peak MiB read {row['read']['peak_MiB']:.0f}, "
            f"spectrum {row['command']['peak_MiB']:.0f}, in-memory {row['in_memory']['peak_MiB']:.0f}",
            flush=True,
        )
        return row

    print("length series", flush=True)
    length_rows = [one_case(Case(length_atoms, n), with_library=True) for n in lengths]
    print("atom-count series", flush=True)
    atom_rows = []
    for n in atom_counts:
        done = [r for r in length_rows if r["case"] == Case(n, atoms_frames)]
        atom_rows.append(done[0] if done else one_case(Case(n, atoms_frames), with_library=False))

    # frame blocks and threads on a long trajectory (blocks are for long runs: each job's
    # fixed costs and the combine step do not shrink with the block); the one-job run is
    # repeated here, next to the parallel runs, so that all see similar outside load
    print("frame blocks and cores", flush=True)
    block_case = Case(length_atoms, block_frames)
    top, traj = make_case(workdir, block_case)
    common = {"top": str(top), "traj": str(traj)}
    single_file = workdir / "one_job.nc"
    block_files = [workdir / f"block{i}-of-2.nc" for i in (1, 2)]
    combined_file = workdir / "combined.nc"
    singles, block_runs, threaded_runs, one_core_runs = [], [], [], []
    for _ in range(max(3, repeats)):
        singles.append(measure({"kind": "command", **common, "output": str(single_file)}, 1))
        procs = [
            launch(
                {
                    "kind": "command",
                    **common,
                    "output": str(block_files[i - 1]),
                    "extra": ["--block", f"{i}-of-2"],
                }
            )
            for i in (1, 2)
        ]
        results = [collect(p) for p in procs]
        # the same two block jobs (and the combine) confined to one core: the blocked
        # trajectory's time on 1 core, for the speed-up from 1 to 2 cores
        pinned = [
            launch(
                {
                    "kind": "command",
                    **common,
                    "output": str(block_files[i - 1]),
                    "extra": ["--block", f"{i}-of-2"],
                    "cpus": [0],
                }
            )
            for i in (1, 2)
        ]
        pinned_results = [collect(p) for p in pinned]
        pinned_combine = collect(
            launch(
                {
                    "kind": "combine",
                    "blocks": [str(b) for b in block_files],
                    "output": str(combined_file),
                    "cpus": [0],
                }
            )
        )
        one_core_runs.append(
            max(r["end"] for r in pinned_results) - min(r["start"] for r in pinned_results)
            + pinned_combine["seconds"]
        )
        combine = collect(
            launch(
                {
                    "kind": "combine",
                    "blocks": [str(b) for b in block_files],
                    "output": str(combined_file),
                }
            )
        )
        block_runs.append(
            {
                "blocks": results,
                "wall": max(r["end"] for r in results) - min(r["start"] for r in results),
                "cpu": max(r["cpu_seconds"] for r in results),
                "combine": combine,
            }
        )
        threaded_runs.append(
            measure(
                {
                    "kind": "command",
                    **common,
                    "output": str(workdir / "threads2.nc"),
                    "extra": ["--threads", "2"],
                },
                1,
                threads=2,
            )
        )
    single = min(singles, key=lambda r: r["seconds"])
    block_file_MiB = traj.stat().st_size / 1024**2
    single_cpu = min(r["cpu_seconds"] for r in singles)
    best_blocks = min(block_runs, key=lambda r: r["wall"] + r["combine"]["seconds"])
    blocks_cpu = min(r["cpu"] for r in block_runs)
    combine_cpu = min(r["combine"]["cpu_seconds"] for r in block_runs)
    threaded = min(threaded_runs, key=lambda r: r["seconds"])
    blocked_seconds = best_blocks["wall"] + best_blocks["combine"]["seconds"]
    speedup_blocks = single["seconds"] / blocked_seconds
    # the same on two otherwise idle cores: the slower block's CPU time, then combine
    speedup_blocks_cpu = single_cpu / (blocks_cpu + combine_cpu)
    speedup_threads = single["seconds"] / threaded["seconds"]
    one_core_seconds = min(one_core_runs)
    speedup_cores = one_core_seconds / blocked_seconds
    agreement = blocks_agreement(single_file, combined_file)
    print(
        f"  wall s: one job {single['seconds']:.2f}; 2 blocks in parallel {best_blocks['wall']:.2f} "
        f"+ combine {best_blocks['combine']['seconds']:.2f} -> speed-up {speedup_blocks:.2f} "
        f"(from CPU times: {speedup_blocks_cpu:.2f}); --threads 2: {threaded['seconds']:.2f} -> "
        f"speed-up {speedup_threads:.2f}; the 2 blocks + combine on 1 core {one_core_seconds:.2f} -> "
        f"speed-up from 1 to 2 cores {speedup_cores:.2f}; combined vs one job: {agreement}",
        flush=True,
    )
    load_after = load_text()

    # ---- targets (single-process ratios on CPU time: robust against other load) ---------
    def cpu(row: dict, kind: str) -> float:
        return row[kind]["cpu_seconds"]

    every = length_rows + [r for r in atom_rows if r not in length_rows]
    largest = max(every, key=lambda r: r["case"].n_atoms * r["case"].n_frames)
    worst_read_ratio = max(cpu(r, "command") / cpu(r, "read") for r in every)
    largest_read_ratio = cpu(largest, "command") / cpu(largest, "read")
    largest_read_ratio_wall = largest["command"]["seconds"] / largest["read"]["seconds"]
    worst_read_ratio_wall = max(r["command"]["seconds"] / r["read"]["seconds"] for r in every)
    faster_than_memory = cpu(largest, "command") < cpu(largest, "in_memory")
    memory_fraction = largest["command"]["peak_MiB"] / largest["in_memory"]["peak_MiB"]
    fixed_s, per_frame_s, linear_residual = linear_fit(
        [r["case"].n_frames for r in length_rows], [cpu(r, "command") for r in length_rows]
    )
    memory_growth = length_rows[-1]["command"]["peak_MiB"] / length_rows[0]["command"]["peak_MiB"]
    frame_factor = lengths[-1] / lengths[0]
    largest_name = f"{largest['case'].n_atoms} atoms x {largest['case'].n_frames} frames"
    targets = [
        (
            (
                f"spectrum / bare read, CPU time ({largest_name}; worst of all sizes "
                f"{fmt(worst_read_ratio)})"
            ),
            "<= 1.3",
            fmt(largest_read_ratio),
            largest_read_ratio <= 1.3,
        ),
        (
            (
                f"spectrum / bare read, wall time ({largest_name}; worst of all sizes "
                f"{fmt(worst_read_ratio_wall)}; the SHA-256 runs in a second thread)"
            ),
            "<= 1.3",
            fmt(largest_read_ratio_wall),
            largest_read_ratio_wall <= 1.3,
        ),
        (
            f"spectrum vs in-memory, CPU time ({largest_name})",
            "faster",
            f"{fmt(cpu(largest, 'command'))} s vs {fmt(cpu(largest, 'in_memory'))} s",
            faster_than_memory,
        ),
        (
            f"spectrum peak memory / in-memory peak ({largest_name})",
            "<= 0.20",
            fmt(memory_fraction, 3),
            memory_fraction <= 0.2,
        ),
        (
            (
                f"spectrum CPU time vs frames: largest deviation from the straight line "
                f"{fmt(fixed_s)} s + {1e3 * per_frame_s:.3f} ms x frames"
            ),
            "<= 10 %",
            f"{100 * linear_residual:.1f} %",
            linear_residual <= 0.10,
        ),
        (
            f"spectrum peak memory, {lengths[-1]} vs {lengths[0]} frames ({frame_factor:.0f}x frames; flat = 1)",
            "<= 1.10",
            fmt(memory_growth),
            memory_growth <= 1.10,
        ),
        (
            "speed-up from 1 to 2 cores of the frame-blocked trajectory (2 blocks + combine, wall time)",
            ">= 1.7",
            fmt(speedup_cores),
            speedup_cores >= 1.7,
        ),
        (
            (
                "speed-up, 2 frame blocks in parallel + combine vs one job on 2 cores (wall time;"
                " the one job hashes its input on the second core)"
            ),
            ">= 1.7",
            fmt(speedup_blocks),
            speedup_blocks >= 1.7,
        ),
        (
            "the same from CPU times (slower block + combine; as on 2 idle cores)",
            ">= 1.7",
            fmt(speedup_blocks_cpu),
            speedup_blocks_cpu >= 1.7,
        ),
    ]
    print("targets (issue 7):")
    for name, target, value, ok in targets:
        print(f"  {name}: {value} (target {target}) {verdict(ok).strip('*')}")

    # ---- report ------------------------------------------------------------------------
    def both(entry: dict) -> str:
        return f"{fmt(entry['seconds'])} / {fmt(entry['cpu_seconds'])}"

    def table(rows: list[dict], with_library: bool) -> list[str]:
        head = "| atoms | frames | TRR MiB | read s | " + ("library s | " if with_library else "")
        head += "spectrum s | in-memory s | spectrum / read (wall / CPU) | spectrum / in-memory (CPU) "
        head += "| peak MiB read | peak MiB spectrum | peak MiB in-memory | SHA-256 of input s |"
        lines = [head, "|" + "---:|" * (head.count("|") - 1)]
        for r in rows:
            c = r["case"]
            cells = [str(c.n_atoms), str(c.n_frames), f"{r['file_MiB']:.0f}", both(r["read"])]
            if with_library:
                cells.append(both(r["library"]) if "library" in r else "")
            cells += [
                both(r["command"]),
                both(r["in_memory"]),
                (
                    f"{fmt(r['command']['seconds'] / r['read']['seconds'])} / "
                    f"{fmt(cpu(r, 'command') / cpu(r, 'read'))}"
                ),
                fmt(cpu(r, "command") / cpu(r, "in_memory")),
                f"{r['read']['peak_MiB']:.0f}",
                f"{r['command']['peak_MiB']:.0f}",
                f"{r['in_memory']['peak_MiB']:.0f}",
                both(r["hash"]),
            ]
            lines.append("| " + " | ".join(cells) + " |")
        return lines

    segment_frames = round(SEGMENT_PS / TIMESTEP_PS)
    report = [
        "# Performance",
        "",
        "Written by `python benchmarks/bench_scaling.py"
        + (" --quick" if args.quick else "")
        + f"` on {started:%Y-%m-%d %H:%M} UTC. Re-run it to refresh this page. The figures are"
        " from one run on the machine described below, not guarantees.",
        "",
        "## Machine",
        "",
        *machine_description(),
        (
            f"- load average before / after the run: {load_before} / {load_after}. When the machine is"
            " shared with other work, wall times are noisy and CPU time (user + system) is the steadier"
            " figure; ratios are given for both. Each figure is the best of"
            f" {repeats} run(s)."
        ),
        "",
        "## What is measured",
        "",
        (
            f"Synthetic GROMACS TRR files (positions and velocities, float32), frames {TIMESTEP_PS} ps apart,"
            f" velocities with the Maxwell variance at {TEMPERATURE_K:.0f} K, written to a temporary"
            " directory (files in the page cache, XDR offsets built beforehand). Each figure comes from its"
            " own subprocess; times are measured after the imports; peak memory is that process's"
            f" `ru_maxrss` (the imports alone take {baseline['peak_MiB']:.0f} MiB). Times are given as"
            " wall / CPU seconds."
        ),
        "",
        (
            "- **read**: `MDAnalysis.Universe(topology, trajectory)`, then a loop over all frames taking"
            " `atoms.velocities`: the least any velocity analysis must do."
        ),
        (
            "- **library**: the same loop feeding `qcorr.spectra.estimator.SegmentAccumulator` (one group,"
            " centre-of-mass velocity removed per frame), no output file."
        ),
        (
            f"- **spectrum**: the whole `qcorr spectrum` command, in-process (`--segment-ps {SEGMENT_PS}` ="
            f" {segment_frames} frames, default overlap and taper, `--threads 1`), NetCDF output included."
        ),
        (
            "- **SHA-256 of input**: hashing the trajectory file alone, part of the spectrum time"
            " (the command records every input's SHA-256, computed in a second thread while the frames"
            " are read; a frame-block job hashes only its 1/N of the bytes)."
        ),
        (
            "- **in-memory**: all velocities in one float64 array, one zero-padded FFT along time over the"
            " whole run, mass-weighted power spectrum and VACF (the plain approach; code in the script)."
        ),
        "",
        f"## Scaling with trajectory length ({length_atoms} atoms)",
        "",
        *table(length_rows, with_library=True),
        "",
        "CPU time of `qcorr spectrum` per frame: "
        + ", ".join(
            f"{r['case'].n_frames} frames {1e3 * cpu(r, 'command') / r['case'].n_frames:.3f} ms"
            for r in length_rows
        )
        + f"; straight-line fit {fmt(fixed_s)} s + {1e3 * per_frame_s:.3f} ms per frame"
        f" (bare read: {1e3 * linear_fit([r['case'].n_frames for r in length_rows], [cpu(r, 'read') for r in length_rows])[1]:.3f} ms per frame).",
        "",
        f"## Scaling with atom count ({atoms_frames} frames)",
        "",
        *table(atom_rows, with_library=False),
        "",
        (
            f"## Frame blocks and cores ({block_case.n_atoms} atoms x {block_case.n_frames} frames,"
            f" {block_file_MiB:.0f} MiB)"
        ),
        "",
        (
            "The two block jobs are started at the same time as two processes; every run was"
            f" repeated {max(3, repeats)} times, alternating, and the fastest is shown. Combined"
            f" result vs one job: {agreement}. The speed-up from 1 to 2 cores compares the same"
            " two block jobs and the combine run with both cores and confined to one. Two processes"
            " get two cores only when nothing"
            " else runs: with outside load (load average above) the wall-time speed-up measures"
            " the load, and the CPU-time line shows what two idle cores would give."
        ),
        "",
        "| run | wall s | speed-up vs one job | peak MiB per process |",
        "|---|---:|---:|---:|",
        f"| one job, `--threads 1` | {fmt(single['seconds'])} | 1.00 | {single['peak_MiB']:.0f} |",
        (
            f"| `--block 1-of-2` and `--block 2-of-2` in parallel | {fmt(best_blocks['wall'])} "
            f"| {fmt(single['seconds'] / best_blocks['wall'])} "
            f"| {max(b['peak_MiB'] for b in best_blocks['blocks']):.0f} |"
        ),
        (
            f"| then `qcorr combine` | {fmt(best_blocks['combine']['seconds'])} | "
            f"| {best_blocks['combine']['peak_MiB']:.0f} |"
        ),
        f"| 2 blocks + combine | {fmt(blocked_seconds)} | {fmt(speedup_blocks)} | |",
        (
            f"| the same 2 blocks + combine confined to 1 core (`sched_setaffinity`) | "
            f"{fmt(one_core_seconds)} | {fmt(single['seconds'] / one_core_seconds)} | |"
        ),
        (
            f"| 2 blocks + combine, from CPU times (slower block {fmt(blocks_cpu)} s + combine"
            f" {fmt(combine_cpu)} s vs one job {fmt(single_cpu)} s) | | {fmt(speedup_blocks_cpu)} | |"
        ),
        (
            f"| one job, `--threads 2` (its process + 1 worker from a forkserver, start-up included) "
            f"| {fmt(threaded['seconds'])} | {fmt(speedup_threads)} | {threaded['peak_MiB']:.0f} |"
        ),
        "",
        "## Targets (issue 7)",
        "",
        "| quantity | target | measured | |",
        "|---|---|---|---|",
        *[
            f"| {name} | {target} | {value} | {verdict(ok)} |"
            for name, target, value, ok in targets
        ],
        "",
    ]
    text = "\n".join(report)
    if output is not None:
        from qcorr.safe_write import write_text_atomic

        write_text_atomic(output, text)
        print(f"bench_scaling: wrote {output}")
    else:
        print()
        print(text)
    if tmp is not None:
        tmp.cleanup()
    return 0


if __name__ == "__main__":
    sys.exit(main())
