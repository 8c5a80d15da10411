"""Checks on how the input was read: time axis, rounding noise, gross kinetic-temperature mismatch.

Two diagnostics join those of :mod:`qcorr.spectra.diagnostics` (they read only the
spectrum file, so ``qcorr combine`` repeats them):

* ``time_axis``: where the frame spacing came from and the comparison of stored
  velocities with the positions (:mod:`qcorr.reading.velocity_check`); always ``ok``
  (a failed comparison was refused before the spectrum was made).
* ``position_noise`` (spectra from differences of positions): the share of each group's
  kinetic energy that was rounding noise and was subtracted
  (:mod:`qcorr.spectra.position_noise`), the model's error bound, and the *remaining
  noise*: the corrected spectrum's mean over the top :data:`NYQUIST_BAND` of the band
  below the Nyquist frequency, as a fraction of the noise subtracted there, with its
  standard error from the segments, and the relative standard error of the spectrum's
  first moment (the zero-point-energy weight, most exposed to noise at high frequency).
  Where the motion lies well below the Nyquist frequency the first must vanish within
  its error; a warning beyond :data:`REMAINING_NOISE_LIMIT` + the statistical allowance
  points at a wrong rounding step or at motion (aliased power) near the Nyquist
  frequency, a warning beyond :data:`MOMENT_NOISE_LIMIT` at results limited by noise.

Refusals (errors, no file written), on the finished spectrum:

* :func:`refuse_motionless`: a group without kinetic energy (all velocities zero, or
  positions that never change) would give an undefined spectrum.
* :func:`refuse_temperature_mismatch`: a group's kinetic temperature differs from the
  stated temperature by more than a factor :data:`KINETIC_TEMPERATURE_FACTOR` and by
  more than its statistical warning limit (:mod:`qcorr.spectra.diagnostics`).  The factor
  2 is our choice: it lies above every deviation a correct set-up shows or a common
  slip in bookkeeping causes, which the warning reports instead (statistical scatter;
  a constraint count off by one per water molecule, 12–20 %; forgetting all three,
  a factor 1.5; hydrogen given deuterium's mass, 1.67), and below the errors that make
  the spectrum itself wrong: a frame spacing off by k changes a spectrum from positions
  by k² in temperature (a DCD header's default 1 ps for 4 fs frames: 62 500), velocities
  in nm/ps read as Å/ps by 100.  ``allow_temperature_mismatch`` lets a user proceed
  (e.g. part of the system held fixed); the temperature diagnostic still warns.
"""

from __future__ import annotations

import json
import math

import numpy as np

from qcorr.errors import TrajectoryError
from qcorr.lazy_modules import lazy
from qcorr.spectra.diagnostics import (
    FALSE_WARNING_PROBABILITY,
    Diagnostic,
    frame_weights,
    kinetic_temperature_statistics,
    student_t_quantile,
)

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

__all__ = [
    "KINETIC_TEMPERATURE_FACTOR",
    "MOMENT_NOISE_LIMIT",
    "NYQUIST_BAND",
    "REMAINING_NOISE_LIMIT",
    "check_position_noise",
    "check_time_axis",
    "dropped_frames_note",
    "refuse_motionless",
    "refuse_temperature_mismatch",
]

#: refused beyond: T_kin/T above this factor or below its inverse (see the module docstring)
KINETIC_TEMPERATURE_FACTOR = 2.0
#: top fraction of the band below Nyquist where the remaining noise is measured
NYQUIST_BAND = 0.05
#: remaining noise near Nyquist tolerated, as a fraction of the noise subtracted there
#: (our choice: 20 times the largest model error accepted, far below a wrong step's 99 %)
REMAINING_NOISE_LIMIT = 0.1
#: relative standard error of the spectrum's first moment (zero-point-energy weight) above
#: which the position_noise diagnostic warns (our choice: the 5 % the issue asks of the ZPE)
MOMENT_NOISE_LIMIT = 0.05


def check_time_axis(ds: xr.Dataset) -> Diagnostic:
    """Where the time axis came from and how stored velocities compared with positions."""
    axis = str(ds.attrs.get("time_axis", "time stamps of the trajectory file(s)"))
    check = str(ds.attrs.get("velocity_check", "not recorded"))
    message = (f"frame spacing {float(ds.attrs['timestep_ps']):g} ps from the {axis}; stored velocities "
               f"against positions: {check}")
    dropped = dropped_frames_note(ds)
    if dropped:
        message += f"; repeated restart frames left out: {dropped}"
    return Diagnostic("time_axis", "ok", message)


def _segment_mean(values: np.ndarray, ds: xr.Dataset) -> tuple[float, float, float]:
    """(mean, standard error, Student-t quantile) of per-segment *values* (diagnostics' K_eff rule)."""
    k = values.size
    mean = float(values.mean())
    if k < 2:
        return mean, math.nan, math.nan
    a, b = frame_weights(ds)
    k_eff = float(np.sum(b * b)) / float(np.sum(a * a))
    if not k_eff > 1:
        return mean, math.nan, math.nan
    se = float(np.std(values, ddof=1)) * math.sqrt((k - 1) / (k * (k_eff - 1.0)))
    return mean, se, student_t_quantile(FALSE_WARNING_PROBABILITY / 2.0, k_eff - 1.0)


def _group_noise(ds: xr.Dataset, g: int, band: np.ndarray) -> dict[str, float] | None:
    """Remaining-noise figures of group *g* (see :func:`check_position_noise`); None without noise."""
    wn = ds["wavenumber"].values
    floor_g = ds["vdos_position_noise"].values[g]
    floor = float(floor_g[band].mean())
    if not floor > 0:
        return None
    segments = ds["vdos_segments"].values[g]
    residual, residual_se, t_q = _segment_mean(segments[:, band].mean(axis=1) / floor, ds)
    moments = np.trapezoid(segments * wn, wn, axis=-1)
    moment, moment_se, _ = _segment_mean(moments, ds)
    noise_moment = float(np.trapezoid(floor_g * wn, wn))
    return {
        "residual": residual, "residual_se": residual_se,
        "allowance": t_q * residual_se if math.isfinite(residual_se) else 0.0,
        "moment_share": noise_moment / (noise_moment + moment) if noise_moment + moment > 0 else math.nan,
        "moment_se": moment_se / moment if moment > 0 else math.nan,
    }


def check_position_noise(ds: xr.Dataset) -> Diagnostic:
    """Noise share, model error and remaining noise of the worst group (module docstring).

    Remaining noise is reported twice: near the Nyquist frequency (:data:`NYQUIST_BAND`;
    should vanish within its error), and as the relative standard error, from the
    segments, of the spectrum's first moment ∫ν̃ S dν̃ (the weight of the zero-point
    energy, and of the energy and free energy at high frequency), with the share of that
    weight that was noise.  A warning when the first exceeds its limit, or when the
    first moment is uncertain by more than :data:`MOMENT_NOISE_LIMIT`.
    """
    if "vdos_position_noise" not in ds.variables:
        return Diagnostic("position_noise", "ok", "velocities were stored: no rounding noise of positions")
    step = float(ds.attrs.get("position_precision_A", 0.0))
    source = str(ds.attrs.get("position_precision_source", ""))
    if step == 0:
        return Diagnostic("position_noise", "ok", f"positions taken as unrounded ({source}): nothing subtracted")
    band = ds["wavenumber"].values >= (1.0 - NYQUIST_BAND) * float(ds.attrs["nyquist_wavenumber"])
    worst = None
    for g, name in enumerate(str(x) for x in ds["group"].values):
        if not float(ds["degrees_of_freedom"].values[g]) > 0:
            continue
        figures = _group_noise(ds, g, band)
        if figures is None:
            continue
        score = max(abs(figures["residual"]) / (REMAINING_NOISE_LIMIT + figures["allowance"]),
                    (figures["moment_se"] / MOMENT_NOISE_LIMIT) if math.isfinite(figures["moment_se"]) else 0.0)
        if worst is None or score > worst[0]:
            worst = (score, name, g, figures)
    if worst is None:
        return Diagnostic("position_noise", "ok", "no group with noise to report")
    _, name, g, f = worst
    share = float(ds["position_noise_share"].values[g])
    error = float(ds["position_noise_model_error"].values[g])
    message = (
        f"positions rounded to {step:g} Å ({source}): rounding noise was {share:.1%} of group {name!r}'s "
        f"kinetic energy and {f['moment_share']:.1%} of its zero-point-energy weight (first moment), "
        f"subtracted in expectation (model error below {error:.2%} of the kinetic energy); remaining noise "
        f"within {NYQUIST_BAND:.0%} of Nyquist {f['residual']:+.1%} of the noise subtracted there"
        + (f" (standard error {f['residual_se']:.1%})" if math.isfinite(f["residual_se"]) else "")
        + (f", first moment uncertain by {f['moment_se']:.1%}" if math.isfinite(f["moment_se"]) else "")
    )
    bad_residual = abs(f["residual"]) > REMAINING_NOISE_LIMIT + f["allowance"]
    bad_moment = math.isfinite(f["moment_se"]) and f["moment_se"] > MOMENT_NOISE_LIMIT
    if bad_residual:
        message += (f"; near Nyquist beyond ±{REMAINING_NOISE_LIMIT + f['allowance']:.0%}: the rounding step "
                    "may be wrong (--position-precision) or motion near the Nyquist frequency is aliased")
    if bad_moment:
        message += (f"; beyond {MOMENT_NOISE_LIMIT:.0%}: zero-point energy, energy and free energy from this "
                    "spectrum are limited by the remaining noise (see their standard errors); save frames less "
                    "often, at a finer precision, or save velocities")
    return Diagnostic("position_noise", "warning" if bad_residual or bad_moment else "ok", message)


def refuse_motionless(raw_integrals: np.ndarray, names, where: str) -> None:
    """Refuse groups whose velocities carry no kinetic energy (raw integral before noise subtraction ≤ 0).

    Raises
    ------
    TrajectoryError
        Naming the group and the input.
    """
    for name, value in zip(names, np.asarray(raw_integrals, dtype=float)):
        if not (math.isfinite(value) and value > 0):
            raise TrajectoryError(
                f"group {name!r} of {where} has no kinetic energy (its velocities are zero, or its "
                "positions never change): its spectrum is undefined; leave its atoms out of the groups, "
                "or check the file's velocities (--velocities-from)"
            )


def refuse_temperature_mismatch(ds: xr.Dataset, where: str, allowed: bool = False) -> None:
    """Refuse a kinetic temperature off the stated one by more than :data:`KINETIC_TEMPERATURE_FACTOR`.

    Groups whose deviation also lies within their statistical warning limit are not
    refused (few degrees of freedom).  *allowed* (``--allow-temperature-mismatch``) skips
    the refusal.

    Raises
    ------
    TrajectoryError
        Naming the group, both temperatures, and the likely causes.
    """
    if allowed:
        return
    stated = float(ds.attrs["temperature_K"])
    factor = KINETIC_TEMPERATURE_FACTOR
    for s in kinetic_temperature_statistics(ds):
        gross = s.ratio > factor or s.ratio < 1.0 / factor
        if gross and s.exceeded:
            raise TrajectoryError(
                f"the kinetic temperature of group {s.group!r} of {where} is {s.ratio * stated:.4g} K, "
                f"{s.ratio:.3g} times the stated --temperature {stated:g} (in K; refused beyond a factor of "
                f"{factor:g}); "
                "likely causes: the frame spacing (--frame-spacing, a reader dt, --step), the velocity "
                "or length units (--lammps-units), the masses (--mass), the constraints "
                "(--constraints) or --temperature itself; if the difference is real (e.g. atoms held "
                "fixed), pass --allow-temperature-mismatch"
            )


def dropped_frames_note(ds: xr.Dataset) -> str:
    """'' or a short list of the repeated restart frames the file records as left out."""
    records = json.loads(ds.attrs.get("repeated_frames_dropped", "[]") or "[]")
    if not records:
        return ""
    return "; ".join(f"frame {r['frame_in_file']} of '{r['file']}'" for r in records[:5]) + (
        f" and {len(records) - 5} more" if len(records) > 5 else "")
