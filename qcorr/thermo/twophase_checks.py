"""Checks of a two-phase (2PT) result that warn only when the model's limits matter.

* **Gas weight beyond the grid.**  The hard-sphere gas spectrum is a Lorentzian
  S_g(ν̃) = S̃(0)/[1 + (π S̃(0) ν̃/(2G))²] (Lin, Blanco, Goddard, J. Chem. Phys. 119, 11792
  (2003)); its share above the grid's top wavenumber ν̃_max (the Nyquist wavenumber) is
  ``1 − (2/π) arctan(π S̃(0) ν̃_max/(2G))`` (our integral).  That share is missing from the
  gas part on the grid, so the solid part (spectrum minus gas) holds it instead and the
  degrees of freedom are counted twice.  Warned above :data:`GAS_BEYOND_GRID_LIMIT`.
* **Zero-point energy and the grid's top.**  Far above its width the Lorentzian falls as
  4G²/(π² S̃(0) ν̃²), so subtracting it lowers the solid part's zero-point energy by
  ``2 h c G² / (π² S̃(0))`` per e-fold of ν̃_max, for ever (our integral of
  (hcν̃/2) S_g over ν̃ … e ν̃).  Reported per mole of molecules; warned when it exceeds
  :data:`ZPE_TAIL_STANDARD_ERRORS` standard errors of the zero-point energy, i.e. when the
  choice of the grid's top changes the result by more than its statistical uncertainty.
* **Kinetic-temperature balance.**  The spectra are normalised with the kinetic temperature
  of the whole group, so a component whose own kinetic temperature differs (poor
  equilibration between translation, rotation and vibration; Caro, Laurila, Lopez-Acevedo,
  J. Chem. Phys. 145, 244504 (2016), abstract) integrates to T_c/T × its degrees of
  freedom, and 2PT splits a wrong number of modes.  T_c is estimated from the integral of
  the component's spectrum (with segment standard errors); warned when it differs from the
  group's by more than :data:`TEMPERATURE_IMBALANCE_LIMIT` and by more than two standard
  errors (few segments make the standard error itself uncertain).  The limits are ours (common practice for such checks), not published.
"""

from __future__ import annotations

import math

import numpy as np

from qcorr import constants as C
from qcorr.thermo.segment_statistics import segment_standard_error
from qcorr.thermo.twophase import ComponentResult, GroupResult
from qcorr.thermo.twophase_inputs import GroupInput

#: warn when more than this share of a component's gas degrees of freedom lies above the grid
GAS_BEYOND_GRID_LIMIT = 0.01
#: warn when the zero-point energy moves by more than this many standard errors per e-fold
ZPE_TAIL_STANDARD_ERRORS = 2.0
#: warn when a component's kinetic temperature differs from the group's by more than this share
TEMPERATURE_IMBALANCE_LIMIT = 0.02

__all__ = [
    "GAS_BEYOND_GRID_LIMIT",
    "TEMPERATURE_IMBALANCE_LIMIT",
    "ZPE_TAIL_STANDARD_ERRORS",
    "component_temperatures",
    "gas_share_beyond",
    "result_checks",
    "zero_point_energy_drift_per_efold",
]


def gas_share_beyond(component: ComponentResult, top_wavenumber_cm: float) -> float:
    """Share (0…1) of the Lorentzian gas degrees of freedom above *top_wavenumber_cm* (cm⁻¹).

    ``1 − (2/π) arctan(π S̃(0) ν̃_max / (2G))``; 0 without a gas part.
    """
    s0 = float(component.gas_dos[0]) if component.gas_dos.size else 0.0
    if component.gas_dof <= 0 or s0 <= 0:
        return 0.0
    return 1.0 - 2.0 / math.pi * math.atan(math.pi * s0 * top_wavenumber_cm / (2.0 * component.gas_dof))


def zero_point_energy_drift_per_efold(result: GroupResult, molecule_count: float) -> float:
    """Change of the 2PT zero-point energy per e-fold of the grid's top wavenumber, kJ/mol of molecules.

    ``−Σ_components 2 h c G² / (π² S̃(0))`` over the translational and rotational gas parts,
    divided by N (negative: a longer grid subtracts more of the Lorentzian's tail).
    """
    total_J = 0.0
    for comp in result.components.values():
        s0 = float(comp.gas_dos[0]) if comp.gas_dos.size else 0.0
        if comp.gas_dof > 0 and s0 > 0:
            hc_J_cm = C.planck_J_s * C.speed_of_light_cm_per_s
            total_J -= 2.0 * hc_J_cm * comp.gas_dof**2 / (math.pi**2 * s0)
    return total_J / molecule_count * C.avogadro_per_mol * 1e-3


def component_temperatures(gin: GroupInput, wavenumber: np.ndarray, group_temperature_K: float,
                           k_eff: float) -> dict[str, tuple[float, float]]:
    """Kinetic temperature (K) and its standard error of translation and rotation, from their spectra.

    T_c = T × ∫S_c dν̃ / (dof_c N) with T the group's kinetic temperature (the spectra's
    normalisation), dof_c = 3 (translation) or the rotational degrees of freedom; the
    standard error from the segments (Welch's effective count *k_eff*).  Empty for a group
    with one component (one-atom molecules), whose translation is the whole group.
    """
    if len(gin.parts) < 2:
        return {}  # one component (one-atom molecules): it is the whole group
    nominal = {"translation": 3.0}
    if gin.rotational_dof:
        nominal["rotation"] = float(gin.rotational_dof)
    out = {}
    for comp, dof in nominal.items():
        if comp not in gin.parts:
            continue
        scale = group_temperature_K / (dof * gin.molecule_count)
        value = float(np.trapezoid(gin.parts[comp], wavenumber)) * scale
        segs = np.trapezoid(np.asarray(gin.part_segments[comp], dtype=float), wavenumber, axis=-1) * scale
        se = float(segment_standard_error(segs[:, None], k_eff)[0]) if segs.size >= 2 else float("nan")
        out[comp] = (value, se)
    return out


def result_checks(gin: GroupInput, result: GroupResult, seg_results: list[GroupResult], k_eff: float,
                  wavenumber: np.ndarray, group_temperature_K: float) -> tuple[list[str], dict]:
    """Cautions and sidecar entries of the three checks of this module for one group.

    Parameters
    ----------
    gin : GroupInput
        The group's spectra (segments rescaled as for the 2PT).
    result, seg_results : GroupResult, list of GroupResult
        2PT of the averaged spectrum and of each segment.
    k_eff : float
        Effective number of independent segments.
    wavenumber : ndarray
        Grid, cm⁻¹ (its last value is the top, the Nyquist wavenumber).
    group_temperature_K : float
        Kinetic temperature of the whole group, K.

    Returns
    -------
    notes : list of str
        Cautions (empty when nothing matters).
    info : dict
        ``gas_share_beyond_grid`` per component, ``zero_point_energy_drift_per_efold_kJ_per_mol``,
        ``zero_point_energy_se_kJ_per_mol`` and ``component_kinetic_temperature_K`` (value, se).
    """
    notes: list[str] = []
    top = float(wavenumber[-1])
    shares = {comp: gas_share_beyond(c, top) for comp, c in result.components.items() if comp != "vibration"}
    for comp, share in shares.items():
        if share > GAS_BEYOND_GRID_LIMIT:
            notes.append(
                f"group '{gin.name}' {comp}: {share:.1%} of the hard-sphere gas degrees of freedom lie above "
                f"the top of the spectrum ({top:.4g} cm-1), so the solid-like part counts them again; "
                "sample the trajectory more often or check the fluidicity choice")
    drift = zero_point_energy_drift_per_efold(result, gin.molecule_count)
    zpe_to_kJ = C.gas_constant_J_per_mol_K * group_temperature_K * 1e-3
    zpes = np.array([r.zero_point_energy for r in seg_results]) * zpe_to_kJ
    zpe_se = float(segment_standard_error(zpes[:, None], k_eff)[0]) if zpes.size >= 2 else float("nan")
    if drift != 0.0 and math.isfinite(zpe_se) and abs(drift) > ZPE_TAIL_STANDARD_ERRORS * zpe_se:
        notes.append(
            f"group '{gin.name}': the 2PT zero-point energy depends on the top of the spectrum: the "
            f"hard-sphere tail subtracts {abs(drift):.3g} kJ/mol more per e-fold of the top wavenumber "
            f"(standard error {zpe_se:.2g} kJ/mol); compare zero-point energies only on equal grids")
    temps = component_temperatures(gin, wavenumber, group_temperature_K, k_eff)
    for comp, (t_c, se) in temps.items():
        off = t_c / group_temperature_K - 1.0
        if abs(off) > TEMPERATURE_IMBALANCE_LIMIT and not (math.isfinite(se) and abs(t_c - group_temperature_K) <= 2 * se):
            notes.append(
                f"group '{gin.name}': {comp} is at {t_c:.4g} K but the whole group at "
                f"{group_temperature_K:.4g} K ({off:+.1%}); kinetic energy is not equipartitioned, so 2PT "
                "splits a wrong number of modes; equilibrate longer or check constraints and thermostat")
    info = {
        "gas_share_beyond_grid": shares,
        "zero_point_energy_drift_per_efold_kJ_per_mol": drift,
        "zero_point_energy_se_kJ_per_mol": zpe_se if math.isfinite(zpe_se) else None,
        "component_kinetic_temperature_K": {c: {"value": v, "standard_error": se if math.isfinite(se) else None}
                                            for c, (v, se) in temps.items()},
    }
    return notes, info
