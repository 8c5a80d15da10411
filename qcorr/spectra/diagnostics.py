"""Checks on a finished spectrum: aliasing, resolution, temperature, centre-of-mass drift, sum rule.

Each check returns a :class:`Diagnostic` (check name, ``"ok"`` or ``"warning"``,
one-line message).  :func:`run_diagnostics` runs all of them on a spectrum
dataset (:func:`diagnose` also records them in the dataset); :func:`announce` emits
the warnings as :class:`~qcorr.errors.QcorrWarning`.
The list is stored in the spectrum file as the JSON attribute ``diagnostics``.

Thresholds (module constants) are common practice, not published standards:

* aliasing: more than :data:`ALIASING_FRACTION` of a group's spectral weight
  lies in the top :data:`ALIASING_BAND` of the band below Nyquist.  Aliasing
  folds power above Nyquist back into the band without changing the sum rule,
  so only the *shape* near Nyquist can reveal it (methods notes §2.6; M. P.
  Allen, D. J. Tildesley, *Computer Simulation of Liquids*, 2nd ed., OUP 2017,
  §8.1 on sampling intervals).
* resolution: fewer than :data:`MIN_SEGMENTS` segments give no usable
  standard error; a resolution coarser than :data:`MAX_RESOLUTION_WAVENUMBER`
  blurs low-frequency bands.
* temperature: kinetic and stated temperature more than
  :data:`TEMPERATURE_TOLERANCE` apart (relative).
* centre-of-mass drift: the mean centre-of-mass kinetic energy before removal,
  M⟨V²⟩/2, exceeds :data:`COM_KINETIC_LIMIT` times its equipartition share 3kT/2
  ("flying ice cube", S. C. Harvey, R. K.-Z. Tan, T. E. Cheatham III, J. Comput.
  Chem. 19, 726 (1998), doi:10.1002/(SICI)1096-987X(199805)19:7<726::AID-JCC4>3.0.CO;2-S).
* sum rule: the raw integral ∫S dν = Σm⟨v²⟩/kT differs from the degrees of
  freedom by more than :data:`SUM_RULE_TOLERANCE` (relative).  This is the same
  ratio as the temperature check (raw/dof = T_kin/T) with a tighter bound; its
  message points at the degree-of-freedom count, masses and units instead.
"""

from __future__ import annotations

import json
import warnings
from dataclasses import asdict, dataclass

import numpy as np
import xarray as xr

from qcorr import constants
from qcorr.errors import QcorrWarning

ALIASING_BAND = 0.05
ALIASING_FRACTION = 1e-3
MIN_SEGMENTS = 4
MAX_RESOLUTION_WAVENUMBER = 20.0
TEMPERATURE_TOLERANCE = 0.03
COM_KINETIC_LIMIT = 10.0
SUM_RULE_TOLERANCE = 0.02

#: u Å² ps⁻² in J
_U_A2_PER_PS2_J = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2


@dataclass(frozen=True)
class Diagnostic:
    """One check: name, ``"ok"`` or ``"warning"``, and a one-line message."""

    check: str
    status: str
    message: str


def _status(bad: bool) -> str:
    return "warning" if bad else "ok"


def check_aliasing(ds: xr.Dataset) -> Diagnostic:
    """Fraction of each group's spectral weight within the top 5 % band below Nyquist."""
    wn = ds["wavenumber"].values
    nyquist = float(ds.attrs["nyquist_wavenumber"])
    band = wn >= (1.0 - ALIASING_BAND) * nyquist
    worst_name, worst = "", 0.0
    for name in ds["group"].values:
        s = ds["vdos"].sel(group=name).values
        total = np.trapezoid(s, wn)
        if band.sum() >= 2 and total > 0:
            frac = float(np.trapezoid(s[band], wn[band]) / total)
        else:
            frac = float(s[-1] * (wn[1] - wn[0]) / total) if total > 0 else 0.0
        if frac > worst:
            worst_name, worst = str(name), frac
    bad = worst > ALIASING_FRACTION
    msg = (
        f"{worst:.2%} of group {worst_name!r}'s spectral weight lies within {ALIASING_BAND:.0%} of "
        f"the Nyquist frequency ({nyquist:.0f} cm-1)"
    )
    if bad:
        msg += "; power above Nyquist may be folded back (aliased): save frames more often"
    elif not worst_name:
        msg = f"no spectral weight within {ALIASING_BAND:.0%} of the Nyquist frequency ({nyquist:.0f} cm-1)"
    return Diagnostic("aliasing", _status(bad), msg)


def check_resolution(ds: xr.Dataset) -> Diagnostic:
    """Resolution 1/(segment length) against the trajectory length (number of segments)."""
    n_seg = int(ds.sizes["segment"])
    res = float(ds.attrs["resolution_wavenumber"])
    seg_ps = float(ds.attrs["segment_length_ps"])
    used_ps = float(ds.attrs["frames_used"]) * float(ds.attrs["timestep_ps"])
    msg = (
        f"resolution {res:.3g} cm-1 from {seg_ps:g} ps segments; {n_seg} segments over "
        f"{used_ps:g} ps of trajectory"
    )
    bad = False
    if n_seg < MIN_SEGMENTS:
        bad = True
        msg += f"; fewer than {MIN_SEGMENTS} segments give no reliable standard error: use a longer trajectory or a shorter --segment-ps"
    if res > MAX_RESOLUTION_WAVENUMBER:
        bad = True
        msg += f"; coarser than {MAX_RESOLUTION_WAVENUMBER:g} cm-1 blurs low-frequency bands: use a longer --segment-ps"
    return Diagnostic("resolution", _status(bad), msg)


def check_temperature(ds: xr.Dataset) -> Diagnostic:
    """Kinetic temperature of each group against the stated temperature."""
    stated = float(ds.attrs["temperature_K"])
    kin = ds["kinetic_temperature"].values
    rel = np.abs(kin - stated) / stated
    i = int(np.argmax(rel))
    name = str(ds["group"].values[i])
    bad = bool(rel[i] > TEMPERATURE_TOLERANCE)
    msg = (
        f"kinetic temperature of group {name!r} is {kin[i]:.2f} K, stated {stated:g} K "
        f"({rel[i]:.1%} apart)"
    )
    if bad:
        msg += (
            f"; more than {TEMPERATURE_TOLERANCE:.0%}: check --temperature, equilibration and "
            "thermostat, or the degrees of freedom (--constraints)"
        )
    return Diagnostic("temperature", _status(bad), msg)


def check_centre_of_mass(ds: xr.Dataset) -> Diagnostic:
    """Centre-of-mass kinetic energy before removal against its equipartition share 3kT/2."""
    mv2 = float(ds.attrs["centre_of_mass_mv2_u_A2_per_ps2"])
    kT = constants.boltzmann_J_per_K * float(ds.attrs["temperature_K"])
    ratio = mv2 * _U_A2_PER_PS2_J / (3.0 * kT)
    total_mass = float(ds["group_mass"].sel(group="total"))
    speed = float(np.sqrt(mv2 / total_mass)) if total_mass > 0 else 0.0
    bad = ratio > COM_KINETIC_LIMIT
    msg = (
        f"centre-of-mass speed before removal {speed:.3g} A/ps; its kinetic energy is "
        f"{ratio:.3g} times the equipartition share 3kT/2"
    )
    if bad:
        msg += (
            f" (over {COM_KINETIC_LIMIT:g}): the system drifts; it was removed per frame, but check "
            "the simulation's centre-of-mass motion removal"
        )
    return Diagnostic("centre_of_mass_drift", _status(bad), msg)


def check_sum_rule(ds: xr.Dataset) -> Diagnostic:
    """Raw integral Σm⟨v²⟩/kT against the degrees of freedom of each group."""
    raw = ds["raw_integral"].values
    dof = ds["degrees_of_freedom"].values
    rel = np.abs(raw - dof) / dof
    i = int(np.argmax(rel))
    name = str(ds["group"].values[i])
    bad = bool(rel[i] > SUM_RULE_TOLERANCE)
    msg = (
        f"raw integral of group {name!r} is {raw[i]:.6g}, degrees of freedom {dof[i]:.6g} "
        f"({rel[i]:.2%} apart)"
    )
    if bad:
        msg += (
            f"; more than {SUM_RULE_TOLERANCE:.0%}: check constraints (--constraints), masses "
            "(--mass), velocity units (--lammps-units) and --temperature; the spectrum was "
            "normalised to the degrees of freedom anyway"
        )
    return Diagnostic("sum_rule", _status(bad), msg)


ALL_CHECKS = (check_aliasing, check_resolution, check_temperature, check_centre_of_mass, check_sum_rule)


def run_diagnostics(ds: xr.Dataset) -> list[Diagnostic]:
    """Run every check on a spectrum dataset (its ``diagnostics`` attribute is not needed)."""
    return [check(ds) for check in ALL_CHECKS]


def diagnose(ds: xr.Dataset) -> list[Diagnostic]:
    """Run every check and record the list in ``ds.attrs["diagnostics"]`` (JSON); return it.

    Warnings are not emitted here (see :func:`announce`).
    """
    checks = run_diagnostics(ds)
    ds.attrs["diagnostics"] = to_json(checks)
    return checks


def to_json(diagnostics: list[Diagnostic]) -> str:
    """JSON list of ``{"check","status","message"}`` for the ``diagnostics`` attribute."""
    return json.dumps([asdict(d) for d in diagnostics], sort_keys=True)


def announce(diagnostics: list[Diagnostic], stacklevel: int = 2) -> None:
    """Emit every warning as a :class:`~qcorr.errors.QcorrWarning`.

    *stacklevel* is passed to :func:`warnings.warn` (2: the caller of this function).
    """
    for d in diagnostics:
        if d.status != "ok":
            warnings.warn(f"{d.check}: {d.message}", QcorrWarning, stacklevel=stacklevel)
