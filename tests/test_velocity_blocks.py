"""Block sampler (qcorr.reading.velocity_blocks) = frame-by-frame sampler, bit for bit.

The frame-by-frame :class:`qcorr.reading.stream.VelocitySampler` is the reference (its
centre-of-mass removal and running sums are tested against analytic cases in
tests/test_trajectory.py and tests/test_kinetic_fluctuations.py); the block version
must give identical samples and statistics for any block size, atom subset, counted
range and changing box, and name the same frame when a time stamp or a velocity is bad.
"""

from __future__ import annotations

import numpy as np
import pytest

mda = pytest.importorskip("MDAnalysis")

from qcorr.errors import SamplingError, TrajectoryError  # noqa: E402
from qcorr.reading.masses import MassCheck  # noqa: E402
from qcorr.reading.stream import FrameStatistics, VelocitySampler  # noqa: E402
from qcorr.reading.time_axis import FrameWindow  # noqa: E402
from qcorr.reading.universe import wrap_universe  # noqa: E402
from qcorr.reading.velocity_blocks import StoredVelocityBlocks  # noqa: E402

N_ATOMS, N_FRAMES, DT = 41, 150, 0.004


def _trajectory(path, *, bad_time_at=None, nan_at=None):
    rng = np.random.default_rng(7)
    u = mda.Universe.empty(N_ATOMS, trajectory=True, velocities=True)
    with mda.Writer(str(path), n_atoms=N_ATOMS) as w:
        for k in range(N_FRAMES):
            ts = u.trajectory.ts
            ts.positions = rng.uniform(0, 25, (N_ATOMS, 3)).astype(np.float32)
            v = rng.normal(0, 4, (N_ATOMS, 3)).astype(np.float32) + np.float32(0.3)  # a drift to remove
            if k == nan_at:
                v[5, 1] = np.nan
            ts.velocities = v
            ts.time = DT * k + (0.5 * DT if k == bad_time_at else 0.0)
            ts.dimensions = [25.0 + 0.001 * (k // 40), 25.0, 25.0, 90, 90, 90]
            w.write(u.atoms)
    return wrap_universe(mda.Universe(str(path)))


def _channels(opened, subset):
    idx = np.arange(0, N_ATOMS, 2 if subset else 1)
    masses = np.random.default_rng(3).uniform(1.0, 16.0, N_ATOMS)[idx]
    return MassCheck(indices=idx, masses=masses)


def _frame_by_frame(opened, channels, window, count_from, count_stop):
    stats = FrameStatistics()
    sampler = VelocitySampler(opened, channels, window, source="stored", dtype=np.float32, statistics=stats,
                              count_from=count_from, count_stop=count_stop)
    samples = [sampler.add(ts, k).copy() for k, ts in enumerate(opened.read_frames(0, N_FRAMES))]
    return np.array(samples), stats


def _in_blocks(opened, channels, window, count_from, count_stop, block_frames):
    stats = FrameStatistics()
    blocks = StoredVelocityBlocks(opened, channels, window, statistics=stats, count_from=count_from,
                                  count_stop=count_stop, block_frames=block_frames)
    out = []
    for k, ts in enumerate(opened.read_frames(0, N_FRAMES)):
        done = blocks.add(ts, k)
        if done is not None:
            assert done[0] == len(out)
            out.extend(done[1].copy())
    done = blocks.flush()
    if done is not None:
        out.extend(done[1].copy())
    return np.array(out), stats


@pytest.mark.parametrize("block_frames", [1, 7, 64, 500])
@pytest.mark.parametrize("subset", [False, True])
def test_blocks_equal_frame_by_frame(tmp_path, block_frames, subset):
    opened = _trajectory(tmp_path / "t.trr")
    channels = _channels(opened, subset)
    window = FrameWindow(0, N_FRAMES, 1, DT, 0.0)
    a, sa = _frame_by_frame(opened, channels, window, 10, 131)
    b, sb = _in_blocks(opened, channels, window, 10, 131, block_frames)
    assert a.dtype == b.dtype == np.float32
    assert np.array_equal(a, b)
    assert abs(a.mean(axis=(0, 1))).max() < 0.3  # the drift of 0.3 A/ps was removed
    assert sa.frames == sb.frames == 121
    assert sa.samples == sb.samples
    assert sa.kinetic == sb.kinetic and sa.momentum == sb.momentum
    assert sa.com_kinetic_sum == sb.com_kinetic_sum and sa.box_volume_sum_A3 == sb.box_volume_sum_A3


@pytest.mark.parametrize("fault, error, words", [
    ({"bad_time_at": 77}, SamplingError, "frame 77"),
    ({"nan_at": 90}, TrajectoryError, "atom index 5"),
])
def test_a_bad_frame_is_named_as_frame_by_frame(tmp_path, fault, error, words):
    """A bad interval or a non-finite velocity gives the frame-by-frame sampler's message."""
    opened = _trajectory(tmp_path / "t.trr", **fault)
    channels = _channels(opened, False)
    window = FrameWindow(0, N_FRAMES, 1, DT, 0.0)
    with pytest.raises(error) as one:
        _frame_by_frame(opened, channels, window, 0, None)
    with pytest.raises(error) as two:
        _in_blocks(opened, channels, window, 0, None, 64)
    assert str(one.value) == str(two.value) and words in str(two.value)
