"""Rows of the two-phase (2PT) property table for one group, and the checks of its result.

Values are per mole of molecules (``DEVELOPERS.md``, "The property table"); the 2PT
results of :mod:`qcorr.thermo.twophase` are in units of k or kT per molecule.
"""

from __future__ import annotations

import dataclasses
from types import SimpleNamespace

import numpy as np

from qcorr import constants as C
from qcorr import units
from qcorr.outputs.table import TableRow
from qcorr.thermo.harmonic_rows import frozen_bond_rows
from qcorr.thermo.segment_statistics import segment_standard_error
from qcorr.thermo.twophase import GroupResult
from qcorr.thermo.twophase_inputs import GroupInput
from qcorr.thermo.weights import PROPERTIES


def _kJ_per_mol(value_kT: float, temperature_K: float) -> float:
    """A value in units of kT per molecule -> kJ/mol (R T / 1000)."""
    return value_kT * C.gas_constant_J_per_mol_K * temperature_K * 1e-3


def two_phase_rows(
    system: str,
    gin: GroupInput,
    result: GroupResult,
    seg_results: list[GroupResult],
    k_eff: float,
    temperature: float,
    md_energy: float | None,
    note: str,
    pv_kJ_per_mol: float | None = None,
) -> list[TableRow]:
    """Rows of one group (method ``2pt``, basis ``per_mole_molecules``).

    Entropy and heat capacity (J/(mol K)), the entropy of each component, the zero-point
    energy of the solid-like parts (kJ/mol), and the energy and Helmholtz free energy
    (kJ/mol): their corrections always, absolute values with the MD energy.

    Parameters
    ----------
    system : str
        Value of the ``system`` column.
    gin : GroupInput
        The group (its name is used).
    result, seg_results : GroupResult, list of GroupResult
        2PT of the averaged spectrum and of each segment (empty: no standard errors).
    k_eff : float
        Effective number of independent segments.
    temperature : float
        Temperature, K.
    md_energy : float or None
        Mean total MD energy per mole of molecules, kJ/mol (None: not given).
    note : str
        Note of the entropy and heat-capacity rows (the model choices).
    pv_kJ_per_mol : float, optional
        pV per mole of molecules, kJ/mol: with *md_energy*, adds ``enthalpy`` (E + pV) and
        ``gibbs_free_energy`` (A + pV) rows; their quantum corrections are those of E and A
        (pV is classical).
    """
    R = C.gas_constant_J_per_mol_K
    rows = []

    def se(values):
        arr = np.asarray(values, dtype=float)
        return float(segment_standard_error(arr[:, None], k_eff)[0]) if arr.size >= 2 else float("nan")

    def per_seg(attr, comp=None):
        if comp is None:
            return [getattr(r, attr) for r in seg_results]
        return [getattr(r.components[comp], attr) for r in seg_results]

    base = {"system": system, "group": gin.name, "method": "2pt", "temperature_K": temperature,
            "basis": "per_mole_molecules"}
    for prop in ("entropy", "heat_capacity"):
        q = getattr(result, prop) * R
        c = getattr(result, prop + "_classical") * R
        qs = np.array(per_seg(prop)) * R
        cs = np.array(per_seg(prop + "_classical")) * R
        rows.append(TableRow(**base, property=prop, unit=units.MOLAR_HEAT_CAPACITY, classical=c, quantum=q,
                             correction=q - c, classical_se=se(cs), quantum_se=se(qs),
                             correction_se=se(qs - cs), classical_source="harmonic_model",
                             note=note))
    for comp, cres in result.components.items():
        q, c = cres.entropy * R, cres.entropy_classical * R
        qs = np.array(per_seg("entropy", comp)) * R
        cs = np.array(per_seg("entropy_classical", comp)) * R
        rows.append(TableRow(**base, property=f"entropy_{comp}", unit=units.MOLAR_HEAT_CAPACITY, classical=c,
                             quantum=q, correction=q - c, classical_se=se(cs), quantum_se=se(qs),
                             correction_se=se(qs - cs), classical_source="harmonic_model",
                             note=f"{comp} part of the 2PT entropy; f = {cres.fluidicity:.4g}"))
    de = _kJ_per_mol(result.energy_minus_classical, temperature)
    de_s = np.array([_kJ_per_mol(v, temperature) for v in per_seg("energy_minus_classical")])
    ds_q = np.array(per_seg("entropy")) * R
    ds_c = np.array(per_seg("entropy_classical")) * R
    s_q, s_c = result.entropy * R, result.entropy_classical * R
    da = de - temperature * (s_q - s_c) * 1e-3
    da_s = de_s - temperature * (ds_q - ds_c) * 1e-3
    zpe = _kJ_per_mol(result.zero_point_energy, temperature)
    zpe_s = np.array([_kJ_per_mol(v, temperature) for v in per_seg("zero_point_energy")])
    rows.append(TableRow(**base, property="zero_point_energy", unit=units.MOLAR_ENERGY, classical=0.0,
                         quantum=zpe, correction=zpe, classical_se=0.0, quantum_se=se(zpe_s),
                         correction_se=se(zpe_s), classical_source="harmonic_model",
                         note="of the solid-like parts"))
    if md_energy is None:
        why = "absolute value needs --md-energy (mean MD energy per mole of molecules)"
        rows.append(TableRow(**base, property="energy", unit=units.MOLAR_ENERGY, correction=de,
                             correction_se=se(de_s), note=why))
        rows.append(TableRow(**base, property="helmholtz_free_energy", unit=units.MOLAR_ENERGY,
                             correction=da, correction_se=se(da_s), note=why))
    else:
        e_c = md_energy
        a_c = e_c - temperature * s_c * 1e-3
        a_s = e_c - temperature * ds_c * 1e-3
        rows.append(TableRow(**base, property="energy", unit=units.MOLAR_ENERGY, classical=e_c,
                             quantum=e_c + de, correction=de, classical_se=float("nan"),
                             quantum_se=se(de_s), correction_se=se(de_s),
                             classical_source="md_value",
                             note="E = E_MD + kT * integral S_solid (W_E^q - 1); E_MD error not included"))
        rows.append(TableRow(**base, property="helmholtz_free_energy", unit=units.MOLAR_ENERGY,
                             classical=a_c, quantum=a_c + da, correction=da,
                             classical_se=se(a_s), quantum_se=se(a_s + da_s),
                             correction_se=se(da_s), classical_source="md_value",
                             note="A = E - T S; E_MD error not included"))
        if pv_kJ_per_mol is not None:
            pv_note = (f"with pV = {pv_kJ_per_mol:.6g} kJ/mol (the given pressure times the volume per molecule, "
                       "classical); E_MD error not included")
            rows.append(TableRow(**base, property="enthalpy", unit=units.MOLAR_ENERGY,
                                 classical=e_c + pv_kJ_per_mol, quantum=e_c + pv_kJ_per_mol + de, correction=de,
                                 classical_se=float("nan"), quantum_se=se(de_s), correction_se=se(de_s),
                                 classical_source="md_value", note="H = E + pV " + pv_note))
            rows.append(TableRow(**base, property="gibbs_free_energy", unit=units.MOLAR_ENERGY,
                                 classical=a_c + pv_kJ_per_mol, quantum=a_c + pv_kJ_per_mol + da, correction=da,
                                 classical_se=se(a_s), quantum_se=se(a_s + da_s), correction_se=se(da_s),
                                 classical_source="md_value", note="G = A + pV " + pv_note))
    if len(seg_results) < 2:  # the standard-error cells are empty; say why
        for row in rows:
            row.note = f"{row.note}; one segment: no standard error" if row.note else "one segment: no standard error"
    return rows


def model_checks(
    gin: GroupInput,
    result: GroupResult,
    seg_results: list[GroupResult],
    k_eff: float,
    wavenumber: np.ndarray,
) -> list[str]:
    """Cautions on one group's 2PT result: fluidicity near 0 or 1, and a solid-like density
    of states negative beyond 3 standard errors at low frequency (wavenumber in cm^-1)."""
    notes = []
    for comp, c in result.components.items():
        if comp == "vibration":
            continue
        if c.fluidicity < 0.01:
            notes.append(f"group '{gin.name}' {comp}: fluidicity {c.fluidicity:.3g} is near 0 (solid-like); "
                         "2PT reduces to the harmonic solid")
        elif c.fluidicity > 0.99:
            notes.append(f"group '{gin.name}' {comp}: fluidicity {c.fluidicity:.3g} is near 1 (gas-like); "
                         "check the density and the zero-frequency value")
        solids = np.array([r.components[comp].solid_dos for r in seg_results]) if len(seg_results) >= 2 else None
        if solids is not None:
            noise = segment_standard_error(solids, k_eff)
            # low frequency = below the mean wavenumber of the component's spectrum; above
            # it the hard-sphere Lorentzian tail exceeding a soft-potential spectrum is a
            # known feature of the model (Desjarlais, Phys. Rev. E 88, 062145 (2013))
            total = c.gas_dos + c.solid_dos
            weight = np.trapezoid(total, wavenumber)
            if not weight > 0:  # an empty component (no such motion): nothing to compare
                continue
            mean = np.trapezoid(wavenumber * total, wavenumber) / weight
            low = wavenumber <= mean
            bad = low & (c.solid_dos < -3.0 * noise) & (c.solid_dos < 0)
            if bad.any():
                k = int(np.flatnonzero(bad)[0])
                notes.append(
                    f"group '{gin.name}' {comp}: the solid-like density of states is negative beyond "
                    f"3 standard errors at low frequency, {wavenumber[k]:.3g} cm-1 (min {c.solid_dos.min() / gin.molecule_count:.3g} "
                    "cm per molecule); the hard-sphere gas exceeds the spectrum there")
    return notes


#: properties of the temperature scan (corrections of the solid-like parts)
SCAN_PROPERTIES = ("entropy", "heat_capacity", "energy", "zero_point_energy", "helmholtz_free_energy")


def solid_corrections(result: GroupResult, wavenumber: np.ndarray, temperature_K: float) -> dict[str, float]:
    """Quantum-minus-classical harmonic corrections of a 2PT result's solid-like parts at *temperature_K*.

    ``Σ_components ∫ S_solid(ν̃) ΔW_X(u) dν̃`` per molecule with u = hcν̃/kT at the given
    temperature (Berens et al., J. Chem. Phys. 79, 2375 (1983) weights from
    :data:`qcorr.thermo.weights.PROPERTIES`); entropy and heat capacity in k, energies in kT
    of that temperature.  The gas-like parts are classical in both columns (no correction).
    Every ΔW vanishes at ν̃ = 0, so the trapezoid rule from 0 is used.
    """
    u = C.second_radiation_constant_cm_K * wavenumber[1:] / temperature_K
    out = {}
    for name in SCAN_PROPERTIES:
        weight = np.concatenate([[0.0], PROPERTIES[name].correction(u)])
        total = 0.0
        for comp in result.components.values():
            total += float(np.trapezoid(comp.solid_dos * weight, wavenumber))
        out[name] = total
    return out


def temperature_scan_rows(
    system: str, group: str, molecule_count: float, result: GroupResult, seg_results: list[GroupResult],
    k_eff: float, wavenumber: np.ndarray, temperature_K: float, spectrum_temperature_K: float,
) -> list[TableRow]:
    """Rows of one group at a scan temperature: only the quantum corrections of the solid-like parts.

    The spectrum and its gas/solid split are those measured at *spectrum_temperature_K*
    (harmonic assumption, as for ``qcorr properties --temperatures``); the classical 2PT
    value at another temperature needs MD at that temperature, so the classical and
    quantum columns are empty.  Per mole of molecules (J/(mol K), kJ/mol).

    Parameters
    ----------
    molecule_count : float
        Molecules of the group (N of its spectra).
    """
    R = C.gas_constant_J_per_mol_K
    scale = {"entropy": R, "heat_capacity": R, "energy": R * temperature_K * 1e-3,
             "zero_point_energy": R * temperature_K * 1e-3, "helmholtz_free_energy": R * temperature_K * 1e-3}
    unit = {"entropy": units.MOLAR_HEAT_CAPACITY, "heat_capacity": units.MOLAR_HEAT_CAPACITY}
    values = solid_corrections(result, wavenumber, temperature_K)
    segs = [solid_corrections(r, wavenumber, temperature_K) for r in seg_results]
    rows = []
    for name in SCAN_PROPERTIES:
        per = scale[name] / molecule_count
        arr = np.array([s[name] for s in segs]) * per
        se = float(segment_standard_error(arr[:, None], k_eff)[0]) if arr.size >= 2 else float("nan")
        rows.append(TableRow(
            system=system, group=group, method="2pt", property=name, temperature_K=temperature_K,
            basis="per_mole_molecules", unit=unit.get(name, units.MOLAR_ENERGY),
            correction=values[name] * per, correction_se=se,
            note=(f"temperature scan: quantum correction of the 2PT solid-like parts at {temperature_K:g} K "
                  f"with the spectrum and gas/solid split measured at {spectrum_temperature_K:g} K "
                  "(harmonic assumption); add it to a classical value at this temperature")))
    return rows


def frozen_bond_addon_rows(
    system: str, group: str, molecule_count: float, atom_count: float, wavenumbers_cm: list[float],
    temperature_K: float,
) -> list[TableRow]:
    """Frozen-bond add-on rows (method ``frozen_bond_addon``, per mole of molecules) of a 2PT group.

    One quantum harmonic mode per given wavenumber (cm⁻¹) per molecule, for bonds
    constrained in the MD (rigid models); the same rows as ``qcorr properties
    --frozen-bond-wavenumbers`` (:func:`qcorr.thermo.harmonic_rows.frozen_bond_rows`).  Add
    them to the group's ``2pt`` rows.
    """
    spectrum = SimpleNamespace(name=group, molecule_count=molecule_count, atom_count=atom_count)
    rows = frozen_bond_rows(spectrum, list(wavenumbers_cm), system=system, temperature_K=temperature_K,
                            properties=list(PROPERTIES.values()))
    note = (f"harmonic modes at the user-given wavenumbers {','.join(f'{w:g}' for w in wavenumbers_cm)} cm-1 "
            "per molecule (constrained in the MD, absent from the spectrum); add to the group's 2pt rows; "
            "exact given the wavenumbers, no standard error")
    return [dataclasses.replace(r, note=note) for r in rows if r.basis == "per_mole_molecules"]


def mixing_entropy_row(system: str, mixture: str, mixing_k: float, temperature_K: float,
                       components: list[str]) -> TableRow:
    """Row ``entropy_mixing`` of a mixture: the ideal mixing entropy R (−Σ x ln x), J/(mol K)
    per mole of the mixture's molecules, in both columns (classical, configurational)."""
    value = mixing_k * C.gas_constant_J_per_mol_K
    return TableRow(system=system, group=mixture, method="2pt", property="entropy_mixing",
                    temperature_K=temperature_K, basis="per_mole_molecules", unit=units.MOLAR_HEAT_CAPACITY,
                    classical=value, quantum=value, correction=0.0, classical_se=0.0, quantum_se=0.0,
                    correction_se=0.0, classical_source="harmonic_model",
                    note=("ideal mixing entropy -R sum x_i ln x_i of the components "
                          + ", ".join(components) + " (included in the mixture's entropy)"))
