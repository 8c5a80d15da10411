"""The direct XDR decoders (qcorr.reading.xdr_frames, qcorr.reading.trr_frames) give MDAnalysis' reader values bit for bit.

Reference: MDAnalysis' own TRRReader / XTCReader (Gowers et al., Proc. SciPy 2016;
Michaud-Agrawal et al., J. Comput. Chem. 32, 2319 (2011)) on files written by
MDAnalysis' writers: velocities, positions, box (orthorhombic, triclinic, changing
per frame, absent), time stamps and frame numbers must be identical, and every reader
set-up the decoder cannot reproduce exactly (dt override, unit conversion off,
transformations) must fall back to MDAnalysis' iteration.  The numpy TRR decoder was also
compared, frame by frame and bit for bit, with MDAnalysis on the GROMACS-written TRR files
of the MDAnalysisTests 2.11.0 data (adk_oplsaa.trr, 47,681 atoms; cobrotoxin.trr; test.trr;
surface.trr; trr_test_only_10_frame_10_atoms.trr): identical (not repeated here, the
package is 60 MB).
"""

from __future__ import annotations

import numpy as np
import pytest

mda = pytest.importorskip("MDAnalysis")

from qcorr.reading.universe import wrap_universe  # noqa: E402
from qcorr.reading.xdr_frames import fast_reader_for, xdr_frames  # noqa: E402

N_ATOMS, N_FRAMES = 37, 23


def _write(path, *, box: str, velocities: bool = True, fmt: str = "TRR"):
    """A small TRR/XTC with random float32 data; *box* is 'cubic', 'triclinic', 'changing' or 'none'."""
    rng = np.random.default_rng(20261202)
    u = mda.Universe.empty(N_ATOMS, trajectory=True, velocities=velocities and fmt == "TRR")
    u.add_TopologyAttr("masses", np.full(N_ATOMS, 12.0))
    with mda.Writer(str(path), n_atoms=N_ATOMS) as w:
        for k in range(N_FRAMES):
            ts = u.trajectory.ts
            ts.positions = rng.uniform(0.0, 30.0, (N_ATOMS, 3)).astype(np.float32)
            if velocities and fmt == "TRR":
                ts.velocities = rng.normal(0.0, 5.0, (N_ATOMS, 3)).astype(np.float32)
            ts.time = 0.004 * k
            ts.dimensions = {
                "cubic": [30.0, 30.0, 30.0, 90, 90, 90],
                "triclinic": [30.0, 31.0, 32.0, 80, 95, 100],
                "changing": [30.0 + 0.01 * k, 30.0, 30.0 - 0.01 * k, 90, 90, 90],
                "none": None,
            }[box]
            ts.frame = k
            w.write(u.atoms)
    return path


def _pairs(path, start=0, stop=N_FRAMES):
    u = mda.Universe(str(path))
    fast = xdr_frames(u.trajectory, start, stop)
    assert fast is not None, "the plain reader must take the direct route"
    reference = mda.Universe(str(path)).trajectory
    for ts_fast, k in zip(fast, range(start, stop), strict=True):
        yield ts_fast, reference[k]


@pytest.mark.parametrize("box", ["cubic", "triclinic", "changing", "none"])
def test_trr_frames_equal_the_mdanalysis_reader(tmp_path, box):
    path = _write(tmp_path / f"{box}.trr", box=box)
    n = 0
    for fast, ts in _pairs(path):
        assert fast.frame == ts.frame and fast.time == ts.time
        assert fast.has_velocities and fast.has_positions
        assert np.array_equal(fast.velocities, ts.velocities)
        assert np.array_equal(fast.positions, ts.positions)
        if ts.dimensions is None:
            assert fast.dimensions is None
        else:
            assert fast.dimensions.dtype == ts.dimensions.dtype
            assert np.array_equal(fast.dimensions, ts.dimensions)
        n += 1
    assert n == N_FRAMES


def test_trr_without_velocities_says_so(tmp_path):
    path = _write(tmp_path / "x.trr", box="cubic", velocities=False)
    for fast, ts in _pairs(path):
        assert fast.has_velocities is False and ts.has_velocities is False
        assert np.array_equal(fast.positions, ts.positions)


def test_xtc_frames_equal_the_mdanalysis_reader(tmp_path):
    path = _write(tmp_path / "p.xtc", box="triclinic", fmt="XTC")
    for fast, ts in _pairs(path, 5, 17):
        assert fast.frame == ts.frame and fast.time == ts.time
        assert np.array_equal(fast.positions, ts.positions)
        assert np.array_equal(fast.dimensions, ts.dimensions)
        assert not fast.has_velocities


def test_a_window_past_the_end_raises_eof(tmp_path):
    path = _write(tmp_path / "c.trr", box="cubic")
    u = mda.Universe(str(path))
    with pytest.raises(EOFError):
        list(xdr_frames(u.trajectory, N_FRAMES - 2, N_FRAMES + 1))


def test_reader_set_ups_it_cannot_reproduce_fall_back(tmp_path):
    from MDAnalysis.transformations import translate

    path = _write(tmp_path / "c.trr", box="cubic")
    assert fast_reader_for(mda.Universe(str(path)).trajectory) is not None
    assert fast_reader_for(mda.Universe(str(path), dt=0.5).trajectory) is None
    assert fast_reader_for(mda.Universe(str(path), convert_units=False).trajectory) is None
    moved = mda.Universe(str(path))
    moved.trajectory.add_transformations(translate([1.0, 0.0, 0.0]))
    assert fast_reader_for(moved.trajectory) is None


def test_opened_trajectory_reads_the_same_frames_either_way(tmp_path):
    """read_frames (direct route) against MDAnalysis' sliced iteration of the same window."""
    path = _write(tmp_path / "c.trr", box="changing")
    u = mda.Universe(str(path))
    opened = wrap_universe(u)
    frames = [(ts.frame, ts.time, ts.velocities.copy(), None if ts.dimensions is None else ts.dimensions.copy())
              for ts in opened.read_frames(3, 20)]
    assert type(next(iter(opened.read_frames(3, 4)))).__name__ == "XdrFrame"
    reference = mda.Universe(str(path)).trajectory
    for (frame, time, v, dims), ts in zip(frames, reference[3:20], strict=True):
        assert frame == ts.frame and time == ts.time
        assert np.array_equal(v, ts.velocities) and np.array_equal(dims, ts.dimensions)


def test_trr_with_forces_takes_the_numpy_route_and_equals_the_reader(tmp_path):
    """Single-precision TRR (MDAnalysis' writer, with forces) -> qcorr.reading.trr_frames, same bits."""
    from qcorr.reading.trr_frames import trr_layout

    rng = np.random.default_rng(5)
    u = mda.Universe.empty(N_ATOMS, trajectory=True, velocities=True, forces=True)
    path = tmp_path / "f.trr"
    with mda.Writer(str(path), n_atoms=N_ATOMS) as w:
        for k in range(7):
            ts = u.trajectory.ts
            ts.positions = rng.uniform(0, 20, (N_ATOMS, 3)).astype(np.float32)
            ts.velocities = rng.normal(0, 3, (N_ATOMS, 3)).astype(np.float32)
            ts.forces = rng.normal(0, 50, (N_ATOMS, 3)).astype(np.float32)
            ts.time = 0.01 * k
            ts.dimensions = [20.0, 21.0, 22.0, 90, 90, 90]
            w.write(u.atoms)
    reader = mda.Universe(str(path)).trajectory
    assert trr_layout(path, reader._xdr.offsets, N_ATOMS)
    for fast, ts in _pairs(path, 0, 7):
        assert np.array_equal(fast.velocities, ts.velocities) and np.array_equal(fast.positions, ts.positions)
        assert fast.time == ts.time and np.array_equal(fast.dimensions, ts.dimensions)


def test_a_damaged_trr_frame_is_an_error_not_a_number(tmp_path):
    """A frame header that no longer matches (here: its atom count) raises OSError for the caller to name."""
    from qcorr.reading.trr_frames import HEADER

    path = _write(tmp_path / "c.trr", box="cubic")
    u = mda.Universe(str(path))
    offsets = u.trajectory._xdr.offsets
    data = bytearray(path.read_bytes())
    natoms_at = int(offsets[4]) + HEADER.size - 8 - 3 * 4  # the 'natoms' field of frame 4
    assert int.from_bytes(data[natoms_at:natoms_at + 4], "big") == N_ATOMS
    data[natoms_at:natoms_at + 4] = (N_ATOMS + 1).to_bytes(4, "big")
    path.write_bytes(bytes(data))
    frames = xdr_frames(u.trajectory, 0, N_FRAMES)
    with pytest.raises(OSError, match="header"):
        for _ in frames:
            pass


def test_other_trr_layouts_are_left_to_mdanalysis(tmp_path):
    """A first frame with another version string is not decoded by numpy (trr_layout says no)."""
    from qcorr.reading.trr_frames import trr_layout

    path = _write(tmp_path / "c.trr", box="cubic")
    offsets = mda.Universe(str(path)).trajectory._xdr.offsets
    data = bytearray(path.read_bytes())
    data[12:24] = b"GMX_trn_fil_"
    changed = tmp_path / "other.trr"
    changed.write_bytes(bytes(data))
    assert trr_layout(path, offsets, N_ATOMS)
    assert not trr_layout(changed, offsets, N_ATOMS)
