"""The microcanonical heat capacity from the trajectory's own kinetic energy (spectrum pass).

``qcorr spectrum`` keeps, for every frame it reads, the kinetic energy of the whole system
K = Σ ½ m v² after the centre-of-mass velocity is removed (the motion the spectrum's degrees of
freedom describe) and the total momentum P = Σ m v before the removal, as the spectrum-file
variables ``kinetic_energy`` and ``total_momentum`` along the dimension ``frame``
(coordinate ``frame_time``, ps; layout in :mod:`qcorr.spectra.kinetic_series`).  Frame
blocks concatenate along it, so ``qcorr combine`` gives the single job's series.  From them, for a run declared NVE:

* C_V by the Lebowitz–Percus–Verlet formula (:func:`qcorr.baselines.fluctuations.microcanonical_heat_capacity`)
  with f = the degrees of freedom of the group ``total``;
* the checks that back the declaration up: the total momentum must not change (Newtonian
  dynamics conserves it; Langevin- and Andersen-type thermostats do not): Σ_α var(P_α) below
  :data:`MOMENTUM_CHANGE_LIMIT` × 3 M k T, the spread of a thermalised centre of mass of mass
  M; the kinetic temperature must not drift between the two halves of the run (4 standard
  errors); and the kinetic-energy variance must lie clearly below the canonical (f/2)(kT)²,
  which the formula itself checks.

For a run declared NVT or NPT the same series gives the canonical check x = 1 as a diagnostic
only (:func:`trajectory_diagnostics`).
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from qcorr.baselines.classical import Baseline, BaselineSet, check_ensemble
from qcorr.baselines.fluctuations import DRIFT_STANDARD_ERRORS, microcanonical_heat_capacity
from qcorr.errors import PhysicsError
from qcorr.spectra.kinetic_series import (
    KINETIC_ENERGY,
    TOTAL_MOMENTUM,
    momentum_change_ratio,  # noqa: F401  (part of this module's interface)
    series_diagnostics,
)

#: Σ var(P_α) above this fraction of 3 M k T contradicts momentum conservation (our choice: a
#: thermostat that acts on single atoms thermalises the centre of mass, ratio ~1; an NVE run keeps
#: it constant to rounding, ratio < 1e-6 in the runs we checked)
MOMENTUM_CHANGE_LIMIT = 0.01


def _series(ds: xr.Dataset):
    if KINETIC_ENERGY not in ds or TOTAL_MOMENTUM not in ds:
        return None
    total = "total" if "total" in [str(g) for g in ds["group"].values] else str(ds["group"].values[0])
    return (np.asarray(ds[KINETIC_ENERGY].values, dtype=float), np.asarray(ds[TOTAL_MOMENTUM].values, dtype=float),
            float(ds["degrees_of_freedom"].sel(group=total).item()), float(ds["group_mass"].sel(group=total).item()))


def trajectory_diagnostics(ds: xr.Dataset) -> dict[str, object]:
    """The per-frame series' checks (:func:`qcorr.spectra.kinetic_series.series_diagnostics`)."""
    return series_diagnostics(ds)


def trajectory_baselines(ds: xr.Dataset, *, ensemble: str, temperature_K: float, molecule_count: float,
                         source: str = "<in memory>") -> BaselineSet:
    """The microcanonical C_V of an NVE run from the spectrum file's kinetic energy (module docstring).

    Returns an empty set for other ensembles or a file without the series (a caution says so for
    NVE).  Raises :class:`PhysicsError` naming the file when the data contradict NVE.
    """
    ensemble = check_ensemble(ensemble)
    out = BaselineSet(diagnostics={"trajectory": trajectory_diagnostics(ds)})
    found = _series(ds)
    where = f"spectrum file '{source}'"
    if found is None:
        if ensemble == "nve":
            out.cautions.append(f"{where} holds no per-frame kinetic energy (made by an older qcorr): no "
                                "microcanonical heat capacity from the trajectory; remake it with 'qcorr spectrum'")
        return out
    if ensemble != "nve":
        return out
    if ds.attrs.get("velocity_source") == "finite_difference":
        raise PhysicsError(
            f"{where}: its velocities are finite differences of positions, which average the motion over "
            "a frame interval and carry the coordinates' rounding: their kinetic-energy fluctuations do not "
            "give the heat capacity; use a trajectory with stored velocities, or an energy file")
    kinetic, momentum, dof, mass = found
    ratio = out.diagnostics["trajectory"]["momentum_change_ratio"]
    if ratio > MOMENTUM_CHANGE_LIMIT:
        raise PhysicsError(
            f"{where}: the total momentum changes during the run (variance {ratio:.3g} x 3MkT, NVE keeps it "
            f"constant: below {MOMENTUM_CHANGE_LIMIT:g}); a local thermostat (Langevin, Andersen) acted: "
            "declare --ensemble nvt")
    apart = out.diagnostics["trajectory"]["kinetic_energy_halves_standard_errors_apart"]
    if apart > DRIFT_STANDARD_ERRORS:
        halves = out.diagnostics["trajectory"]["kinetic_energy_halves_kJ_per_mol"]
        raise PhysicsError(
            f"{where}: the kinetic energy drifts from {halves[0]:.6g} to {halves[1]:.6g} kJ/mol between the "
            f"halves of the run ({apart:.1f} standard errors apart): energy is not conserved or the run is "
            "not at equilibrium; use a shorter time step or drop the start (--start)")
    cv = microcanonical_heat_capacity(kinetic, dof, where=where)
    value, se = cv.value / molecule_count, cv.standard_error / molecule_count
    note = (f"C_V from the trajectory's kinetic-energy fluctuations (Lebowitz-Percus-Verlet), f = {dof:g}, "
            f"{kinetic.size} frames, kinetic temperature {cv.temperature_K:.4g} K")
    out.baselines["heat_capacity"] = Baseline("heat_capacity", value, se, "kinetic_fluctuation", note)
    if not cv.converged:
        out.cautions.append(f"{where}: the block standard error of the kinetic-energy variance reached no "
                            "plateau: the run is short against its correlation time; the error is underestimated")
    if not math.isclose(cv.temperature_K, temperature_K, rel_tol=0.02):
        out.cautions.append(f"{where}: the run's kinetic temperature {cv.temperature_K:.4g} K differs from the "
                            f"stated {temperature_K:g} K by more than 2 %; the heat capacity is at the former, the "
                            "correction at the latter")
    return out
