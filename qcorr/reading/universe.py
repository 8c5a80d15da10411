"""Opening trajectories as MDAnalysis Universes: formats, LAMMPS units, completeness, frame names.

Everything qcorr needs to know about *how* a trajectory was read travels with it in an
:class:`OpenedTrajectory`: the Universe, the input files (for provenance and messages)
and the factors that turn the reader's times and velocities into ps and Å/ps.

Rules applied here:

* **LAMMPS dumps** are read without unit conversion by MDAnalysis: the user states
  the LAMMPS unit style (``real``: Å, fs, Å/fs; ``metal``: Å, ps, Å/ps; LAMMPS manual,
  "units" command [2]_) and, when opening files, the MD time step in that style's time
  unit (reader option ``dt``); qcorr converts times to ps and velocities to Å/ps.
* **Truncated files**: a GROMACS XDR file or a LAMMPS dump that ends inside a frame
  is refused (MDAnalysis silently drops the partial frame).

References
----------
.. [1] R. J. Gowers et al., "MDAnalysis: A Python package for the rapid analysis of
   molecular dynamics simulations", Proc. 15th Python in Science Conf., 98 (2016),
   doi:10.25080/Majora-629e541a-00e.
.. [2] LAMMPS documentation, "units command", https://docs.lammps.org/units.html.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from qcorr.constants import femtosecond_s, picosecond_s
from qcorr.errors import ConfigError, TrajectoryError
from qcorr.reading.reader_options import check_reader_options

__all__ = [
    "LAMMPS_DUMP_SUFFIXES",
    "LAMMPS_UNIT_STYLES",
    "OpenedTrajectory",
    "check_complete",
    "first_line",
    "open_trajectory",
    "release_quietly",
    "universe_files",
    "wrap_universe",
]

#: file suffixes read as LAMMPS dumps when no format is given
LAMMPS_DUMP_SUFFIXES = (".lammpstrj", ".lammpsdump", ".dump")

#: LAMMPS unit styles qcorr converts: the style's time unit in s (its velocity unit is Å per that time)
LAMMPS_UNIT_STYLES: dict[str, float] = {
    "real": femtosecond_s,  # time fs, length Å, velocity Å/fs
    "metal": picosecond_s,  # time ps, length Å, velocity Å/ps
}


@dataclass
class OpenedTrajectory:
    """An MDAnalysis Universe plus what qcorr needs to know about how it was read.

    Attributes
    ----------
    universe : MDAnalysis.Universe
    files : list of pathlib.Path
        Topology first, then the trajectory files, as given (empty for a Universe that
        was not read from files).
    lammps_time_factor : float
        Multiplies ``ts.time`` to give ps (1 except for LAMMPS dumps in ``real`` units).
    lammps_velocity_factor : float
        Multiplies velocities to give Å/ps (1 except for LAMMPS dumps in ``real`` units).
    is_lammps_dump : bool
        The trajectory is a LAMMPS dump (its units were converted by qcorr).
    lammps_units : str
        LAMMPS unit style stated by the user (``""`` when not given).
    stamped : bool
        The frames' time stamps give the time axis (False: the format stores no
        trustworthy times and ``frame_spacing_ps`` does; :mod:`qcorr.reading.time_source`).
    frame_spacing_ps : float or None
        Time between consecutive frames stated by the user (``--frame-spacing``), ps:
        the time axis when not *stamped*, otherwise checked against the stamps.
    time_axis_note : str
        Where the time axis comes from (recorded in the spectrum file).
    dropped_frames : tuple of int
        Reader frame indices of restart frames that repeat the previous file's frames
        exactly and are left out (:mod:`qcorr.reading.restarts`); every other frame
        number qcorr uses counts frames without them.
    dropped_records : tuple of dict
        The same frames as ``{"file", "frame_in_file", "time_ps"}`` for the spectrum file.
    """

    universe: object
    files: list[Path] = field(default_factory=list)
    lammps_time_factor: float = 1.0
    lammps_velocity_factor: float = 1.0
    is_lammps_dump: bool = False
    lammps_units: str = ""
    stamped: bool = True
    frame_spacing_ps: float | None = None
    time_axis_note: str = "time stamps of the trajectory file(s)"
    dropped_frames: tuple[int, ...] = ()
    dropped_records: tuple[dict, ...] = ()

    @property
    def n_frames(self) -> int:
        """Frames of the trajectory as qcorr reads it (repeated restart frames left out)."""
        return self.universe.trajectory.n_frames - len(self.dropped_frames)

    def physical_frame(self, frame: int) -> int:
        """Reader frame index of *frame* (frames numbered without the dropped repeats)."""
        if not self.dropped_frames:
            return int(frame)
        dropped = np.asarray(self.dropped_frames, dtype=np.int64)
        shift = dropped - np.arange(len(dropped))
        return int(frame) + int(np.searchsorted(shift, int(frame), side="right"))

    def read_frames(self, first: int, stop: int, step: int = 1):
        """Time steps of frames ``first, first+step, ... < stop`` (numbered without dropped repeats).

        Consecutive frames are read with one seek and then ``next()`` (TRR and XTC files
        through :func:`qcorr.reading.xdr_frames.xdr_frames`, the same values without
        MDAnalysis' per-frame Timestep work); dropped frames are read past.  Raises EOFError if the reader ends early.
        """
        from qcorr.reading.stream import consecutive_frames

        trajectory = self.universe.trajectory
        if stop <= first:
            return iter(())
        if not self.dropped_frames:
            if step == 1:
                from qcorr.reading.xdr_frames import xdr_frames

                fast = xdr_frames(trajectory, first, stop)  # TRR/XTC decoded without the Timestep work
                return consecutive_frames(trajectory, first, stop) if fast is None else fast
            return iter(trajectory[first:stop:step])
        wanted = [self.physical_frame(f) for f in range(first, stop, step)]
        if step == 1:
            keep = set(wanted)
            return (ts for ts in consecutive_frames(trajectory, wanted[0], wanted[-1] + 1)
                    if ts.frame in keep)
        return iter(trajectory[wanted])

    def time_ps(self, ts, frame: int) -> float:
        """Time of *ts* in ps: its stamp (× the LAMMPS factor), or frame × the explicit spacing."""
        if self.stamped:
            return float(ts.time) * self.lammps_time_factor
        return int(frame) * float(self.frame_spacing_ps)

    @property
    def label(self) -> str:
        """The trajectory file(s) for messages: ``'a.trr'`` or ``'a.trr' + 2 more files``."""
        readers = _readers(self.universe.trajectory)
        name = getattr(readers[0], "filename", None)
        if not name:
            return "the in-memory trajectory"
        extra = len(readers) - 1
        return f"'{name}'" + (f" + {extra} more files" if extra > 0 else "")

    def where(self, frame: int) -> str:
        """``frame F of 'file'``; for several files also the frame number inside its own file.

        *frame* is numbered without dropped repeats; the frame inside its file is the reader's.
        """
        readers = getattr(self.universe.trajectory, "readers", None)
        if not readers or len(readers) < 2:
            return f"frame {frame} of {self.label}"
        local = self.physical_frame(frame)
        for reader in readers:
            if local < reader.n_frames:
                return f"frame {frame} (frame {local} of '{reader.filename}')"
            local -= reader.n_frames
        return f"frame {frame} of {self.label}"


def first_line(err: BaseException) -> str:
    """``"TypeName: first line of the message"`` of an exception, for one-line messages."""
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


def release_quietly(err: BaseException) -> None:
    """Free half-built MDAnalysis readers held by *err*'s traceback without their ``__del__`` noise."""
    import gc
    import sys

    hook = sys.unraisablehook
    sys.unraisablehook = lambda _unraisable: None
    try:
        err.__traceback__ = None
        err.__context__ = None
        gc.collect()
    finally:
        sys.unraisablehook = hook


def _readers(trajectory) -> list:
    """The single-file readers behind *trajectory* (a ChainReader's parts, or itself)."""
    return list(getattr(trajectory, "readers", None) or [trajectory])


def _is_lammps_dump(trajectory) -> bool:
    from MDAnalysis.coordinates.LAMMPS import DumpReader

    return any(isinstance(reader, DumpReader) for reader in _readers(trajectory))


def universe_files(universe) -> list[Path]:
    """Files a Universe was read from: the topology, then the trajectory files in order.

    Names that are not files on disk (an in-memory trajectory, a stream) are left out;
    a Universe built in memory gives an empty list.
    """
    names = [getattr(universe, "filename", None)]
    for reader in _readers(universe.trajectory):
        names.append(getattr(reader, "filename", None))
    paths = []
    for name in names:
        if isinstance(name, (str, os.PathLike)) and Path(name).is_file():
            paths.append(Path(name))
    return paths


def wrap_universe(universe, *, lammps_units: str | None = None,
                  files: Sequence[str | os.PathLike[str]] | None = None,
                  frame_spacing_ps: float | None = None) -> OpenedTrajectory:
    """Describe an open Universe for qcorr: files, LAMMPS unit factors, time axis, restart repeats.

    Parameters
    ----------
    universe : MDAnalysis.Universe
    lammps_units : {"real", "metal"}, optional
        LAMMPS unit style of a dump trajectory (required for dumps, ignored otherwise).
    files : sequence of path, optional
        Input files (topology first); default :func:`universe_files`.
    frame_spacing_ps : float, optional
        Time between consecutive frames, ps (``--frame-spacing``); required for formats
        without trustworthy time stamps (:func:`qcorr.reading.time_source.resolve_time_axis`).

    Raises
    ------
    ConfigError
        *lammps_units* is not one of :data:`LAMMPS_UNIT_STYLES`; a bad or disagreeing
        frame spacing or reader ``dt``.
    TrajectoryError
        The trajectory is a LAMMPS dump and *lammps_units* is not given; a format
        without time stamps and no frame spacing; files that overlap with different frames.
    """
    from qcorr.reading.restarts import repeated_boundary_frames
    from qcorr.reading.time_source import resolve_time_axis

    if lammps_units is not None and lammps_units not in LAMMPS_UNIT_STYLES:
        raise ConfigError(
            f"--lammps-units {lammps_units!r} is not supported; choose one of "
            f"{', '.join(LAMMPS_UNIT_STYLES)}"
        )
    paths = universe_files(universe) if files is None else [Path(f) for f in files]
    opened = OpenedTrajectory(universe=universe, files=paths, lammps_units=lammps_units or "")
    if _is_lammps_dump(universe.trajectory):
        if lammps_units is None:
            raise TrajectoryError(
                f"{opened.label} is a LAMMPS dump, whose velocities and times MDAnalysis does not "
                "convert; pass --lammps-units real or --lammps-units metal"
            )
        unit_s = LAMMPS_UNIT_STYLES[lammps_units]
        opened.is_lammps_dump = True
        opened.lammps_time_factor = unit_s / picosecond_s  # step x dt[unit] -> ps
        opened.lammps_velocity_factor = picosecond_s / unit_s  # Å/unit -> Å/ps
    axis = resolve_time_axis(opened, frame_spacing_ps)
    opened.stamped, opened.frame_spacing_ps, opened.time_axis_note = axis.stamped, axis.frame_spacing_ps, axis.note
    repeats = repeated_boundary_frames(opened)
    opened.dropped_frames = tuple(r.frame for r in repeats)
    opened.dropped_records = tuple(r.record() for r in repeats)
    return opened


def _format_for(path: Path, given: str | None) -> str | None:
    if given:
        return given
    if path.suffix.lower() in LAMMPS_DUMP_SUFFIXES:
        return "LAMMPSDUMP"
    return None


def open_trajectory(
    topology: str | os.PathLike[str],
    trajectories: Sequence[str | os.PathLike[str]],
    *,
    topology_format: str | None = None,
    trajectory_format: str | None = None,
    reader_options: Mapping[str, object] | None = None,
    lammps_units: str | None = None,
    frame_spacing_ps: float | None = None,
) -> OpenedTrajectory:
    """Open topology + trajectory files as an MDAnalysis Universe (streaming, nothing loaded).

    Parameters
    ----------
    topology : path
        Any topology MDAnalysis parses (TPR, PSF, PRMTOP, GRO, PDB, LAMMPS data, ...).
    trajectories : sequence of path
        One or more trajectory files, read in order as one trajectory.
    topology_format, trajectory_format : str, optional
        MDAnalysis format names (e.g. ``"TPR"``, ``"LAMMPSDUMP"``); guessed from the
        suffix otherwise (``.lammpstrj``/``.lammpsdump``/``.dump`` read as ``LAMMPSDUMP``).
    reader_options : mapping, optional
        Passed unchanged to :class:`MDAnalysis.Universe` (e.g. ``atom_style``, ``dt``).
    lammps_units : {"real", "metal"}, optional
        LAMMPS unit style of a dump trajectory; required for dumps.
    frame_spacing_ps : float, optional
        Time between consecutive frames, ps (see :func:`wrap_universe`).

    Returns
    -------
    OpenedTrajectory

    Raises
    ------
    TrajectoryError
        If a file is missing, unreadable or truncated (names the file and the reader's
        complaint), or a LAMMPS dump lacks its unit style or MD time step.
    ConfigError
        If *lammps_units* is not one of :data:`LAMMPS_UNIT_STYLES`.
    """
    import MDAnalysis as mda

    top = Path(topology)
    trajs = [Path(t) for t in trajectories]
    for path in [top, *trajs]:
        if path.is_dir():
            raise TrajectoryError(f"input file '{path}' is a directory; give the file in it")
        if not path.is_file():
            raise TrajectoryError(f"input file '{path}' does not exist; check the path")
    if lammps_units is not None and lammps_units not in LAMMPS_UNIT_STYLES:
        raise ConfigError(
            f"--lammps-units {lammps_units!r} is not supported; choose one of "
            f"{', '.join(LAMMPS_UNIT_STYLES)}"
        )
    options = dict(reader_options or {})
    top_format = _format_for(top, topology_format)
    traj_formats = {_format_for(t, trajectory_format) for t in trajs}
    is_dump = "LAMMPSDUMP" in {str(f).upper() for f in traj_formats if f}
    if is_dump:
        if lammps_units is None:
            raise TrajectoryError(
                f"'{trajs[0]}' is a LAMMPS dump, whose velocities and times MDAnalysis does not "
                "convert; pass --lammps-units real or --lammps-units metal"
            )
        if "dt" not in options:
            raise TrajectoryError(
                f"LAMMPS dump '{trajs[0]}' stores step numbers, not times; pass the MD time step "
                f"as --reader-option dt=VALUE (in {'fs' if lammps_units == 'real' else 'ps'} "
                f"for units {lammps_units})"
            )
    check_reader_options(options, top, trajs, top_format,
                         next(iter(traj_formats)) if len(traj_formats) == 1 else None)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # guesser chatter; masses are validated later
            kwargs = dict(options)
            if top_format:
                kwargs["topology_format"] = top_format
            fmt = next(iter(traj_formats)) if len(traj_formats) == 1 else None
            if fmt:
                kwargs["format"] = fmt
            universe = mda.Universe(str(top), *[str(t) for t in trajs], **kwargs)
    except Exception as err:  # noqa: BLE001 -- MDAnalysis raises many types for unreadable input
        message = (
            f"cannot read '{top}' with {', '.join(map(str, trajs))} ({first_line(err)}); check "
            "that the files are complete and that --topology-format/--trajectory-format are right"
        )
        release_quietly(err)
        raise TrajectoryError(message) from None
    check_complete(universe.trajectory)
    return wrap_universe(universe, lammps_units=lammps_units, files=[top, *trajs],
                         frame_spacing_ps=frame_spacing_ps)


def check_complete(trajectory) -> None:
    """Detect a GROMACS XDR file (TRR/XTC), DCD file or LAMMPS dump that ends inside a frame.

    MDAnalysis indexes XDR files by scanning frame headers and silently ignores a partial
    last frame; here the end of the last complete frame is compared with the file size
    (for DCD, whose frames have a fixed size, the header and frame sizes give that end).
    A LAMMPS dump is read on past its last complete frame.  Other readers are not checked.

    Parameters
    ----------
    trajectory : MDAnalysis trajectory reader
        Single-file reader or ChainReader; left at frame 0.

    Raises
    ------
    TrajectoryError
        Naming the file, its last complete frame and the bytes left over.
    """
    for reader in _readers(trajectory):
        offsets = getattr(reader, "_offsets", None)
        if type(reader).__name__ == "DumpReader" and offsets and not str(reader.filename).endswith((".gz", ".bz2")):
            # MDAnalysis drops a partial last frame of a LAMMPS dump; look past the last full one
            with open(reader.filename, "rb") as fh:
                fh.seek(offsets[-1])
                for _ in range(reader.n_atoms + 9):  # 9 header lines per frame (LAMMPS "dump")
                    fh.readline()
                rest = fh.read(1 << 16).strip()
            if rest:
                raise TrajectoryError(
                    f"'{reader.filename}' ends with an incomplete frame after frame "
                    f"{reader.n_frames - 1}; the dump is truncated: copy it again, or keep only "
                    "its complete frames"
                )
            continue
        dcd = getattr(reader, "_file", None)
        if type(reader).__name__ == "DCDReader" and hasattr(dcd, "_framesize") and reader.n_frames:
            # MDAnalysis counts the whole frames that fit the file and drops the rest
            end = dcd._header_size + dcd._firstframesize + (reader.n_frames - 1) * dcd._framesize
            size = os.path.getsize(reader.filename)
            if size > end:
                raise TrajectoryError(
                    f"'{reader.filename}' ends with an incomplete frame after frame {reader.n_frames - 1} "
                    f"({size - end} bytes left over); the file is truncated or corrupt: copy it again, "
                    "or trim it to the complete frames"
                )
            continue
        xdr = getattr(reader, "_xdr", None)
        if xdr is None or not hasattr(xdr, "_bytes_tell"):
            continue
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # MDAnalysis' "seek failed" before it gives up
                reader[reader.n_frames - 1]
        except OSError as err:  # the last frame's header is whole but its body is cut
            message = (
                f"'{reader.filename}' ends inside frame {reader.n_frames - 1} ({first_line(err)}); the "
                "file is truncated or corrupt: copy it again, or trim it to the complete frames "
                "(e.g. gmx trjconv -e)"
            )
            release_quietly(err)
            raise TrajectoryError(message) from None
        end = int(xdr._bytes_tell())
        size = os.path.getsize(reader.filename)
        reader[0]
        if end < size:
            raise TrajectoryError(
                f"'{reader.filename}' ends with an incomplete frame after frame {reader.n_frames - 1} "
                f"({size - end} bytes left over); the file is truncated or corrupt: copy it again, "
                f"or trim it to the complete frames (e.g. gmx trjconv -e)"
            )
