"""Restarted runs in several files: frames the next file repeats are found and left out.

An MD engine that continues a run from a checkpoint writes the checkpoint's frame again
at the start of its new file (GROMACS ``mdrun -cpi -noappend`` does, for example), so
the files, read in order, hold that frame twice and the time axis stalls.  Here, for
each pair of consecutive files, every frame of the later file whose time stamp is not
beyond the earlier file's last frame must repeat the earlier file's frame of the same
time exactly: the same positions (as stored), the same velocities where both store
them, the same box.  Such frames are left out (listed in the spectrum file); an
overlapping frame that differs, or that matches no frame of the earlier file, is an
error.  Files without time stamps (:mod:`qcorr.reading.time_source`) are compared by
the first frame of the later file against the last of the earlier only.
"""

from __future__ import annotations

import itertools
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from qcorr.errors import TrajectoryError

__all__ = ["RepeatedFrame", "repeated_boundary_frames"]

#: tolerance on equal time stamps, as a fraction of the earlier file's frame spacing
#: (plus float32 rounding of the stamps)
TIME_MATCH_TOLERANCE = 1e-2


@dataclass(frozen=True)
class RepeatedFrame:
    """A frame of a later file that repeats the earlier file's frame of the same time.

    Attributes
    ----------
    frame : int
        Index of the frame in the trajectory as MDAnalysis reads the files (the repeat).
    file : str
        The later file.
    frame_in_file : int
        Its index inside that file.
    time_ps : float or None
        Its time stamp, ps (None for files without time stamps).
    """

    frame: int
    file: str
    frame_in_file: int
    time_ps: float | None

    def record(self) -> dict:
        """``{"file", "frame_in_file", "time_ps"}`` for the spectrum file's attribute."""
        return {"file": Path(self.file).name, "frame_in_file": self.frame_in_file, "time_ps": self.time_ps}


def _state(reader, index: int) -> tuple:
    """Copies of (positions, velocities or None, box or None, time) of frame *index* of *reader*."""
    ts = reader[index]
    velocities = np.array(ts.velocities) if ts.has_velocities else None
    box = None if ts.dimensions is None else np.array(ts.dimensions)
    return np.array(ts.positions), velocities, box, float(ts.time)


def _difference(a: tuple, b: tuple) -> str:
    """Empty if frames *a* and *b* (from :func:`_state`) are identical, else what differs."""
    (xa, va, ba, _), (xb, vb, bb, _) = a, b
    if xa.shape != xb.shape:
        return "a different number of atoms"
    if not np.array_equal(xa, xb):
        atom = int(np.argmax(np.abs(xa - xb).max(axis=1)))
        return f"different positions (largest difference {float(np.abs(xa - xb).max()):.3g} A, atom index {atom})"
    if va is not None and vb is not None and not np.array_equal(va, vb):
        return f"different velocities (largest difference {float(np.abs(va - vb).max()):.3g} A/ps)"
    if (ba is None) != (bb is None) or (ba is not None and not np.array_equal(ba, bb)):
        return "a different box"
    return ""


def _spacing32(t: float) -> float:
    return 2.0 * float(np.spacing(np.float32(abs(t))))


def _overlap_with_stamps(a, b, first_b: int, factor: float) -> list[RepeatedFrame]:
    n_a = a.n_frames
    last = _state(a, n_a - 1)
    t_last = last[3] * factor
    t_first_a = float(a[0].time) * factor
    dt_a = (t_last - float(a[n_a - 2].time) * factor) if n_a >= 2 else 0.0
    found: list[RepeatedFrame] = []
    for k in range(b.n_frames):
        here = _state(b, k)
        t = here[3] * factor
        tol = TIME_MATCH_TOLERANCE * abs(dt_a) + _spacing32(t) + _spacing32(t_last)
        if t > t_last + tol:
            break
        if t < t_first_a - tol:
            raise TrajectoryError(
                f"frame {k} of '{b.filename}' (t = {t:g} ps) comes before the first frame of "
                f"'{a.filename}' (t = {t_first_a:g} ps); give the files in the order of their times"
            )
        j = n_a - 1 - (round((t_last - t) / dt_a) if dt_a > 0 else 0)
        earlier = _state(a, j) if 0 <= j < n_a else None
        if earlier is None or abs(earlier[3] * factor - t) > tol:
            raise TrajectoryError(
                f"frame {k} of '{b.filename}' (t = {t:g} ps) lies within '{a.filename}' (which ends at "
                f"t = {t_last:g} ps) but on none of its frames' times; the files overlap with "
                "different frame spacings: give files that continue each other"
            )
        differs = _difference(earlier, here)
        if differs:
            raise TrajectoryError(
                f"frame {k} of '{b.filename}' repeats the time t = {t:g} ps of frame {j} of "
                f"'{a.filename}' with {differs}: the files overlap with different frames (a rerun, "
                "not a restart); cut the overlap from one file (e.g. gmx trjconv -b/-e) and try again"
            )
        found.append(RepeatedFrame(first_b + k, str(b.filename), k, t))
    return found


def _same_file(a, b) -> bool:
    """True if two trajectory file names point at the same file."""
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def _overlap_without_stamps(a, b, first_b: int) -> list[RepeatedFrame]:
    if _difference(_state(a, a.n_frames - 1), _state(b, 0)):
        return []
    return [RepeatedFrame(first_b, str(b.filename), 0, None)]


def repeated_boundary_frames(opened) -> list[RepeatedFrame]:
    """Frames of later files that repeat frames of the file before them (see the module docstring).

    Parameters
    ----------
    opened : qcorr.reading.universe.OpenedTrajectory
        With its time axis resolved (``stamped``); a single-file trajectory has none.

    Returns
    -------
    list of RepeatedFrame
        In trajectory order; the trajectory is left at its first frame.

    Raises
    ------
    TrajectoryError
        An overlapping frame that differs from the earlier file's frame of the same time,
        that matches no frame's time, or files given out of time order (names both files,
        the frames and the time).
    """
    trajectory = opened.universe.trajectory
    readers = getattr(trajectory, "readers", None)
    if not readers or len(readers) < 2:
        return []
    found: list[RepeatedFrame] = []
    first = 0
    for a, b in itertools.pairwise(readers):
        first += a.n_frames
        if _same_file(a.filename, b.filename):
            raise TrajectoryError(
                f"'{b.filename}' is given twice in a row as a trajectory file; give each file of the "
                "run once, in time order"
            )
        if opened.stamped:
            repeats = _overlap_with_stamps(a, b, first, opened.lammps_time_factor)
        else:
            repeats = _overlap_without_stamps(a, b, first)
        if b.n_frames >= 2 and len(repeats) == b.n_frames:
            raise TrajectoryError(
                f"every frame of '{b.filename}' repeats a frame of '{a.filename}': the second file "
                "adds nothing (the same run given twice?); leave it out"
            )
        found += repeats
    trajectory[0]
    return found
