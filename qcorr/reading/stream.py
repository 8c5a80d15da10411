"""Velocities of consecutive frames, centre-of-mass motion removed, one sample at a time.

:class:`VelocitySampler` turns the frames of a window, fed in order, into velocity
samples (Å/ps, shape (n_channels, 3)): the stored velocities, or forward differences
of positions made continuous across periodic boundaries (minimum image of each step's
displacement), on request only.  Every sample has the centre-of-mass velocity of the
channels removed; box volume and centre-of-mass kinetic term are summed in a
:class:`FrameStatistics`.  :func:`stream_velocities` is the same as a generator over a
range of samples.  Frames are read with one seek and then ``next()``
(:func:`consecutive_frames`), which costs less than MDAnalysis' sliced iteration.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from qcorr.errors import ConfigError, TrajectoryError
from qcorr.reading.masses import MassCheck
from qcorr.reading.time_axis import FrameWindow, check_one_interval
from qcorr.reading.universe import OpenedTrajectory, first_line, release_quietly

__all__ = [
    "VELOCITY_SOURCES",
    "FrameStatistics",
    "VelocitySampler",
    "consecutive_frames",
    "guarded_frames",
    "minimum_image",
    "stream_velocities",
    "window_frames",
]

#: accepted velocity sources (option ``--velocities-from``)
VELOCITY_SOURCES = ("stored", "positions")


@dataclass
class FrameStatistics:
    """Running sums the spectrum file stores besides the spectra (over the counted frames).

    Attributes
    ----------
    frames : int
        Frames counted.
    box_volume_sum_A3 : float
        Sum of box volumes (Å³); 0 for frames without a box.
    com_kinetic_sum : float
        Sum over frames of M |V_com|² before removal (u Å² ps⁻²).
    samples, kinetic, momentum : list
        Per counted frame (see the comments of the fields).
    """

    frames: int = 0
    box_volume_sum_A3: float = 0.0
    com_kinetic_sum: float = 0.0
    #: per counted sample: its window index, Σ ½ m v² after the centre-of-mass removal
    #: (u Å² ps⁻²) and the total momentum Σ m v before it (u Å ps⁻¹): the series of the
    #: microcanonical heat capacity (:mod:`qcorr.baselines.kinetic`)
    samples: list = field(default_factory=list)
    kinetic: list = field(default_factory=list)
    momentum: list = field(default_factory=list)


class VelocitySampler:
    """Centre-of-mass-free velocity samples from consecutive frames of a window.

    Sample j is window frame j for stored velocities; for ``source="positions"`` it is
    the forward difference (x_{j+1} − x_j)/Δt of window frames j and j+1, each
    displacement first reduced to its minimum image (so positions need not be
    unwrapped; valid while no atom moves more than half a box edge between frames).
    Every interval between consecutive time stamps is checked against the window's time step
    (formats without stamps use the stated frame spacing and have none to check).

    Parameters
    ----------
    opened : OpenedTrajectory
    channels : MassCheck
        Atoms (indices) and masses (u) of the channels.
    window : FrameWindow
    source : {"stored", "positions"}
    dtype : {numpy.float64, numpy.float32}
        Precision of the stored velocities returned.  ``float32`` hands on the reader's
        single-precision values (MDAnalysis reads every format in float32) with the
        centre-of-mass velocity computed in float64 and subtracted once, which avoids a
        double-precision copy per frame; ``float64`` (default) converts first.
        Velocities from positions are always differenced and returned in float64.
    statistics : FrameStatistics, optional
        Updated in place for samples in ``[count_from, count_stop)``.
    count_from, count_stop : int, optional
        Samples in this range add to *statistics* (default: every sample).

    Raises
    ------
    ConfigError
        Unknown *source* or *dtype*.
    """

    def __init__(self, opened: OpenedTrajectory, channels: MassCheck, window: FrameWindow, *,
                 source: str = "stored", dtype: type = np.float64,
                 statistics: FrameStatistics | None = None, count_from: int = 0,
                 count_stop: int | None = None) -> None:
        if source not in VELOCITY_SOURCES:
            raise ConfigError(f"--velocities-from {source!r}: choose stored or positions")
        if np.dtype(dtype) not in (np.float32, np.float64):
            raise ConfigError(f"velocity precision {dtype!r}: choose numpy.float32 or numpy.float64")
        self.opened = opened
        self.window = window
        self.source = source
        self.statistics = statistics
        self.count_from = int(count_from)
        self.count_stop = None if count_stop is None else int(count_stop)
        self._single = np.dtype(dtype) == np.float32 and source == "stored"
        self._idx = channels.indices
        self._masses = channels.masses
        self._total_mass = float(channels.masses.sum())
        self._all_atoms = len(self._idx) == opened.universe.atoms.n_atoms  # no fancy indexing needed
        self._time_factor = opened.lammps_time_factor
        self._stamped = opened.stamped
        self._velocity_factor = opened.lammps_velocity_factor
        self._previous_time: float | None = None
        self._previous_positions: NDArray[np.float64] | None = None
        self._previous_box = None
        self._volume_cache: list = [None, 0.0]
        #: window index of the sample returned last (None before the first)
        self.sample: int | None = None

    @property
    def extra_frames(self) -> int:
        """Frames read beyond the samples: 1 for differences of positions, else 0."""
        return 1 if self.source == "positions" else 0

    def add(self, ts, position: int) -> NDArray[np.floating] | None:
        """The velocity sample that frame *ts* (window position *position*) completes.

        Frames must come in window order without gaps.  Returns an (n_channels, 3)
        array in Å/ps (a new array each time), or None for the first frame of a run of
        differences (it only provides the first positions).  :attr:`sample` holds the
        returned sample's window index.

        Raises
        ------
        TrajectoryError
            A frame without velocities (stored mode; says how to derive them), or a
            non-finite velocity/position (names the frame and the atom).
        SamplingError
            An interval unlike the window's time step (names the frame and both intervals).
        """
        opened, window, idx = self.opened, self.window, self._idx
        if self._stamped:
            time_ps = float(ts.time) * self._time_factor
            if self._previous_time is not None:
                check_one_interval(opened, window, position, time_ps - self._previous_time,
                                   window.timestep_ps, time_ps)
            self._previous_time = time_ps
        masses, total_mass = self._masses, self._total_mass
        if self.source == "stored":
            if not ts.has_velocities:
                raise TrajectoryError(
                    f"{opened.where(window.frame(position))} has no velocities; pass "
                    "--velocities-from positions to derive them from positions by finite differences"
                )
            raw = ts.velocities
            factor_v = self._velocity_factor
            if self._single:
                selected = raw if self._all_atoms else raw[idx]
                # centre-of-mass velocity in float64; sum_j m_j v_j is finite iff every v_j is
                cx, cy, cz = (np.dot(masses, selected.astype(np.float64))
                              * (factor_v / total_mass)).tolist()
                if not math.isfinite(cx + cy + cz):
                    _check_finite(selected, opened, idx, window, position, "velocity")
                v = np.multiply(selected, np.float32(factor_v)) if factor_v != 1.0 else selected
                v = _minus_vector(v, np.array((cx, cy, cz), np.float32))
                self._count(position, (cx, cy, cz), ts.dimensions, v)
                self.sample = position
                return v
            v = np.array(raw if self._all_atoms else raw[idx], dtype=np.float64)
            if factor_v != 1.0:
                v *= factor_v
            _check_finite(v, opened, idx, window, position, "velocity")
            box = ts.dimensions
            sample = position
        else:
            x = np.array(ts.positions if self._all_atoms else ts.positions[idx], dtype=np.float64)
            _check_finite(x, opened, idx, window, position, "position")
            if self._previous_positions is None:
                self._previous_positions = x
                self._previous_box = ts.dimensions
                return None
            current_box = ts.dimensions
            d = minimum_image(x - self._previous_positions, current_box)
            self._previous_positions = x
            v = d / window.timestep_ps
            sample = position - 1  # the difference of frames j, j+1 is sample j
            box = self._previous_box
            self._previous_box = current_box
        com = masses @ v / total_mass
        v -= com
        self._count(sample, tuple(com.tolist()), box, v)
        self.sample = sample
        return v

    def _count(self, sample: int, com: tuple[float, float, float], dims, velocities) -> None:
        """Add one sample's box volume, M |V_com|², kinetic energy and momentum to the
        statistics (if counted).

        *com* is the centre-of-mass velocity removed (Å/ps), *velocities* the sample after
        its removal.  The box volume is recomputed only when the box's bytes change
        (constant-volume runs compute it once).
        """
        statistics = self.statistics
        stop = self.count_stop
        if statistics is None or sample < self.count_from or (stop is not None and sample >= stop):
            return
        mass = self._total_mass
        statistics.frames += 1
        statistics.com_kinetic_sum += mass * (com[0] * com[0] + com[1] * com[1] + com[2] * com[2])
        statistics.samples.append(sample)
        statistics.kinetic.append(0.5 * float(np.dot(self._masses, np.einsum("ij,ij->i", velocities, velocities))))
        statistics.momentum.append((mass * com[0], mass * com[1], mass * com[2]))
        if dims is None:
            return
        key = dims.tobytes()
        cache = self._volume_cache
        if cache[0] != key:
            box = np.asarray(dims)
            cache[:] = [key, _box_volume(box) if np.all(box[:3] > 0) else 0.0]
        statistics.box_volume_sum_A3 += cache[1]


def minimum_image(d: NDArray[np.float64], box) -> NDArray[np.float64]:
    """Displacements *d* (n, 3), Å, reduced to their minimum image in *box* (in place; returned).

    Only atoms that crossed a boundary (a component beyond a quarter of the shortest
    edge) are reduced; :func:`MDAnalysis.lib.distances.minimize_vectors` works in
    float32, so the others keep their float64 displacement.  No box (or a zero one):
    *d* unchanged.
    """
    if box is None or d.size == 0:
        return d
    edges = np.asarray(box[:3])
    if not edges.min() > 0:  # also False for NaN edges, as np.all(edges > 0)
        return d
    magnitude = np.abs(d)
    limit = 0.25 * float(edges.min())
    if not magnitude.max() > limit:  # one reduction; the per-atom mask only when some atom jumped
        return d
    jumped = np.any(magnitude > limit, axis=1)
    if jumped.any():
        from MDAnalysis.lib.distances import minimize_vectors

        d[jumped] = minimize_vectors(d[jumped].astype(np.float32), box)
    return d


def stream_velocities(
    opened: OpenedTrajectory,
    channels: MassCheck,
    window: FrameWindow,
    first_sample: int,
    stop_sample: int,
    *,
    source: str = "stored",
    count_from: int | None = None,
    count_stop: int | None = None,
    statistics: FrameStatistics | None = None,
    progress_mode: str = "never",
    dtype: type = np.float64,
) -> Iterator[NDArray[np.floating]]:
    """Yield centre-of-mass-free velocities (Å/ps, (n_channels, 3)) one sample at a time.

    Parameters
    ----------
    opened : OpenedTrajectory
    channels : MassCheck
        Atoms (indices) and masses (u) of the channels.
    window : FrameWindow
    first_sample, stop_sample : int
        Samples ``first_sample .. stop_sample-1`` are produced (see :class:`VelocitySampler`).
    source : {"stored", "positions"}
    count_from, count_stop : int, optional
        Samples in this range add to *statistics* (box volume, centre-of-mass drift).
    statistics : FrameStatistics, optional
        Updated in place.
    progress_mode : {"auto", "always", "never"}
    dtype : {numpy.float64, numpy.float32}
        See :class:`VelocitySampler`.

    Yields
    ------
    ndarray, shape (n_channels, 3), Å/ps (a new array each sample)

    Raises
    ------
    TrajectoryError, SamplingError
        As :meth:`VelocitySampler.add`, and an unreadable frame (names it).
    """
    from qcorr.progress import progress

    sampler = VelocitySampler(
        opened, channels, window, source=source, dtype=dtype, statistics=statistics,
        count_from=first_sample if count_from is None else count_from,
        count_stop=stop_sample if count_stop is None else count_stop,
    )
    n_read = stop_sample - first_sample + sampler.extra_frames
    frames = window_frames(opened, window, first_sample, first_sample + n_read)
    for k, ts in enumerate(progress(frames, total=n_read, desc="frames", mode=progress_mode)):
        v = sampler.add(ts, first_sample + k)
        if v is not None:
            yield v


def window_frames(opened: OpenedTrajectory, window: FrameWindow, first: int, stop: int):
    """Time steps of window positions ``first .. stop-1``, read in order.

    Consecutive trajectory frames (step 1) are read with one seek and then ``next()``
    (:func:`consecutive_frames`, via :meth:`OpenedTrajectory.read_frames`, which also
    skips repeated restart frames); a reader failure becomes a TrajectoryError naming the
    frame (:func:`guarded_frames`).
    """
    frames = opened.read_frames(window.frame(first), window.start + stop * window.step, window.step)
    return guarded_frames(frames, opened, window, first)


#: rows per block in :func:`_minus_vector`
_BLOCK_ROWS = 64


def _minus_vector(values: NDArray[np.floating], vector: NDArray[np.floating]) -> NDArray[np.floating]:
    """``values - vector`` for (n, 3) *values* and a 3-vector, as a new array (same bits).

    Broadcasting a 3-vector runs numpy's inner loop over 3 elements n times; subtracting
    the vector repeated 64 times from (n/64, 192) blocks gives long contiguous inner loops.
    """
    n, width = values.shape
    out = np.empty(values.shape, values.dtype)
    full = (n // _BLOCK_ROWS) * _BLOCK_ROWS
    if full:
        row = np.empty((_BLOCK_ROWS, width), values.dtype)
        row[:] = vector
        np.subtract(values[:full].reshape(-1, _BLOCK_ROWS * width), row.reshape(-1),
                    out=out[:full].reshape(-1, _BLOCK_ROWS * width))
    if full < n:
        np.subtract(values[full:], vector, out=out[full:])
    return out


def consecutive_frames(trajectory, start: int, stop: int):
    """Frames ``start .. stop-1`` read one after the other (one seek, then ``next()``).

    MDAnalysis' sliced iteration seeks to every frame; reading on costs less
    (about 10 % of a bare TRR read for 2,000 atoms).

    Raises
    ------
    EOFError
        If the reader finds no frame before *stop*.
    """
    if stop <= start:
        return
    yield trajectory[start]
    for _ in range(stop - start - 1):
        try:
            ts = trajectory.next()
        except StopIteration:  # the reader found no further frame
            raise EOFError("the trajectory ends before this frame") from None
        yield ts


def guarded_frames(frames, opened: OpenedTrajectory, window: FrameWindow, first_sample: int):
    """Iterate *frames*, turning a reader failure into a TrajectoryError naming the frame.

    *first_sample* is the window position of the first frame of *frames*.
    """
    iterator = iter(frames)
    k = 0
    while True:
        try:
            ts = next(iterator)
        except StopIteration:
            return
        except Exception as err:  # noqa: BLE001 -- any reader failure becomes one message naming the frame
            message = (
                f"cannot read {opened.where(window.frame(first_sample + k))} "
                f"({first_line(err)}); the file is truncated or corrupt there: use --stop to "
                "end the window before it, or repair the file"
            )
            release_quietly(err)
            raise TrajectoryError(message) from None
        yield ts
        k += 1


def _box_volume(dimensions) -> float:
    from MDAnalysis.lib.mdamath import box_volume

    return float(box_volume(np.asarray(dimensions, dtype=np.float32)))


def _atom_label(universe, channel_indices, channel) -> str:
    atom = universe.atoms[int(channel_indices[channel])]
    name = getattr(atom, "name", "?")
    resname = getattr(atom, "resname", "?")
    resid = getattr(atom, "resid", "?")
    return f"atom index {atom.index} (name {name}, residue {resname} {resid})"


def _check_finite(values, opened: OpenedTrajectory, idx, window: FrameWindow, position: int,
                  what: str) -> None:
    """Raise a TrajectoryError naming the frame (window position) and the first atom with a NaN or Inf."""
    if np.isfinite(values.sum()):  # fast path: the sum of finite values is finite (no overflow here)
        return
    finite = np.isfinite(values)
    if not finite.all():
        channel = int(np.flatnonzero(~finite.all(axis=1))[0])
        raise TrajectoryError(
            f"{opened.where(window.frame(position))} has a non-finite {what} (NaN or Inf) for "
            f"{_atom_label(opened.universe, idx, channel)}; the file is corrupt there, choose a window "
            "before it with --stop"
        )
