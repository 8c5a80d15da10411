"""Refuse a stated temperature that the trajectory's velocities contradict by a factor.

The spectrum is normalised to the degrees of freedom, so its shape does not depend on
the stated temperature; everything computed from it afterwards does (the weighting
functions take u = hν/kT).  The diagnostics (:mod:`qcorr.spectra.diagnostics`) warn when
the mean kinetic temperature Σm⟨v²⟩/(f k) of a group differs from the stated one by more
than its statistics allow; the set-up errors that warning is for change the ratio by at
most two thirds (a constraint count off per water molecule 6/7 to 9/8, all three water
constraints forgotten 6/9, deuterium's mass for hydrogen 5/3).  A ratio beyond a factor of
2 for all analysed atoms comes from none of them, nor from a thermostat: it is a wrong
``--temperature`` (degrees Celsius given for kelvin, a typing error) or velocities in the
wrong unit, and every property computed at the stated temperature would be wrong.  Such
runs are refused.

A run is refused only when the ratio is also more than five standard errors from 1, the
standard error of the mean over segments from their scatter (a run of one segment: the
canonical scatter of one instantaneous kinetic temperature, √(2/f) for f degrees of
freedom, whose kinetic energy is χ²-distributed with relative variance 2/f in the
canonical ensemble), so that a tiny system's statistics are never taken for a mistake.
"""

from __future__ import annotations

import math

import numpy as np

from qcorr.errors import PhysicsError

__all__ = ["FACTOR", "check_stated_temperature"]

#: largest ratio between kinetic and stated temperature (either way) that is not refused
FACTOR = 2.0
#: standard errors of the mean kinetic temperature a refused ratio must also be away from 1
SPREAD = 5.0


def check_stated_temperature(raw_segments: np.ndarray, wavenumber: np.ndarray, degrees_of_freedom: float,
                             temperature_K: float, factor_check: bool = True) -> None:
    """Refuse when the kinetic temperature of all analysed atoms contradicts the stated one.

    Parameters
    ----------
    raw_segments : ndarray, shape (n_segments, n_wavenumber)
        Raw per-segment spectra of the group ``total`` (cm; their trapezoid integral over
        wavenumber is Σm⟨v²⟩/kT of the segment, with T the stated temperature).
    wavenumber : ndarray, cm⁻¹
    degrees_of_freedom : float
        f of the group.
    temperature_K : float
        The stated temperature.
    factor_check : bool
        Also refuse a ratio beyond :data:`FACTOR`; ``False`` checks only that 2/kT is
        representable (the spectrum pass refuses the ratio per group, with an override:
        :func:`qcorr.spectra.input_checks.refuse_temperature_mismatch`).

    Raises
    ------
    PhysicsError
        Naming ``--temperature``, both temperatures and what to check.
    """
    if not degrees_of_freedom > 0:
        return
    segments = np.trapezoid(np.asarray(raw_segments, float), wavenumber, axis=-1) / degrees_of_freedom
    ratio = float(segments.mean())
    if math.isnan(ratio):  # NaN velocities: refused, naming the frame, by the other checks
        return
    if math.isinf(ratio):
        raise PhysicsError(
            f"--temperature {temperature_K:g}: the spectrum's factor 2/kT is not representable in double "
            "precision at this temperature; give the simulation's temperature in K"
        )
    if not factor_check:
        return
    if segments.size >= 2:
        standard_error = float(segments.std(ddof=1)) / math.sqrt(segments.size)
    else:
        standard_error = math.sqrt(2.0 / degrees_of_freedom)
    within_factor = 1.0 / FACTOR <= ratio <= FACTOR
    if within_factor or abs(ratio - 1.0) <= SPREAD * standard_error:
        return
    kinetic = ratio * temperature_K
    raise PhysicsError(
        f"--temperature {temperature_K:g}: the velocities give a kinetic temperature of {kinetic:.4g} K for "
        f"the analysed atoms ({degrees_of_freedom:g} degrees of freedom), not within a factor {FACTOR:g} of "
        "the stated temperature; check --temperature (in K), the velocity units (--lammps-units) and the "
        "frame spacing"
    )
