"""Corrected observables of one system: a classical baseline plus the harmonic quantum correction.

Every row (method ``corrected``, per mole of molecules and per mole of atoms, at the spectrum's temperature)
is  quantum = classical + correction,  with the classical baseline measured from the runs
(:mod:`qcorr.baselines.classical`, its source in ``classical_source``) and the correction the
harmonic one of the group's spectrum at the same temperature (Berens, Mackay, White, Wilson
[1]_; :func:`qcorr.thermo.harmonic.harmonic_property_rows`):

=========================  =============================  ===================================
property                   classical                      correction
=========================  =============================  ===================================
``heat_capacity``          C_V (fluctuations or user)     ΔC_V
``isobaric_heat_capacity`` C_P (fluctuations, series)     ΔC_V: the pV and expansion terms are
                                                          assumed classical (common practice
                                                          for condensed phases)
``energy``                 ⟨E⟩ (energy file)              ΔE (zero-point energy included)
``enthalpy``               ⟨E + pV⟩ (energy file)         ΔE
``helmholtz_free_energy``  user value, or ⟨E⟩ − T S_2PT   ΔA (harmonic; 2PT's ΔA with S_2PT)
``gibbs_free_energy``      user value, or ⟨H⟩ − T S_2PT   ΔA, likewise (ΔG ≈ ΔA: harmonic)
=========================  =============================  ===================================

S_2PT is the classical (classical-weight) two-phase entropy of the group from a ``qcorr
liquid`` table; with it the free-energy correction is that table's, so that classical and
quantum free energies use one model.  The standard error of the quantum value combines the
baseline's and the correction's (independent estimates).  A reference value supplied by
the user, with its source, fills ``reference`` and ``deviation = quantum − reference``.

A baseline measured from the whole system's energy or kinetic energy belongs to a group that
holds every atom of the system; other groups are refused for it.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79, 2375 (1983).
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd
import xarray as xr

from qcorr.baselines.classical import (
    BASELINE_PROPERTIES,
    Baseline,
    BaselineSet,
    check_ensemble,
    energy_file_baselines,
    user_baselines,
)
from qcorr.baselines.energy_files import EnergySeries
from qcorr.baselines.kinetic import trajectory_baselines
from qcorr.errors import ConfigError
from qcorr.outputs.table import TableRow, read_table, rows_to_frame
from qcorr.thermo.harmonic import harmonic_property_rows
from qcorr.thermo.spectrum_groups import spectrum_source, spectrum_temperature, system_name

#: which harmonic correction each corrected property takes
CORRECTION_OF = {
    "heat_capacity": "heat_capacity",
    "isobaric_heat_capacity": "heat_capacity",
    "energy": "energy",
    "enthalpy": "energy",
    "helmholtz_free_energy": "helmholtz_free_energy",
    "gibbs_free_energy": "helmholtz_free_energy",
}
#: order of the corrected rows (the answer first: heat capacities, then energies)
ROW_ORDER = tuple(CORRECTION_OF)
#: priority of baseline sources when several give the same property (first wins)
SOURCE_PRIORITY = ("user_value", "kinetic_fluctuation", "energy_file", "temperature_series")

#: cautions written with every table of corrected rows
CORRECTED_CAUTIONS = (
    ("Corrected observables are classical MD values plus harmonic quantum corrections of the "
     "same run's spectrum at the same temperature (Berens, Mackay, White, Wilson, J. Chem. Phys. "
     "79, 2375 (1983)); first-order fixes, not a quantum simulation."),
    ("C_P,corrected = C_P,classical + Delta C_V: the pV work and thermal-expansion terms are taken as "
     "classical (common practice for condensed phases); likewise the Gibbs energy takes the "
     "constant-volume correction Delta A."),
    ("Fluctuation heat capacities assume the declared ensemble; their standard errors come from block "
     "averaging (Flyvbjerg & Petersen, J. Chem. Phys. 91, 461 (1989)) and grow fast as a run shortens."),
    ("Energies and enthalpies are per mole of molecules of the whole simulated system, on the "
     "engine's energy scale (its zero of potential energy, cutoff treatment and long-range "
     "corrections); compare differences, or values on the same scale."),
)


@dataclass(frozen=True)
class Reference:
    """A reference value for a corrected property (molar unit of the row) and its source."""

    value: float
    standard_error: float
    source: str

    def as_json(self) -> dict[str, object]:
        """The reference for a JSON sidecar (no standard error: null)."""
        se = self.standard_error if math.isfinite(self.standard_error) else None
        return {"value": self.value, "standard_error": se, "source": self.source}


@dataclass(frozen=True)
class TwoPhaseEntropy:
    """The classical 2PT entropy (J/(mol K)) and 2PT free-energy correction (kJ/mol) of a group."""

    entropy: float
    entropy_se: float
    free_energy_correction: float
    free_energy_correction_se: float
    table: str


def merged_baselines(*sets: BaselineSet) -> BaselineSet:
    """One baseline per property, chosen by :data:`SOURCE_PRIORITY`; the others named in its note."""
    out = BaselineSet()
    candidates: dict[str, list[Baseline]] = {}
    for item in sets:
        out.cautions += item.cautions
        out.diagnostics.update(item.diagnostics)
        for name, baseline in item.baselines.items():
            candidates.setdefault(name, []).append(baseline)
    for name, found in candidates.items():
        found = sorted(found, key=lambda b: SOURCE_PRIORITY.index(b.source))
        chosen, others = found[0], found[1:]
        if others:
            also = "; ".join(f"{b.source} gave {b.value:.6g} ± {b.standard_error:.2g}" for b in others)
            chosen = Baseline(chosen.property, chosen.value, chosen.standard_error, chosen.source,
                              f"{chosen.note}; also measured: {also}")
        out.baselines[name] = chosen
    return out


def two_phase_entropy(path: str | os.PathLike[str] | pd.DataFrame, *, system: str, group: str,
                      temperature_K: float) -> TwoPhaseEntropy:
    """The classical 2PT entropy and free-energy correction of *group* from a ``qcorr liquid`` table
    (its file, or the DataFrame of :func:`qcorr.thermo.twophase_table.two_phase_properties`).

    Raises
    ------
    ConfigError
        Naming the table, if it lacks the group's 2PT entropy or free energy at the temperature.
    """
    frame = path if isinstance(path, pd.DataFrame) else read_table(path)
    path = "2PT table (in memory)" if isinstance(path, pd.DataFrame) else path
    rows = frame[(frame["method"] == "2pt") & (frame["group"] == group)
                 & (frame["basis"] == "per_mole_molecules")
                 & np.isclose(frame["temperature_K"], temperature_K, rtol=1e-9)]
    found = {p: rows[rows["property"] == p] for p in ("entropy", "helmholtz_free_energy")}
    if any(len(r) != 1 for r in found.values()):
        raise ConfigError(f"--two-phase-table '{os.fspath(path)}' has no 2PT entropy and free energy of "
                          f"group '{group}' at {temperature_K:g} K; give the 'qcorr liquid' table of this spectrum")
    s, a = found["entropy"].iloc[0], found["helmholtz_free_energy"].iloc[0]
    if str(s["system"]) != system:
        raise ConfigError(f"--two-phase-table '{os.fspath(path)}' belongs to system '{s['system']}', not "
                          f"'{system}'; give the table of this system")
    return TwoPhaseEntropy(float(s["classical"]), float(s["classical_se"]), float(a["correction"]),
                           float(a["correction_se"]), os.fspath(path))


def _free_energy_baselines(base: BaselineSet, two_phase: TwoPhaseEntropy | None,
                           temperature_K: float) -> dict[str, tuple[Baseline, float, float]]:
    """Free-energy baselines from ⟨E⟩ or ⟨H⟩ and the classical 2PT entropy, with 2PT's ΔA."""
    out = {}
    if two_phase is None:
        return out
    for free, mean in (("helmholtz_free_energy", "energy"), ("gibbs_free_energy", "enthalpy")):
        if free in base.baselines or mean not in base.baselines:
            continue
        m = base.baselines[mean]
        ts = temperature_K * two_phase.entropy / 1000.0
        value = m.value - ts
        se = math.hypot(m.standard_error, temperature_K * two_phase.entropy_se / 1000.0)
        note = (f"{'<E>' if mean == 'energy' else '<H>'} - T S, S = {two_phase.entropy:.6g} J/(mol K) "
                "by 2PT with classical weights (the group's 2pt entropy row); correction: the 2pt "
                "Delta A")
        out[free] = (Baseline(free, value, se, m.source, note), two_phase.free_energy_correction,
                     two_phase.free_energy_correction_se)
    return out


def _reference_fields(quantum: float, quantum_se: float, ref: Reference | None) -> dict:
    if ref is None:
        return {}
    ref_se = ref.standard_error if math.isfinite(ref.standard_error) else 0.0
    return {"reference": ref.value,
            "reference_se": ref.standard_error if math.isfinite(ref.standard_error) else None,
            "reference_source": ref.source, "deviation": quantum - ref.value,
            "deviation_se": math.hypot(quantum_se, ref_se) if math.isfinite(quantum_se) else None}


def corrected_rows(
    corrections: Mapping[str, tuple[float, float]],
    baselines: BaselineSet,
    *,
    system: str,
    group: str,
    temperature_K: float,
    two_phase: TwoPhaseEntropy | None = None,
    references: Mapping[str, Reference] | None = None,
    atoms_per_molecule: float | None = None,
) -> list[TableRow]:
    """The corrected rows of one group: a row for every property with a baseline, per mole of
    molecules and (with *atoms_per_molecule*) per mole of atoms.

    Parameters
    ----------
    corrections : mapping
        ``{harmonic property: (correction, standard error)}`` per mole of molecules
        (``heat_capacity`` J/(mol K); ``energy``, ``helmholtz_free_energy`` kJ/mol).
    baselines : BaselineSet
        The classical baselines (one per property, :func:`merged_baselines`).
    system, group : str
        Values of the ``system`` and ``group`` columns.
    temperature_K : float
        Temperature of the spectrum and of the baselines, K.
    two_phase : TwoPhaseEntropy, optional
        Classical 2PT entropy for the free energies of a liquid.
    references : mapping, optional
        ``{property: Reference}`` (per mole of molecules; on that row only).
    atoms_per_molecule : float, optional
        Atoms per molecule of the group: adds a ``per_mole_atoms`` row after each row (a
        group read without residues, e.g. from a LAMMPS dump, is one "molecule" of the
        whole system; its per-atom rows are then the useful ones).
    """
    references = dict(references or {})
    free = _free_energy_baselines(baselines, two_phase, temperature_K)
    rows = []
    for prop in ROW_ORDER:
        if prop in free:
            base, corr, corr_se = free[prop]
        elif prop in baselines.baselines:
            base = baselines.baselines[prop]
            corr, corr_se = corrections[CORRECTION_OF[prop]]
        else:
            continue
        quantum = base.value + corr
        quantum_se = math.hypot(base.standard_error if math.isfinite(base.standard_error) else 0.0, corr_se)
        extra = {"isobaric_heat_capacity": "; correction Delta C_V (pV and expansion terms classical)",
                 "gibbs_free_energy": "; correction Delta A (constant-volume, harmonic)"}.get(prop, "")
        row = TableRow(
            system=system, group=group, method="corrected", property=prop, temperature_K=temperature_K,
            basis="per_mole_molecules", unit=BASELINE_PROPERTIES[prop], classical=base.value,
            quantum=quantum, correction=corr,
            classical_se=base.standard_error if math.isfinite(base.standard_error) else None,
            quantum_se=quantum_se, correction_se=corr_se, classical_source=base.source,
            note=f"classical: {base.note}{extra}",
            **_reference_fields(quantum, quantum_se, references.pop(prop, None)),
        )
        rows.append(row)
        if atoms_per_molecule is not None:
            rows.append(per_atom_row(row, atoms_per_molecule))
    if references:
        raise ConfigError(f"--reference {', '.join(references)}: no corrected row of group '{group}' for "
                          "it (no classical baseline); give the baseline or drop the reference")
    return rows


def per_atom_row(row: TableRow, atoms_per_molecule: float) -> TableRow:
    """The same row per mole of atoms (values divided by atoms per molecule; no reference)."""

    def scaled(value):
        return None if value is None else value / atoms_per_molecule

    return TableRow(
        system=row.system, group=row.group, method=row.method, property=row.property,
        temperature_K=row.temperature_K, basis="per_mole_atoms", unit=row.unit,
        classical=scaled(row.classical), quantum=scaled(row.quantum), correction=scaled(row.correction),
        classical_se=scaled(row.classical_se), quantum_se=scaled(row.quantum_se),
        correction_se=scaled(row.correction_se), classical_source=row.classical_source, note=row.note)


def harmonic_corrections(ds: xr.Dataset, *, system: str, group: str, source: str
                         ) -> tuple[dict[str, tuple[float, float]], list[str]]:
    """Harmonic corrections (per mole of molecules) of *group* at the spectrum's temperature,
    and the spectrum's cautions."""
    result = harmonic_property_rows(ds, system=system, source=source,
                                    properties=["heat_capacity", "energy", "helmholtz_free_energy"],
                                    include_msd=False)
    out = {}
    for row in result.rows:
        if row.group == group and row.basis == "per_mole_molecules":
            out[row.property] = (float(row.correction), float(row.correction_se))
    if not out:
        names = sorted({row.group for row in result.rows})
        raise ConfigError(f"--group: no group '{group}' in spectrum file '{source}'; groups: {', '.join(names)}")
    return out, result.cautions


def whole_system_group(ds: xr.Dataset, group: str, source: str, what: str) -> None:
    """Refuse a baseline of the whole system for a group that lacks some of its atoms."""
    names = [str(g) for g in ds["group"].values]
    if group not in names:
        raise ConfigError(f"--group: no group '{group}' in spectrum file '{source}'; groups: {', '.join(names)}")
    atoms = ds["atom_count"].sel(group=group).item()
    total = ds["atom_count"].sel(group="total").item() if "total" in names else atoms
    if atoms != total:
        raise ConfigError(f"--group {group}: {what} belongs to the whole system ({total:g} atoms) but the group "
                          f"holds {atoms:g}; use the group 'total' (or one holding every atom)")


def corrected_table(
    rows: list[TableRow], *, cautions: list[str], provenance: Mapping[str, object]
) -> pd.DataFrame:
    """The property table of corrected rows with its provenance in ``attrs``."""
    frame = rows_to_frame(rows)
    frame.attrs = {**provenance, "cautions": list(CORRECTED_CAUTIONS) + list(dict.fromkeys(cautions))}
    return frame


def spectrum_context(ds: xr.Dataset, system: str | None, source: str | os.PathLike[str] | None
                     ) -> tuple[str, str, float]:
    """(source name, system name, temperature in K) of a spectrum Dataset."""
    name = spectrum_source(ds, source)
    return name, system_name(system, name), spectrum_temperature(ds, name)


def corrected_properties(
    ds: xr.Dataset,
    *,
    ensemble: str,
    system: str | None = None,
    group: str = "total",
    energy_series: EnergySeries | None = None,
    pressure_bar: float | None = None,
    classical_values: Mapping[str, float] | None = None,
    two_phase_table: str | os.PathLike[str] | pd.DataFrame | None = None,
    references: Mapping[str, Reference] | None = None,
    source: str | os.PathLike[str] | None = None,
) -> pd.DataFrame:
    """Corrected observables of one run: classical baselines from the run plus harmonic corrections.

    What ``qcorr corrected`` computes (module docstring: which baseline and correction each
    row takes).  Cautions are issued as :class:`qcorr.errors.QcorrWarning` too.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum Dataset of the run (spectrum-file contract, ``DEVELOPERS.md``).
    ensemble : {"nve", "nvt", "npt"}
        The ensemble the run sampled; decides the fluctuation formula and is checked
        against the data.
    system : str, optional
        Value of the ``system`` column; default the spectrum file's stem.
    group : str
        The group whose spectrum gives the corrections; energy-file and kinetic baselines
        need one that holds every atom (default ``total``).
    energy_series : EnergySeries, optional
        The engine's energy output of the same run
        (:func:`qcorr.baselines.energy_files.read_energy_file`).
    pressure_bar : float, optional
        Barostat reference pressure, bar (NPT; default the energy file's record).
    classical_values : mapping, optional
        ``{property: value}`` typed in by the user, per mole of molecules in the row's molar
        unit (J/(mol K), kJ/mol), at the spectrum's temperature; they take precedence.
    two_phase_table : path-like or pandas.DataFrame, optional
        The ``qcorr liquid`` table of this spectrum (or the DataFrame of
        :func:`~qcorr.thermo.twophase_table.two_phase_properties`): its classical 2PT entropy
        makes the free energies A = ⟨E⟩ − TS and G = ⟨H⟩ − TS.
    references : mapping, optional
        ``{property: Reference}``: reference values with their sources (reference and
        deviation columns).
    source : str or path-like, optional
        The spectrum's file name (messages, default *system*, provenance).

    Returns
    -------
    pandas.DataFrame
        Property table of method ``corrected`` (bases ``per_mole_molecules`` and
        ``per_mole_atoms``); ``attrs``
        holds the provenance: ``method``, ``input_spectrum``, ``energy_file`` (path,
        format, columns used), ``options``, ``baselines`` (diagnostics), ``missing`` (the
        properties without a baseline and what they need), ``temperature_K``,
        ``molecule_count``, ``harmonic_corrections`` (the group's ΔC_V, ΔE, ΔA per mole of
        molecules with standard errors: what :mod:`qcorr.baselines.temperature_series` and
        :mod:`qcorr.baselines.vaporisation` combine) and ``cautions``.

    Raises
    ------
    ConfigError
        A bad option (unknown group or property, a group that is not the whole system).
    PhysicsError
        Data that contradict the declared ensemble or temperature, or an ill-conditioned
        fluctuation formula.
    """
    import warnings

    from qcorr.errors import QcorrWarning

    ensemble = check_ensemble(ensemble)
    name, system, temperature = spectrum_context(ds, system, source)
    corrections, cautions = harmonic_corrections(ds, system=system, group=group, source=name)
    molecules = float(ds["molecule_count"].sel(group=group).item())
    sets = []
    if ensemble == "nve":
        whole_system_group(ds, group, name, "the trajectory's kinetic energy")
    sets.append(trajectory_baselines(ds, ensemble=ensemble, temperature_K=temperature, molecule_count=molecules,
                                     source=name))
    if energy_series is not None:
        whole_system_group(ds, group, name, f"energy file '{energy_series.path}'")
        dof = float(ds["degrees_of_freedom"].sel(group=group).item())
        sets.append(energy_file_baselines(energy_series, ensemble=ensemble, temperature_K=temperature,
                                          molecule_count=molecules, degrees_of_freedom=dof,
                                          pressure_bar=pressure_bar))
    if classical_values:
        sets.append(user_baselines(classical_values))
    baselines = merged_baselines(*sets)
    entropy = (two_phase_entropy(two_phase_table, system=system, group=group, temperature_K=temperature)
               if two_phase_table is not None else None)
    atoms = float(ds["atom_count"].sel(group=group).item())
    rows = corrected_rows(corrections, baselines, system=system, group=group, temperature_K=temperature,
                          two_phase=entropy, references=references, atoms_per_molecule=atoms / molecules)
    present = {r.property for r in rows}
    missing = {p: NEEDS[p] for p in ROW_ORDER if p not in present and _expected(p, ensemble)}
    cautions = baselines.cautions + cautions
    frame = corrected_table(rows, cautions=cautions, provenance={
        "method": "classical baselines measured from the run + harmonic quantum corrections (Berens, "
                  "Mackay, White, Wilson, J. Chem. Phys. 79, 2375 (1983))",
        "input_spectrum": {"name": name},
        "energy_file": None if energy_series is None else {
            "name": energy_series.path, "format": energy_series.file_format,
            "samples": energy_series.sample_count, "columns": energy_series.columns},
        "options": {"system": system, "group": group, "ensemble": ensemble, "pressure_bar": pressure_bar,
                    "classical_values": dict(classical_values or {}),
                    "two_phase_table": None if two_phase_table is None else (
                        "in memory" if isinstance(two_phase_table, pd.DataFrame) else os.fspath(two_phase_table)),
                    "references": {p: r.as_json() for p, r in (references or {}).items()}},
        "baselines": baselines.diagnostics,
        "missing": missing,
        "temperature_K": temperature,
        "molecule_count": molecules,
        "molecule_mass_g_mol": float(ds["group_mass"].sel(group=group).item()) / molecules,
        "harmonic_corrections": {p: {"value": v, "standard_error": se, "unit": "J mol-1 K-1"
                                     if p == "heat_capacity" else "kJ mol-1"}
                                 for p, (v, se) in corrections.items()},
    })
    for caution in list(dict.fromkeys(cautions)):
        warnings.warn(caution, QcorrWarning, stacklevel=2)
    return frame


#: what a property without a baseline needs (written to the provenance)
NEEDS = {
    "heat_capacity": "an NVT energy file, an NVE run, or a user value",
    "isobaric_heat_capacity": "an NPT energy file (enthalpy fluctuations), a temperature series, or a user value",
    "energy": "an energy file or a user value",
    "enthalpy": "an NPT energy file or a user value",
    "helmholtz_free_energy": "a user value, or the mean energy and a 2PT table (--two-phase-table)",
    "gibbs_free_energy": "a user value, or the mean enthalpy of an NPT run and a 2PT table",
}


def _expected(prop: str, ensemble: str) -> bool:
    """Whether a run of this ensemble is expected to give *prop*."""
    if ensemble == "npt":
        return prop != "heat_capacity" and prop != "helmholtz_free_energy"
    return prop in ("heat_capacity", "energy", "helmholtz_free_energy")
