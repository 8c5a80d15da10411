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

from qcorr.constants import femtosecond_s, picosecond_s
from qcorr.errors import ConfigError, TrajectoryError

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
    """

    universe: object
    files: list[Path] = field(default_factory=list)
    lammps_time_factor: float = 1.0
    lammps_velocity_factor: float = 1.0
    is_lammps_dump: bool = False
    lammps_units: str = ""

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
        """``frame F of 'file'``; for several files also the frame number inside its own file."""
        readers = getattr(self.universe.trajectory, "readers", None)
        if not readers or len(readers) < 2:
            return f"frame {frame} of {self.label}"
        local = frame
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
                  files: Sequence[str | os.PathLike[str]] | None = None) -> OpenedTrajectory:
    """Describe an open Universe for qcorr: its files and the unit factors of a LAMMPS dump.

    Parameters
    ----------
    universe : MDAnalysis.Universe
    lammps_units : {"real", "metal"}, optional
        LAMMPS unit style of a dump trajectory (required for dumps, ignored otherwise).
    files : sequence of path, optional
        Input files (topology first); default :func:`universe_files`.

    Raises
    ------
    ConfigError
        *lammps_units* is not one of :data:`LAMMPS_UNIT_STYLES`.
    TrajectoryError
        The trajectory is a LAMMPS dump and *lammps_units* is not given.
    """
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
    opened = wrap_universe(universe, lammps_units=lammps_units, files=[top, *trajs])
    check_complete(universe.trajectory)
    return opened


def check_complete(trajectory) -> None:
    """Detect a GROMACS XDR file (TRR/XTC) or LAMMPS dump that ends inside a frame.

    MDAnalysis indexes XDR files by scanning frame headers and silently ignores a partial
    last frame; here the end of the last complete frame is compared with the file size.
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
        xdr = getattr(reader, "_xdr", None)
        if xdr is None or not hasattr(xdr, "_bytes_tell"):
            continue
        reader[reader.n_frames - 1]
        end = int(xdr._bytes_tell())
        size = os.path.getsize(reader.filename)
        reader[0]
        if end < size:
            raise TrajectoryError(
                f"'{reader.filename}' ends with an incomplete frame after frame {reader.n_frames - 1} "
                f"({size - end} bytes left over); the file is truncated or corrupt: copy it again, "
                f"or trim it to the complete frames (e.g. gmx trjconv -e)"
            )
