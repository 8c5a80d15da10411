"""Rows of the harmonic property table for one atom group (``DEVELOPERS.md``, "The property table").

* :func:`property_rows`: classical, quantum and correction of every property on every
  basis, with standard errors, MD values and the refusals for diffusing groups;
* :func:`msd_rows`: the harmonic mean-square displacement and its quantum/classical ratio;
* :func:`frozen_bond_rows`: the frozen-bond add-on at user-given wavenumbers.

The physics is in :mod:`qcorr.thermo.spectrum_integrals`; :mod:`qcorr.thermo.harmonic`
assembles the rows of all groups into the table.
"""

from __future__ import annotations

import math

import numpy as np

from qcorr import constants as C
from qcorr import units
from qcorr.errors import PhysicsError
from qcorr.outputs.table import BASES, TableRow
from qcorr.thermo.segment_statistics import normalised_segments, segment_standard_error
from qcorr.thermo.spectrum_groups import GroupSpectrum, ZeroFrequencyCheck
from qcorr.thermo.spectrum_integrals import (
    frozen_bond_integrals,
    mean_square_displacement,
    mode_integrals,
    to_physical,
    unit_of,
)
from qcorr.thermo.weights import HarmonicProperty


def property_rows(
    group: GroupSpectrum,
    *,
    system: str,
    temperature_K: float,
    spectrum_temperature_K: float,
    properties: list[HarmonicProperty],
    md_values: dict[tuple[str, str], float],
    k_eff: float,
    check: ZeroFrequencyCheck,
) -> list[TableRow]:
    """Rows of one group at one temperature: every property on every basis (method ``harmonic``).

    Parameters
    ----------
    group : GroupSpectrum
        The group's spectrum (cm on a cm^-1 grid) and counts.
    system : str
        Value of the ``system`` column.
    temperature_K, spectrum_temperature_K : float
        Temperature of the rows and of the measured spectrum, K; when they differ the
        rows are harmonic extrapolations (noted) and MD values are not used.
    properties : list of HarmonicProperty
        Properties to report.
    md_values : dict
        ``{(group, property): value}`` per mole of molecules in the molar unit.
    k_eff : float
        Effective number of independent segments (standard errors).
    check : ZeroFrequencyCheck
        Whether the group diffuses (absolute entropy and free energy refused).
    """
    rows: list[TableRow] = []
    x = group.wavenumber_cm
    extrapolated = not math.isclose(temperature_K, spectrum_temperature_K, rel_tol=1e-12)
    scan_note = (
        f"harmonic extrapolation of the spectrum measured at {spectrum_temperature_K:g} K"
        if extrapolated
        else ""
    )
    segments = normalised_segments(x, group.vdos_segments, float(np.trapezoid(group.vdos, x)))
    for prop in properties:
        cl, qu, co = mode_integrals(x, group.vdos, temperature_K, prop)
        cl_s, qu_s, co_s = mode_integrals(x, segments, temperature_K, prop)
        se = {
            "classical": segment_standard_error(cl_s, k_eff),
            "quantum": segment_standard_error(qu_s, k_eff),
            "correction": segment_standard_error(co_s, k_eff),
        }
        md = md_values.get((group.name, prop.name))
        for basis in BASES:

            def conv(value, prop=prop, basis=basis):
                return float(to_physical(value, prop, temperature_K, basis,
                                         group.molecule_count, group.atom_count))

            notes = [scan_note] if scan_note else []
            row = TableRow(
                system=system, group=group.name, method="harmonic", property=prop.name,
                temperature_K=temperature_K, basis=basis, unit=unit_of(prop, basis),
                correction=conv(co), correction_se=conv(se["correction"]),
            )
            if md is not None and not extrapolated:
                # md value is per mole of molecules in the molar unit
                per_molecule_to_basis = {
                    "per_mole_molecules": 1.0,
                    "per_mole_atoms": group.molecule_count / group.atom_count,
                    "per_system": group.molecule_count / C.avogadro_per_mol,
                }[basis]
                row.classical = md * per_molecule_to_basis
                row.quantum = row.classical + row.correction
                row.quantum_se = row.correction_se
                row.classical_source = "md_value"
                notes.append("quantum = MD value + correction; its standard error excludes the MD value's own")
            elif prop.log_singular and check.diffusing:
                notes.append(
                    f"absolute harmonic {prop.name} refused: diffusing group ({check.describe()}); "
                    "use 'qcorr liquid' (2PT) for absolute values; the correction is valid"
                )
            else:
                row.classical, row.quantum = conv(cl), conv(qu)
                row.classical_se, row.quantum_se = conv(se["classical"]), conv(se["quantum"])
                row.classical_source = "harmonic_model"
                if md is not None:
                    notes.append("MD value not used: it belongs to the spectrum's temperature")
                if check.diffusing:
                    notes.append(
                        "harmonic-model value of a diffusing group; prefer --md-value plus the correction"
                    )
            if np.isnan(se["correction"]):
                notes.append("one segment: no standard error")
            row.note = "; ".join(notes)
            rows.append(row)
    return rows


def msd_rows(
    group: GroupSpectrum, *, system: str, temperature_K: float, k_eff: float, check: ZeroFrequencyCheck,
    spectrum_temperature_K: float,
) -> list[TableRow]:
    """The mean-square-displacement rows of one group (Å², and the quantum/classical ratio).

    Refused (empty cells with a note) for a diffusing group.  Arguments as for
    :func:`property_rows`.
    """
    base = {"system": system, "group": group.name, "method": "harmonic",
            "temperature_K": temperature_K, "basis": "atom_mean"}
    if check.diffusing:
        note = (f"refused: diffusing group ({check.describe()}); the harmonic mean-square "
                "displacement needs bound motion")
        return [
            TableRow(property="mean_square_displacement", unit=units.AREA, note=note, **base),
            TableRow(property="mean_square_displacement_ratio", unit=units.DIMENSIONLESS, note=note, **base),
        ]
    x = group.wavenumber_cm
    q, c = mean_square_displacement(x, group.vdos, temperature_K, group.group_mass_g_mol)
    segments = normalised_segments(x, group.vdos_segments, float(np.trapezoid(group.vdos, x)))
    q_s, c_s = mean_square_displacement(x, segments, temperature_K, group.group_mass_g_mol)
    q, c = float(q), float(c)
    if not (math.isfinite(c) and c > 0 and math.isfinite(q)):
        raise PhysicsError(
            f"--temperatures {temperature_K:g}: the mean-square displacement of group '{group.name}' is "
            f"not representable in double precision at this temperature (classical {c:g}, quantum "
            f"{q:g} A^2); give temperatures nearer the spectrum's {spectrum_temperature_K:g} K"
        )
    note = "mass-weighted mean over the group's atoms of <|u|^2> (= 3 <u_x^2>)"
    ratio_note = "quantum / classical mean-square displacement"
    if not math.isclose(temperature_K, spectrum_temperature_K, rel_tol=1e-12):
        scan = f"; harmonic extrapolation of the spectrum measured at {spectrum_temperature_K:g} K"
        note += scan
        ratio_note += scan
    if math.isnan(float(segment_standard_error(q_s, k_eff))):
        note += "; one segment: no standard error"
        ratio_note += "; one segment: no standard error"
    return [
        TableRow(
            property="mean_square_displacement", unit=units.AREA, classical=c, quantum=q,
            correction=q - c, classical_se=float(segment_standard_error(c_s, k_eff)),
            quantum_se=float(segment_standard_error(q_s, k_eff)),
            correction_se=float(segment_standard_error(q_s - c_s, k_eff)),
            classical_source="harmonic_model", note=note, **base,
        ),
        TableRow(
            property="mean_square_displacement_ratio", unit=units.DIMENSIONLESS, classical=1.0, quantum=q / c,
            correction=q / c - 1.0, classical_se=0.0,
            quantum_se=float(segment_standard_error(q_s / c_s, k_eff)),
            correction_se=float(segment_standard_error(q_s / c_s, k_eff)),
            classical_source="harmonic_model", note=ratio_note,
            **base,
        ),
    ]


def frozen_bond_rows(
    group: GroupSpectrum, wavenumbers: list[float], *, system: str, temperature_K: float,
    properties: list[HarmonicProperty],
) -> list[TableRow]:
    """Rows of the frozen-bond add-on (method ``frozen_bond_addon``): one quantum harmonic mode
    per given wavenumber (cm^-1) per molecule; classical part 0 (constrained in the MD)."""
    rows = []
    listed = ",".join(f"{w:g}" for w in wavenumbers)
    for prop in properties:
        _, qu, co = frozen_bond_integrals(wavenumbers, temperature_K, prop)
        total_q = qu * group.molecule_count  # whole group, in k or kT units
        total_c = co * group.molecule_count
        for basis in BASES:
            rows.append(
                TableRow(
                    system=system, group=group.name, method="frozen_bond_addon", property=prop.name,
                    temperature_K=temperature_K, basis=basis, unit=unit_of(prop, basis),
                    classical=0.0,
                    quantum=float(to_physical(total_q, prop, temperature_K, basis,
                                              group.molecule_count, group.atom_count)),
                    correction=float(to_physical(total_c, prop, temperature_K, basis,
                                                 group.molecule_count, group.atom_count)),
                    classical_source="constrained_in_md",
                    note=(f"harmonic modes at the user-given wavenumbers {listed} cm-1 per molecule "
                          "(constrained in the MD, absent from the spectrum); add to the group's "
                          "harmonic rows; exact given the wavenumbers, no standard error"),
                )
            )
    return rows
