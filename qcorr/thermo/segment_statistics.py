"""Standard errors of spectrum integrals from the per-segment spectra (block averaging).

A property is evaluated on each segment's spectrum, rescaled to integrate to the
same dof as the spectrum (:func:`normalised_segments`: the normalisation to the
dof is itself a fluctuating ratio), and its standard error is
s / sqrt(K_eff), s the sample standard deviation over the K segments.
Overlapping tapered segments are correlated; K_eff is Welch's [1]_ effective
number of independent segments, K / [1 + 2 sum_j (1 - j/K) rho_j^2], with
rho_j the overlap correlation of the taper at a shift of j hops
(:func:`effective_segment_count`).  This is exact for Gaussian data and
spectral averages; for correlated segments s^2 is also slightly biased low,
which the formula does not correct.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. 15, 70 (1967). doi:10.1109/TAU.1967.1161901
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]


def effective_segment_count(
    n_segments: int, segment_frames: int, overlap: float, taper: str
) -> float:
    """Welch's effective number of independent segments for overlapping tapered segments.

    Parameters
    ----------
    n_segments : int
        Number of segments K averaged.
    segment_frames : int
        Frames per segment L.
    overlap : float
        Fraction of a segment shared by consecutive segments, 0 <= overlap < 1.
    taper : str
        ``"hann"`` (periodic Hann window) or ``"none"`` (rectangular).

    Returns
    -------
    float
        K / [1 + 2 sum_{j=1}^{K-1} (1 - j/K) rho_j^2], with
        rho_j = sum_n w_n w_{n+jD} / sum_n w_n^2 and D = L - round(overlap L)
        (Welch 1967 [1]_, eq. for the variance of the averaged periodogram).
        Equals K for non-overlapping segments.
    """
    if n_segments < 1:
        return 0.0
    L = int(segment_frames)
    hop = max(1, L - round(float(overlap) * L))
    n = np.arange(L)
    w = 0.5 - 0.5 * np.cos(2.0 * np.pi * n / L) if taper == "hann" else np.ones(L)
    norm = float(np.sum(w * w))
    total = 1.0
    for j in range(1, n_segments):
        shift = j * hop
        if shift >= L:
            break
        rho = float(np.sum(w[: L - shift] * w[shift:])) / norm
        total += 2.0 * (1.0 - j / n_segments) * rho * rho
    return n_segments / total


def normalised_segments(wavenumber_cm: ArrayLike, segments: ArrayLike, target: float) -> FloatArray:
    """Rescale each segment's spectrum so that its trapezoid integral is *target* (the dof).

    A spectrum normalised to its degrees of freedom is a ratio (power / total
    power).  Evaluating a property on each segment rescaled this way makes the
    segment scatter include the fluctuation of the normalisation itself (the
    delta-method variance of a ratio estimator); with the file's common factor
    instead, that part would be missed.  Segments whose integral is not positive
    are left as they are.

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Wavenumber grid, cm^-1.
    segments : array_like, shape (K, n)
        Per-segment densities of states, cm.
    target : float
        Integral each segment should have (degrees of freedom).
    """
    segs = np.asarray(segments, dtype=float)
    integrals = np.trapezoid(segs, np.asarray(wavenumber_cm, dtype=float), axis=-1)
    scale = np.where(integrals > 0, target / np.where(integrals > 0, integrals, 1.0), 1.0)
    return segs * scale[..., None]


def segment_standard_error(per_segment: ArrayLike, effective_count: float) -> FloatArray:
    """Standard error s / sqrt(K_eff) over the segment axis (axis 0); NaN if K < 2."""
    values = np.asarray(per_segment, dtype=float)
    if values.shape[0] < 2 or effective_count <= 0:
        return np.full(values.shape[1:], np.nan)
    return np.std(values, axis=0, ddof=1) / math.sqrt(effective_count)


def segment_effective_count(ds: xr.Dataset) -> float:
    """:func:`effective_segment_count` from a spectrum file's estimator attributes."""
    n = int(ds.sizes.get("segment", 0))
    try:
        return effective_segment_count(
            n, int(ds.attrs["segment_frames"]), float(ds.attrs["segment_overlap"]), str(ds.attrs["taper"])
        )
    except (KeyError, TypeError, ValueError):
        return float(n)
