"""Where a trajectory's time axis comes from, and when the user must state the frame spacing.

MDAnalysis readers fall into four kinds (checked against MDAnalysis 2.11's readers;
``ts.time`` is used, never ``trajectory.dt``, which several readers fill with a fallback):

* **time stamps** stored per frame (:data:`STAMPED_READERS`: GROMACS TRR/XTC, AMBER NetCDF
  with a ``time`` variable, H5MD, TRZ, TNG, and in-memory trajectories, whose spacing
  the caller set): the time axis is the stamps.  A reader keyword ``dt`` replaces them
  with frame × dt in MDAnalysis; if it disagrees with the file's own stamps that is an
  error naming both values (:func:`check_reader_dt`).
* **step numbers** (LAMMPS dump): time = step × the MD time step given as reader option
  ``dt`` (required by :func:`qcorr.reading.universe.open_trajectory`).  Handled like
  stamps; a ``dt`` given as the *sampling* interval instead of the MD step is caught by
  the check of stored velocities against positions (:mod:`qcorr.reading.velocity_check`).
* **a header** (DCD): the time is frame × (step length × save interval) from the header,
  which writers fill with defaults (MDAnalysis' DCD writer stores 1 ps per frame unless
  told otherwise), so the frame spacing must be stated (``--frame-spacing``).
* **no times** (XYZ, AMBER ASCII, DL_POLY HISTORY, GSD, PDB, ...: MDAnalysis substitutes
  1 ps per frame with a warning): the frame spacing must be stated.

A stated frame spacing is checked against the stamps where the file has them
(:func:`qcorr.reading.time_axis.frame_window`).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

from qcorr.errors import ConfigError, TrajectoryError

__all__ = [
    "HEADER_READERS",
    "STAMPED_READERS",
    "STEP_READERS",
    "TimeAxis",
    "check_frame_spacing",
    "check_reader_dt",
    "reader_kind",
    "resolve_time_axis",
]

#: MDAnalysis reader classes whose frames carry their own time stamps
STAMPED_READERS = frozenset({"TRRReader", "XTCReader", "NCDFReader", "H5MDReader", "TRZReader",
                             "TNGReader", "MemoryReader"})
#: readers whose time is a step number times the MD time step given by the user
STEP_READERS = frozenset({"DumpReader"})
#: readers whose time comes from a file header that writers fill with defaults
HEADER_READERS = frozenset({"DCDReader"})

#: relative tolerance between a stated spacing (or reader dt) and the stamps' spacing
#: (the same 1 % as the interval check of :mod:`qcorr.reading.time_axis`)
SPACING_TOLERANCE = 1e-2


@dataclass(frozen=True)
class TimeAxis:
    """How the frames' times are obtained.

    Attributes
    ----------
    stamped : bool
        True: ``ts.time`` (× the LAMMPS factor) is the time; False: frame × ``frame_spacing_ps``.
    frame_spacing_ps : float or None
        The stated spacing (ps): the time axis when not stamped, else a value to check.
    note : str
        One line for the spectrum file's ``time_axis`` attribute.
    """

    stamped: bool
    frame_spacing_ps: float | None
    note: str


def _readers(trajectory) -> list:
    return list(getattr(trajectory, "readers", None) or [trajectory])


def reader_kind(reader) -> str:
    """``"stamps"``, ``"steps"``, ``"header"`` or ``"none"`` for one MDAnalysis reader."""
    name = type(reader).__name__
    if name in STEP_READERS:
        return "steps"
    if name in HEADER_READERS:
        return "header"
    if name in STAMPED_READERS:
        if name == "NCDFReader" and not getattr(reader, "has_time", True):
            return "none"
        return "stamps"
    return "none"


def _user_dt(reader) -> float | None:
    """The ``dt`` keyword the reader was opened with (None if not given)."""
    if type(reader).__name__ == "MemoryReader":
        return None  # its dt *is* the time axis the caller built
    value = getattr(reader, "_kwargs", {}).get("dt")
    return None if value is None else float(value)


def _stamp_spacing(reader) -> float | None:
    """Spacing (ps) of a file's own time stamps: the reader reopened without ``dt``."""
    kwargs = {k: v for k, v in getattr(reader, "_kwargs", {}).items() if k != "dt"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fresh = type(reader)(**kwargs)
    try:
        if fresh.n_frames < 2:
            return None
        t0 = float(fresh[0].time)
        t_last = float(fresh[fresh.n_frames - 1].time)
        return (t_last - t0) / (fresh.n_frames - 1)
    finally:
        fresh.close()


def check_reader_dt(reader, time_factor: float = 1.0) -> None:
    """Refuse a reader keyword ``dt`` that disagrees with the file's own time stamps.

    MDAnalysis replaces stored time stamps by frame × dt when ``dt`` is given; the stamps
    are read again without it and compared (:data:`SPACING_TOLERANCE`).

    Raises
    ------
    ConfigError
        Naming the file, the given dt and the stamps' spacing (both in ps).
    """
    dt = _user_dt(reader)
    if dt is None or reader_kind(reader) != "stamps":
        return
    spacing = _stamp_spacing(reader)
    if spacing is None or abs(dt - spacing) <= SPACING_TOLERANCE * abs(spacing):
        return
    raise ConfigError(
        f"--reader-option dt={dt:g} replaces the time stamps of '{reader.filename}', which are "
        f"{spacing * time_factor:.6g} ps apart, by frame x {dt:g}; leave dt out (qcorr reads the "
        "stamps) or, if the stamps are wrong, give the true spacing with --frame-spacing PS"
    )


def _check_spacing_value(frame_spacing_ps) -> float | None:
    if frame_spacing_ps is None:
        return None
    try:
        value = float(frame_spacing_ps)
    except (TypeError, ValueError):
        value = math.nan
    if isinstance(frame_spacing_ps, bool) or not (math.isfinite(value) and value > 0):
        raise ConfigError(f"--frame-spacing {frame_spacing_ps!r}: must be a positive number of ps")
    return value


def _stamps_stand_still(opened) -> bool:
    """True if the first two frames carry the same time stamp (a writer that stores no times)."""
    trajectory = opened.universe.trajectory
    if trajectory.n_frames < 2:
        return False
    t0 = float(trajectory[0].time)
    t1 = float(trajectory[1].time)
    trajectory[0]
    return t1 == t0


def resolve_time_axis(opened, frame_spacing_ps: float | None = None) -> TimeAxis:
    """The time axis of *opened* (:class:`qcorr.reading.universe.OpenedTrajectory`).

    Parameters
    ----------
    opened : OpenedTrajectory
    frame_spacing_ps : float, optional
        Stated time between consecutive frames, ps.  It replaces stamps only where the
        file has none, or where its first two stamps are equal (a writer that stores no
        times); elsewhere it is checked against them.

    Raises
    ------
    ConfigError
        A spacing that is not a positive number; a reader ``dt`` that disagrees with the
        stamps (:func:`check_reader_dt`) or with a stated spacing.
    TrajectoryError
        A format without trustworthy time stamps (header or none) and no stated spacing.
    """
    spacing = _check_spacing_value(frame_spacing_ps)
    readers = _readers(opened.universe.trajectory)
    kinds = [reader_kind(r) for r in readers]
    for reader in readers:
        check_reader_dt(reader, opened.lammps_time_factor)
    if all(k in ("stamps", "steps") for k in kinds) and spacing is not None and _stamps_stand_still(opened):
        return TimeAxis(False, spacing, f"stated frame spacing {spacing:g} ps (the file's time stamps "
                                        "do not increase)")
    if all(k in ("stamps", "steps") for k in kinds):
        note = ("LAMMPS step numbers x the MD time step (reader option dt)" if "steps" in kinds
                else "time stamps of the trajectory file(s)")
        if spacing is not None:
            note += f"; stated frame spacing {spacing:g} ps checked against them"
        return TimeAxis(True, spacing, note)
    bad = readers[next(i for i, k in enumerate(kinds) if k not in ("stamps", "steps"))]
    name = getattr(bad, "filename", None) or "the trajectory"
    fmt = type(bad).__name__.replace("Reader", "")
    user_dt = _user_dt(bad)
    if spacing is None and user_dt is not None:
        spacing = user_dt
    elif spacing is not None and user_dt is not None and abs(user_dt - spacing) > SPACING_TOLERANCE * spacing:
        raise ConfigError(
            f"--frame-spacing {spacing:g} ps and --reader-option dt={user_dt:g} disagree for "
            f"'{name}'; give the frame spacing once, with --frame-spacing"
        )
    if spacing is None:
        if reader_kind(bad) == "header":
            header = float(getattr(bad, "ts").dt)
            raise TrajectoryError(
                f"'{name}' ({fmt}) stores no time per frame, only a header step ({header:.6g} ps per "
                "frame here), which writers often leave at a default (MDAnalysis writes 1 ps): "
                "give the time between saved frames with --frame-spacing PS"
            )
        raise TrajectoryError(
            f"'{name}' ({fmt}) stores no time stamps (MDAnalysis would assume 1 ps per frame): "
            "give the time between saved frames with --frame-spacing PS"
        )
    note = f"stated frame spacing {spacing:g} ps ({fmt} files store no per-frame times)"
    if reader_kind(bad) == "header":
        header = float(bad.ts.dt)
        note += f"; the header gives {header:.6g} ps"
    return TimeAxis(False, spacing, note)


def check_frame_spacing(opened, stamps_spacing_ps: float, step: int) -> None:
    """Refuse a stated frame spacing that disagrees with the stamps (window spacing / step).

    Raises
    ------
    ConfigError
        Naming both spacings in ps.
    """
    stated = opened.frame_spacing_ps
    if stated is None or not opened.stamped:
        return
    per_frame = stamps_spacing_ps / step
    if abs(per_frame - stated) > SPACING_TOLERANCE * abs(per_frame):
        raise ConfigError(
            f"--frame-spacing {stated:g} ps disagrees with the time stamps of {opened.label}, "
            f"{per_frame:.6g} ps apart; leave --frame-spacing out or check which file you meant"
        )
