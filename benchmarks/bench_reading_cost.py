"""Spectrum against the bare read, whole processes side by side (issue 16).

For a real-engine trajectory (OpenMM flexible TIP3P water, 648 atoms, 10,001 frames,
157 MB TRR, made once by ``benchmarks/reading_data.py`` and cached outside the
repository) and for synthetic TRR files of 250, 4,000 and 1,000 atoms (100-370 MB,
``bench_scaling.py``'s writer), this script times whole processes, interpreter start
and imports included, in turn, ``--repeats`` times each, and prints medians:

* ``read``: ``MDAnalysis.Universe`` and a loop taking every frame's ``atoms.velocities``
  (the least any velocity analysis does) -- the floor;
* ``spectrum``: ``qcorr spectrum`` (``--threads 1``);
* ``spectrum --threads 2``: two processes (the forkserver worker included), the window
  split whatever its size (``split_always.py``: the threshold ``PROCESS_MIN_ATOM_FRAMES``
  set to 0 for this run);
* ``in-memory``: every velocity in one array and one FFT (``bench_scaling.measure_in_memory``);
* the size from which ``--threads 2`` beats ``--threads 1`` (:func:`split_crossover`), which
  sets ``PROCESS_MIN_ATOM_FRAMES``;
* positions only (the water run's positions as XTC, MDAnalysis' writer, precision 0.001 nm):
  ``read`` of the positions, and ``qcorr spectrum --velocities-from positions``.

Wall seconds are measured around the process; CPU seconds (user + system) and peak
memory (``ru_maxrss``) come from ``os.wait4`` for the process and every process it
waited for (a forkserver and its worker are reaped before the command exits, see
``bench_processes._reap_forkserver``).  It also measures the start-up of one worker
process (forkserver with ``qcorr.spectra.analysis`` preloaded, until the worker has
unpickled the analysis and can read) and derives the atom-frame count above which two
processes beat one.  ``--write`` replaces the section "Reading cost" of
``docs/performance.md``.

Usage::

    python benchmarks/bench_reading_cost.py [--repeats 5] [--skip-synthetic] [--write]
"""

from __future__ import annotations

import argparse
import datetime
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
sys.path.insert(0, str(HERE))

import bench_scaling as scaling  # noqa: E402  (synthetic trajectories, in-memory reference)
import reading_data  # noqa: E402  (the OpenMM water run)

SECTION = "## Reading cost: spectrum against the bare read (issue 16)"

READ_CODE = """
import sys
import MDAnalysis as mda
u = mda.Universe(sys.argv[1], sys.argv[2])
atoms = u.atoms
what = sys.argv[3]
for ts in u.trajectory:
    atoms.velocities if what == "velocities" else atoms.positions
"""


def _child(argv: list[str]) -> dict:
    """Run *argv*; wall seconds, CPU seconds and peak MiB of it and the processes it reaped."""
    env = dict(os.environ, PYTHONPATH=str(REPO), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1",
               MKL_NUM_THREADS="1")
    start = time.perf_counter()
    process = subprocess.Popen(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(process.pid, 0)
    wall = time.perf_counter() - start
    err = process.stderr.read().decode(errors="replace")
    process.stderr.close()
    process.returncode = os.waitstatus_to_exitcode(status)
    if process.returncode != 0:
        raise SystemExit(f"{' '.join(argv[:4])} ... failed:\n{err[-2000:]}")
    return {"wall": wall, "cpu": usage.ru_utime + usage.ru_stime, "MiB": usage.ru_maxrss / 1024}


def _spectrum_argv(top: Path, traj: Path, output: Path, *extra: str) -> list[str]:
    return [sys.executable, str(HERE / "split_always.py"), "spectrum", "--topology", str(top),
            "--trajectory", str(traj), "--temperature", "298.15", "--progress", "never",
            "--output", str(output), *extra]


def run_in_memory(top: str, traj: str) -> int:
    scaling.TIMESTEP_PS = float(os.environ.get("BENCH_TIMESTEP_PS", scaling.TIMESTEP_PS))
    scaling.measure_in_memory(top, traj)
    return 0


def worker_start_up(top: Path, traj: Path, repeats: int) -> dict:
    """Seconds from asking a forkserver for one worker until that worker has unpickled the analysis.

    Measured in a fresh process that imported what ``qcorr spectrum`` imports (as the
    command has when it splits).  Also the parent's CPU cost of pickling.
    """
    code = f"""
import json, os, pickle, sys, time, warnings
warnings.simplefilter("ignore")
sys.path.insert(0, {str(HERE)!r})
import MDAnalysis as mda
import multiprocessing
from concurrent.futures import ProcessPoolExecutor
from qcorr.spectra.analysis import VibrationalSpectrum
from qcorr.spectra.backends import FORKSERVER_PRELOAD
from worker_probe import unpickle_timed

u = mda.Universe({str(top)!r}, {str(traj)!r})
spectrum = VibrationalSpectrum(u, 298.15, hash_inputs=False)
start = time.time()
payload = pickle.dumps(spectrum._compute, protocol=pickle.HIGHEST_PROTOCOL)
pickled = time.time()
context = multiprocessing.get_context("forkserver")
context.set_forkserver_preload(list(FORKSERVER_PRELOAD))
with ProcessPoolExecutor(1, mp_context=context) as pool:
    entered, unpickled = pool.submit(unpickle_timed, payload).result()
import bench_processes
bench_processes._reap_forkserver()
print(json.dumps({{"pickle": pickled - start, "to_worker": entered - pickled, "unpickle": unpickled - entered,
                  "total": unpickled - start, "payload_kB": len(payload) / 1e3}}))
"""
    results = []
    for _ in range(repeats):
        env = dict(os.environ, PYTHONPATH=os.pathsep.join((str(REPO), str(HERE))))
        done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                              check=True, cwd=str(HERE))
        results.append(json.loads(done.stdout.strip().splitlines()[-1]))
    return {k: statistics.median(r[k] for r in results) for k in results[0]}


def split_crossover(top: Path, traj: Path, workdir: Path, repeats: int,
                    stops=(2500, 5000, 7500, 10000)) -> list[dict]:
    """Wall seconds of ``--threads 1`` and ``--threads 2`` (split whatever the size) on the first
    *stop* frames of the water run, 1 ps segments: where two processes start to pay.

    Both through ``split_always.py`` (the forkserver and its worker reaped, as in the table).
    """
    rows = []
    for stop in stops:
        got: dict[str, list[float]] = {"1": [], "2": []}
        for _ in range(repeats):
            for threads in ("1", "2"):
                argv = _spectrum_argv(top, traj, workdir / f"cross_{threads}.nc", "--stop", str(stop),
                                      "--segment-ps", "1", "--threads", threads)
                got[threads].append(_child(argv)["wall"])
        one, two = statistics.median(got["1"]), statistics.median(got["2"])
        print(f"crossover: {stop} frames: --threads 1 {one:.2f} s, --threads 2 {two:.2f} s", file=sys.stderr)
        rows.append({"frames": stop, "one": one, "two": two})
    return rows


def _cases(workdir: Path, skip_synthetic: bool) -> list[dict]:
    top, traj = reading_data.water_trajectory(20.0)
    xtc = reading_data.positions_only_xtc(top, traj)
    cases = [{"name": "water (OpenMM), TRR", "top": top, "traj": traj, "what": "velocities",
              "timestep_ps": 0.002},
             {"name": "water (OpenMM), XTC positions", "top": top, "traj": xtc, "what": "positions",
              "timestep_ps": 0.002}]
    if not skip_synthetic:
        for atoms, frames in ((250, 18000), (4000, 1300), (1000, 16000)):
            case = scaling.Case(atoms, frames)
            stop, straj = scaling.make_case(workdir, case)
            cases.append({"name": f"synthetic {atoms} atoms, TRR", "top": stop, "traj": straj,
                          "what": "velocities", "timestep_ps": scaling.TIMESTEP_PS})
    return cases


def _variants(case: dict, workdir: Path) -> list[tuple[str, list[str], dict]]:
    top, traj = case["top"], case["traj"]
    read = [sys.executable, "-c", READ_CODE, str(top), str(traj), case["what"]]
    # the water run with the default segments (5 ps), as a user runs it; synthetic ones 2 ps
    segment = [] if case["name"].startswith("water") else ["--segment-ps", str(scaling.SEGMENT_PS)]
    if case["what"] == "positions":
        return [("read", read, {}),
                ("spectrum", _spectrum_argv(top, traj, workdir / "xtc.nc", "--velocities-from", "positions",
                                            *segment), {})]
    stem = traj.stem
    imports = [sys.executable, "-c", "import MDAnalysis, xarray, qcorr.cli, qcorr.spectra.analysis"]
    return [("read", read, {}),
            ("imports only", imports, {}),
            ("spectrum", _spectrum_argv(top, traj, workdir / f"{stem}_1.nc", *segment), {}),
            ("spectrum --threads 2", _spectrum_argv(top, traj, workdir / f"{stem}_2.nc", *segment,
                                                    "--threads", "2"), {}),
            ("in-memory", [sys.executable, str(Path(__file__).resolve()), "--in-memory", str(top), str(traj)],
             {"BENCH_TIMESTEP_PS": str(case["timestep_ps"])})]


def _frames_and_atoms(top: Path, traj: Path) -> tuple[int, int, float]:
    import MDAnalysis as mda

    u = mda.Universe(str(top), str(traj))
    return u.atoms.n_atoms, u.trajectory.n_frames, traj.stat().st_size / 1e6


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--skip-synthetic", action="store_true")
    parser.add_argument("--write", action="store_true", help="write the section of docs/performance.md")
    parser.add_argument("--in-memory", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.in_memory:
        return run_in_memory(*args.in_memory)

    with tempfile.TemporaryDirectory(prefix="qcorr_bench_reading_") as tmp:
        workdir = Path(tmp)
        cases = _cases(workdir, args.skip_synthetic)
        load_before = os.getloadavg()
        rows = []
        for case in cases:
            n_atoms, n_frames, size_MB = _frames_and_atoms(case["top"], case["traj"])
            variants = _variants(case, workdir)
            got: dict[str, list[dict]] = {label: [] for label, *_ in variants}
            for _ in range(args.repeats):
                for label, command, env in variants:
                    saved = {k: os.environ.get(k) for k in env}
                    os.environ.update(env)
                    try:
                        got[label].append(_child(command))
                    finally:
                        for k, v in saved.items():
                            if v is None:
                                os.environ.pop(k, None)
                            else:
                                os.environ[k] = v
                    print(f"{case['name']}: {label}: {got[label][-1]}", file=sys.stderr)
            med = {label: {k: statistics.median(r[k] for r in runs) for k in ("wall", "cpu", "MiB")}
                   for label, runs in got.items()}
            rows.append((case, n_atoms, n_frames, size_MB, med))
        start_up = worker_start_up(cases[0]["top"], cases[0]["traj"], max(3, args.repeats))
        crossover = split_crossover(cases[0]["top"], cases[0]["traj"], workdir, args.repeats)
        load_after = os.getloadavg()
    text = report(rows, start_up, load_before, load_after, args.repeats, crossover)
    print(text)
    if args.write:
        write_section(text)
    return 0


def report(rows, start_up, load_before, load_after, repeats, crossover) -> str:
    lines = [
        SECTION,
        "",
        (f"Written by `python benchmarks/bench_reading_cost.py` on "
         f"{datetime.datetime.now(datetime.UTC):%Y-%m-%d %H:%M} UTC, medians of {repeats} runs taken in "
         "turn. Every figure is a whole process (interpreter start, imports, opening, hashing and the "
         "written file included). Wall seconds around the process; CPU seconds (user + system) and "
         "peak memory of the process and every process it waited for (the `--threads 2` worker and "
         f"forkserver included). Load average (1, 5, 15 min) before: {load_before[0]:.2f}, "
         f"{load_before[1]:.2f}, {load_before[2]:.2f}; after: {load_after[0]:.2f}, {load_after[1]:.2f}, "
         f"{load_after[2]:.2f} on {os.cpu_count()} logical cores."),
        "",
        *scaling.machine_description(),
        "",
        "| trajectory | atoms | frames | MB | run | wall s | CPU s | peak MiB | wall / read | CPU / read |",
        "|---|---:|---:|---:|---|---:|---:|---:|---:|---:|",
    ]
    for case, n_atoms, n_frames, size_MB, med in rows:
        read = med["read"]
        for label, m in med.items():
            lines.append(f"| {case['name']} | {n_atoms} | {n_frames} | {size_MB:.0f} | {label} | {m['wall']:.2f} "
                         f"| {m['cpu']:.2f} | {m['MiB']:.0f} | {m['wall'] / read['wall']:.2f} "
                         f"| {m['cpu'] / read['cpu']:.2f} |")
    lines += [
        "",
        (f"Worker start-up (median of {max(3, repeats)}, fresh process per repeat, water TRR): "
         f"{start_up['total']:.2f} s from asking the forkserver for one worker until the worker has "
         f"unpickled the analysis ({start_up['pickle']:.3f} s pickling a {start_up['payload_kB']:.0f} kB "
         f"payload, {start_up['to_worker']:.2f} s forkserver start with `qcorr.spectra.analysis` "
         f"preloaded and fork, {start_up['unpickle']:.2f} s unpickling, which reopens the Universe)."),
        "",
        ("The forkserver starts when the command starts and preloads the pipeline without xarray "
         "and pandas while the command imports and opens, so a worker is usually ready about when "
         "the calling process starts its own part; the start-up above is that of a fresh process "
         "that asks for a worker at once."),
        "",
        "Where two processes start to pay (first frames of the water run, 648 atoms, 1 ps segments, "
        f"medians of {repeats}; `--threads 2` split whatever the size):",
        "",
        "| frames | atom-frames | `--threads 1` wall s | `--threads 2` wall s | 2 / 1 |",
        "|---:|---:|---:|---:|---:|",
        *[f"| {r['frames']} | {r['frames'] * rows[0][1]:.2g} | {r['one']:.2f} | {r['two']:.2f} | "
          f"{r['two'] / r['one']:.2f} |" for r in crossover],
        "",
        (f"`PROCESS_MIN_ATOM_FRAMES` ({_threshold():.2g} atom-frames) is set from this table and the "
         "`--threads 2` rows of the table above (split whatever the size): the comment beside "
         "it in `qcorr/cli/spectrum_command.py` says how."),
    ]
    return "\n".join(lines) + "\n"


def _threshold() -> float:
    from qcorr.cli.spectrum_command import PROCESS_MIN_ATOM_FRAMES

    return float(PROCESS_MIN_ATOM_FRAMES)


def write_section(text: str) -> None:
    from qcorr.safe_write import write_text_atomic

    page = REPO / "docs" / "performance.md"
    current = page.read_text()
    if SECTION in current:
        head, rest = current.split(SECTION, 1)
        tail = rest[rest.find("\n## "):] if "\n## " in rest else "\n"
        current = head + text + tail
    else:
        current = current.rstrip("\n") + "\n\n" + text
    write_text_atomic(page, current)


if __name__ == "__main__":
    sys.exit(main())
