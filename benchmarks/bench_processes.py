"""One spectrum job on one or two processes: which process split is faster (``--threads``).

For one synthetic GROMACS TRR trajectory (written with the machinery of
``bench_scaling.py``, at least 100 MB), this script times, side by side in one run,

* ``qcorr spectrum --threads 1`` and ``--threads 2`` of this tree: with 2, the job runs
  :class:`qcorr.spectra.analysis.VibrationalSpectrum` through MDAnalysis'
  ``AnalysisBase.run`` with qcorr's :class:`~qcorr.spectra.backends.ProcessBackend`
  (workers forked from a forkserver that preloaded qcorr; the calling process computes
  parts too; 4 parts per process);
* the same class run through MDAnalysis' own ``BackendMultiprocessing`` (a
  ``multiprocessing.Pool`` of forked workers; the calling process waits), and through
  ``ProcessBackend`` with spawned workers, to separate the two choices;
* optionally (``--old-tree PATH``: a copy of an earlier qcorr, e.g. ``git archive
  <commit> | tar -x -C PATH``) that tree's ``qcorr spectrum --threads 1`` and ``--threads 2``.

Every run is its own subprocess; times are wall seconds from the command's start (after
the imports) to its written file, worker start-up included; each is the best of
``--repeats`` runs, taken in turn.  The files must agree with the one-process file to
rounding (printed).  The machine's load average before and after is printed, since on a
shared machine two processes only get two cores when nothing else runs.  With
``--write`` the results replace the section "One job on several processes" of
``docs/performance.md`` (the rest of the page is kept).

Usage::

    python benchmarks/bench_processes.py [--atoms 1000 --frames 24000] [--old-tree PATH] [--write]
"""

from __future__ import annotations

import argparse
import datetime
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
sys.path.insert(0, str(HERE))

import bench_scaling as scaling  # the synthetic-trajectory machinery

SECTION = "## One job on several processes (`--threads`)"


def _argv(top: str, traj: str, output: str, threads: int) -> list[str]:
    return ["spectrum", "--topology", top, "--trajectory", traj, "--temperature", str(scaling.TEMPERATURE_K),
            "--segment-ps", str(scaling.SEGMENT_PS), "--progress", "never", "--output", output,
            "--threads", str(threads)]


def _import_everything() -> None:
    """Import what the spectrum command imports lazily, in this tree or an older one."""
    import importlib

    for name in ("MDAnalysis", "xarray", "h5netcdf", "scipy.fft", "qcorr.cli.spectrum_command",
                 "qcorr.spectra.analysis", "qcorr.reading.trajectory", "qcorr.spectra.spectrum_file"):
        try:
            importlib.import_module(name)
        except ModuleNotFoundError:
            pass
    import qcorr.cli

    qcorr.cli.build_parser()


def _reap_forkserver() -> None:
    """Wait for the forkserver's workers to end, then stop and reap the forkserver.

    Its workers are its children, not ours: only when they have been reaped by the
    forkserver and the forkserver by us does their CPU time reach the benchmark's
    ``RUSAGE_CHILDREN``.  (Uses multiprocessing's private ``_forkserver``; benchmark only.)
    """
    from multiprocessing import forkserver

    server = forkserver._forkserver
    pid = server._forkserver_pid
    if pid is None:
        return
    deadline = time.time() + 60
    while time.time() < deadline and any(_parent_of(p) == pid for p in os.listdir("/proc") if p.isdigit()):
        time.sleep(0.05)
    server._stop()


def _parent_of(pid: str) -> int | None:
    try:
        with open(f"/proc/{pid}/stat") as handle:
            return int(handle.read().rsplit(")", 1)[1].split()[1])
    except (OSError, IndexError, ValueError):
        return None


def measure(spec: dict) -> dict:
    """One measurement (runs in its own subprocess)."""
    import warnings

    warnings.simplefilter("ignore")
    _import_everything()
    if spec["kind"] == "command":
        import qcorr.cli

        start = time.perf_counter()
        status = qcorr.cli.main(_argv(spec["top"], spec["traj"], spec["output"], spec["threads"]))
        seconds = time.perf_counter() - start
        if status != 0:
            raise SystemExit(f"qcorr spectrum exited with {status}")
        _reap_forkserver()
        return {"seconds": seconds}
    import MDAnalysis as mda
    from MDAnalysis.analysis.backends import BackendMultiprocessing

    from qcorr.spectra.analysis import VibrationalSpectrum
    from qcorr.spectra.backends import ProcessBackend

    start = time.perf_counter()
    universe = mda.Universe(spec["top"], spec["traj"])
    spectrum = VibrationalSpectrum(universe, scaling.TEMPERATURE_K, segment_ps=scaling.SEGMENT_PS)
    backend = {"mdanalysis_pool": BackendMultiprocessing, "spawn": lambda n: ProcessBackend(n, start_method="spawn")
               }[spec["kind"]](spec["threads"])
    spectrum.run(backend=backend, n_parts=4 * spec["threads"])
    spectrum.save(spec["output"])
    seconds = time.perf_counter() - start
    _reap_forkserver()
    return {"seconds": seconds}


def launch(spec: dict, pythonpath: str) -> dict:
    """Run one measurement; adds the CPU seconds of every process it started (imports included)."""
    import resource

    env = dict(os.environ, PYTHONPATH=pythonpath, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1",
               MKL_NUM_THREADS="1")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    done = subprocess.run([sys.executable, __file__, "--measure", json.dumps(spec)], capture_output=True,
                          text=True, env=env, check=False)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        raise SystemExit(f"measurement {spec['label']} failed:\n{done.stderr.strip()[-2000:]}")
    result = json.loads(done.stdout.strip().splitlines()[-1])
    result["cpu_seconds"] = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return result


def agreement(reference: Path, other: Path) -> float:
    """Largest |VDOS difference| / max VDOS between two spectrum files."""
    import numpy as np
    import xarray as xr

    with xr.open_dataset(reference) as a, xr.open_dataset(other) as b:
        return float(np.abs(a["vdos"] - b["vdos"]).max() / np.abs(a["vdos"]).max())


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--atoms", type=int, default=1000)
    parser.add_argument("--frames", type=int, default=24000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--old-tree", default=None, help="a copy of an earlier qcorr to time beside this one")
    parser.add_argument("--old-label", default=None, help="name of the old tree in the table (default: its path)")
    parser.add_argument("--workdir", default=None, help="directory for the trajectory (default: a temporary one)")
    parser.add_argument("--write", action="store_true", help="write the section of docs/performance.md")
    parser.add_argument("--measure", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.measure:
        print(json.dumps(measure(json.loads(args.measure))))
        return 0

    with tempfile.TemporaryDirectory(prefix="qcorr_bench_processes_") as tmp:
        workdir = Path(args.workdir or tmp)
        workdir.mkdir(parents=True, exist_ok=True)
        case = scaling.Case(args.atoms, args.frames)
        top, traj = scaling.make_case(workdir, case)
        size_MiB = traj.stat().st_size / 2**20
        variants = [("this tree, --threads 1", "command", 1, str(REPO)),
                    ("this tree, --threads 2 (ProcessBackend: forkserver, caller takes parts)", "command", 2, str(REPO)),
                    ("this tree, class with MDAnalysis BackendMultiprocessing (fork pool, caller waits), 2",
                     "mdanalysis_pool", 2, str(REPO)),
                    ("this tree, class with ProcessBackend spawning its workers, 2", "spawn", 2, str(REPO))]
        if args.old_tree:
            old = args.old_label or args.old_tree
            variants += [(f"old tree ({old}), --threads 1", "command", 1, args.old_tree),
                         (f"old tree ({old}), --threads 2", "command", 2, args.old_tree)]
        load_before = os.getloadavg()
        best: dict[str, float] = {}
        cpu: dict[str, float] = {}
        for repeat in range(args.repeats):
            for k, (label, kind, threads, path) in enumerate(variants):
                output = workdir / f"variant{k}_{repeat}.nc"
                spec = {"label": label, "kind": kind, "threads": threads, "top": str(top), "traj": str(traj),
                        "output": str(output)}
                result = launch(spec, path)
                best[label] = min(best.get(label, float("inf")), result["seconds"])
                cpu[label] = min(cpu.get(label, float("inf")), result["cpu_seconds"])
                print(f"{label}: {result['seconds']:.2f} s wall, {result['cpu_seconds']:.2f} s CPU",
                      file=sys.stderr)
        load_after = os.getloadavg()
        reference = workdir / "variant0_0.nc"
        agree = {label: agreement(reference, workdir / f"variant{k}_0.nc") for k, (label, *_rest) in enumerate(variants)}

    one = best[variants[0][0]]
    lines = [
        SECTION,
        "",
        (f"Written by `python benchmarks/bench_processes.py` on "
        f"{datetime.datetime.now(datetime.UTC):%Y-%m-%d %H:%M} UTC: {args.atoms} atoms x {args.frames} "
        f"frames ({size_MiB:.0f} MiB TRR), `--segment-ps {scaling.SEGMENT_PS}`, best of {args.repeats} runs "
        "taken in turn; wall seconds from the command's start (imports done) to the written file, worker "
        f"start-up included. Load average (1, 5, 15 min) before: {load_before[0]:.2f}, {load_before[1]:.2f}, "
        f"{load_before[2]:.2f}; after: {load_after[0]:.2f}, {load_after[1]:.2f}, {load_after[2]:.2f} on "
        f"{os.cpu_count()} logical cores."),
        "",
        ("CPU s is the user + system time of every process of the run (the command's, the forkserver's, "
         "the workers'), imports included: what the run cost the machine. A second process helps only "
         "when a core is free: on a machine busy with other work (load average near or above the core "
         "count) the two-process runs can take longer than one process, and the wall times scatter "
         "widely between repeats."),
        "",
        "| run | wall s | speed-up vs this tree, 1 process | CPU s, all processes | max VDOS difference vs 1 process |",
        "|---|---:|---:|---:|---:|",
    ]
    for label, *_rest in variants:
        lines.append(f"| {label} | {best[label]:.2f} | {one / best[label]:.2f} | {cpu[label]:.2f} "
                     f"| {agree[label]:.1e} |")
    text = "\n".join(lines) + "\n"
    print(text)
    if args.write:
        page = REPO / "docs" / "performance.md"
        current = page.read_text()
        if SECTION in current:
            head, rest = current.split(SECTION, 1)
            tail = rest[rest.find("\n## "):] if "\n## " in rest else "\n"
            current = head + text + tail
        else:
            current = current.rstrip("\n") + "\n\n" + text
        from qcorr.safe_write import write_text_atomic

        write_text_atomic(page, current)
    return 0


if __name__ == "__main__":
    sys.exit(main())
