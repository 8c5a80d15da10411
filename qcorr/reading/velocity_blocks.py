"""Stored single-precision velocities, centre-of-mass motion removed, a block of frames at a time.

The same samples and running sums as :class:`qcorr.reading.stream.VelocitySampler`
with ``source="stored"`` and ``dtype=numpy.float32`` (bit for bit: the centre-of-mass
velocity is ``masses @ v`` in float64 per frame with the same BLAS call, subtracted in
float32; the kinetic energy is the same per-frame dot product), but frames are
collected into a (frames, channels, 3) buffer and the centre-of-mass removal, kinetic
energy, momentum and time-stamp checks run once per block instead of once per frame.
Per frame only the copy of the velocities and the time stamp remain in Python: the
sampler's own cost falls from about 37 µs to a few µs per frame of 648 atoms
(``benchmarks/bench_reading_cost.py``, issue 16).

:class:`qcorr.spectra.part_pass.PartPass` uses it for atomic spectra of stored
velocities; differences of positions and the molecular decomposition (float64) go
frame by frame through :class:`~qcorr.reading.stream.VelocitySampler`.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from qcorr.errors import TrajectoryError
from qcorr.reading.masses import MassCheck
from qcorr.reading.stream import FrameStatistics, _box_volume, _check_finite
from qcorr.reading.time_axis import INTERVAL_TOLERANCE, FrameWindow, check_one_interval
from qcorr.reading.universe import OpenedTrajectory

__all__ = ["BLOCK_FRAMES", "StoredVelocityBlocks"]

#: frames per block: large enough to make the per-block calls negligible, small enough to
#: stay in cache (64 frames of 1,000 atoms: 0.8 MB of float32)
BLOCK_FRAMES = 64


class StoredVelocityBlocks:
    """Blocks of centre-of-mass-free stored velocities (float32, Å/ps).

    Parameters
    ----------
    opened, channels, window, statistics, count_from, count_stop
        As :class:`qcorr.reading.stream.VelocitySampler`.
    block_frames : int
        Frames per block.

    Use :meth:`add` for every frame in window order; it returns ``(first_sample, block)``
    when a block is complete, else None; :meth:`flush` returns the last, partial block.
    A returned block is overwritten by the next one.
    """

    def __init__(self, opened: OpenedTrajectory, channels: MassCheck, window: FrameWindow, *,
                 statistics: FrameStatistics | None = None, count_from: int = 0,
                 count_stop: int | None = None, block_frames: int = BLOCK_FRAMES) -> None:
        self.opened, self.window = opened, window
        self.statistics = statistics
        self.count_from = int(count_from)
        self.count_stop = None if count_stop is None else int(count_stop)
        self._idx = channels.indices
        self._masses = np.ascontiguousarray(channels.masses, dtype=np.float64)
        self._total_mass = float(self._masses.sum())
        self._all_atoms = len(self._idx) == opened.universe.atoms.n_atoms
        self._time_factor = opened.lammps_time_factor
        self._stamped = opened.stamped
        self._velocity_factor = float(opened.lammps_velocity_factor)
        n = len(self._idx)
        self._block = np.empty((int(block_frames), n, 3), np.float32)
        self._times = np.empty(int(block_frames), np.float64)
        self._boxes: list = []
        self._filled = 0
        self._first = 0  # window position of the block's first frame
        self._previous_time: float | None = None
        self._volume_cache: list = [None, 0.0]

    def add(self, ts, position: int) -> tuple[int, NDArray[np.float32]] | None:
        """Copy frame *ts* (window position *position*); the block it completes, if any.

        Raises
        ------
        TrajectoryError
            A frame without velocities, or a non-finite velocity (names the frame and atom).
        SamplingError
            An interval unlike the window's time step (names the frame and both intervals).
        """
        k = self._filled
        if k == 0:
            self._first = position
        if not ts.has_velocities:
            raise TrajectoryError(
                f"{self.opened.where(self.window.frame(position))} has no velocities; pass "
                "--velocities-from positions to derive them from positions by finite differences"
            )
        raw = ts.velocities
        if self._all_atoms:
            np.copyto(self._block[k], raw)
        else:
            np.take(raw, self._idx, axis=0, out=self._block[k])
        if self._stamped:
            self._times[k] = float(ts.time) * self._time_factor
        dims = ts.dimensions
        self._boxes.append(None if dims is None else dims.copy())  # the reader reuses its array
        self._filled = k + 1
        if self._filled == len(self._block):
            return self._process()
        return None

    def flush(self) -> tuple[int, NDArray[np.float32]] | None:
        """The partial block collected since the last complete one (None if empty)."""
        return self._process() if self._filled else None

    def _process(self) -> tuple[int, NDArray[np.float32]]:
        n, first = self._filled, self._first
        block = self._block[:n]
        if self._stamped:
            self._check_times(n, first)
        masses, total = self._masses, self._total_mass
        # centre-of-mass velocity in float64: the same gemv per frame as numpy.dot(masses, v)
        com = np.matmul(masses, block.astype(np.float64)) * (self._velocity_factor / total)
        if not np.isfinite(com).all():  # sum_j m_j v_j is finite iff every v_j is
            bad = int(np.flatnonzero(~np.isfinite(com).all(axis=1))[0])
            _check_finite(block[bad], self.opened, self._idx, self.window, first + bad, "velocity")
        if self._velocity_factor != 1.0:
            np.multiply(block, np.float32(self._velocity_factor), out=block)
        com32 = com.astype(np.float32)
        for c in range(3):  # one long strided loop per component; a (k, 1, 3) broadcast is 5x slower
            np.subtract(block[:, :, c], com32[:, c:c + 1], out=block[:, :, c])
        self._count(block, com, first)
        self._filled = 0
        self._boxes.clear()
        return first, block

    def _check_times(self, n: int, first: int) -> None:
        times = self._times[:n]
        previous = self._previous_time
        reference = self.window.timestep_ps
        intervals = np.diff(times, prepend=times[0] if previous is None else previous)
        checked = intervals if previous is not None else intervals[1:]
        if checked.size and not (np.abs(checked - reference) <= INTERVAL_TOLERANCE * abs(reference)).all():
            start = 0 if previous is not None else 1
            for j in range(start, n):  # the per-frame check names the first frame at fault
                check_one_interval(self.opened, self.window, first + j, float(intervals[j]), reference,
                                   float(times[j]))
        self._previous_time = float(times[n - 1])

    def _count(self, block: NDArray[np.float32], com: NDArray[np.float64], first: int) -> None:
        """Statistics of the counted samples of the block (as VelocitySampler._count)."""
        statistics = self.statistics
        if statistics is None:
            return
        n = len(block)
        lo = max(self.count_from - first, 0)
        hi = n if self.count_stop is None else min(self.count_stop - first, n)
        if hi <= lo:
            return
        counted = block[lo:hi]
        c = com[lo:hi]
        mass = self._total_mass
        # |v|^2 per atom in float32, (x^2 + y^2) + z^2 as numpy.einsum("ij,ij->i") sums it,
        # then the masses' dot product in float64 per frame (the same gemv as numpy.dot)
        squares = np.multiply(counted, counted)
        speeds = squares[:, :, 0] + squares[:, :, 1]
        speeds += squares[:, :, 2]
        kinetic = 0.5 * np.matmul(self._masses, speeds.astype(np.float64)[:, :, None])[:, 0]
        statistics.frames += hi - lo
        com_terms = (mass * (c[:, 0] * c[:, 0] + c[:, 1] * c[:, 1] + c[:, 2] * c[:, 2])).tolist()
        for term in com_terms:  # summed in frame order, as frame by frame
            statistics.com_kinetic_sum += term
        statistics.samples.extend(range(first + lo, first + hi))
        statistics.kinetic.extend(kinetic.tolist())
        statistics.momentum.extend(map(tuple, (mass * c).tolist()))
        cache = self._volume_cache
        for box in self._boxes[lo:hi]:
            if box is None:
                continue
            key = box.tobytes()
            if cache[0] != key:
                cache[:] = [key, _box_volume(box) if np.all(box[:3] > 0) else 0.0]
            statistics.box_volume_sum_A3 += cache[1]
