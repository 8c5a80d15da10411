"""The inputs of the robustness catalogue (tests/test_robustness.py), made in the test.

Everything is derived from the analytic diatomic scenario of ``tests/synthetic.py`` (four
antiphase dimers, 1000 frames of 2 fs) written with MDAnalysis' own writers, and from
files qcorr makes of it; broken variants are cut, edited or rewritten copies.

Layout under the catalogue's root directory (the names appear in docs/robustness.md):

* ``in/``: the inputs (trajectories, spectrum files, tables);
* ``work/<case>/``: one empty directory per case, for its outputs;
* ``full/``, ``nearly_full/``, ``read_only/``: small tmpfs mounts (Linux, root only): no
  byte free, one page free (a one-byte probe fits, an output does not), mounted read-only.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
import os
import shutil
import subprocess
import warnings
from pathlib import Path

import numpy as np
import synthetic
from conftest import (
    OSC_BINS,
    OSC_FRAMES,
    OSC_MASS_U,
    OSC_SEGMENT_PS,
    OSC_TEMPERATURE_K,
    OSC_TIMESTEP_PS,
)

#: the command-line options every spectrum case starts from (files are added per case)
SPECTRUM_SETTINGS = ["--temperature", "300", "--segment-ps", f"{OSC_SEGMENT_PS:g}", "--mass",
                     f"O={OSC_MASS_U}", "--progress", "never"]
#: the mounts of a full, a nearly full and a read-only file system
MOUNTS = ("full", "nearly_full", "read_only")
#: bytes of the tmpfs mounts (tmpfs counts whole pages)
MOUNT_BYTES = 1 << 20


def scenario(seed: int = 20261202) -> synthetic.Scenario:
    """The diatomic scenario of tests/conftest.py (another seed: another run of the same system)."""
    resolution_hz = 1.0 / (OSC_SEGMENT_PS * 1e-12)
    n_atoms = 2 * len(OSC_BINS)
    return synthetic.diatomic_oscillators(
        np.array(OSC_BINS) * resolution_hz, n_frames=OSC_FRAMES, timestep_ps=OSC_TIMESTEP_PS,
        temperature_K=OSC_TEMPERATURE_K, mass_u=OSC_MASS_U, seed=seed,
        kinetic_scale=(3 * n_atoms - 3) / (3 * n_atoms))


def qcorr_quietly(*argv) -> None:
    """Run a qcorr command that must succeed (making an input), output discarded."""
    from qcorr.cli import main

    sink = io.StringIO()
    with contextlib.redirect_stderr(sink), contextlib.redirect_stdout(sink), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main([str(a) for a in argv])
    assert code == 0, sink.getvalue()


def _cut(source: Path, target: Path, size: int) -> Path:
    target.write_bytes(source.read_bytes()[:size])
    return target


def _writer_frames(scn: synthetic.Scenario, path: Path, **writer_options) -> Path:
    """Positions (and velocities if the format has them) through MDAnalysis' writer for *path*."""
    import MDAnalysis as mda

    u = synthetic.universe_of(scn)
    with mda.Writer(str(path), n_atoms=scn.n_atoms, **writer_options) as writer:
        for ts, time in zip(u.trajectory, scn.times_ps):
            ts.time = float(time)
            writer.write(u.atoms)
    return path


def make_trajectories(d: Path) -> None:
    """Topologies and trajectories, good and broken."""
    scn = scenario()
    synthetic.write_gro(scn, d / "dimers.gro")
    good = synthetic.write_trr(scn, d / "dimers.trr")
    size = good.stat().st_size
    frame = size // scn.n_frames
    _cut(good, d / "cut_in_header.trr", size // 2 + 37)
    _cut(good, d / "cut_in_body.trr", 500 * frame + 100)  # the 501st frame's header is whole
    (d / "empty.trr").write_bytes(b"")
    (d / "random_bytes.trr").write_bytes(np.random.default_rng(7).integers(0, 256, 5000, dtype=np.uint8).tobytes())
    synthetic.write_trr(dataclasses.replace(scn, velocities=np.zeros_like(scn.velocities)), d / "zero_velocities.trr")
    jitter = scn.times_ps.copy()
    jitter[300] += 0.5 * scn.timestep_ps
    synthetic.write_trr(dataclasses.replace(scn, times_ps=jitter), d / "jitter.trr")
    nan_v = scn.velocities.copy()
    nan_v[700, 3, 1] = np.nan
    synthetic.write_trr(dataclasses.replace(scn, velocities=nan_v), d / "nan_velocity.trr")
    synthetic.write_trr(scn, d / "positions_only.trr", with_velocities=False)
    # another run of the same system: same file name and size, other contents
    (d / "other_run").mkdir()
    synthetic.write_trr(scenario(seed=99), d / "other_run" / "dimers.trr")
    # fewer atoms in the topology than in the trajectory
    synthetic.write_gro(dataclasses.replace(scn, positions=scn.positions[:, :6], velocities=scn.velocities[:, :6],
                                            masses=scn.masses[:6], names=scn.names[:6], types=scn.types[:6],
                                            resids=scn.resids[:6]), d / "six_atoms.gro")
    (d / "broken.gro").write_text("not a topology\n12\n")
    synthetic.write_gro(dataclasses.replace(scn, names=["QA", "QB"] * (scn.n_atoms // 2)), d / "unknown_elements.gro")
    # positions only: XTC and DCD through MDAnalysis' writers; the DCD with the writer's
    # default header time step (1 ps) although the frames are 2 fs apart
    xtc = _writer_frames(scn, d / "dimers.xtc")
    _cut(xtc, d / "cut.xtc", xtc.stat().st_size // 2 + 11)
    _writer_frames(scn, d / "default_header.dcd")
    dcd = d / "default_header.dcd"
    _cut(dcd, d / "cut.dcd", dcd.stat().st_size // 2 + 11)
    # LAMMPS dumps: MD step 0.5 fs, every 4th step written (frames 2 fs apart)
    dump = synthetic.write_lammps_dump(scn, d / "dimers.lammpstrj", units="real", md_timestep=0.5, steps_per_frame=4)
    text = dump.read_text()
    (d / "cut.lammpstrj").write_text(text[: len(text) // 2])


def make_spectra(d: Path) -> None:
    """Spectrum files: whole, one segment, molecular, frame blocks, broken."""
    files = ["--topology", d / "dimers.gro", "--trajectory", d / "dimers.trr"]
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--output", d / "dimers.nc")
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--stop", "201", "--output", d / "one_segment.nc")
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--molecular", "--output", d / "molecular.nc")
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--molecular", "--stop", "201",
                  "--output", d / "one_segment_molecular.nc")
    for index in (1, 2):
        qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--block", f"{index}-of-2",
                      "--output", d / f"block{index}.nc")
    qcorr_quietly("spectrum", "--topology", d / "dimers.gro", "--trajectory", d / "other_run" / "dimers.trr",
                  *SPECTRUM_SETTINGS, "--block", "2-of-2", "--output", d / "other_run" / "block2.nc")
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS, "--block", "2-of-3", "--output", d / "block2_of_3.nc")
    qcorr_quietly("spectrum", *files, *SPECTRUM_SETTINGS[:2], "--segment-ps", "0.2", *SPECTRUM_SETTINGS[4:],
                  "--block", "2-of-2", "--output", d / "block2_short_segments.nc")
    _cut(d / "dimers.nc", d / "truncated.nc", (d / "dimers.nc").stat().st_size // 2)
    import xarray as xr

    xr.Dataset({"x": ("n", np.arange(3.0))}, attrs={"title": "not made by qcorr"}).to_netcdf(
        d / "foreign.nc", engine="h5netcdf")


def make_tables(d: Path) -> None:
    """Property tables (CSV + sidecar + schema): whole, and cut, edited or incomplete copies."""
    qcorr_quietly("properties", d / "dimers.nc", "--quiet", "--output", d / "dimers.csv")
    qcorr_quietly("properties", d / "dimers.nc", "--quiet", "--system", "again", "--output", d / "again.csv")

    def copy(name: str, csv_bytes: bytes, sidecar: bool = True) -> None:
        (d / f"{name}.csv").write_bytes(csv_bytes)
        if sidecar:
            shutil.copy(d / "dimers.json", d / f"{name}.json")

    whole = (d / "dimers.csv").read_bytes()
    lines = whole.splitlines(keepends=True)
    copy("cut_mid_row", b"".join(lines[:8]) + lines[8][: len(lines[8]) // 2])
    copy("edited", whole.replace(b"harmonic_model", b"harmonic_modex", 1))
    copy("no_sidecar", whole, sidecar=False)
    copy("other_columns", whole.replace(b"classical_source", b"source", 1))
    copy("empty_table", b"")
    copy("binary_table", bytes(range(256)) * 4)
    copy("bad_sidecar", whole)
    (d / "bad_sidecar.json").write_text("{not json")
    copy("foreign_sidecar", whole)
    (d / "foreign_sidecar.json").write_text(json.dumps({"qcorr_file_kind": "spectrum"}))


def make_inputs(root: Path) -> Path:
    """Make every input under ``root/in``; return that directory."""
    d = root / "in"
    d.mkdir(parents=True)
    make_trajectories(d)
    make_spectra(d)
    make_tables(d)
    (root / "work").mkdir()
    return d


# ----------------------------------------------------------------------------- mounts


def mount_filesystems(root: Path) -> str | None:
    """Mount the full, nearly full and read-only tmpfs under *root*; None, or why not."""
    if os.geteuid() != 0 or shutil.which("mount") is None:
        return "mounting a tmpfs needs root and mount(8)"
    made = []
    for name in MOUNTS:
        point = root / name
        point.mkdir()
        done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={MOUNT_BYTES},mode=1777", "tmpfs", str(point)],
                              capture_output=True, text=True, check=False)
        if done.returncode != 0:
            unmount_filesystems(root, made)
            return f"mount -t tmpfs failed: {done.stderr.strip() or done.returncode}"
        made.append(name)
    _fill(root / "full", keep=0)
    _fill(root / "nearly_full", keep=os.statvfs(root / "nearly_full").f_frsize)
    subprocess.run(["mount", "-o", "remount,ro", str(root / "read_only")], check=True)
    return None


def _fill(point: Path, keep: int) -> None:
    """Fill a tmpfs so that *keep* bytes stay free."""
    stats = os.statvfs(point)
    free = stats.f_bavail * stats.f_frsize
    with open(point / "filler", "wb") as handle:
        handle.write(b"\0" * (free - keep))
    left = os.statvfs(point).f_bavail * os.statvfs(point).f_frsize
    assert left == keep, (point, left, keep)


def unmount_filesystems(root: Path, names=MOUNTS) -> None:
    """Unmount what :func:`mount_filesystems` mounted (lazily if busy)."""
    for name in names:
        point = root / name
        if os.path.ismount(point):
            subprocess.run(["umount", "-l", str(point)], check=False)
