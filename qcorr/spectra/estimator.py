"""Streaming, segment-averaged spectrum of mass-weighted velocities (Welch estimator).

The trajectory is cut into segments of ``L`` frames that start every ``hop``
frames (``overlap`` is the shared fraction).  For every segment and every group
of channels (atoms) this module returns

* the one-sided power spectral density of the weighted velocities,
  ``P_g(nu) = sum_{j in g} w_j sum_alpha PSD[x_{j alpha}](nu)`` in
  (weight x value^2)/Hz, tapered with a periodic Hann window or untapered, and
* the unbiased weighted autocorrelation
  ``C_g(k dt) = sum_{j in g} w_j sum_alpha sum_{n<L-k} x_{j alpha}[n] x_{j alpha}[n+k] / (L-k)``
  of the untapered data (the VACF when ``w`` are masses and ``x`` velocities).

Frames are fed one at a time; the estimator holds one segment plus a small
FFT workspace, so memory does not grow with the trajectory length.

Conventions
-----------
*Continuous one-sided density.*  With the ``L``-point DFT ``Y[m]`` of the tapered
segment ``w[n] x[n]`` and ``f_m = m/(L dt)``, ``m = 0 .. L/2``::

    P[m] = 2 dt |Y[m]|^2 / sum_n w[n]^2        (every bin doubled, DC and Nyquist too)

For even ``L`` Parseval's theorem then makes the trapezoid integral over
``f_0 .. f_{L/2}`` equal to ``sum_n w[n]^2 x[n]^2 / sum_n w[n]^2`` (the window-weighted
mean square) exactly, and ``P[0]`` estimates the one-sided density at zero
frequency, ``S(0) = 4 int_0^inf C(t) dt`` per unit variance, as needed by the
Green-Kubo relation [3]_.  ``segment_frames`` must therefore be even.

*Window.*  The periodic ("DFT-even") Hann window ``w[n] = (1 - cos(2 pi n/L))/2`` [2]_.
Its DFT has three non-zero coefficients, so the tapered spectrum is the
three-tap convolution ``Y[m] = X[m]/2 - (X[m-1] + X[m+1])/4`` of the untapered
one.

*Transforms.*  With 50 % overlap (``L = 2 hop``, the default) each half segment
is zero-padded to ``L`` and transformed once with :func:`scipy.fft.rfft`; it
serves both segments that contain it.  For a segment made of halves ``A`` and
``B`` the ``L``-point DFT is ``X[m] = A[m] + (-1)^m B[m]`` and the linear
autocorrelation is ``r_AA + r_BB`` plus the cross-correlation of ``A`` with
``B`` shifted by ``hop``, all from inverse transforms of group sums of ``|A|^2``,
``|B|^2`` and ``conj(A) B`` (Wiener-Khinchin with zero padding, [4]_).  For other
overlaps each segment is zero-padded to ``2L`` and transformed once: the squared
modulus gives the linear autocorrelation, the even bins are ``X[m]``.  In both
routes the tapered periodogram follows from ``X`` by the three-tap convolution
above, and sums over channels are taken in the frequency domain with the
(group x channel) weights, so only a few inverse transforms per group are needed.

No detrending: removing each segment's mean velocity would remove the
diffusive (zero-frequency) power [1]_.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. 15, 70-73 (1967),
   doi:10.1109/TAU.1967.1161901.
.. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", Proc. IEEE 66, 51-83 (1978), doi:10.1109/PROC.1978.10837.
.. [3] S.-T. Lin, M. Blanco, W. A. Goddard III, "The two-phase model for calculating
   thermodynamic properties of liquids from molecular dynamics", J. Chem. Phys.
   119, 11792 (2003), doi:10.1063/1.1624057.
.. [4] W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery, Numerical
   Recipes, 3rd ed., Cambridge University Press (2007), sections 13.2 and 13.4
   (correlation by FFT with zero padding; power spectrum estimation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft
from numpy.typing import ArrayLike, NDArray

from qcorr import constants
from qcorr.errors import ConfigError, SamplingError, TrajectoryError
from qcorr.spectra.segments import SpectrumSettings, frames_needed, taper_window

__all__ = ["SegmentAccumulator", "SegmentPowers"]

#: bytes of FFT workspace aimed at per chunk of channels (keeps temporaries in cache)
_CHUNK_BYTES = 512 * 1024


@dataclass(frozen=True)
class SegmentPowers:
    """Per-segment spectra and correlations of one pass (see the module docstring).

    Attributes
    ----------
    frequency_Hz : ndarray, shape (n_freq,)
        ``m/(L dt)`` for ``m = 0 .. L/2``, Hz.
    power : ndarray, shape (n_groups, n_segments, n_freq)
        One-sided weighted PSD, (weight x value^2)/Hz; the trapezoid integral over
        ``frequency_Hz`` equals ``mean_square``.
    mean_square : ndarray, shape (n_groups, n_segments)
        Window-weighted mean of ``sum_j w_j |x_j|^2``, weight x value^2.
    correlation : ndarray, shape (n_groups, n_segments, L)
        Unbiased weighted autocorrelation of the untapered data, weight x value^2.
    lag_ps : ndarray, shape (L,)
        ``k dt``, ps.
    segment_first_frame : ndarray, shape (n_segments,)
        Relative frame index at which each kept segment starts.
    settings : SpectrumSettings
    """

    frequency_Hz: NDArray[np.float64]
    power: NDArray[np.float64]
    mean_square: NDArray[np.float64]
    correlation: NDArray[np.float64]
    lag_ps: NDArray[np.float64]
    segment_first_frame: NDArray[np.int64]
    settings: SpectrumSettings


class SegmentAccumulator:
    """Streams frames; holds one segment (L x n_channels x n_components) plus FFT workspace.

    Precision follows the first frame: float32 frames (as MDAnalysis reads them) are
    buffered and transformed in single precision (complex64), other input in float64.
    Group sums over one chunk of channels are formed in the working precision and
    accumulated in float64; results are always float64.  Single precision differs from
    double by about the FFT rounding bound, ``log2(2L) x 2^-24`` relative to the total
    power (N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed. (2002),
    section 24.1), far below the statistical error of any spectrum from MD.

    Memory does not depend on the number of frames: with 50 % overlap the frame
    buffer is half a segment and the
    transforms of the previous half take about one segment; otherwise the buffer is
    one segment.  The FFT workspace is a few hundred kB per chunk of channels.  Only
    the per-segment results (n_groups x (L/2 + 1 + L) numbers per segment) grow.

    Parameters
    ----------
    settings : SpectrumSettings
    weights : array_like, shape (n_channels,)
        Weight of each channel, e.g. masses in u (finite, >= 0).
    group_members : array_like of bool, shape (n_groups, n_channels)
        Which channels each group sums.
    n_components : int
        Components per channel (3 for Cartesian velocities).
    workers : int
        FFT threads (option ``--threads``; :func:`scipy.fft.rfft` ``workers``).  Transforms
        run in the caller's thread.  (Transforming finished half segments in a background
        thread while the caller reads on was tried and dropped: with MDAnalysis' reader
        holding the GIL the two threads took turns and the run was 5-12 % slower.)
    first_segment, stop_segment : int
        Only segments ``first_segment .. stop_segment-1`` of the frame window are
        kept (a frame block); frames must be fed from
        ``frames_needed(first_segment, stop_segment, settings)[0]`` on.  With
        ``stop_segment=None`` every full segment is kept.

    Raises
    ------
    ConfigError
        If weights, groups or segment range are unusable.
    """

    def __init__(
        self,
        settings: SpectrumSettings,
        weights: ArrayLike,
        group_members: ArrayLike,
        n_components: int = 3,
        workers: int = 1,
        first_segment: int = 0,
        stop_segment: int | None = None,
        *,
        _route: str = "auto",
    ) -> None:
        weights = np.asarray(weights, dtype=np.float64)
        members = np.asarray(group_members)
        if weights.ndim != 1 or weights.size == 0:
            raise ConfigError(f"weights must be a non-empty 1-d array, got shape {weights.shape}")
        if not np.all(np.isfinite(weights)) or np.any(weights < 0):
            bad = int(np.flatnonzero(~np.isfinite(weights) | (weights < 0))[0])
            raise ConfigError(
                f"weight (mass) of channel {bad} is {weights[bad]}; weights must be finite and "
                ">= 0 (check --mass)"
            )
        if members.ndim != 2 or members.shape[1] != weights.size or members.shape[0] == 0:
            raise ConfigError(
                f"group membership must have shape (n_groups, {weights.size}), got {members.shape}"
            )
        if members.dtype != bool:
            raise ConfigError("group membership must be a boolean array")
        if int(n_components) < 1:
            raise ConfigError(f"n_components must be >= 1, got {n_components}")
        if int(workers) < 1:
            raise ConfigError(f"--threads must be >= 1, got {workers}")
        if first_segment < 0 or (stop_segment is not None and stop_segment <= first_segment):
            raise ConfigError(
                f"segment range [{first_segment}, {stop_segment}) is empty or negative"
            )
        self.settings = settings
        self.n_channels = weights.size
        self.n_components = int(n_components)
        self.n_groups = members.shape[0]
        self.workers = int(workers)
        self.first_segment = int(first_segment)
        self.stop_segment = None if stop_segment is None else int(stop_segment)

        L = settings.segment_frames
        rows = self.n_channels * self.n_components
        self._rows = rows
        # (group x row) weight matrix: one column per channel component
        self._row_weights = np.repeat(members * weights[None, :], self.n_components, axis=1)
        half = L // 2
        if _route not in ("auto", "segment"):
            raise ConfigError(f"unknown transform route {_route!r}")
        # With 50 % overlap (L = 2 hop) every half segment is transformed once and reused by
        # the two segments that contain it; otherwise each segment is transformed whole.
        self._half_overlap = _route == "auto" and settings.hop_frames == half
        if self._half_overlap:
            self._chunk = min(rows, max(8, _CHUNK_BYTES // (L * 8)))
            self._previous: list[NDArray[np.complexfloating]] = []
            self._previous_auto: NDArray[np.float64] | None = None
        else:
            self._chunk = min(rows, max(8, _CHUNK_BYTES // (2 * L * 8)))
        # frame buffer and FFT workspace are allocated at the first frame, in its precision
        self.dtype: np.dtype | None = None
        self.buffer: NDArray[np.floating] | None = None
        window = taper_window(settings)
        self._window_power = float(np.sum(window * window))
        self._fft_workers = self.workers
        self._frames_fed = 0
        self._power: list[NDArray[np.float64]] = []
        self._correlation: list[NDArray[np.float64]] = []
        self._first_frames: list[int] = []

    def _allocate(self, dtype: np.dtype) -> None:
        """Frame buffer and FFT workspace in *dtype* (float32 or float64).

        float32 frames (as MDAnalysis reads every format) are buffered and transformed
        in single precision (complex64 transforms); the products of transforms are summed
        over the rows of one chunk (at most a few hundred) in single precision and
        accumulated across chunks, halves and segments in float64.  Any other input is
        processed in float64 throughout.
        """
        L = self.settings.segment_frames
        half = L // 2
        rows, chunk = self._rows, self._chunk
        complex_dtype = np.result_type(dtype, np.complex64)
        self.dtype = np.dtype(dtype)
        self._work_weights = self._row_weights.astype(dtype)
        if self._half_overlap:
            # frame-major buffer of one half segment (frame f lives in row f % half) and the
            # L-point transforms of the previous half segment, one array per chunk of rows
            self.buffer = np.zeros((half, rows), dtype)
            self.workspace = np.zeros((chunk, L), dtype)
            self._combined = np.zeros((chunk, half + 1), complex_dtype)
            # e^{-i 2 pi m hop / L} = (-1)^m: phase of the second half in the segment's DFT
            # (float view: real and imaginary part of each bin share the sign)
            self._alternating = np.repeat(
                np.where(np.arange(half + 1) % 2 == 0, 1.0, -1.0), 2
            ).astype(dtype)
        else:
            # ring buffer of one segment, frame-major: frame f lives in row f % L
            self.buffer = np.zeros((L, rows), dtype)
            # zero-padded FFT input for one chunk of rows; columns L..2L-1 stay zero
            self.workspace = np.zeros((chunk, 2 * L), dtype)
            self._even = np.zeros((chunk, half + 1), complex_dtype)
        self._tapered = np.zeros((chunk, half + 1), complex_dtype)

    @property
    def frames_fed(self) -> int:
        """Number of frames given to :meth:`add_frame` so far."""
        return self._frames_fed

    @property
    def segments_done(self) -> int:
        """Number of segments transformed and kept so far."""
        return len(self._power)

    def _segments_wanted(self) -> int | None:
        if self.stop_segment is None:
            return None
        return self.stop_segment - self.first_segment

    def add_frame(self, values: ArrayLike) -> None:
        """Add one frame; transform and accumulate when a segment is complete.

        Parameters
        ----------
        values : array_like, shape (n_channels, n_components)
            E.g. velocities in Angstrom/ps (copied; the caller may reuse the array).
        """
        values = np.asarray(values)
        if values.shape != (self.n_channels, self.n_components):
            raise TrajectoryError(
                f"frame {self._frames_fed} has values of shape {values.shape}, expected "
                f"({self.n_channels}, {self.n_components})"
            )
        if self.buffer is None:
            self._allocate(np.float32 if values.dtype == np.float32 else np.float64)
        L, hop = self.settings.segment_frames, self.settings.hop_frames
        wanted = self._segments_wanted()
        if wanted is not None and self._frames_fed >= (wanted - 1) * hop + L:
            self._frames_fed += 1  # beyond the block: not needed, not stored
            return
        if self._half_overlap:
            self.buffer[self._frames_fed % hop] = values.reshape(-1)
            self._frames_fed += 1
            if self._frames_fed % hop == 0:
                self._transform_half(self.buffer, self._frames_fed)
            return
        self.buffer[self._frames_fed % L] = values.reshape(-1)
        self._frames_fed += 1
        start = self._frames_fed - L
        if start >= 0 and start % hop == 0:
            self._transform_segment(start)

    def add_frames(self, values: NDArray[np.floating]) -> None:
        """Add consecutive frames, shape (n_frames, n_channels, n_components): the same as
        :meth:`add_frame` for each in turn, with one copy per run of frames that stays
        inside one half segment (50 % overlap); other overlaps go frame by frame.
        """
        values = np.asarray(values)
        if values.ndim != 3 or values.shape[1:] != (self.n_channels, self.n_components):
            raise TrajectoryError(
                f"frames {self._frames_fed}.. have values of shape {values.shape}, expected "
                f"(n, {self.n_channels}, {self.n_components})"
            )
        if not self._half_overlap or len(values) == 0:
            for frame in values:
                self.add_frame(frame)
            return
        if self.buffer is None:
            self._allocate(np.float32 if values.dtype == np.float32 else np.float64)
        L, hop = self.settings.segment_frames, self.settings.hop_frames
        wanted = self._segments_wanted()
        limit = None if wanted is None else (wanted - 1) * hop + L
        rows = values.reshape(len(values), -1)
        k = 0
        while k < len(rows):
            if limit is not None and self._frames_fed >= limit:
                self._frames_fed += len(rows) - k  # beyond the block: not needed, not stored
                return
            at = self._frames_fed % hop
            m = min(len(rows) - k, hop - at)
            if limit is not None:
                m = min(m, limit - self._frames_fed)
            self.buffer[at:at + m] = rows[k:k + m]
            self._frames_fed += m
            k += m
            if self._frames_fed % hop == 0:
                self._transform_half(self.buffer, self._frames_fed)

    def _add_tapered_power(
        self, x: NDArray[np.complexfloating], w: NDArray[np.floating], power: NDArray[np.float64]
    ) -> None:
        """``power += w @ |4 Y|^2`` (interleaved re^2, im^2) for the L-point DFT *x* of a segment.

        *x* must be C-contiguous, shape (rows, L/2 + 1).

        ``4 Y[m] = 2 X[m] - X[m-1] - X[m+1]`` is the periodic-Hann taper applied in the
        frequency domain (Harris 1978); without a taper ``Y = X``.
        """
        n = x.shape[0]
        y = self._tapered[:n]
        if self.settings.taper == "hann":
            # on the flattened float views a shift by one complex bin is a shift by two floats;
            # contiguous 1-d operations are several times faster than 2-d slices
            real = self.dtype
            xf, yf = x.view(real).reshape(-1), y.view(real).reshape(-1)
            np.multiply(xf, 2.0, out=yf)
            np.subtract(yf[2:-2], xf[:-4], out=yf[2:-2])
            np.subtract(yf[2:-2], xf[4:], out=yf[2:-2])
            # first and last bin of every row (the flat shifts mixed neighbouring rows there):
            # X[-1] = conj X[1] and X[L/2+1] = conj X[L/2-1] for real data
            y[:, 0] = 2.0 * (x[:, 0] - x[:, 1].real)
            y[:, -1] = 2.0 * (x[:, -1] - x[:, -2].real)
        else:
            np.copyto(y, x)
        yf = y.view(self.dtype)
        np.multiply(yf, yf, out=yf)
        power += w @ yf

    def _store_segment(
        self,
        power: NDArray[np.float64],
        corr_spectrum: NDArray[np.float64] | None,
        lagged: NDArray[np.float64] | None,
        start: int,
    ) -> None:
        """Scale the group sums of one segment and keep them."""
        L = self.settings.segment_frames
        power = power[:, 0::2] + power[:, 1::2]  # re^2 + im^2 (interleaved)
        if self.settings.taper == "hann":
            power /= 16.0
        dt_s = self.settings.timestep_ps * constants.picosecond_s
        power *= 2.0 * dt_s / self._window_power
        if lagged is None:
            lagged = scipy.fft.irfft(corr_spectrum, n=2 * L, axis=-1)[:, :L]
        lagged /= np.arange(L, 0, -1, dtype=np.float64)
        if not (np.all(np.isfinite(power)) and np.all(np.isfinite(lagged))):
            raise TrajectoryError(
                f"values are not finite (NaN or Inf) in frames {start}..{start + L - 1}, "
                "counted from the first frame fed; check the trajectory there"
            )
        self._power.append(power)
        self._correlation.append(lagged)
        self._first_frames.append(start)

    def _transform_half(self, block: NDArray[np.floating], frames_fed: int) -> None:
        """Transform the half segment just completed; finish the segment it closes (if any).

        With ``L = 2H`` a segment is two halves ``A`` (first) and ``B``.  Their ``L``-point
        transforms (each half zero-padded to ``L``) give

        * the segment's DFT, ``X[m] = A[m] + (-1)^m B[m]``, hence the tapered periodogram;
        * its linear autocorrelation, ``R(k) = r_AA(k) + r_BB(k) + c_AB(k - H)`` with
          ``r_AA = IDFT|A|^2`` (lags ``0 .. H-1``, zero beyond) and the cross-correlation
          ``c_AB(d) = sum_n a[n] b[n+d] = IDFT(conj(A) B)`` at ``d = -H .. H-1`` (no
          wrap-around: ``L >= 2H - 1``).

        Each half is transformed once and used by both segments containing it.
        """
        L, H = self.settings.segment_frames, self.settings.hop_frames
        G = self.n_groups
        have_previous = bool(self._previous)
        auto = np.zeros((G, 2 * (H + 1)))
        cross = np.zeros((G, 2 * (H + 1)))
        power = np.zeros((G, 2 * (H + 1)))
        new_transforms = []
        for index, c0 in enumerate(range(0, self._rows, self._chunk)):
            c1 = min(self._rows, c0 + self._chunk)
            n = c1 - c0
            work = self.workspace[:n]
            work[:, :H] = block[:, c0:c1].T  # columns H..L-1 stay zero
            b = scipy.fft.rfft(work, axis=-1, workers=self._fft_workers)
            w = self._work_weights[:, c0:c1]
            scratch = self._combined[:n]
            bf, sf = b.view(self.dtype), scratch.view(self.dtype)
            np.multiply(bf, bf, out=sf)
            auto += w @ sf
            if have_previous:
                a = self._previous[index]
                np.conjugate(a, out=scratch)
                np.multiply(scratch, b, out=scratch)
                cross += w @ sf
                np.multiply(bf, self._alternating, out=sf)
                np.add(scratch, a, out=scratch)
                self._add_tapered_power(scratch, w, power)
            new_transforms.append(b)
        auto = auto[:, 0::2] + auto[:, 1::2]
        if have_previous:
            r_first = scipy.fft.irfft(self._previous_auto, n=L, axis=-1)[:, :H]
            r_second = scipy.fft.irfft(auto, n=L, axis=-1)[:, :H]
            c = scipy.fft.irfft(cross[:, 0::2] + 1j * cross[:, 1::2], n=L, axis=-1)
            lagged = np.roll(c, H, axis=-1)  # lagged[k] = c_AB(k - H), index taken mod L
            lagged[:, :H] += r_first + r_second
            self._store_segment(power, None, lagged, frames_fed - L)
        self._previous = new_transforms
        self._previous_auto = auto

    def _transform_segment(self, start: int) -> None:
        """Transform the segment beginning at relative frame *start* (its last frame just came)."""
        L = self.settings.segment_frames
        half = L // 2
        r = start % L  # ring row holding the segment's first frame
        G = self.n_groups
        corr_spectrum = np.zeros((G, 2 * (L + 1)))  # real/imaginary parts interleaved
        power = np.zeros((G, 2 * (half + 1)))
        for c0 in range(0, self._rows, self._chunk):
            c1 = min(self._rows, c0 + self._chunk)
            n = c1 - c0
            work = self.workspace[:n]
            work[:, : L - r] = self.buffer[r:, c0:c1].T
            if r:
                work[:, L - r : L] = self.buffer[:r, c0:c1].T
            z = scipy.fft.rfft(work, n=2 * L, axis=-1, workers=self._fft_workers)
            w = self._work_weights[:, c0:c1]
            x = self._even[:n]
            np.copyto(x, z[:, ::2])  # L-point DFT of the untapered segment, m = 0 .. L/2
            self._add_tapered_power(x, w, power)
            zf = z.view(self.dtype)
            np.multiply(zf, zf, out=zf)
            corr_spectrum += w @ zf
        corr_spectrum = corr_spectrum[:, 0::2] + corr_spectrum[:, 1::2]
        self._store_segment(power, corr_spectrum, None, start)

    def result(self) -> SegmentPowers:
        """Per-segment powers and correlations of the segments kept so far.

        Raises
        ------
        SamplingError
            If no full segment was seen.
        """
        L = self.settings.segment_frames
        if not self._power:
            raise SamplingError(
                f"fewer frames than one segment: got {self._frames_fed} frames, a segment "
                f"needs {L} (--segment-ps); shorten --segment-ps or give more frames"
            )
        wanted = self._segments_wanted()
        if wanted is not None and len(self._power) < wanted:
            need = frames_needed(self.first_segment, self.stop_segment, self.settings)
            raise SamplingError(
                f"frame block ended early: got {self._frames_fed} frames, segments "
                f"{self.first_segment}..{self.stop_segment - 1} need {need[1] - need[0]}; "
                "the trajectory is shorter than when the blocks were planned"
            )
        dt_ps = self.settings.timestep_ps
        frequency = np.arange(L // 2 + 1) * self.settings.resolution_Hz
        power = np.stack(self._power, axis=1)
        df = self.settings.resolution_Hz
        mean_square = df * (power.sum(axis=-1) - 0.5 * (power[..., 0] + power[..., -1]))
        hop = self.settings.hop_frames
        return SegmentPowers(
            frequency_Hz=frequency,
            power=power,
            mean_square=mean_square,
            correlation=np.stack(self._correlation, axis=1),
            lag_ps=np.arange(L) * dt_ps,
            segment_first_frame=np.asarray(self._first_frames, dtype=np.int64)
            + self.first_segment * hop,
            settings=self.settings,
        )
