"""Opening trajectories, the time axis, masses, atom groups and streamed velocities.

Everything that touches MDAnalysis lives here.  The rest of qcorr sees plain
arrays: per-atom masses (u = g/mol), per-frame velocities (Å/ps) with the
centre-of-mass velocity removed, and a uniform sampling interval (ps).

Rules this module applies (each one documented where it is implemented):

* **Time step** comes from the frames' time stamps, never from
  ``trajectory.dt`` (which several MDAnalysis readers fill with a fallback);
  unevenly spaced or missing frames raise :class:`~qcorr.errors.SamplingError`
  naming the first bad frame.
* **Masses** come from the topology (or MDAnalysis' guess), overridden per
  atom type by the user.  Atoms of zero mass are *virtual sites* and are
  excluded (with a note) when their name or type looks like one
  (:data:`VIRTUAL_SITE_PATTERN`) or when the user asks for it; any other zero,
  negative or undefined mass is an error.
* **LAMMPS dumps** are read without unit conversion by MDAnalysis: the user
  states the LAMMPS unit style (``real``: Å, fs, Å/fs; ``metal``: Å, ps, Å/ps;
  LAMMPS manual, "units" command) and the MD time step in that style's time unit
  (reader option ``dt``); qcorr converts times to ps and velocities to Å/ps.
* **Velocities** are the stored ones, or forward differences of positions made
  continuous across periodic boundaries (minimum image of each step's
  displacement), on request only.

References
----------
.. [1] R. J. Gowers et al., "MDAnalysis: A Python package for the rapid analysis of
   molecular dynamics simulations", Proc. 15th Python in Science Conf., 98 (2016),
   doi:10.25080/Majora-629e541a-00e.
.. [2] LAMMPS documentation, "units command", https://docs.lammps.org/units.html.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
import threading
import warnings
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from qcorr.constants import femtosecond_s, picosecond_s
from qcorr.errors import ConfigError, SamplingError, TrajectoryError

#: atom names/types (case-insensitive, whole name) that mark a massless virtual site:
#: TIP4P-style "M"/"MW"/"EPW", extra points "EP1", lone pairs "LP1", generic "VS"/"VSITE", dummies "DUM".
VIRTUAL_SITE_PATTERN = re.compile(r"^(M|MW\d*|EPW\d*|EP\d*|LP\d*|VS\d*|VSITE\d*|DUM\w*)$", re.IGNORECASE)

#: file suffixes read as LAMMPS dumps when no format is given
LAMMPS_DUMP_SUFFIXES = (".lammpstrj", ".lammpsdump", ".dump")

#: LAMMPS unit styles qcorr converts: (time unit in s, velocity factor to Å/ps)
LAMMPS_UNIT_STYLES: dict[str, float] = {
    "real": femtosecond_s,  # time fs, length Å, velocity Å/fs
    "metal": picosecond_s,  # time ps, length Å, velocity Å/ps
}

#: relative tolerance on each frame interval (fraction of the time step), plus float32 rounding
INTERVAL_TOLERANCE = 1e-2


# --------------------------------------------------------------------------- options
def parse_option_value(text: str) -> int | float | bool | str:
    """Interpret a ``KEY=VALUE`` option value: int, then float, then true/false, else text."""
    for kind in (int, float):
        try:
            return kind(text)
        except ValueError:
            pass
    if text.lower() in ("true", "yes"):
        return True
    if text.lower() in ("false", "no"):
        return False
    return text


def parse_key_values(items: Sequence[str] | None, option: str) -> dict[str, str]:
    """Split repeated ``KEY=VALUE`` options into a dict (keys unique).

    Raises
    ------
    ConfigError
        If an item has no ``=``, an empty key, or a key repeats.
    """
    result: dict[str, str] = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep or not key:
            raise ConfigError(f"{option} expects KEY=VALUE, got {item!r}")
        if key in result:
            raise ConfigError(f"{option} gives {key!r} twice; give each name once")
        result[key] = value.strip()
    return result


# --------------------------------------------------------------------------- universe
@dataclass
class OpenedTrajectory:
    """An MDAnalysis Universe plus what qcorr needs to know about how it was read.

    Attributes
    ----------
    universe : MDAnalysis.Universe
    files : list of pathlib.Path
        Topology first, then the trajectory files, as given.
    lammps_time_factor : float
        Multiplies ``ts.time`` to give ps (1 except for LAMMPS dumps in ``real`` units).
    lammps_velocity_factor : float
        Multiplies velocities to give Å/ps (1 except for LAMMPS dumps in ``real`` units).
    """

    universe: object
    files: list[Path]
    lammps_time_factor: float = 1.0
    lammps_velocity_factor: float = 1.0
    is_lammps_dump: bool = False

    @property
    def label(self) -> str:
        """The trajectory file(s) for messages: ``'a.trr'`` or ``'a.trr' + 2 more files``."""
        extra = len(self.files) - 2
        return f"'{self.files[1]}'" + (f" + {extra} more files" if extra > 0 else "")

    def where(self, frame: int) -> str:
        """``frame F of 'file'``; for several files also the frame number inside its own file."""
        readers = getattr(self.universe.trajectory, "readers", None)
        if not readers or len(readers) < 2:
            return f"frame {frame} of '{self.files[1]}'"
        local = frame
        for reader in readers:
            if local < reader.n_frames:
                return f"frame {frame} (frame {local} of '{reader.filename}')"
            local -= reader.n_frames
        return f"frame {frame} of {self.label}"


def _format_for(path: Path, given: str | None) -> str | None:
    if given:
        return given
    if path.suffix.lower() in LAMMPS_DUMP_SUFFIXES:
        return "LAMMPSDUMP"
    return None


def _first_line(err: BaseException) -> str:
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


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
        If a file is missing or unreadable (names the file and the reader's complaint),
        or a LAMMPS dump lacks its unit style or MD time step.
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
            warnings.simplefilter("ignore")  # guesser chatter; masses are validated below
            kwargs = dict(options)
            if top_format:
                kwargs["topology_format"] = top_format
            fmt = next(iter(traj_formats)) if len(traj_formats) == 1 else None
            if fmt:
                kwargs["format"] = fmt
            universe = mda.Universe(str(top), *[str(t) for t in trajs], **kwargs)
    except Exception as err:  # noqa: BLE001 -- MDAnalysis raises many types for unreadable input
        message = (
            f"cannot read '{top}' with {', '.join(map(str, trajs))} ({_first_line(err)}); check "
            "that the files are complete and that --topology-format/--trajectory-format are right"
        )
        _release_quietly(err)
        raise TrajectoryError(message) from None
    opened = OpenedTrajectory(universe=universe, files=[top, *trajs], is_lammps_dump=is_dump)
    check_complete(opened)
    if is_dump:
        unit_s = LAMMPS_UNIT_STYLES[lammps_units]
        opened.lammps_time_factor = unit_s / picosecond_s  # step x dt[unit] -> ps
        opened.lammps_velocity_factor = picosecond_s / unit_s  # Å/unit -> Å/ps
    return opened


def _release_quietly(err: BaseException) -> None:
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


def check_complete(opened: OpenedTrajectory) -> None:
    """Detect a GROMACS XDR file (TRR/XTC) that ends inside a frame (truncated copy or crash).

    MDAnalysis indexes XDR files by scanning frame headers and silently ignores a partial
    last frame; here the end of the last complete frame is compared with the file size.

    Raises
    ------
    TrajectoryError
        Naming the file, its last complete frame and the bytes left over.
    """
    trajectory = opened.universe.trajectory
    readers = getattr(trajectory, "readers", None) or [trajectory]
    for reader in readers:
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


def byte_range_of_part(size: int, part: int, parts: int) -> tuple[int, int]:
    """Byte range ``[first, stop)`` of part *part* (0-based) of *parts* equal shares of a file.

    Part ``i`` of ``N`` is ``[floor(i size / N), floor((i + 1) size / N))``; the parts of
    ``i = 0 .. N-1`` cover the file once, in order.
    """
    if parts < 1 or not 0 <= part < parts:
        raise ConfigError(f"file part {part + 1} of {parts}: the part must be between 1 and {parts}")
    return (part * size) // parts, ((part + 1) * size) // parts


def describe_files(
    paths: Sequence[str | os.PathLike[str]], _cancel: threading.Event | None = None,
    *, part: int = 0, parts: int = 1,
) -> list[dict[str, object]]:
    """Name, size (bytes) and SHA-256 (FIPS 180-4, via :mod:`hashlib`) of each input file.

    Files are read in 16 MiB blocks into one reused buffer, so large trajectories are not
    held in memory; hashlib releases the GIL while it digests a block, so this can run in
    a background thread beside the frame loop (:func:`start_describing_files`).

    With ``parts > 1`` (a frame-block job, ``--block I-of-N``) only the byte range
    :func:`byte_range_of_part` of each file is hashed, and the record holds
    ``"sha256_parts": [{"first_byte", "stop_byte", "sha256"}]`` instead of ``"sha256"``.
    The N block jobs then hash each file once between them instead of N times;
    ``qcorr combine`` checks that the parts cover every file and lists them all.  A part
    can be checked with standard tools, e.g. ``tail -c +$((first+1)) FILE | head -c
    $((stop-first)) | sha256sum``.

    Raises
    ------
    TrajectoryError
        If a file cannot be read (names the file).
    """
    records = []
    # 16 MiB reads: the thread needs the GIL between reads, and a frame loop in the main
    # thread holds it for milliseconds at a time (1 MiB reads made the hash of a 736 MiB
    # file last ~4 s of wall time beside the loop instead of ~0.5 s)
    buffer = bytearray(16 << 20)
    view = memoryview(buffer)
    for path in paths:
        path = Path(path)
        digest = hashlib.sha256()
        try:
            size = path.stat().st_size
            first, stop = byte_range_of_part(size, part, parts)
            left = stop - first
            with path.open("rb", buffering=0) as fh:
                fh.seek(first)
                while left > 0:
                    if _cancel is not None and _cancel.is_set():
                        return records
                    n = fh.readinto(view[: min(left, len(buffer))])
                    if not n:
                        break
                    digest.update(view[:n])
                    left -= n
        except OSError as err:
            raise TrajectoryError(
                f"cannot read '{path}' to record its SHA-256 ({err.strerror or err}); "
                "check that the file exists and is readable"
            ) from None
        if left > 0:
            raise TrajectoryError(
                f"'{path}' became shorter while its SHA-256 was computed ({size} bytes when "
                "started); do not change input files while qcorr reads them"
            )
        record: dict[str, object] = {"name": path.name, "size_bytes": size}
        if parts == 1:
            record["sha256"] = digest.hexdigest()
        else:
            record["sha256_parts"] = [{"first_byte": first, "stop_byte": stop,
                                       "sha256": digest.hexdigest()}]
        records.append(record)
    return records


class FileDescriptions:
    """:func:`describe_files` running in a background thread; :meth:`result` waits for it.

    The SHA-256 of a large trajectory costs about as much CPU as a tenth of reading
    it with MDAnalysis; hashing while the frames are read hides that time on a machine
    with a free core.  :meth:`cancel` stops the thread at the next 16 MiB block (used when
    the command fails).
    """

    def __init__(self, paths: Sequence[str | os.PathLike[str]], part: int = 0, parts: int = 1) -> None:
        self._paths = list(paths)
        self._part, self._parts = part, parts
        self._cancel = threading.Event()
        self._records: list[dict[str, object]] | None = None
        self._error: BaseException | None = None
        self._thread = threading.Thread(target=self._work, name="qcorr-sha256", daemon=True)
        self._thread.start()

    def _work(self) -> None:
        try:
            self._records = describe_files(self._paths, self._cancel, part=self._part, parts=self._parts)
        except BaseException as err:  # noqa: BLE001 -- handed to the caller's thread by result()
            self._error = err

    def result(self) -> list[dict[str, object]]:
        """The records of :func:`describe_files` (waits; re-raises its error here)."""
        self._thread.join()
        if self._error is not None:
            raise self._error
        if self._records is None or self._cancel.is_set():
            raise RuntimeError("file hashing was cancelled; no records")
        return self._records

    def cancel(self) -> None:
        """Stop hashing (the records are then incomplete and not returned)."""
        self._cancel.set()
        self._thread.join()


def start_describing_files(paths: Sequence[str | os.PathLike[str]], part: int = 0,
                           parts: int = 1) -> FileDescriptions:
    """Start :func:`describe_files` in a background thread; see :class:`FileDescriptions`."""
    return FileDescriptions(paths, part, parts)


# --------------------------------------------------------------------------- masses
def apply_masses_by_type(universe, masses_by_type: Mapping[str, float]) -> None:
    """Set the mass (u) of every atom of each given type (in the in-memory topology only).

    Raises
    ------
    ConfigError
        If a type does not occur in the topology, or a mass is not positive and finite.
    """
    if not masses_by_type:
        return
    if not hasattr(universe.atoms, "masses"):
        universe.add_TopologyAttr("masses", np.zeros(universe.atoms.n_atoms))
    types = np.asarray(universe.atoms.types).astype(str)
    masses = np.array(universe.atoms.masses, dtype=float)
    for atom_type, value in masses_by_type.items():
        try:
            mass = float(value)
        except (TypeError, ValueError) as err:
            raise ConfigError(f"--mass {atom_type}={value}: the mass must be a number in u") from err
        if not np.isfinite(mass) or mass <= 0:
            raise ConfigError(f"--mass {atom_type}={value}: the mass must be positive (u = g/mol)")
        hit = types == atom_type
        if not hit.any():
            known = ", ".join(sorted(set(types))[:20])
            raise ConfigError(
                f"--mass {atom_type}=...: no atom has type {atom_type!r}; types in the topology: {known}"
            )
        masses[hit] = mass
    universe.atoms.masses = masses


@dataclass
class MassCheck:
    """Result of :func:`massive_atoms`: the atoms kept and a note on those dropped."""

    indices: NDArray[np.int64]
    masses: NDArray[np.float64]
    note: str = ""


def massive_atoms(universe, *, exclude_massless: bool = False, topology_name: str = "topology") -> MassCheck:
    """Atoms that carry mass (the channels of the spectrum), with virtual sites excluded.

    Rule: an atom of mass exactly 0 is a virtual site and is dropped when its name or
    type matches :data:`VIRTUAL_SITE_PATTERN`, or when *exclude_massless* is true.  Any
    other zero mass, and every negative or undefined (NaN) mass, is an error, because a
    guessed mass of 0 usually means MDAnalysis did not recognise the element.

    Parameters
    ----------
    universe : MDAnalysis.Universe
    exclude_massless : bool
        Drop every atom of zero mass whatever its name.
    topology_name : str
        Used in messages.

    Returns
    -------
    MassCheck
        Indices (into ``universe.atoms``) and masses (u) of the kept atoms, and a note
        (empty if nothing was dropped).

    Raises
    ------
    TrajectoryError
        Zero/negative/NaN masses that are not virtual sites (names the atoms and types
        and suggests ``--mass TYPE=AMU``), or no atom with mass at all.
    """
    atoms = universe.atoms
    if not hasattr(atoms, "masses"):
        raise TrajectoryError(
            f"{topology_name} has no masses and MDAnalysis could not guess them; "
            "give them with --mass TYPE=AMU"
        )
    masses = np.asarray(atoms.masses, dtype=float)
    names = np.asarray(atoms.names).astype(str) if hasattr(atoms, "names") else np.full(len(masses), "")
    types = np.asarray(atoms.types).astype(str) if hasattr(atoms, "types") else np.full(len(masses), "")
    zero = masses == 0.0
    looks_virtual = np.array(
        [bool(VIRTUAL_SITE_PATTERN.match(n) or VIRTUAL_SITE_PATTERN.match(t)) for n, t in zip(names, types)],
        dtype=bool,
    )
    dropped = zero & (looks_virtual | exclude_massless)
    bad = (~np.isfinite(masses) | (masses < 0) | zero) & ~dropped
    if bad.any():
        idx = np.flatnonzero(bad)
        bad_types = sorted(set(types[idx]))
        first = idx[0]
        raise TrajectoryError(
            f"{len(idx)} atoms in {topology_name} have zero, negative or undefined mass (first: atom "
            f"index {first} name {str(names[first])!r} type {str(types[first])!r}; types {', '.join(bad_types[:10])}); "
            "give masses with --mass TYPE=AMU, or pass --exclude-massless if they are virtual sites"
        )
    keep = np.flatnonzero(~dropped)
    if len(keep) == 0:
        raise TrajectoryError(f"no atom in {topology_name} has a mass; give masses with --mass TYPE=AMU")
    note = ""
    if dropped.any():
        dropped_names = sorted(set(names[dropped]))
        note = (
            f"excluded {int(dropped.sum())} massless virtual-site atoms (names "
            f"{', '.join(dropped_names[:10])}) from every group"
        )
    return MassCheck(indices=keep.astype(np.int64), masses=masses[keep], note=note)


# --------------------------------------------------------------------------- groups
@dataclass
class GroupInfo:
    """One named atom group, expressed on the channels (the massive atoms of the total).

    Attributes
    ----------
    name, selection : str
    members : bool ndarray (n_channels,)
    atom_count, molecule_count : int
        Atoms and residues (molecules) in the group.
    mass : float
        Total mass of the group's atoms, u (g/mol).
    """

    name: str
    selection: str
    members: NDArray[np.bool_]
    atom_count: int
    molecule_count: int
    mass: float
    constraints: float = 0.0
    degrees_of_freedom: float = field(default=0.0)


def select_groups(
    universe, channels: MassCheck, selections: Mapping[str, str]
) -> list[GroupInfo]:
    """Build the group list: ``total`` (all channels) first, then each user group in order.

    Atoms a selection picks that are not channels (virtual sites) are left out.

    Raises
    ------
    ConfigError
        Reserved or malformed group name, invalid selection, or a group with no
        massive atom (names the group and the selection).
    """
    n_atoms = universe.atoms.n_atoms
    position = np.full(n_atoms, -1, dtype=np.int64)
    position[channels.indices] = np.arange(len(channels.indices))
    total_atoms = universe.atoms[channels.indices]
    groups = [
        GroupInfo(
            name="total",
            selection="all atoms with mass",
            members=np.ones(len(channels.indices), dtype=bool),
            atom_count=len(channels.indices),
            molecule_count=int(total_atoms.n_residues),
            mass=float(channels.masses.sum()),
        )
    ]
    for name, selection in selections.items():
        if name == "total":
            raise ConfigError("--group total=...: the name 'total' is reserved for all atoms; pick another name")
        if not re.fullmatch(r"[A-Za-z0-9_.+-]+", name):
            raise ConfigError(
                f"--group {name}=...: group names may hold letters, digits and _ . + - only"
            )
        try:
            atoms = universe.select_atoms(selection)
        except Exception as err:
            raise ConfigError(
                f"--group {name}={selection!r}: MDAnalysis cannot parse the selection ({_first_line(err)})"
            ) from err
        pos = position[atoms.indices]
        pos = pos[pos >= 0]
        if len(pos) == 0:
            raise ConfigError(
                f"--group {name}={selection!r} selects no atom with mass; check the selection "
                "against the topology's names/types/residues"
            )
        members = np.zeros(len(channels.indices), dtype=bool)
        members[pos] = True
        picked = universe.atoms[channels.indices[members]]
        groups.append(
            GroupInfo(
                name=name,
                selection=selection,
                members=members,
                atom_count=int(members.sum()),
                molecule_count=int(picked.n_residues),
                mass=float(channels.masses[members].sum()),
            )
        )
    return groups


def assign_degrees_of_freedom(
    groups: list[GroupInfo],
    constraints: Mapping[str, str | float] | None = None,
    constraints_per_molecule: Mapping[str, str | float] | None = None,
    *,
    remove_com: bool = True,
) -> None:
    """Set ``constraints`` and ``degrees_of_freedom`` of every group in place.

    The total has ``3N - c - 3`` degrees of freedom (the centre-of-mass velocity of
    the total is removed every frame).  A group g of N_g atoms, mass M_g, out of the
    total mass M, has ``3 N_g - c_g - 3 M_g / M``.

    Derivation of the centre-of-mass share [derived for qcorr; re-check]: with
    independent Maxwell velocities (each Cartesian component of atom i has
    variance kT/m_i), the centre-of-mass velocity V = Σ m_i v_i / M has variance
    kT/M per component and Cov(v_i, V) = kT/M.  Hence for the group,
    E[Σ_{i∈g} m_i (v_i − V)²] = Σ_{i∈g} m_i (3kT/m_i − 2·3kT/M + 3kT/M)
    = 3kT (N_g − M_g/M), i.e. the group loses 3 M_g/M degrees of freedom; summed
    over disjoint groups covering the total this gives back the 3 of the total
    (equipartition, e.g. D. A. McQuarrie, *Statistical Mechanics*, ch. 7).

    Constraint counts: ``constraints[name]`` is a count for the group,
    ``constraints_per_molecule[name]`` a count per residue of the group.  For the
    total, when not given, the sum over the user groups is used if the groups are
    disjoint; overlapping constrained groups need an explicit total.

    Raises
    ------
    ConfigError
        Unknown group name, negative or non-numeric count, a group given both ways,
        overlapping constrained groups without an explicit total, or a count that
        leaves no degree of freedom.
    """
    constraints = dict(constraints or {})
    per_molecule = dict(constraints_per_molecule or {})
    by_name = {g.name: g for g in groups}
    for option, table in (("--constraints", constraints), ("--constraints-per-molecule", per_molecule)):
        for name, value in table.items():
            if name not in by_name:
                raise ConfigError(
                    f"{option} {name}=...: no group named {name!r}; groups are {', '.join(by_name)}"
                )
            try:
                count = float(value)
            except (TypeError, ValueError) as err:
                raise ConfigError(f"{option} {name}={value}: the count must be a number") from err
            if not np.isfinite(count) or count < 0:
                raise ConfigError(f"{option} {name}={value}: the count must be zero or positive")
            table[name] = count
    for name in set(constraints) & set(per_molecule):
        raise ConfigError(
            f"group {name!r} has both --constraints and --constraints-per-molecule; give one"
        )
    for group in groups:
        if group.name in constraints:
            group.constraints = constraints[group.name]
        elif group.name in per_molecule:
            group.constraints = per_molecule[group.name] * group.molecule_count
    total = groups[0]
    if "total" not in constraints and "total" not in per_molecule:
        users = groups[1:]
        constrained = [g for g in users if g.constraints > 0]
        if constrained:
            stack = np.sum([g.members for g in users], axis=0)
            if np.any(stack > 1):
                raise ConfigError(
                    "the groups overlap and carry constraints, so the total's count is ambiguous; "
                    "pass --constraints total=N"
                )
            total.constraints = float(sum(g.constraints for g in users))
    com = 3.0 if remove_com else 0.0
    for group in groups:
        share = com * group.mass / total.mass
        group.degrees_of_freedom = 3.0 * group.atom_count - group.constraints - share
        if group.degrees_of_freedom <= 0:
            raise ConfigError(
                f"group {group.name!r}: {group.constraints:g} constraints leave "
                f"{group.degrees_of_freedom:g} degrees of freedom for {group.atom_count} atoms; "
                "check --constraints"
            )


# --------------------------------------------------------------------------- time axis
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
            _check_one_interval(opened, window, i, t - previous, reference_ps, t)
        previous = t


def _check_one_interval(opened, window, index, interval, reference, time_ps) -> None:
    tol = INTERVAL_TOLERANCE * abs(reference) + _float32_spacing(time_ps)
    if not abs(interval - reference) <= tol:
        raise SamplingError(
            f"{opened.where(window.frame(index))} (t = {time_ps:g} ps) follows the "
            f"previous frame by {interval:.4g} ps instead of the regular {reference:.4g} ps (missing, "
            "repeated or unevenly spaced frames); choose a window of evenly spaced frames with "
            "--start/--stop/--step"
        )


# --------------------------------------------------------------------------- streaming
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
    """

    frames: int = 0
    box_volume_sum_A3: float = 0.0
    com_kinetic_sum: float = 0.0


def _atom_label(universe, channel_indices, channel) -> str:
    atom = universe.atoms[int(channel_indices[channel])]
    name = getattr(atom, "name", "?")
    resname = getattr(atom, "resname", "?")
    resid = getattr(atom, "resid", "?")
    return f"atom index {atom.index} (name {name}, residue {resname} {resid})"


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

    Sample j is window frame j for stored velocities; for ``source="positions"`` it is
    the forward difference (x_{j+1} − x_j)/Δt of window frames j and j+1, each
    displacement first reduced to its minimum image (so positions need not be
    unwrapped; valid while no atom moves more than half a box edge between frames).

    Parameters
    ----------
    opened : OpenedTrajectory
    channels : MassCheck
        Atoms (indices) and masses (u) of the channels.
    window : FrameWindow
    first_sample, stop_sample : int
        Samples ``first_sample .. stop_sample-1`` are produced.
    source : {"stored", "positions"}
    count_from, count_stop : int, optional
        Samples in this range add to *statistics* (box volume, centre-of-mass drift).
    statistics : FrameStatistics, optional
        Updated in place.
    progress_mode : {"auto", "always", "never"}
    dtype : {numpy.float64, numpy.float32}
        Precision of the stored velocities yielded.  ``float32`` hands on the reader's
        single-precision values (MDAnalysis reads every format in float32) with the
        centre-of-mass velocity computed in float64 and subtracted once, which avoids a
        double-precision copy per frame; ``float64`` (default) converts first.  Velocities
        from positions are always differenced and yielded in float64.

    Yields
    ------
    ndarray, shape (n_channels, 3), Å/ps (a new array each sample)

    Raises
    ------
    TrajectoryError
        A frame without velocities (stored mode; says how to derive them), or a
        non-finite velocity/position (names the frame and the atom).
    SamplingError
        An interval unlike the window's time step (names the frame and both intervals).
    """
    from MDAnalysis.exceptions import NoDataError
    from MDAnalysis.lib.distances import minimize_vectors

    from qcorr.progress import progress

    if source not in ("stored", "positions"):
        raise ConfigError(f"--velocities-from {source!r}: choose stored or positions")
    if np.dtype(dtype) not in (np.float32, np.float64):
        raise ConfigError(f"velocity precision {dtype!r}: choose numpy.float32 or numpy.float64")
    single = np.dtype(dtype) == np.float32 and source == "stored"
    universe = opened.universe
    idx = channels.indices
    masses = channels.masses
    total_mass = float(masses.sum())
    extra = 1 if source == "positions" else 0
    read_stop = window.start + (stop_sample + extra) * window.step
    first_frame = window.start + first_sample * window.step
    if window.step == 1:
        frames = _consecutive(universe.trajectory, first_frame, read_stop)
    else:
        frames = universe.trajectory[first_frame:read_stop : window.step]
    count_from = first_sample if count_from is None else count_from
    count_stop = stop_sample if count_stop is None else count_stop
    dt = window.timestep_ps
    factor_t = opened.lammps_time_factor
    factor_v = opened.lammps_velocity_factor
    previous_time = None
    previous_positions = None
    all_atoms = len(idx) == universe.atoms.n_atoms  # no virtual sites: skip fancy indexing
    volume_cache: list = [None, 0.0]
    n_read = stop_sample - first_sample + extra
    for k, ts in enumerate(progress(_guarded(frames, opened, window, first_sample), total=n_read,
                                    desc="frames", mode=progress_mode)):
        sample = first_sample + k
        frame_no = window.frame(sample)
        time_ps = float(ts.time) * factor_t
        if previous_time is not None:
            _check_one_interval(opened, window, sample, time_ps - previous_time, dt, time_ps)
        previous_time = time_ps
        if source == "stored":
            try:
                if not ts.has_velocities:
                    raise NoDataError
                raw = ts.velocities
            except NoDataError:
                raise TrajectoryError(
                    f"{opened.where(frame_no)} has no velocities; pass "
                    "--velocities-from positions to derive them from positions by finite differences"
                ) from None
            if single:
                selected = raw if all_atoms else raw[idx]
                # centre-of-mass velocity in float64; sum_j m_j v_j is finite iff every v_j is
                cx, cy, cz = (np.dot(masses, selected.astype(np.float64))
                              * (factor_v / total_mass)).tolist()
                if not math.isfinite(cx + cy + cz):
                    _check_finite(selected, universe, idx, frame_no, opened, "velocity")
                v = np.multiply(selected, np.float32(factor_v)) if factor_v != 1.0 else selected
                v = _minus_vector(v, np.array((cx, cy, cz), np.float32))
                _count_frame(statistics, count_from, count_stop, sample, total_mass,
                             cx * cx + cy * cy + cz * cz, ts.dimensions, volume_cache)
                yield v
                continue
            v = np.array(raw if all_atoms else raw[idx], dtype=np.float64)
            if factor_v != 1.0:
                v *= factor_v
            _check_finite(v, universe, idx, frame_no, opened, "velocity")
        else:
            x = np.array(ts.positions if all_atoms else ts.positions[idx], dtype=np.float64)
            _check_finite(x, universe, idx, frame_no, opened, "position")
            if previous_positions is None:
                previous_positions = x
                previous_box = ts.dimensions
                continue
            d = x - previous_positions
            box = ts.dimensions
            if box is not None and np.all(np.asarray(box[:3]) > 0):
                # only atoms that crossed a boundary (a component beyond a quarter of the
                # shortest edge) get the minimum image; minimize_vectors works in float32,
                # so the others keep their float64 displacement
                jumped = np.any(np.abs(d) > 0.25 * float(np.min(box[:3])), axis=1)
                if jumped.any():
                    d[jumped] = minimize_vectors(d[jumped].astype(np.float32), box)
            previous_positions = x
            v = d / dt
            sample -= 1  # the difference of frames j, j+1 is sample j
            frame_no = window.frame(sample)
            box = previous_box
            previous_box = ts.dimensions
        com = masses @ v / total_mass
        v -= com
        _count_frame(statistics, count_from, count_stop, sample, total_mass, float(com @ com),
                     box if source == "positions" else ts.dimensions, volume_cache)
        yield v


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


def _count_frame(statistics, count_from, count_stop, sample, total_mass, com_square, dims,
                 volume_cache) -> None:
    """Add one sample's box volume and M |V_com|^2 to *statistics* (if counted).

    *volume_cache* is ``[key, volume]``: the box volume is recomputed only when the
    box's bytes change (constant-volume runs compute it once).
    """
    if statistics is None or not count_from <= sample < count_stop:
        return
    statistics.frames += 1
    statistics.com_kinetic_sum += total_mass * com_square
    if dims is None:
        return
    key = dims.tobytes()
    if volume_cache[0] != key:
        box = np.asarray(dims)
        volume_cache[:] = [key, _box_volume(box) if np.all(box[:3] > 0) else 0.0]
    statistics.box_volume_sum_A3 += volume_cache[1]


def _consecutive(trajectory, start: int, stop: int):
    """Frames ``start .. stop-1`` read one after the other (one seek, then ``next()``).

    MDAnalysis' sliced iteration seeks to every frame; reading on costs less
    (about 10 % of a bare TRR read for 2,000 atoms).
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


def _guarded(frames, opened: OpenedTrajectory, window: FrameWindow, first_sample: int):
    """Iterate *frames*, turning a reader failure into a TrajectoryError naming the frame."""
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
                f"({_first_line(err)}); the file is truncated or corrupt there: use --stop to "
                "end the window before it, or repair the file"
            )
            _release_quietly(err)
            raise TrajectoryError(message) from None
        yield ts
        k += 1


def _box_volume(dimensions) -> float:
    from MDAnalysis.lib.mdamath import box_volume

    return float(box_volume(np.asarray(dimensions, dtype=np.float32)))


def _check_finite(values, universe, idx, frame_no, opened, what) -> None:
    if np.isfinite(values.sum()):  # fast path: the sum of finite values is finite (no overflow here)
        return
    finite = np.isfinite(values)
    if not finite.all():
        channel = int(np.flatnonzero(~finite.all(axis=1))[0])
        raise TrajectoryError(
            f"{opened.where(frame_no)} has a non-finite {what} (NaN or Inf) for "
            f"{_atom_label(universe, idx, channel)}; the file is corrupt there, choose a window "
            "before it with --stop"
        )
