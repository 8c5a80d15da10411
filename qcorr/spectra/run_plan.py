"""What a spectrum run reads: its settings checked, the frame window, segments and parts.

:func:`check_settings` validates the settings of
:class:`qcorr.spectra.analysis.VibrationalSpectrum` before any file is read;
:func:`plan_run` resolves the frame window (time step from the time stamps) and cuts
the run's frame block into parts of whole segments
(:func:`qcorr.spectra.segments.split_block`), each with the frames it reads.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qcorr.errors import ConfigError, SamplingError
from qcorr.reading.stream import VELOCITY_SOURCES
from qcorr.reading.time_axis import FrameWindow, frame_window
from qcorr.reading.universe import OpenedTrajectory
from qcorr.spectra.molecular import MOLECULE_DEFINITIONS
from qcorr.spectra.molecular_pass import msd_lag_stride
from qcorr.spectra.segments import (
    TAPERS,
    BlockFrames,
    SpectrumSettings,
    segment_frames_for,
    segment_starts,
    split_block,
)

__all__ = ["RunPlan", "check_settings", "plan_run"]


def _number(value) -> float | None:
    """*value* as a float, or None if it is not a real number."""
    if isinstance(value, bool):
        return None
    try:
        return float(value)
    except (TypeError, ValueError):
        return None


def check_settings(*, temperature: float, segment_ps: float = 5.0, overlap: float = 0.5,
                   taper: str = "hann", velocities_from: str = "stored", molecules: str = "residue",
                   block: tuple[int, int] = (1, 1), fft_threads: int = 1) -> None:
    """Check the settings of a spectrum before any file is read.

    Parameters are those of :class:`VibrationalSpectrum` (temperature in K, segment
    length in ps).  Messages name the option by its ``qcorr spectrum`` spelling.

    Raises
    ------
    ConfigError
        Naming the first setting at fault and what is allowed.
    """
    t = _number(temperature)
    if t is None or not math.isfinite(t) or t <= 0:
        shown = f"{t:g}" if t is not None else repr(temperature)
        raise ConfigError(f"--temperature {shown}: must be a positive number of kelvin")
    s = _number(segment_ps)
    if s is None or not math.isfinite(s) or s <= 0:
        shown = f"{s:g}" if s is not None else repr(segment_ps)
        raise ConfigError(f"--segment-ps {shown}: must be a positive number of ps")
    o = _number(overlap)
    if o is None or not (math.isfinite(o) and 0.0 <= o < 1.0):
        raise ConfigError(f"--overlap must satisfy 0 <= overlap < 1, got {overlap!r}")
    if taper not in TAPERS:
        raise ConfigError(f"--taper {taper!r} is not known; use one of {', '.join(TAPERS)}")
    if velocities_from not in VELOCITY_SOURCES:
        raise ConfigError(f"--velocities-from {velocities_from!r}: choose stored or positions")
    if molecules not in MOLECULE_DEFINITIONS:
        raise ConfigError(f"--molecules {molecules!r}: choose one of {', '.join(MOLECULE_DEFINITIONS)}")
    try:
        index, count = (int(v) for v in block)
        exact = tuple(block) == (index, count)
    except (TypeError, ValueError):
        exact = False
    if not exact or count < 1 or not 1 <= index <= count:
        raise ConfigError(f"--block {block!r}: give (I, N), block I (1-based) of N; I must be between 1 and N")
    if isinstance(fft_threads, bool) or not isinstance(fft_threads, (int, np.integer)) or fft_threads < 1:
        raise ConfigError(f"--threads {fft_threads!r}: must be at least 1")


@dataclass(frozen=True)
class RunPlan:
    """Frame window, segment settings and the parts (frame blocks) of one run.

    Attributes
    ----------
    window : qcorr.reading.time_axis.FrameWindow
    settings : qcorr.spectra.segments.SpectrumSettings
    segment_count : int
        Full segments in the whole frame window.
    parts : tuple of qcorr.spectra.segments.BlockFrames
        The run's block cut into parts of whole segments, in order.
    """

    window: FrameWindow
    settings: SpectrumSettings
    segment_count: int
    parts: tuple[BlockFrames, ...]

    def part_of(self, indexed_frames: np.ndarray) -> BlockFrames:
        """The part whose window positions are the first column of *indexed_frames*."""
        first, stop = int(indexed_frames[0, 0]), int(indexed_frames[-1, 0]) + 1
        for part in self.parts:
            if (part.read_from, part.read_stop) == (first, stop):
                return part
        raise ConfigError(f"window positions {first}..{stop - 1} are not a part of this run's plan")


def plan_run(opened: OpenedTrajectory, start: int | None, stop: int | None, step: int | None, *,
             segment_ps: float, overlap: float, taper: str, velocities_from: str, molecular: bool,
             block: tuple[int, int], pieces: int) -> RunPlan:
    """Resolve the frame window and cut frame block *block* (1-based I, N) into *pieces* parts.

    Parameters
    ----------
    opened : OpenedTrajectory
    start, stop, step : int, optional
        Frame window (trajectory frame indices).
    segment_ps : float
        Segment length, ps (rounded to an even number of frames).
    overlap, taper, velocities_from, molecular :
        As for :class:`qcorr.spectra.analysis.VibrationalSpectrum`.
    block : tuple of int
        ``(I, N)``, 1-based.
    pieces : int
        Parts wanted (lowered to the segments of the block).

    Raises
    ------
    SamplingError
        Fewer frames than one segment, or uneven time stamps.
    ConfigError
        More blocks than segments, a bad window.
    """
    window = frame_window(opened, start, stop, step)
    positions = velocities_from == "positions"
    n_samples = window.n_frames - (1 if positions else 0)
    segment_frames = segment_frames_for(segment_ps, window.timestep_ps)
    settings = SpectrumSettings(window.timestep_ps, segment_frames, overlap, taper)
    n_segments = len(segment_starts(n_samples, settings))
    if n_segments == 0:
        raise SamplingError(
            f"fewer frames than one segment: the frame window of {opened.label} gives "
            f"{n_samples} velocity samples ({n_samples * window.timestep_ps:g} ps at "
            f"{window.timestep_ps:g} ps), a --segment-ps {segment_ps:g} segment needs "
            f"{segment_frames}; shorten --segment-ps or use more frames"
        )
    lookback = 0
    if molecular:  # a block reads the longest lag of the mean-square displacement before itself
        stride, count = msd_lag_stride(segment_frames)
        lookback = stride * count
    parts = split_block(n_segments, block[0] - 1, block[1], pieces, settings,
                        extra_frames=1 if positions else 0, lookback_frames=lookback)
    return RunPlan(window, settings, n_segments, tuple(parts))
