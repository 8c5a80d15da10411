"""Segments of the spectrum estimator and their frame blocks.

The trajectory is cut into segments of ``L`` frames (even, at least 4) that start every
``hop = L - round(overlap L)`` frames (Welch 1967 [1]_).  A frame-block job keeps a
contiguous share of the segments (:func:`block_range`) and reads the frames those
segments need (:func:`frames_needed`); blocks nest, so block I of N cut into S pieces is
blocks (I-1)S+1 .. IS of NS.  The same blocks serve ``--block I-of-N`` across jobs and
the parts of a parallel run inside one job.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. 15, 70-73 (1967),
   doi:10.1109/TAU.1967.1161901.
.. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", Proc. IEEE 66, 51-83 (1978), doi:10.1109/PROC.1978.10837.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from qcorr import constants
from qcorr.errors import ConfigError, SamplingError

__all__ = [
    "TAPERS",
    "BlockFrames",
    "SpectrumSettings",
    "block_frames",
    "block_range",
    "frames_needed",
    "segment_frames_for",
    "segment_starts",
    "split_block",
    "taper_window",
]

#: accepted values of ``SpectrumSettings.taper`` (option ``--taper``)
TAPERS = ("hann", "none")


@dataclass(frozen=True)
class SpectrumSettings:
    """Segmenting and tapering of the spectrum estimator.

    Parameters
    ----------
    timestep_ps : float
        Spacing of the frames fed in, ps (> 0).
    segment_frames : int
        Frames per segment ``L`` (even, >= 4).  Resolution is ``1/(L dt)``.
    overlap : float
        Fraction of a segment shared by consecutive segments, ``0 <= overlap < 1``.
    taper : str
        ``"hann"`` (periodic Hann window) or ``"none"``.

    Raises
    ------
    ConfigError
        Naming the option (``--segment-ps``, ``--overlap``, ``--taper``) at fault.
    """

    timestep_ps: float
    segment_frames: int
    overlap: float = 0.5
    taper: str = "hann"

    def __post_init__(self) -> None:
        dt = self.timestep_ps
        if isinstance(dt, bool) or not isinstance(dt, (int, float, np.floating, np.integer)):
            raise ConfigError(f"time step between frames must be a number in ps, got {dt!r}")
        if not math.isfinite(dt) or dt <= 0:
            raise ConfigError(
                f"time step between frames must be positive and finite, got {dt} ps; "
                "check the trajectory's time stamps or --step"
            )
        L = self.segment_frames
        if isinstance(L, bool) or not isinstance(L, (int, np.integer)):
            raise ConfigError(f"--segment-ps: segment must be a whole number of frames, got {L!r}")
        if L < 4:
            raise ConfigError(
                f"--segment-ps: a segment must hold at least 4 frames, got {L} "
                f"(time step {dt} ps); lengthen --segment-ps"
            )
        if L % 2:
            raise ConfigError(
                f"--segment-ps: a segment must hold an even number of frames, got {L} "
                f"(time step {dt} ps); choose --segment-ps as an even multiple of the time step"
            )
        ov = self.overlap
        if isinstance(ov, bool) or not isinstance(ov, (int, float, np.floating, np.integer)):
            raise ConfigError(f"--overlap must be a number in [0, 1), got {ov!r}")
        if not (math.isfinite(ov) and 0.0 <= ov < 1.0):
            raise ConfigError(f"--overlap must satisfy 0 <= overlap < 1, got {ov}")
        if self.taper not in TAPERS:
            raise ConfigError(
                f"--taper {self.taper!r} is not known; use one of {', '.join(TAPERS)}"
            )
        if L - round(ov * L) < 1:
            raise ConfigError(
                f"--overlap {ov} leaves no frame between the starts of consecutive "
                f"{L}-frame segments; lower --overlap"
            )

    @property
    def hop_frames(self) -> int:
        """Frames between the starts of consecutive segments, ``L - round(overlap L)`` (>= 1)."""
        return self.segment_frames - round(self.overlap * self.segment_frames)

    @property
    def segment_ps(self) -> float:
        """Segment length ``L dt`` in ps."""
        return self.segment_frames * self.timestep_ps

    @property
    def resolution_Hz(self) -> float:
        """Spacing of the frequency grid, ``1/(L dt)``, Hz."""
        return 1.0 / (self.segment_frames * self.timestep_ps * constants.picosecond_s)

    @property
    def nyquist_Hz(self) -> float:
        """Nyquist frequency ``1/(2 dt)``, Hz."""
        return 0.5 / (self.timestep_ps * constants.picosecond_s)


def segment_frames_for(segment_ps: float, timestep_ps: float) -> int:
    """Frames per segment for a segment length in ps: the nearest even count, at least 4.

    Parameters
    ----------
    segment_ps : float
        Requested segment length, ps (option ``--segment-ps``).
    timestep_ps : float
        Spacing of the frames, ps.

    Raises
    ------
    ConfigError
        If either value is not positive and finite.
    """
    for name, value in (("--segment-ps", segment_ps), ("time step", timestep_ps)):
        if not (math.isfinite(value) and value > 0):
            raise ConfigError(f"{name} must be positive and finite, got {value} ps")
    frames = 2 * round(segment_ps / timestep_ps / 2.0)
    return max(4, int(frames))


def segment_starts(n_frames: int, settings: SpectrumSettings) -> NDArray[np.int64]:
    """First frame (0-based, relative to the frames fed) of every full segment.

    Segments start at ``0, hop, 2 hop, ...`` while ``start + L <= n_frames``; frames
    after the last full segment are not used.
    """
    n_frames = int(n_frames)
    L, hop = settings.segment_frames, settings.hop_frames
    if n_frames < L:
        return np.zeros(0, dtype=np.int64)
    return np.arange(0, n_frames - L + 1, hop, dtype=np.int64)


def block_range(n_segments: int, block_index: int, block_count: int) -> tuple[int, int]:
    """Contiguous share ``[first, stop)`` of the segment indices for one frame-block job.

    Segments are split as evenly as possible: block ``i`` of ``N`` gets
    ``[floor(i n/N), floor((i+1) n/N))``.  Concatenating all blocks in order gives
    ``0 .. n_segments`` exactly once.

    Parameters
    ----------
    n_segments : int
        Number of full segments in the whole frame window.
    block_index : int
        0-based index of this block.
    block_count : int
        Number of blocks ``N`` (>= 1, at most ``n_segments``).

    Raises
    ------
    ConfigError
        Naming ``--block`` if the index is out of range or a block would be empty.
    SamplingError
        If there is no segment at all.
    """
    if block_count < 1:
        raise ConfigError(f"--block: the number of blocks must be at least 1, got {block_count}")
    if not 0 <= block_index < block_count:
        raise ConfigError(
            f"--block: block {block_index + 1} of {block_count} does not exist; "
            f"use 1..{block_count}"
        )
    if n_segments < 1:
        raise SamplingError(
            "the frame window holds no full segment; shorten --segment-ps or give more frames"
        )
    if block_count > n_segments:
        raise ConfigError(
            f"--block: {block_count} blocks but the frame window holds only {n_segments} "
            "segments; use fewer blocks or shorter --segment-ps"
        )
    first = (block_index * n_segments) // block_count
    stop = ((block_index + 1) * n_segments) // block_count
    return first, stop


def frames_needed(
    first_segment: int, stop_segment: int, settings: SpectrumSettings
) -> tuple[int, int]:
    """Relative frame range ``[start, stop)`` read by segments ``first_segment .. stop_segment-1``."""
    if not 0 <= first_segment < stop_segment:
        raise ConfigError(f"segment range [{first_segment}, {stop_segment}) is empty or negative")
    hop, L = settings.hop_frames, settings.segment_frames
    return first_segment * hop, (stop_segment - 1) * hop + L


def taper_window(settings: SpectrumSettings) -> NDArray[np.float64]:
    """Time-domain taper ``w[n]``, ``n = 0 .. L-1``: the periodic Hann window [2]_, or ones."""
    L = settings.segment_frames
    if settings.taper == "hann":
        return 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(L) / L)
    return np.ones(L)


@dataclass(frozen=True)
class BlockFrames:
    """The segments of one frame block and the window positions it reads.

    Positions count frames of the frame window from 0; sample j is window frame j for
    stored velocities and the difference of frames j and j+1 for velocities from
    positions.

    Attributes
    ----------
    block_index, block_count : int
        0-based index of the block and number of blocks of the window.
    first_segment, stop_segment : int
        The block keeps segments ``first_segment .. stop_segment-1`` of the window.
    first_sample, stop_sample : int
        Velocity samples those segments use (:func:`frames_needed`).
    read_from, read_stop : int
        Window positions read: from up to *lookback* samples before ``first_sample``
        (earlier snapshots of the mean-square displacement) to ``stop_sample`` plus
        the frames one sample needs beyond itself (1 for differences of positions).
    count_stop : int
        Samples ``first_sample .. count_stop-1`` are this block's counted frames
        (frame statistics, principal moments, displacement pairs): up to the next
        block's first sample, so that the blocks count every frame once.
    """

    block_index: int
    block_count: int
    first_segment: int
    stop_segment: int
    first_sample: int
    stop_sample: int
    read_from: int
    read_stop: int
    count_stop: int


def block_frames(n_segments: int, block_index: int, block_count: int, settings: SpectrumSettings, *,
                 extra_frames: int = 0, lookback_frames: int = 0) -> BlockFrames:
    """Segments and frames of frame block *block_index* (0-based) of *block_count*.

    Parameters
    ----------
    n_segments : int
        Full segments in the whole frame window.
    block_index, block_count : int
        See :func:`block_range`.
    settings : SpectrumSettings
    extra_frames : int
        Frames a sample needs after its own (1 for forward differences of positions).
    lookback_frames : int
        Samples read before the block's first one (the longest lag of the
        mean-square displacement, for ``--molecular``).

    Raises
    ------
    ConfigError, SamplingError
        As :func:`block_range`.
    """
    first_segment, stop_segment = block_range(n_segments, block_index, block_count)
    first_sample, stop_sample = frames_needed(first_segment, stop_segment, settings)
    if block_index + 1 < block_count:
        count_stop = block_range(n_segments, block_index + 1, block_count)[0] * settings.hop_frames
    else:
        count_stop = stop_sample
    return BlockFrames(
        block_index=block_index, block_count=block_count,
        first_segment=first_segment, stop_segment=stop_segment,
        first_sample=first_sample, stop_sample=stop_sample,
        read_from=max(0, first_sample - int(lookback_frames)),
        read_stop=stop_sample + int(extra_frames),
        count_stop=count_stop,
    )


def split_block(n_segments: int, block_index: int, block_count: int, pieces: int,
                settings: SpectrumSettings, **frames) -> list[BlockFrames]:
    """Frame block *block_index* of *block_count* cut into *pieces* nested blocks.

    Block I of N cut into S pieces is blocks IS .. IS+S-1 (0-based) of NS:
    :func:`block_range` floors ``i n / N``, so the pieces cover exactly the segments of
    block I of N.  *pieces* is lowered to the segments the block holds.  Keywords go
    to :func:`block_frames`.

    Raises
    ------
    ConfigError
        If *pieces* is below 1 (and as :func:`block_range`).
    """
    if int(pieces) < 1:
        raise ConfigError(f"n_parts {pieces}: a frame block must be cut into at least one part")
    first, stop = block_range(n_segments, block_index, block_count)
    pieces = min(int(pieces), max(1, n_segments // block_count), stop - first)
    return [block_frames(n_segments, block_index * pieces + k, block_count * pieces, settings, **frames)
            for k in range(pieces)]
