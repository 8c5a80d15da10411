"""Stored velocities against positions: a check of the time axis and the velocity units.

When a trajectory holds both positions and velocities, the displacement over two frame
intervals must equal the integral of the velocity over that time.  With Simpson's rule
(common practice) on the stored velocities v_k and the window's frame spacing Δt,

    D_k = x_{k+2} − x_k   (each one-frame step reduced to its minimum image),
    S_k = Δt/3 · (v_k + 4 v_{k+1} + v_{k+2}),

and the mass-weighted ratio R = Σ m D·S / Σ m S·S over the first :data:`CHECK_FRAMES`
frames of the window (centre-of-mass motion removed from both, as from the spectrum).

Expected value [D].  For a mode x = A sin(ωt), with y = ωΔt = 2πνΔt,
D = 2A sin(y) cos(ω(t+Δt)) and S = (AΔt ω/3)(4 + 2 cos y) cos(ω(t+Δt)), so the mode
contributes the ratio ``r(y) = 3 sin(y) / (y (2 + cos y))`` = 1 − y⁴/180 + …, weighted by
its share of Σ m S².  r ≥ 0.955 for every mode below half the Nyquist frequency
(y ≤ π/2), r(π/2) = 3/π; r falls to 0 at the Nyquist frequency, but a mode there carries
1/9 of the weight it would at low frequency, so R stays near 1 unless most of the motion
is near the Nyquist frequency (badly aliased sampling).  Stored leap-frog velocities lag
by half an MD step δt ≪ Δt; that multiplies a mode's term by cos(πνδt) ≈ 1.

A frame spacing wrong by a factor k (a DCD header left at a writer's default, a LAMMPS
dump's ``dt`` given as the dump interval instead of the MD step, a reader ``dt`` laid
over correct stamps) or velocities in a unit k times too large scale R by 1/k.  The
accepted range :data:`RATIO_LIMITS` = [1/√2, √2] is the geometric midpoint between
correct data (R within a few per cent of 1) and an error of a factor 2: every error of a
factor 2 or more is refused; the statistical scatter of R over hundreds of atom
components and several frames is far smaller.

All-zero stored velocities and velocities that do not change from frame to frame are
refused when the spectrum is to be made from them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qcorr.errors import TrajectoryError
from qcorr.reading.stream import minimum_image

__all__ = ["CHECK_FRAMES", "RATIO_LIMITS", "VelocityCheck", "check_velocities_against_positions",
           "simpson_ratio"]

#: frames read at the start of the window (gives CHECK_FRAMES − 2 Simpson pairs)
CHECK_FRAMES = 9
#: accepted range of the displacement-to-velocity-integral ratio R (see the module docstring)
RATIO_LIMITS = (2.0**-0.5, 2.0**0.5)


@dataclass(frozen=True)
class VelocityCheck:
    """Result of :func:`check_velocities_against_positions`.

    Attributes
    ----------
    ratio : float
        R (NaN when not made: no stored velocities, or fewer than three frames).
    frames : int
        Frames compared.
    note : str
        One line for the spectrum file (what was compared, or why not).
    """

    ratio: float
    frames: int
    note: str


def simpson_ratio(y):
    """The ratio r(y) = 3 sin y / (y (2 + cos y)) of one mode at y = 2πνΔt (1 at y → 0)."""
    y = np.asarray(y, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = 3.0 * np.sin(y) / (y * (2.0 + np.cos(y)))
    return np.where(y == 0.0, 1.0, r)


def _frames(opened, channels, window, n: int):
    """(positions, velocities or None, box) of the first *n* window frames, float64, Å and Å/ps."""
    idx = channels.indices
    out = []
    for ts in opened.read_frames(window.start, window.start + n * window.step, window.step):
        v = (np.array(ts.velocities[idx], dtype=np.float64) * opened.lammps_velocity_factor
             if ts.has_velocities else None)
        box = None if ts.dimensions is None else np.array(ts.dimensions)
        out.append((np.array(ts.positions[idx], dtype=np.float64), v, box))
    return out


def check_velocities_against_positions(opened, channels, window, *, velocities_used: bool) -> VelocityCheck:
    """Compare stored velocities with the positions' displacements (see the module docstring).

    Parameters
    ----------
    opened : qcorr.reading.universe.OpenedTrajectory
    channels : qcorr.reading.masses.MassCheck
        Atoms (indices) and masses (u).
    window : qcorr.reading.time_axis.FrameWindow
    velocities_used : bool
        The spectrum is made from the stored velocities: all-zero or unchanging
        velocities are then an error; otherwise they only skip the comparison.

    Returns
    -------
    VelocityCheck

    Raises
    ------
    TrajectoryError
        R outside :data:`RATIO_LIMITS` (names the file, the ratio, the spacing and the
        likely causes); with *velocities_used*, all-zero or unchanging velocities.
    """
    n = min(CHECK_FRAMES, window.n_frames)
    if n < 3:
        return VelocityCheck(math.nan, 0, "not compared: fewer than three frames")
    frames = _frames(opened, channels, window, n)
    if any(v is None for _, v, _ in frames):
        return VelocityCheck(math.nan, 0, "not compared: the trajectory stores no velocities")
    where = f"frames {window.frame(0)}..{window.frame(n - 1)} of {opened.label}"
    velocities = [v for _, v, _ in frames]
    problem = ""
    if not any(np.any(v) for v in velocities):
        problem = "are all zero"
    elif all(np.array_equal(a, b) for a, b in zip(velocities, velocities[1:])):
        problem = "do not change from frame to frame"
    if problem:
        if velocities_used:
            raise TrajectoryError(
                f"the stored velocities in {where} {problem}: the file's velocities are not the "
                "motion (not written, or a copy of one frame); use --velocities-from positions, or a "
                "trajectory with real velocities"
            )
        return VelocityCheck(math.nan, 0, f"not compared: the stored velocities {problem}")
    masses = channels.masses
    total = float(masses.sum())
    dt = window.timestep_ps
    steps = [minimum_image(frames[k + 1][0] - frames[k][0], frames[k + 1][2]) for k in range(n - 1)]
    numerator = denominator = 0.0
    for k in range(n - 2):
        d = steps[k] + steps[k + 1]
        s = dt / 3.0 * (velocities[k] + 4.0 * velocities[k + 1] + velocities[k + 2])
        d -= masses @ d / total
        s -= masses @ s / total
        numerator += float(np.sum(masses[:, None] * d * s))
        denominator += float(np.sum(masses[:, None] * s * s))
    if not denominator > 0:
        return VelocityCheck(math.nan, n, "not compared: the velocities are a uniform translation only")
    ratio = numerator / denominator
    low, high = RATIO_LIMITS
    note = (f"displacements over two frames / Simpson integral of the stored velocities = {ratio:.4f} "
            f"over {where} (accepted {low:.3f} to {high:.3f})")
    if not low <= ratio <= high:
        raise TrajectoryError(
            f"the stored velocities and the positions of {opened.label} disagree: over {where} the "
            f"atoms moved {ratio:.3g} times as far as their velocities say for the frame spacing "
            f"{window.timestep_ps:g} ps (from the {opened.time_axis_note}); expected about 1. The frame "
            f"spacing or the velocity unit is off by a factor of about {1.0 / ratio:.3g}: check "
            "--frame-spacing, a reader dt (for a LAMMPS dump the MD time step, not the dump "
            "interval), --lammps-units and --step, or whether the frames are too far apart for the motion"
        )
    return VelocityCheck(ratio, n, note)
