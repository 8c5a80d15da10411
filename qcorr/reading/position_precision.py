"""The rounding step of stored positions, for spectra made from differences of positions.

Lossy formats round every coordinate to a grid: GROMACS XTC multiplies nanometres by a
precision stored in each frame (1000 per nm by default, a step of 0.001 nm = 0.01 Å) and
rounds to integers (GROMACS manual, "xtc" file format); with fewer than 10 atoms it
stores the coordinates unrounded (same page).  MDAnalysis' XTC reader does not expose
the precision; the low-level ``XTCFile`` frame does (``prec``).

Where the format does not store a precision, the first two frames are searched for a
common grid (:data:`GRID_CANDIDATES_A`): positions converted from an XTC to a TRR, or
written as fixed-decimal text, lie on one.  Otherwise the positions are taken as stored
unrounded (binary floating point: a relative rounding of about 6e-8, negligible), unless
the user states the step (``--position-precision``).  A stated step must agree with a
stored or detected one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qcorr.errors import ConfigError, TrajectoryError

__all__ = ["GRID_CANDIDATES_A", "PositionPrecision", "detected_grid_A", "position_precision", "xtc_step_A"]

#: rounding steps looked for (Å), coarsest first: 1, 0.1, 0.01 (XTC default), 0.001 Å (PDB, AMBER ASCII)
GRID_CANDIDATES_A = (1.0, 0.1, 0.01, 0.001)
#: a coordinate is on a grid of step p if within this fraction of p of a multiple of p
GRID_TOLERANCE = 0.05
#: XTC stores coordinates unrounded below this many atoms (GROMACS manual, xtc format)
XTC_UNROUNDED_BELOW_ATOMS = 10


@dataclass(frozen=True)
class PositionPrecision:
    """Rounding step of the positions and where it comes from.

    Attributes
    ----------
    step_A : float
        Rounding step p, Å (0: positions taken as unrounded).
    source : str
        One line for the spectrum file.
    """

    step_A: float
    source: str


def xtc_step_A(filename) -> tuple[float, str]:
    """Rounding step (Å) of an XTC file from its first frame's precision, and a description."""
    from MDAnalysis.lib.formats.libmdaxdr import XTCFile

    with XTCFile(str(filename)) as xtc:
        n_atoms = xtc.n_atoms
        frame = xtc.read()
    if n_atoms < XTC_UNROUNDED_BELOW_ATOMS:
        return 0.0, f"XTC file of {n_atoms} atoms: stored unrounded"
    precision = float(frame.prec)  # per nm
    if not (math.isfinite(precision) and precision > 0):
        raise TrajectoryError(f"'{filename}' stores an XTC precision of {precision!r} per nm; the file is corrupt")
    return 10.0 / precision, f"XTC file: precision {precision:g} per nm"


def detected_grid_A(frames: list[np.ndarray]) -> float | None:
    """The coarsest step of :data:`GRID_CANDIDATES_A` on which every coordinate of *frames* lies.

    A step is tried only where float32 storage can resolve it (4 × the float32 spacing
    of the largest coordinate below :data:`GRID_TOLERANCE` of the step).
    """
    values = np.concatenate([np.asarray(f, dtype=np.float64).ravel() for f in frames])
    if values.size == 0:
        return None
    largest = float(np.max(np.abs(values)))
    resolution = 4.0 * float(np.spacing(np.float32(largest)))
    for step in GRID_CANDIDATES_A:
        if resolution > GRID_TOLERANCE * step:
            continue
        q = values / step
        if np.all(np.abs(q - np.round(q)) <= GRID_TOLERANCE):
            return step
    return None


def _checked_given(given) -> float | None:
    if given is None:
        return None
    try:
        value = float(given)
    except (TypeError, ValueError):
        value = math.nan
    if isinstance(given, bool) or not (math.isfinite(value) and value >= 0):
        raise ConfigError(f"--position-precision {given!r}: must be a rounding step of 0 or more, in Å")
    return value


def _file_step(reader) -> tuple[float | None, str]:
    """(step Å or None, description) of one file's stored or detected rounding."""
    if type(reader).__name__ == "XTCReader":
        return xtc_step_A(reader.filename)
    frames = [np.array(reader[k].positions) for k in range(min(2, reader.n_frames))]
    reader[0]
    step = detected_grid_A(frames)
    if step is None:
        return None, "no common rounding step in the first frames"
    return step, f"detected: every coordinate of the first frames lies on a {step:g} Å grid"


def position_precision(opened, given_A: float | None = None) -> PositionPrecision:
    """Rounding step of the positions of *opened* (see the module docstring).

    Parameters
    ----------
    opened : qcorr.reading.universe.OpenedTrajectory
    given_A : float, optional
        Step stated by the user (``--position-precision``), Å.

    Returns
    -------
    PositionPrecision

    Raises
    ------
    ConfigError
        A stated step that is negative or not a number, or that disagrees with the step
        an XTC file stores or the positions show (names both); files of different steps.
    """
    given = _checked_given(given_A)
    readers = list(getattr(opened.universe.trajectory, "readers", None) or [opened.universe.trajectory])
    found = [(_file_step(r), getattr(r, "filename", "the trajectory")) for r in readers]
    opened.universe.trajectory[0]
    with_step = [(step, source, name) for (step, source), name in found if step is not None]
    if len({step for step, _, _ in with_step}) > 1 or 0 < len(with_step) < len(found):
        names = ", ".join(f"'{name}' {'unknown' if step is None else f'{step:g} Å'}"
                          for (step, _), name in found)
        raise ConfigError(f"the trajectory files store positions with different rounding steps ({names}); "
                          "analyse them separately")
    step, source, name = with_step[0] if with_step else (None, found[0][0][1], found[0][1])
    if given is not None:
        if step is not None and abs(given - step) > 1e-6 * max(step, given):
            raise ConfigError(
                f"--position-precision {given:g} Å disagrees with '{name}' ({source}: {step:g} Å); "
                "leave the option out or check the file"
            )
        return PositionPrecision(given, source if step is not None else "stated (--position-precision)")
    if step is None:
        return PositionPrecision(0.0, "no rounding step stored or detected: positions taken as unrounded "
                                      "(state one with --position-precision)")
    return PositionPrecision(step, source)
