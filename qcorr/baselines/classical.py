"""The classical baselines of one simulated system, with their sources and the ensemble checks.

A baseline is a classical MD value per mole of molecules at the spectrum's temperature:
heat capacity C_V (``heat_capacity``), C_P (``isobaric_heat_capacity``), the mean total
energy ⟨E⟩ (``energy``), the mean enthalpy ⟨E + pV⟩ (``enthalpy``), or a free energy given
by the user.  Where it came from is its ``source`` (:data:`CLASSICAL_SOURCES`, the table's
``classical_source`` column):

``kinetic_fluctuation``
    the Lebowitz–Percus–Verlet C_V of an NVE run from the kinetic energy accumulated in the
    spectrum pass (:func:`trajectory_baselines`);
``energy_file``
    the engine's energy output (:func:`energy_file_baselines`): ⟨E⟩, ⟨H⟩, C_V from the
    total-energy fluctuations of an NVT run, C_P from the enthalpy fluctuations of an NPT run,
    C_V from the kinetic-energy fluctuations of an NVE run;
``temperature_series``
    C_P (or C_V) from the slope of H(T) (or E(T)) over several runs
    (:mod:`qcorr.baselines.temperature_series`);
``user_value``
    typed in by the user, with no standard error (:func:`user_baselines`).

The declared ensemble decides which formula applies; the data must not contradict it, else
the fluctuation value is refused with the reason (:func:`check_energy_file`): the engine's
mean temperature must match the declared one, the temperature (and for NPT the volume) must
not drift between the two halves of the run, and an NVE run's total energy must be
conserved (its variance below :data:`NVE_TOTAL_ENERGY_VARIANCE_LIMIT` of the kinetic
energy's; in a canonical run it is larger than the kinetic energy's, C_V/(f k/2) times).
An NVT or NPT run must have sampled canonical fluctuations: its kinetic energy's variance
ratio x = f⟨δK²⟩/(2⟨K⟩²) is 1 in any canonical ensemble (K of f quadratic degrees of freedom is
Gamma(f/2, kT) whatever the potential).  A run that misses it by more than
:data:`CANONICAL_KINETIC_TOLERANCE` + 3 standard errors (a weak thermostat over a few of its
periods, or a non-canonical one) gives no fluctuation heat capacity, and the standard error of
its mean energy is raised to kT·sqrt(f), the canonical spread of one sample for f harmonic
modes: its own scatter does not measure how far its mean is from the canonical one.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from qcorr import constants as C
from qcorr.baselines.energy_files import EnergySeries
from qcorr.baselines.fluctuations import (
    DRIFT_STANDARD_ERRORS,
    blocked_standard_error,
    canonical_heat_capacity,
    half_drift,
    kinetic_variance_ratio,
    microcanonical_heat_capacity,
)
from qcorr.errors import ConfigError, PhysicsError

#: ensembles a run can be declared to sample
ENSEMBLES = ("nve", "nvt", "npt")
#: where a classical baseline came from (values of the table's ``classical_source``)
CLASSICAL_SOURCES = ("kinetic_fluctuation", "energy_file", "temperature_series", "user_value")
#: properties a baseline can be given for, with their molar unit
BASELINE_PROPERTIES = {
    "heat_capacity": "J mol-1 K-1",
    "isobaric_heat_capacity": "J mol-1 K-1",
    "energy": "kJ mol-1",
    "enthalpy": "kJ mol-1",
    "helmholtz_free_energy": "kJ mol-1",
    "gibbs_free_energy": "kJ mol-1",
}
#: the engine's mean temperature may differ from the declared one by this fraction plus three
#: standard errors (our choice: degree-of-freedom conventions of engines differ by 3/(3N), under
#: 2 % for more than 50 atoms)
TEMPERATURE_TOLERANCE = 0.02
#: in an NVE run var(E_total) must stay below this fraction of var(K) (our choice; canonical runs
#: have var(E)/var(K) = C_V/(f k/2) >= 1, and integration noise in NVE is orders of magnitude less)
NVE_TOTAL_ENERGY_VARIANCE_LIMIT = 0.1
#: a canonical run's kinetic-variance ratio x may differ from 1 by this plus three standard errors
#: (our choice); beyond, the run did not sample canonical fluctuations (a thermostat too weak for
#: the run's length, or one that is not canonical, such as Berendsen's)
CANONICAL_KINETIC_TOLERANCE = 0.05


@dataclass(frozen=True)
class Baseline:
    """A classical value per mole of molecules (J/(mol K) or kJ/mol, see :data:`BASELINE_PROPERTIES`)."""

    property: str
    value: float
    standard_error: float
    source: str
    note: str = ""


@dataclass
class BaselineSet:
    """Baselines of one system by property, the cautions and the diagnostics (JSON-ready)."""

    baselines: dict[str, Baseline] = field(default_factory=dict)
    cautions: list[str] = field(default_factory=list)
    diagnostics: dict[str, object] = field(default_factory=dict)


def check_ensemble(ensemble: str) -> str:
    """The ensemble name, lower case; refuse anything but :data:`ENSEMBLES`."""
    name = str(ensemble).lower()
    if name not in ENSEMBLES:
        raise ConfigError(f"--ensemble {ensemble!r}: declare the ensemble the run sampled, one of "
                          f"{', '.join(ENSEMBLES)}")
    return name


def _finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def check_energy_file(series: EnergySeries, ensemble: str, temperature_K: float) -> dict[str, object]:
    """Refuse an energy file whose data contradict the declared ensemble or temperature.

    Returns the diagnostics (JSON-ready).  Raises :class:`PhysicsError` naming the file.
    """
    where = f"energy file '{series.path}'"
    info: dict[str, object] = {"samples": series.sample_count, "columns": series.columns}
    if series.temperature_K is not None:
        t = blocked_standard_error(series.temperature_K)
        info["mean_temperature_K"], info["mean_temperature_se_K"] = t.mean, _finite(t.standard_error)
        allowed = TEMPERATURE_TOLERANCE * temperature_K + 3.0 * t.standard_error
        if abs(t.mean - temperature_K) > allowed:
            raise PhysicsError(
                f"{where}: mean temperature {t.mean:.2f} ± {t.standard_error:.2f} K differs from the "
                f"declared {temperature_K:g} K by more than 2 % + 3 standard errors: it is not the run "
                "of this spectrum, or it includes equilibration (--energy-start)")
        drift = half_drift(series.temperature_K)
        info["temperature_halves_K"] = [drift.first_half, drift.second_half]
        if drift.standard_errors_apart > DRIFT_STANDARD_ERRORS:
            raise PhysicsError(
                f"{where}: the mean temperature drifts from {drift.first_half:.2f} K (first half) to "
                f"{drift.second_half:.2f} K (second half), {drift.standard_errors_apart:.1f} standard "
                "errors apart: the run is not at equilibrium; drop the start with --energy-start")
    if ensemble == "npt" and series.volume_nm3 is not None:
        drift = half_drift(series.volume_nm3)
        info["volume_halves_nm3"] = [drift.first_half, drift.second_half]
        if drift.standard_errors_apart > DRIFT_STANDARD_ERRORS:
            raise PhysicsError(
                f"{where}: the mean volume drifts from {drift.first_half:.4g} to {drift.second_half:.4g} "
                f"nm3 ({drift.standard_errors_apart:.1f} standard errors apart): the density is not "
                "equilibrated; drop the start with --energy-start")
    if ensemble == "nve" and series.kinetic_energy_kJ_per_mol is not None:
        ratio = float(np.var(series.total_energy_kJ_per_mol) / np.var(series.kinetic_energy_kJ_per_mol))
        info["total_to_kinetic_energy_variance"] = ratio
        if ratio > NVE_TOTAL_ENERGY_VARIANCE_LIMIT:
            raise PhysicsError(
                f"{where}: the total energy fluctuates with {ratio:.3g} times the kinetic energy's "
                f"variance (NVE conserves it: below {NVE_TOTAL_ENERGY_VARIANCE_LIMIT:g}); the run is "
                "thermostatted: declare --ensemble nvt")
    return info


def _per_molecule(value: float, se: float, molecule_count: float) -> tuple[float, float]:
    return value / molecule_count, se / molecule_count


def energy_file_baselines(
    series: EnergySeries,
    *,
    ensemble: str,
    temperature_K: float,
    molecule_count: float,
    degrees_of_freedom: float | None = None,
    pressure_bar: float | None = None,
) -> BaselineSet:
    """Classical baselines from an engine's energy output.

    Parameters
    ----------
    series : EnergySeries
        The whole system's energies (kJ per mole of systems).
    ensemble : {"nve", "nvt", "npt"}
        The ensemble the run sampled.
    temperature_K : float
        The declared (spectrum) temperature, K; the canonical formulas use it.
    molecule_count : float
        Molecules in the whole system (values are returned per mole of molecules).
    degrees_of_freedom : float, optional
        Kinetic degrees of freedom of the whole system (NVE heat capacity only).
    pressure_bar : float, optional
        The barostat's reference pressure in bar (NPT); default the file's own record
        (GROMACS ``pV``); a given value must agree with a recorded one.

    Returns
    -------
    BaselineSet
        ``energy`` always; ``heat_capacity`` (NVT: total-energy fluctuations; NVE:
        kinetic-energy fluctuations); NPT: ``enthalpy`` and ``isobaric_heat_capacity``.

    Raises
    ------
    ConfigError
        NPT without a pressure or a volume column; a pressure that contradicts the file's.
    PhysicsError
        Data that contradict the declared ensemble or temperature (:func:`check_energy_file`),
        or an ill-conditioned NVE formula.
    """
    ensemble = check_ensemble(ensemble)
    where = f"energy file '{series.path}'"
    if not molecule_count > 0:
        raise ConfigError(f"{where}: the molecule count {molecule_count} must be positive")
    out = BaselineSet(diagnostics=check_energy_file(series, ensemble, temperature_K))
    source = "energy_file"
    e = blocked_standard_error(series.total_energy_kJ_per_mol)
    value, se = _per_molecule(e.mean, e.standard_error, molecule_count)
    out.baselines["energy"] = Baseline("energy", value, se, source,
                                       "mean total (kinetic + potential) energy of the run")
    unconverged = [] if e.converged else ["energy"]
    canonical = True
    if ensemble in ("nvt", "npt"):
        canonical = _canonical_sampling(series, degrees_of_freedom, molecule_count, temperature_K, out)
        if not canonical:
            old = out.baselines["energy"]
            spread = _canonical_spread(degrees_of_freedom, temperature_K, molecule_count)
            out.baselines["energy"] = Baseline("energy", old.value, max(old.standard_error, spread), source,
                                               f"{old.note}; {_SPREAD_NOTE}")
    if ensemble == "nvt":
        if canonical:
            cv = canonical_heat_capacity(series.total_energy_kJ_per_mol, temperature_K)
            value, se = _per_molecule(cv.value, cv.standard_error, molecule_count)
            out.baselines["heat_capacity"] = Baseline(
                "heat_capacity", value, se, source, "C_V = <dE^2>/(k T^2), canonical total-energy fluctuations")
            unconverged += [] if cv.converged else ["heat_capacity"]
    elif ensemble == "nve":
        if series.kinetic_energy_kJ_per_mol is None or degrees_of_freedom is None:
            out.cautions.append(f"{where}: no kinetic-energy column or no degree-of-freedom count: "
                                "no microcanonical heat capacity from the energy file")
        else:
            cv = microcanonical_heat_capacity(series.kinetic_energy_kJ_per_mol, degrees_of_freedom,
                                              where=where)
            value, se = _per_molecule(cv.value, cv.standard_error, molecule_count)
            out.baselines["heat_capacity"] = Baseline(
                "heat_capacity", value, se, source,
                f"C_V from the kinetic-energy fluctuations (Lebowitz-Percus-Verlet), f = {degrees_of_freedom:g}")
            out.diagnostics["kinetic_variance_ratio"] = [cv.variance_ratio, cv.variance_ratio_se]
            unconverged += [] if cv.converged else ["heat_capacity"]
    else:
        if series.volume_nm3 is None:
            raise ConfigError(f"{where} has no volume column: the enthalpy of an NPT run needs it")
        pressure = _npt_pressure(series, pressure_bar, where)
        enthalpy = series.total_energy_kJ_per_mol + pressure * C.bar_nm3_kJ_per_mol * series.volume_nm3
        h = blocked_standard_error(enthalpy)
        value, se = _per_molecule(h.mean, h.standard_error, molecule_count)
        note = f"mean of E + p V with p = {pressure:g} bar (barostat reference)"
        if not canonical:
            se, note = max(se, _canonical_spread(degrees_of_freedom, temperature_K, molecule_count)), \
                f"{note}; {_SPREAD_NOTE}"
        out.baselines["enthalpy"] = Baseline("enthalpy", value, se, source, note)
        out.diagnostics["reference_pressure_bar"] = pressure
        if not canonical:
            return _with_unconverged(out, unconverged, where)
        cp = canonical_heat_capacity(enthalpy, temperature_K)
        value, se = _per_molecule(cp.value, cp.standard_error, molecule_count)
        out.baselines["isobaric_heat_capacity"] = Baseline(
            "isobaric_heat_capacity", value, se, source, "C_P = <dH^2>/(k T^2), isothermal-isobaric enthalpy fluctuations")
        unconverged += [p for p, ok in (("enthalpy", h.converged), ("isobaric_heat_capacity", cp.converged)) if not ok]
    return _with_unconverged(out, unconverged, where)


def _with_unconverged(out: BaselineSet, unconverged: list[str], where: str) -> BaselineSet:
    if unconverged:
        out.cautions.append(
            f"{where}: the block standard errors of {', '.join(unconverged)} reached no plateau "
            "(Flyvbjerg-Petersen): the run is short against its correlation time and the errors are "
            "underestimated")
    return out


_SPREAD_NOTE = ("standard error raised to the canonical spread kT sqrt(f) of one sample (the run did not "
                "sample canonical fluctuations; see the cautions)")


def _canonical_spread(dof: float | None, temperature_K: float, molecule_count: float) -> float:
    """kT·sqrt(f) per mole of molecules, kJ/mol: the canonical standard deviation of the energy
    of f harmonic modes (var E = k T² C_V with C_V = f k), the error of a one-sample mean."""
    f = float(dof) if dof else 0.0
    return C.gas_constant_J_per_mol_K * temperature_K / 1000.0 * math.sqrt(f) / molecule_count


def _canonical_sampling(series: EnergySeries, dof: float | None, molecule_count: float, temperature_K: float,
                        out: BaselineSet) -> bool:
    """Whether the kinetic energy fluctuates as in a canonical run (x = 1); cautions if not or unknown."""
    where = f"energy file '{series.path}'"
    if series.kinetic_energy_kJ_per_mol is None or not dof:
        out.cautions.append(f"{where}: no kinetic energy (or no degree-of-freedom count), so the canonical "
                            "sampling of the run cannot be checked; the fluctuation heat capacity assumes it")
        return True
    x, x_se = kinetic_variance_ratio(series.kinetic_energy_kJ_per_mol, dof)
    out.diagnostics["kinetic_variance_ratio"] = [x, x_se]
    if abs(x - 1.0) <= CANONICAL_KINETIC_TOLERANCE + 3.0 * x_se:
        return True
    spread = _canonical_spread(dof, temperature_K, molecule_count)
    out.cautions.append(
        f"{where}: the kinetic energy fluctuates {x:.3f} ± {x_se:.3f} times as much as in a canonical run "
        "(1 for any canonical run): the run did not sample canonical fluctuations (a thermostat too weak "
        "for its length, or not canonical); no fluctuation heat capacity from it, and the standard error of "
        f"its mean energy is raised to the canonical spread of one sample, {spread:.3g} kJ/mol; use a "
        "longer run or a stronger canonical thermostat")
    return False


def _npt_pressure(series: EnergySeries, pressure_bar: float | None, where: str) -> float:
    recorded = series.reference_pressure_bar
    if pressure_bar is None:
        if recorded is None:
            raise ConfigError(f"{where} records no reference pressure: give the barostat's with --pressure (bar)")
        return recorded
    if not (math.isfinite(pressure_bar) and pressure_bar >= 0):
        raise ConfigError(f"--pressure {pressure_bar}: give the barostat's reference pressure in bar (>= 0)")
    if recorded is not None and abs(recorded - pressure_bar) > 1e-3 * max(1.0, abs(pressure_bar)):
        raise ConfigError(f"--pressure {pressure_bar:g} bar contradicts the {recorded:.6g} bar recorded in {where} "
                          "(pV/Volume); give the barostat's reference pressure")
    return float(pressure_bar)


def user_baselines(values: Mapping[str, float]) -> BaselineSet:
    """Baselines typed in by the user (per mole of molecules, molar units; no standard error)."""
    out = BaselineSet()
    for name, value in values.items():
        if name not in BASELINE_PROPERTIES:
            raise ConfigError(f"--classical-value {name}: choose one of {', '.join(BASELINE_PROPERTIES)}")
        if not math.isfinite(float(value)):
            raise ConfigError(f"--classical-value {name}={value}: the value must be a finite number")
        out.baselines[name] = Baseline(name, float(value), math.nan, "user_value",
                                       "classical value given by the user; no standard error")
    return out
