"""Self-diffusion from the velocity autocorrelation function, free of the spectrum's taper.

The zero-frequency value S(0) of a Welch spectrum is the true spectrum convolved with the
taper's window, so where S(ν) rises steeply from ν = 0 (every liquid) it is biased high
(``methods.md`` §8.3; on LJ argon at its triple point D from S(0) is 12 % above the
long-lag value with 5 ps Hann segments, 2 % with 20 ps).  The Green–Kubo running integral
of the (unbiased, untapered) VACF,

    D(τ) = (1/3) ∫_0^τ ⟨v(0)·v(t)⟩ dt,

has no taper (Green–Kubo; e.g. Hansen & McDonald, Theory of Simple Liquids, 4th ed. (2013),
§7.2).  :func:`green_kubo_diffusion` takes it to the longest lag of the segment (one
segment) and, per segment, gives its scatter.  Long lags: the VACF of a fluid ends in the
hydrodynamic tail A t^{−3/2} (Alder, Wainwright, Phys. Rev. A 1, 18 (1970)), whose
integral beyond τ is 2Aτ^{−1/2}.  A is fitted (least squares) to the last half of the
lags and the tail's integral is *reported*, not added: in a dense liquid the VACF is
still in its negative (caging) region at a few ps, where the fit is meaningless (argon at
86.5 K: −5 % with a 5 ps window, +3 % with 20 ps; ``docs/liquids.md``).  Its size tells
whether the window reaches the plateau.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from qcorr import constants as C
from qcorr.errors import PhysicsError
from qcorr.thermo.segment_statistics import segment_standard_error

__all__ = ["GreenKuboDiffusion", "green_kubo_diffusion"]

#: Å²/ps → m²/s
_A2_PER_PS = C.angstrom_m**2 / C.picosecond_s


@dataclass(frozen=True)
class GreenKuboDiffusion:
    """Green–Kubo self-diffusion coefficient of one group (all in m²/s).

    Attributes
    ----------
    value : float
        (1/3) ∫_0^τ ⟨v(0)·v(t)⟩ dt to the last lag τ of the segment-averaged VACF.
    standard_error : float
        From the scatter of the per-segment integrals (Welch's effective count); NaN with
        fewer than two segments.
    tail_estimate : float
        Alder–Wainwright tail 2Aτ^{−1/2}/3 fitted to the last half of the lags (reported,
        not added).
    window_ps : float
        τ, ps.
    per_segment : tuple of float
        The integral of each segment's VACF (m²/s).
    """

    value: float
    standard_error: float
    tail_estimate: float
    window_ps: float
    per_segment: tuple[float, ...] = ()


def green_kubo_diffusion(lag_ps: ArrayLike, vacf_segments_A2_per_ps2: ArrayLike,
                         effective_segments: float) -> GreenKuboDiffusion:
    """Self-diffusion coefficient from per-segment velocity autocorrelation functions.

    Parameters
    ----------
    lag_ps : array (n,)
        Lags from 0, evenly spaced, ps.
    vacf_segments_A2_per_ps2 : array (segments, n)
        ⟨v(0)·v(t)⟩ per molecule for each segment, Å²/ps² (mass-weighted sums divided by
        the group's mass, for one-atom molecules).
    effective_segments : float
        Welch's effective number of independent segments (for the standard error).

    Returns
    -------
    GreenKuboDiffusion

    Raises
    ------
    PhysicsError
        Fewer than 8 lags, lags not starting at 0, or values that are not finite.
    """
    lag = np.asarray(lag_ps, dtype=float)
    segs = np.atleast_2d(np.asarray(vacf_segments_A2_per_ps2, dtype=float))
    if lag.ndim != 1 or lag.size < 8 or lag[0] != 0.0 or segs.shape[-1] != lag.size:
        raise PhysicsError("Green-Kubo diffusion needs >= 8 lags starting at 0 matching the VACF")
    if not np.all(np.isfinite(segs)):
        raise PhysicsError("Green-Kubo diffusion: the VACF holds values that are not finite")
    per_segment = np.trapezoid(segs, lag, axis=-1) / 3.0 * _A2_PER_PS
    mean = segs.mean(axis=0)
    value = float(np.trapezoid(mean, lag)) / 3.0 * _A2_PER_PS
    se = (float(segment_standard_error(per_segment[:, None], effective_segments)[0])
          if per_segment.size >= 2 else float("nan"))
    half = lag >= 0.5 * lag[-1]
    t = lag[half]
    amplitude = float(np.sum(mean[half] * t**-1.5) / np.sum(t**-3.0))  # least squares, C = A t^-3/2
    tail = 2.0 * amplitude / np.sqrt(lag[-1]) / 3.0 * _A2_PER_PS
    return GreenKuboDiffusion(value=value, standard_error=se, tail_estimate=tail, window_ps=float(lag[-1]),
                              per_segment=tuple(float(v) for v in per_segment))
