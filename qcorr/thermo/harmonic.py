"""The harmonic property table of a spectrum: corrections, ZPE, absolute values, MSD, errors.

Given the vibrational density of states S(nu~) of an atom group (per unit
wavenumber, integral = degrees of freedom; the spectrum-file contract in
``DEVELOPERS.md``), every property X of :mod:`qcorr.thermo.weights` is

    X = m * integral_0^inf S(nu~) W_X(u) dnu~,   u = h c nu~ / (k T),

with m = k for heat capacity and entropy and m = kT for energies
(Berens, Mackay, White, Wilson [1]_).  The quantum correction
dX = m * integral S (W^q - W^c) dnu~ is added to a classical MD value,
X_q = X_MD + dX, when the user supplies X_MD; the absolute harmonic values
(classical and quantum) describe a solid, where S(0) = 0.

Assumptions and cautions
------------------------
* Harmonic approximation: each spectral component is an independent harmonic
  mode at its (anharmonic, classical-MD) frequency.  Anharmonic, diffusive or
  tunnelling motion is not treated correctly; the corrections are first order.
* A diffusing group (S(0) clearly > 0,
  :func:`qcorr.thermo.spectrum_groups.zero_frequency_check`) is not a
  set of oscillators: its absolute harmonic entropy and free energy, and its
  mean-square displacement, are refused (use ``qcorr liquid``, the 2PT method);
  the corrections stay finite and are reported.
* The spectrum is measured at one temperature.  Evaluating it at other
  temperatures (a temperature scan) assumes the spectrum does not change with
  temperature, i.e. purely harmonic behaviour.
* Thermostats that act locally (Langevin, Andersen) change the spectrum;
  constrained bonds are absent from it (see
  :func:`qcorr.thermo.spectrum_integrals.frozen_bond_integrals`).
* These results support, not replace, validated practice.

Layout of the table: ``DEVELOPERS.md`` ("The property table").  The integrals are in
:mod:`qcorr.thermo.spectrum_integrals`, the standard errors in
:mod:`qcorr.thermo.segment_statistics`, the checks of each group in
:mod:`qcorr.thermo.spectrum_groups`.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79,
   2375 (1983). doi:10.1063/1.446044
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np
import xarray as xr

from qcorr import constants as C
from qcorr.errors import ConfigError
from qcorr.outputs.table import BASES, TableRow
from qcorr.thermo.segment_statistics import (
    normalised_segments,
    segment_effective_count,
    segment_standard_error,
)
from qcorr.thermo.spectrum_groups import (
    DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    GroupSpectrum,
    ZeroFrequencyCheck,
    check_nonnegative,
    spectrum_diagnostic_cautions,
    spectrum_groups,
    spectrum_temperature,
    zero_frequency_check,
)
from qcorr.thermo.spectrum_integrals import (
    frozen_bond_integrals,
    mean_square_displacement,
    mode_integrals,
    to_physical,
    unit_of,
)
from qcorr.thermo.weights import PROPERTIES, HarmonicProperty, get_property


def _group_rows(
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


def _msd_rows(
    group: GroupSpectrum, *, system: str, temperature_K: float, k_eff: float, check: ZeroFrequencyCheck,
    spectrum_temperature_K: float,
) -> list[TableRow]:
    base = {"system": system, "group": group.name, "method": "harmonic",
            "temperature_K": temperature_K, "basis": "atom_mean"}
    if check.diffusing:
        note = (f"refused: diffusing group ({check.describe()}); the harmonic mean-square "
                "displacement needs bound motion")
        return [
            TableRow(property="mean_square_displacement", unit="angstrom^2", note=note, **base),
            TableRow(property="mean_square_displacement_ratio", unit="1", note=note, **base),
        ]
    x = group.wavenumber_cm
    q, c = mean_square_displacement(x, group.vdos, temperature_K, group.group_mass_g_mol)
    segments = normalised_segments(x, group.vdos_segments, float(np.trapezoid(group.vdos, x)))
    q_s, c_s = mean_square_displacement(x, segments, temperature_K, group.group_mass_g_mol)
    q, c = float(q), float(c)
    note = "mass-weighted mean over the group's atoms of <|u|^2> (= 3 <u_x^2>)"
    ratio_note = "quantum / classical mean-square displacement"
    if not math.isclose(temperature_K, spectrum_temperature_K, rel_tol=1e-12):
        scan = f"; harmonic extrapolation of the spectrum measured at {spectrum_temperature_K:g} K"
        note += scan
        ratio_note += scan
    return [
        TableRow(
            property="mean_square_displacement", unit="angstrom^2", classical=c, quantum=q,
            correction=q - c, classical_se=float(segment_standard_error(c_s, k_eff)),
            quantum_se=float(segment_standard_error(q_s, k_eff)),
            correction_se=float(segment_standard_error(q_s - c_s, k_eff)),
            classical_source="harmonic_model", note=note, **base,
        ),
        TableRow(
            property="mean_square_displacement_ratio", unit="1", classical=1.0, quantum=q / c,
            correction=q / c - 1.0, classical_se=0.0,
            quantum_se=float(segment_standard_error(q_s / c_s, k_eff)),
            correction_se=float(segment_standard_error(q_s / c_s, k_eff)),
            classical_source="harmonic_model", note=ratio_note,
            **base,
        ),
    ]


def _frozen_rows(
    group: GroupSpectrum, wavenumbers: list[float], *, system: str, temperature_K: float,
    properties: list[HarmonicProperty],
) -> list[TableRow]:
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


@dataclass
class PropertyResult:
    """Rows, cautions and per-group diagnostics of :func:`harmonic_properties`."""

    rows: list[TableRow]
    cautions: list[str]
    groups: dict[str, dict]


def harmonic_properties(
    ds: xr.Dataset,
    *,
    system: str,
    path: str | os.PathLike[str] = "<in memory>",
    temperatures_K: list[float] | None = None,
    properties: list[str] | None = None,
    md_values: dict[tuple[str, str], float] | None = None,
    frozen_bond_wavenumbers: dict[str, list[float]] | None = None,
    zero_frequency_threshold: float = DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    include_msd: bool = True,
) -> PropertyResult:
    """All harmonic properties of every group of a spectrum Dataset, as table rows.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum following the contract (``qcorr.spectra.spectrum_file.read_spectrum``).
    system : str
        System identifier for the ``system`` column.
    path : str or path-like
        File name, for messages.
    temperatures_K : list of float, optional
        Temperatures, K (> 0); default: the spectrum's ``temperature_K``.  Other
        temperatures are harmonic extrapolations (noted in each row).
    properties : list of str, optional
        Property names (:data:`qcorr.thermo.weights.PROPERTIES`); default all.
    md_values : dict, optional
        ``{(group, property): value}``, the classical MD value per mole of
        molecules in the table's molar unit (J/(mol K) or kJ/mol), at the
        spectrum's temperature.
    frozen_bond_wavenumbers : dict, optional
        ``{group: [wavenumber cm^-1, ...]}`` per molecule.
    zero_frequency_threshold : float
        See :func:`zero_frequency_check`.
    include_msd : bool
        Add mean-square-displacement rows.

    Returns
    -------
    PropertyResult

    Raises
    ------
    ConfigError
        Unknown property or group, temperature <= 0, bad wavenumber.
    SpectrumFileError
        Bad spectrum content (negative density beyond noise, bad counts, bad grid).
    """
    t0 = spectrum_temperature(ds, path)
    temps = [t0] if not temperatures_K else [float(t) for t in temperatures_K]
    for t in temps:
        if not (math.isfinite(t) and t > 0):
            raise ConfigError(f"--temperatures: {t:g} K is not a positive temperature; give values > 0 K")
    props = [get_property(n, "--properties") for n in (properties or list(PROPERTIES))]
    md_values = dict(md_values or {})
    frozen = dict(frozen_bond_wavenumbers or {})
    if not (math.isfinite(zero_frequency_threshold) and zero_frequency_threshold > 0):
        raise ConfigError(
            f"--zero-frequency-threshold: {zero_frequency_threshold} must be a positive fraction"
        )
    groups = spectrum_groups(ds, path)
    names = [g.name for g in groups]
    for (gname, pname), value in md_values.items():
        if gname not in names:
            raise ConfigError(f"--md-value: no group '{gname}' in spectrum file '{path}'; groups: {', '.join(names)}")
        get_property(pname, "--md-value")
        if not math.isfinite(value):
            raise ConfigError(f"--md-value {gname}:{pname}: value {value} is not a finite number")
    for gname, wns in frozen.items():
        if gname not in names:
            raise ConfigError(
                f"--frozen-bond-wavenumbers: no group '{gname}' in spectrum file '{path}'; groups: {', '.join(names)}"
            )
        if not wns or not all(math.isfinite(w) and w > 0 for w in wns):
            raise ConfigError(
                f"--frozen-bond-wavenumbers {gname}: wavenumbers must be positive numbers in cm-1"
            )
    k_eff = segment_effective_count(ds)
    rows: list[TableRow] = []
    cautions: list[str] = []
    info: dict[str, dict] = {}
    if k_eff < 2 and int(ds.sizes.get("segment", 0)) < 2:
        cautions.append("The spectrum has fewer than two segments: no standard errors.")
    cautions += spectrum_diagnostic_cautions(ds)
    for g in groups:
        where = f"spectrum file '{os.fspath(path)}', group '{g.name}'"
        bin_se = segment_standard_error(g.vdos_segments, k_eff)
        check_nonnegative(g.wavenumber_cm, g.vdos, bin_se, where)
        check = zero_frequency_check(
            g.wavenumber_cm, g.vdos, float(bin_se[0]) if bin_se.size else float("nan"),
            zero_frequency_threshold,
        )
        info[g.name] = {
            "diffusing": check.diffusing,
            "zero_frequency_density_cm": check.zero_frequency_density,
            "zero_frequency_se_cm": check.zero_frequency_se,
            "mean_wavenumber_cm": check.mean_wavenumber,
            "zero_frequency_ratio": check.ratio,
            "zero_frequency_threshold": check.threshold,
            "degrees_of_freedom": g.degrees_of_freedom,
            "molecule_count": g.molecule_count,
            "atom_count": g.atom_count,
            "effective_segment_count": k_eff,
        }
        if check.diffusing:
            cautions.append(
                f"Group '{g.name}' diffuses ({check.describe()}): absolute harmonic entropy, free "
                "energy and mean-square displacement are refused; use 'qcorr liquid' (2PT). The "
                "corrections are reported."
            )
        integral = float(np.trapezoid(g.vdos, g.wavenumber_cm))
        if abs(integral - g.degrees_of_freedom) > 1e-3 * g.degrees_of_freedom:
            cautions.append(
                f"Group '{g.name}': the spectrum integrates to {integral:.6g}, not to its "
                f"{g.degrees_of_freedom:g} degrees of freedom; values follow the spectrum as stored."
            )
        if math.isfinite(g.kinetic_temperature_K) and abs(g.kinetic_temperature_K - t0) > 0.02 * t0:
            cautions.append(
                f"Group '{g.name}': kinetic temperature {g.kinetic_temperature_K:.4g} K differs from "
                f"the stated {t0:g} K by more than 2 %; check the degrees of freedom and equilibration."
            )
        for t in temps:
            rows += _group_rows(
                g, system=system, temperature_K=t, spectrum_temperature_K=t0, properties=props,
                md_values=md_values, k_eff=k_eff, check=check,
            )
            if include_msd:
                rows += _msd_rows(g, system=system, temperature_K=t, k_eff=k_eff, check=check,
                                  spectrum_temperature_K=t0)
            if g.name in frozen:
                rows += _frozen_rows(g, frozen[g.name], system=system, temperature_K=t, properties=props)
    if any(not math.isclose(t, t0, rel_tol=1e-12) for t in temps):
        cautions.append(
            f"Temperature scan: the spectrum was measured at {t0:g} K; values at other temperatures "
            "assume it does not change with temperature (harmonic assumption)."
        )
    return PropertyResult(rows=rows, cautions=cautions, groups=info)
