"""The microcanonical heat capacity from the trajectory's own kinetic energy (spectrum pass).

``qcorr spectrum`` keeps, for every frame it reads, the kinetic energy of the whole system
K = Σ ½ m v² after the centre-of-mass velocity is removed (the motion the spectrum's degrees of
freedom describe) and the total momentum P = Σ m v before the removal, as the spectrum-file
variables :data:`KINETIC_ENERGY` and :data:`TOTAL_MOMENTUM` along the dimension ``frame``
(coordinate ``frame_time``, ps).  Frame blocks concatenate along it, so ``qcorr combine``
gives the single job's series.  From them, for a run declared NVE:

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

from qcorr import constants as C
from qcorr.baselines.classical import Baseline, BaselineSet, check_ensemble
from qcorr.baselines.fluctuations import (
    DRIFT_STANDARD_ERRORS,
    half_drift,
    kinetic_variance_ratio,
    microcanonical_heat_capacity,
)
from qcorr.errors import PhysicsError

#: spectrum-file variable: kinetic energy of the whole system per frame, kJ/mol (per mole of systems)
KINETIC_ENERGY = "kinetic_energy"
#: spectrum-file variable: total momentum per frame before the centre-of-mass removal, g/mol Å/ps
TOTAL_MOMENTUM = "total_momentum"
#: the frame dimension and its time coordinate (ps)
FRAME = "frame"
FRAME_TIME = "frame_time"
#: Σ var(P_α) above this fraction of 3 M k T contradicts momentum conservation (our choice: a
#: thermostat that acts on single atoms thermalises the centre of mass, ratio ~1; an NVE run keeps
#: it constant to rounding, ratio < 1e-6 in the runs we checked)
MOMENTUM_CHANGE_LIMIT = 0.01
#: 1 kJ/mol expressed in g/mol Å²/ps² (1e3 J / (1e-3 kg · 1e-20 m² / 1e-24 s²))
KJ_PER_MOL_IN_U_A2_PER_PS2 = 100.0


def kinetic_variables(time_ps, kinetic_u_A2_per_ps2, momentum_u_A_per_ps) -> dict[str, xr.DataArray]:
    """The spectrum-file variables of the per-frame kinetic energy and total momentum.

    Parameters
    ----------
    time_ps : array_like
        Frame times, ps.
    kinetic_u_A2_per_ps2 : array_like
        Σ ½ m v² per frame after the centre-of-mass removal, g/mol Å²/ps².
    momentum_u_A_per_ps : array_like
        Σ m v per frame before the removal, shape (frames, 3), g/mol Å/ps.
    """
    time = np.asarray(time_ps, dtype=float)
    coords = {FRAME_TIME: ((FRAME,), time, {"units": "ps", "long_name": "time of the frame"})}
    return {
        KINETIC_ENERGY: xr.DataArray(
            np.asarray(kinetic_u_A2_per_ps2, dtype=float) / KJ_PER_MOL_IN_U_A2_PER_PS2, dims=(FRAME,),
            coords=coords, attrs={"units": "kJ mol-1", "long_name": "kinetic energy of the whole system "
                                  "(centre-of-mass motion removed), per mole of systems"}),
        TOTAL_MOMENTUM: xr.DataArray(
            np.asarray(momentum_u_A_per_ps, dtype=float).reshape(-1, 3), dims=(FRAME, "spatial"),
            coords=coords, attrs={"units": "g mol-1 angstrom ps-1",
                                  "long_name": "total momentum before the centre-of-mass removal"}),
    }


def momentum_change_ratio(momentum_u_A_per_ps, total_mass_u: float, temperature_K: float) -> float:
    """Σ_α var(P_α) / (3 M k T): 0 for conserved momentum, about 1 for a thermalised centre of mass."""
    p = np.asarray(momentum_u_A_per_ps, dtype=float).reshape(-1, 3)
    rt = C.gas_constant_J_per_mol_K * temperature_K / 1000.0 * KJ_PER_MOL_IN_U_A2_PER_PS2
    return float(np.sum(np.var(p, axis=0)) / (3.0 * total_mass_u * rt))


def _series(ds: xr.Dataset):
    if KINETIC_ENERGY not in ds or TOTAL_MOMENTUM not in ds:
        return None
    total = "total" if "total" in [str(g) for g in ds["group"].values] else str(ds["group"].values[0])
    return (np.asarray(ds[KINETIC_ENERGY].values, dtype=float), np.asarray(ds[TOTAL_MOMENTUM].values, dtype=float),
            float(ds["degrees_of_freedom"].sel(group=total).item()), float(ds["group_mass"].sel(group=total).item()))


def trajectory_diagnostics(ds: xr.Dataset, temperature_K: float) -> dict[str, object]:
    """The per-frame series' checks (JSON-ready); empty when the file has no such series."""
    found = _series(ds)
    if found is None:
        return {}
    kinetic, momentum, dof, mass = found
    x, x_se = kinetic_variance_ratio(kinetic, dof)
    drift = half_drift(kinetic)
    return {"frames": int(kinetic.size), "kinetic_variance_ratio": [x, x_se],
            "momentum_change_ratio": momentum_change_ratio(momentum, mass, temperature_K),
            "kinetic_energy_halves_kJ_per_mol": [drift.first_half, drift.second_half],
            "kinetic_energy_halves_standard_errors_apart": drift.standard_errors_apart}


def trajectory_baselines(ds: xr.Dataset, *, ensemble: str, temperature_K: float, molecule_count: float,
                         source: str = "<in memory>") -> BaselineSet:
    """The microcanonical C_V of an NVE run from the spectrum file's kinetic energy (module docstring).

    Returns an empty set for other ensembles or a file without the series (a caution says so for
    NVE).  Raises :class:`PhysicsError` naming the file when the data contradict NVE.
    """
    ensemble = check_ensemble(ensemble)
    out = BaselineSet(diagnostics={"trajectory": trajectory_diagnostics(ds, temperature_K)})
    found = _series(ds)
    where = f"spectrum file '{source}'"
    if found is None:
        if ensemble == "nve":
            out.cautions.append(f"{where} holds no per-frame kinetic energy (made by an older qcorr): no "
                                "microcanonical heat capacity from the trajectory; remake it with 'qcorr spectrum'")
        return out
    if ensemble != "nve":
        return out
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
