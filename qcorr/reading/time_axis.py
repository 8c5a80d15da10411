"""The time axis of a frame window: which frames, and their spacing from the time stamps.

The time step comes from the frames' time stamps, never from ``trajectory.dt`` (which
several MDAnalysis readers fill with a fallback); unevenly spaced or missing frames
raise :class:`~qcorr.errors.SamplingError` naming the first bad frame.  Times are in ps
(after the LAMMPS unit factor of :class:`~qcorr.reading.universe.OpenedTrajectory`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from qcorr.errors import ConfigError, SamplingError
from qcorr.reading.universe import OpenedTrajectory

__all__ = [
    "INTERVAL_TOLERANCE",
    "FrameWindow",
    "check_intervals",
    "check_one_interval",
    "evenly_spaced_frames",
    "frame_window",
]

#: relative tolerance on each frame interval (fraction of the time step), plus float32 rounding
INTERVAL_TOLERANCE = 1e-2


@dataclass(frozen=True)
class FrameWindow:
    """Frames ``start, start+step, ...`` (< stop) of the trajectory, and their spacing.

    Attributes
    ----------
    start, stop, step : int
        Trajectory frame indices (stop exclusive, already clipped to the trajectory).
    timestep_ps : float
        Spacing of consecutive window frames in ps (from the time stamps).
    first_time_ps : float
        Time stamp of the first window frame (ps).
    """

    start: int
    stop: int
    step: int
    timestep_ps: float
    first_time_ps: float

    @property
    def n_frames(self) -> int:
        """Frames in the window."""
        return len(range(self.start, self.stop, self.step))

    def frame(self, index: int) -> int:
        """Trajectory frame number of window position *index*."""
        return self.start + index * self.step


def _float32_spacing(time_ps: float) -> float:
    return float(np.spacing(np.float32(abs(time_ps)))) * 2.0


def frame_window(
    opened: OpenedTrajectory, start: int | None = None, stop: int | None = None, step: int | None = None
) -> FrameWindow:
    """Resolve the frame window and its time step from the first two and the last time stamps.

    The time step is (t_last − t_first)/(n − 1) over the whole window (robust against
    float32 rounding of single stamps); the first interval must agree with it.  Every
    later interval is checked while streaming (:func:`stream_velocities`).

    Raises
    ------
    ConfigError
        Negative step or an empty window.
    SamplingError
        Fewer than two frames, non-increasing time stamps, or a span that disagrees with
        the first interval (the frames are then scanned to name the first bad one).
    """
    trajectory = opened.universe.trajectory
    n_total = trajectory.n_frames
    step = 1 if step is None else int(step)
    if step <= 0:
        raise ConfigError(f"--step {step}: the frame step must be a positive integer")
    rng = range(*slice(start, stop, step).indices(n_total))
    if len(rng) < 2:
        raise SamplingError(
            f"the frame window (--start {start} --stop {stop} --step {step}) of {opened.label} "
            f"holds {len(rng)} of its {n_total} frames; at least two are needed"
        )
    factor = opened.lammps_time_factor
    t0 = float(trajectory[rng[0]].time) * factor
    t1 = float(trajectory[rng[1]].time) * factor
    t_last = float(trajectory[rng[-1]].time) * factor
    n = len(rng)
    dt = (t_last - t0) / (n - 1)
    window = FrameWindow(rng.start, rng.stop, rng.step, dt, t0)
    tol = INTERVAL_TOLERANCE * abs(dt) + _float32_spacing(t_last)
    if not dt > 0:
        raise SamplingError(
            f"the time stamps of {opened.label} do not increase (frame {rng[0]}: {t0:g} ps, frame "
            f"{rng[-1]}: {t_last:g} ps); the file may carry no times: give the frame spacing with "
            "--reader-option dt=PS if the reader accepts it"
        )
    if abs((t1 - t0) - dt) > tol:
        # find the first bad frame for a precise message (error path only)
        check_intervals(opened, window, reference_ps=t1 - t0)
        raise SamplingError(
            f"the time stamps of {opened.label} are not evenly spaced: frames "
            f"{rng[0]}..{rng[-1]} span {t_last - t0:g} ps, but the first interval is {t1 - t0:g} ps"
        )
    return window


def check_intervals(opened: OpenedTrajectory, window: FrameWindow, reference_ps: float) -> None:
    """Scan the window's time stamps; raise at the first interval unlike *reference_ps*."""
    factor = opened.lammps_time_factor
    previous = None
    for i, ts in enumerate(opened.universe.trajectory[window.start : window.stop : window.step]):
        t = float(ts.time) * factor
        if previous is not None:
            check_one_interval(opened, window, i, t - previous, reference_ps, t)
        previous = t


def check_one_interval(opened: OpenedTrajectory, window: FrameWindow, index: int, interval: float,
                       reference: float, time_ps: float) -> None:
    """Raise if one frame interval (ps) differs from *reference* (ps) by more than the tolerance.

    *index* is the later frame's window position, *time_ps* its time stamp (ps).  The
    tolerance is :data:`INTERVAL_TOLERANCE` of the reference plus two float32 spacings
    at *time_ps* (stamps are stored in single precision by most formats).

    Raises
    ------
    SamplingError
        Naming the frame (and its file) and both intervals.
    """
    difference = abs(interval - reference)
    if difference <= INTERVAL_TOLERANCE * abs(reference):  # fast path: no float32 spacing needed
        return
    if not difference <= INTERVAL_TOLERANCE * abs(reference) + _float32_spacing(time_ps):
        raise SamplingError(
            f"{opened.where(window.frame(index))} (t = {time_ps:g} ps) follows the "
            f"previous frame by {interval:.4g} ps instead of the regular {reference:.4g} ps (missing, "
            "repeated or unevenly spaced frames); choose a window of evenly spaced frames with "
            "--start/--stop/--step"
        )


def evenly_spaced_frames(frames, n_frames: int) -> tuple[int, int, int]:
    """``(start, stop, step)`` of an explicit frame selection, which must be evenly spaced.

    Parameters
    ----------
    frames : array_like of int or bool
        Frame indices (ascending, at least two, equal steps) or a boolean mask over the
        trajectory's frames.
    n_frames : int
        Frames in the trajectory.

    Returns
    -------
    tuple of int
        ``range(start, stop, step)`` equals the selection.

    Raises
    ------
    ConfigError
        If the selection is not ascending, not evenly spaced, holds fewer than two
        frames or a frame outside the trajectory.
    """
    values = np.asarray(frames)
    if values.dtype == bool:
        if values.shape != (n_frames,):
            raise ConfigError(
                f"frames: a boolean mask must have one entry per frame ({n_frames}), got {values.shape}"
            )
        values = np.flatnonzero(values)
    if values.ndim != 1 or (values.size and not np.issubdtype(values.dtype, np.integer)):
        raise ConfigError("frames: give a 1-d list of frame indices (integers) or a boolean mask")
    if values.size < 2:
        raise ConfigError(f"frames: {values.size} frame(s) selected; a spectrum needs at least two")
    values = np.where(values < 0, values + n_frames, values)
    if values.min() < 0 or values.max() >= n_frames:
        raise ConfigError(f"frames: indices must lie in 0..{n_frames - 1} (the trajectory's frames)")
    steps = np.diff(values)
    if np.any(steps <= 0):
        raise ConfigError("frames: the selection must be ascending without repeats; sort it or use "
                          "start/stop/step")
    uneven = np.flatnonzero(steps != steps[0])
    if uneven.size:
        bad = int(uneven[0]) + 1
        raise ConfigError(
            f"frames: the selection must be evenly spaced (a spectrum needs a uniform time step); "
            f"frame {int(values[bad])} follows frame {int(values[bad - 1])}, not the step "
            f"{int(steps[0])}; use start/stop/step instead"
        )
    return int(values[0]), int(values[-1]) + 1, int(steps[0])
