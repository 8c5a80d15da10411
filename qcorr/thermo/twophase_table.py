"""Two-phase (2PT) thermodynamics of every suitable group of a spectrum, as a property table.

What ``qcorr liquid`` computes (Lin, Blanco, Goddard [1]_; Lin, Maiti, Goddard [2]_):
each group of identical molecules has its translational and rotational density of
states split into a hard-sphere gas part and a solid-like part; the solid-like parts
and the intramolecular vibrations get harmonic weights.  :func:`two_phase_properties`
gives the table (``DEVELOPERS.md``, "The property table"), :func:`two_phase_split_spectra`
the gas-like and solid-like spectra.  The physics of one molecule type is in
:mod:`qcorr.thermo.twophase`; the inputs of a group in :mod:`qcorr.thermo.twophase_inputs`;
its rows in :mod:`qcorr.thermo.twophase_rows`.

Standard errors come from evaluating 2PT on every segment's spectra (fluidicity solved
per segment), rescaled to the averaged spectrum's normalisation, with Welch's effective
segment count (:mod:`qcorr.thermo.segment_statistics`).

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003).
   doi:10.1063/1.1624057
.. [2] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191 (2010).
   doi:10.1021/jp103120q
.. [3] I.-C. Yeh, G. Hummer, J. Phys. Chem. B 108, 15873 (2004).
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Mapping, Sequence
from types import SimpleNamespace

import numpy as np
import pandas as pd
import xarray as xr

from qcorr.constants import avogadro_per_mol as AVOGADRO
from qcorr.errors import QcorrWarning
from qcorr.outputs.table import rows_to_frame
from qcorr.thermo.segment_statistics import segment_effective_count
from qcorr.thermo.spectrum_groups import spectrum_source, system_name
from qcorr.thermo.twophase_checks import result_checks
from qcorr.thermo.twophase_evaluation import DIFFUSION_SOURCES, checked_options, evaluate
from qcorr.thermo.twophase_rows import (
    frozen_bond_addon_rows,
    mixing_entropy_row,
    model_checks,
    temperature_scan_rows,
    two_phase_rows,
)

__all__ = [
    "CHOICES_OFFERED",
    "COMPONENTS",
    "DIFFUSION_SOURCES",
    "TWO_PHASE_CAUTIONS",
    "diffusion_summary",
    "two_phase_properties",
    "two_phase_split_spectra",
]

#: cautions written with every 2PT table
TWO_PHASE_CAUTIONS = (
    (
        "Two-phase model: the gas-like part is a hard-sphere gas with an exponential velocity "
        "autocorrelation (Enskog) and the solid-like part a set of harmonic oscillators; the "
        "hard-sphere tail is unphysical at high frequency and the heat capacity lacks the "
        "anharmonic (configurational) part (Madarasz et al. 2021)."
    ),
    (
        "Published-form choices (hard-sphere entropy with ln z, rotational fluidicity) implement Lin et al. "
        "(2003, 2010) as summarised in the project's method notes; the printed equations could not be "
        "re-read for this release, so no equation number is cited; the defaults are validated against "
        "thermodynamic integration instead. The default gas volume V/N is empirical: the "
        "variant closest to thermodynamic integration on Lennard-Jones liquids (docs/liquids.md). "
        "The alternatives are options and are listed in this sidecar."
    ),
    (
        "The classical column uses classical harmonic weights on the solid-like part (compare with "
        "classical references such as a Lennard-Jones equation of state); the quantum column uses "
        "quantum weights. Energy and free energy are absolute only with --md-energy."
    ),
    (
        "Standard errors come from the per-segment spectra (fluidicity solved per segment, with each "
        "segment's own VACF integral or S(0)); with the MSD the zero-frequency value is held fixed and "
        "its error is not included."
    ),
)

#: the model choices offered, as recorded in the sidecar
CHOICES_OFFERED = {
    "hard_sphere_entropy": {"published": "with ln z(y) (default)",
                            "constant-volume": "Carnahan-Starling at fixed N, V, T, no ln z"},
    "gas_volume": {"all-particles": "V/N (default; closest to thermodynamic integration on LJ liquids)",
                   "gas-particles": "V/(fN), consistent with the gas packing fraction"},
    "rotational_fluidicity": {"from-rotation": "Delta from the rotational S(0) (default)",
                              "same-as-translation": "f_rot = f_trans"},
}

#: components of the split spectra, in order
COMPONENTS = ("translation", "rotation", "vibration")


def two_phase_properties(
    ds: xr.Dataset,
    *,
    system: str | None = None,
    groups: Sequence[str] | None = None,
    symmetry_number: int | None = None,
    group_symmetry_numbers: Mapping[str, int] | None = None,
    rotational_fluidicity: str = "from-rotation",
    hard_sphere_entropy: str = "published",
    gas_volume: str = "all-particles",
    diffusion_from: str = "auto",
    viscosity_Pa_s: float | None = None,
    vibration_spectrum: str = "residual",
    volume_A3: float | None = None,
    md_energies_kJ_per_mol: Mapping[str, float] | None = None,
    mixtures: Mapping[str, Sequence[str]] | None = None,
    temperatures_K: Sequence[float] | None = None,
    frozen_bond_wavenumbers_cm: Mapping[str, Sequence[float]] | None = None,
    pressure_bar: float | None = None,
    source: str | os.PathLike[str] | None = None,
) -> pd.DataFrame:
    """Absolute entropy, heat capacity, zero-point energy, energy and free energy of liquids by 2PT.

    Per group of identical molecules, per mole of molecules at the spectrum's
    temperature, with standard errors from the per-segment spectra [1]_ [2]_.  Needs a
    spectrum from ``qcorr spectrum --molecular`` (or, for one-atom molecules, any
    spectrum) and a volume.  Cautions on the result (fluidicity near 0 or 1, a negative
    solid-like spectrum, skipped groups, an assumed symmetry number) are also issued as
    :class:`qcorr.errors.QcorrWarning`.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum Dataset following the spectrum-file contract (``DEVELOPERS.md``).
    system : str, optional
        Value of the ``system`` column; default the stem of the spectrum's file name
        (``"spectrum"`` for a Dataset made in memory).
    groups : sequence of str, optional
        Groups to evaluate; each must hold whole identical molecules.  Default: every
        group that does (the others are skipped, with a caution).
    symmetry_number : int, optional
        Rotational symmetry number (count; 2 for water) of every group; 1 is assumed,
        with a caution, for a rotating group without one.
    group_symmetry_numbers : mapping of str to int, optional
        Symmetry numbers of single groups (override *symmetry_number*).
    rotational_fluidicity : {"from-rotation", "same-as-translation"}
        Rotational fluidicity from the rotational S(0) (published form) or equal to the
        translational one.
    hard_sphere_entropy : {"published", "constant-volume"}
        Hard-sphere entropy with ln z(y) (published form) or the Carnahan–Starling
        entropy at fixed N, V, T.
    gas_volume : {"all-particles", "gas-particles"}
        Volume per gas particle: V/N (default, the variant closest to thermodynamic
        integration on the Lennard-Jones references of ``docs/liquids.md``) or V/(fN).
    diffusion_from : {"auto", "vacf-integral", "msd", "spectrum"}
        Translational zero-frequency value: the Green–Kubo integral of the VACF over one
        segment (one-atom molecules), the Einstein MSD slope, or S(0) of the tapered
        spectrum (biased high where the spectrum rises steeply; ``methods.md`` §8.3).
        ``auto`` takes the VACF integral when the file has the molecules' VACF, else the
        MSD, else S(0) with a caution.  All are reported in ``attrs["groups"]``.
    viscosity_Pa_s : float, optional
        Shear viscosity in Pa s: adds the Yeh–Hummer correction 2.837297 kT/(6 π η L)
        (cubic box, L = volume^(1/3)) to the self-diffusion coefficient [3]_.
    vibration_spectrum : {"residual", "difference"}
        Intramolecular vibration from the residual-velocity spectrum or the difference
        spectrum (vdos − translation − rotation).
    volume_A3 : float, optional
        System volume in Å³; default the spectrum's ``mean_box_volume_A3``.
    md_energies_kJ_per_mol : mapping of str to float, optional
        Mean total (kinetic + potential) MD energy per mole of molecules of a group (or of
        a mixture, per mole of all its molecules), kJ/mol; makes its energy and free energy
        absolute.
    mixtures : mapping of str to sequence of str, optional
        Mixtures: name → its component groups (each of one kind of molecule, together the
        whole liquid).  Each component is evaluated at the total density and the mixture's
        rows (``group`` = its name, per mole of all its molecules) add the ideal mixing
        entropy (:mod:`qcorr.thermo.twophase_mixture`; our rule, validated against
        thermodynamic integration in ``docs/liquids.md``).  A group of that name, if any,
        must hold exactly the components' atoms and is replaced by the mixture.
    temperatures_K : sequence of float, optional
        Temperature scan, K: at each other temperature, rows with only the quantum
        corrections of the solid-like parts (the spectrum and split of the MD temperature).
    frozen_bond_wavenumbers_cm : mapping of str to sequence of float, optional
        Wavenumbers (cm⁻¹) of bonds constrained in the MD, per molecule of a group: rows of
        method ``frozen_bond_addon`` (one quantum harmonic mode each) to add to its rows.
    pressure_bar : float, optional
        Mean MD pressure, bar: with an MD energy, adds enthalpy H = E + pV and Gibbs energy
        G = A + pV (kJ/mol) for a group that holds every atom of ``total``, and for a
        mixture (V: the volume, per molecule).
    source : str or path-like, optional
        The spectrum's file name, for messages, the default *system* and the provenance;
        default the file xarray read *ds* from, if any.

    Returns
    -------
    pandas.DataFrame
        The property table (method ``2pt``, basis ``per_mole_molecules``; J/(mol K) and
        kJ/mol).  ``attrs`` holds what :func:`qcorr.outputs.table.write_table` writes to
        the sidecar: ``method``, ``input_spectrum`` (``{"name": source}``),
        ``options``, ``choices_offered``, ``standard_errors``,
        ``effective_segment_count``, ``groups`` (per group: diffusion coefficients in
        m²/s, fluidicities, ...), ``skipped_groups`` and ``cautions``
        (:data:`TWO_PHASE_CAUTIONS` first).

    Raises
    ------
    ConfigError
        A bad option (messages name the ``qcorr liquid`` option it matches).
    PhysicsError
        No volume, no group that 2PT can evaluate, a chosen group that it cannot.
    SpectrumFileError
        Molecular variables missing from the spectrum.

    References
    ----------
    .. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003).
    .. [2] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191 (2010).
    .. [3] I.-C. Yeh, G. Hummer, J. Phys. Chem. B 108, 15873 (2004).
    """
    opts = checked_options(
        groups=groups, symmetry_number=symmetry_number, group_symmetry_numbers=group_symmetry_numbers,
        rotational_fluidicity=rotational_fluidicity, hard_sphere_entropy=hard_sphere_entropy,
        gas_volume=gas_volume, diffusion_from=diffusion_from, viscosity_Pa_s=viscosity_Pa_s,
        vibration_spectrum=vibration_spectrum, volume_A3=volume_A3,
        md_energies_kJ_per_mol=md_energies_kJ_per_mol, mixtures=mixtures, temperatures_K=temperatures_K,
        frozen_bond_wavenumbers_cm=frozen_bond_wavenumbers_cm, pressure_bar=pressure_bar)
    name = spectrum_source(ds, source)
    system = system_name(system, name)
    evaluations, mixtures_done, skipped, temperature, volume = evaluate(ds, name, opts, with_segments=True)
    k_eff = segment_effective_count(ds)
    wavenumber = ds["wavenumber"].values
    names = [str(g) for g in ds["group"].values]
    scan = [t for t in opts.temperatures_K if not np.isclose(t, temperature, rtol=1e-12)]
    rows, notes = [], []
    atoms = {g: int(ds["atom_count"].values[i]) for i, g in enumerate(names)}

    def pv(molecules: float, whole: bool) -> float | None:
        """pV per mole of molecules (kJ/mol), only for a group or mixture that is the whole system."""
        if opts.pressure_bar is None or not whole:
            return None
        return opts.pressure_bar * 1e5 * volume * 1e-30 / molecules * AVOGADRO * 1e-3

    for gname, ev in evaluations.items():
        t_group = float(ds["kinetic_temperature"].values[names.index(gname)])
        checks, ev.info["checks"] = result_checks(ev.gin, ev.result, ev.segment_results, k_eff, wavenumber,
                                                  t_group if t_group > 0 else temperature)
        notes += ev.notes + model_checks(ev.gin, ev.result, ev.segment_results, k_eff, wavenumber) + checks
        whole = ev.mixture is None and atoms[gname] == atoms.get("total", -1)
        rows += two_phase_rows(system, ev.gin, ev.result, ev.segment_results, k_eff, temperature,
                               opts.md_energies_kJ_per_mol.get(gname), ev.note,
                               pv(ev.gin.molecule_count, whole))
        for t in scan:
            rows += temperature_scan_rows(system, gname, ev.gin.molecule_count, ev.result, ev.segment_results,
                                          k_eff, wavenumber, t, temperature)
        if gname in opts.frozen_bond_wavenumbers_cm:
            atoms = float(ds["atom_count"].values[names.index(gname)])
            for t in [temperature, *scan]:
                rows += frozen_bond_addon_rows(system, gname, ev.gin.molecule_count, atoms,
                                               opts.frozen_bond_wavenumbers_cm[gname], t)
    for mname, mix in mixtures_done.items():
        rows += two_phase_rows(system, SimpleNamespace(name=mname), mix.result, mix.segment_results, k_eff,
                               temperature, opts.md_energies_kJ_per_mol.get(mname),
                               f"2PT mixture of {', '.join(mix.members)} per mole of all their molecules: "
                               "components at the total density plus the ideal mixing entropy",
                               pv(sum(mix.molecule_counts), True))
        rows.append(mixing_entropy_row(system, mname, mix.info["ideal_mixing_entropy_per_molecule_k"],
                                       temperature, mix.members))
    if scan:
        notes.append(f"Temperature scan: the spectrum was measured at {temperature:g} K; the rows at other "
                     "temperatures hold only the quantum corrections of its solid-like parts (harmonic assumption).")
    notes += [f"group '{gname}' skipped: {why}" for gname, why in skipped.items()]
    frame = rows_to_frame(rows)
    frame.attrs = {
        "method": "two-phase thermodynamics (Lin, Blanco, Goddard, J. Chem. Phys. 119, 11792 (2003); "
                  "Lin, Maiti, Goddard, J. Phys. Chem. B 114, 8191 (2010))",
        "input_spectrum": {"name": name},
        "options": {
            "system": system,
            "groups": opts.groups,
            "symmetry_number": {"default": opts.symmetry_number, "per_group": opts.group_symmetry_numbers},
            "rotational_fluidicity": opts.rotational_fluidicity,
            "hard_sphere_entropy": opts.hard_sphere_entropy,
            "gas_volume": opts.gas_volume,
            "diffusion_from": opts.diffusion_from,
            "viscosity_Pa_s": opts.viscosity_Pa_s,
            "vibration_spectrum": opts.vibration_spectrum,
            "volume_A3": volume,
            "md_energy_kJ_per_mol": opts.md_energies_kJ_per_mol,
            "mixtures": opts.mixtures,
            "temperatures_K": opts.temperatures_K,
            "frozen_bond_wavenumbers_cm": opts.frozen_bond_wavenumbers_cm,
            "pressure_bar": opts.pressure_bar,
        },
        "choices_offered": CHOICES_OFFERED,
        "standard_errors": "per-segment spectra; s / sqrt(K_eff), Welch (1967) effective segment count",
        "effective_segment_count": k_eff,
        "groups": {gname: ev.info for gname, ev in evaluations.items()},
        "mixtures": {mname: mix.info for mname, mix in mixtures_done.items()},
        "skipped_groups": skipped,
        "cautions": list(TWO_PHASE_CAUTIONS) + notes,
    }
    for note in notes:
        warnings.warn(note, QcorrWarning, stacklevel=2)
    return frame


def two_phase_split_spectra(
    ds: xr.Dataset,
    *,
    groups: Sequence[str] | None = None,
    symmetry_number: int | None = None,
    group_symmetry_numbers: Mapping[str, int] | None = None,
    rotational_fluidicity: str = "from-rotation",
    hard_sphere_entropy: str = "published",
    gas_volume: str = "all-particles",
    diffusion_from: str = "auto",
    viscosity_Pa_s: float | None = None,
    vibration_spectrum: str = "residual",
    volume_A3: float | None = None,
    mixtures: Mapping[str, Sequence[str]] | None = None,
    source: str | os.PathLike[str] | None = None,
) -> xr.Dataset:
    """The gas-like and solid-like spectra of every component of every 2PT group.

    Same groups, options and errors as :func:`two_phase_properties` (without the table's
    *system* and MD energies, which do not change the split); no warnings are issued.

    Returns
    -------
    xarray.Dataset
        ``vdos_gas`` and ``vdos_solid`` (dims ``group``, ``component``, ``wavenumber``;
        cm, i.e. per cm^-1, for all molecules of the group): the hard-sphere gas part and
        the spectrum minus it (the whole vibration spectrum is solid-like, its gas part
        0); NaN for a component the group lacks.  Coordinates ``group``, ``component``
        (``translation``, ``rotation``, ``vibration``) and ``wavenumber`` (cm^-1);
        attribute ``qcorr_file_kind = "two_phase_split"``.
    """
    opts = checked_options(
        groups=groups, symmetry_number=symmetry_number, group_symmetry_numbers=group_symmetry_numbers,
        rotational_fluidicity=rotational_fluidicity, hard_sphere_entropy=hard_sphere_entropy,
        gas_volume=gas_volume, diffusion_from=diffusion_from, viscosity_Pa_s=viscosity_Pa_s,
        vibration_spectrum=vibration_spectrum, volume_A3=volume_A3, mixtures=mixtures)
    evaluations = evaluate(ds, spectrum_source(ds, source), opts, with_segments=False)[0]
    wavenumber = ds["wavenumber"].values
    names = list(evaluations)
    gas = np.full((len(names), len(COMPONENTS), wavenumber.size), np.nan)
    solid = np.full_like(gas, np.nan)
    for i, gname in enumerate(names):
        for j, comp in enumerate(COMPONENTS):
            if comp in evaluations[gname].result.components:
                gas[i, j] = evaluations[gname].result.components[comp].gas_dos
                solid[i, j] = evaluations[gname].result.components[comp].solid_dos
    return xr.Dataset(
        {
            "vdos_gas": (("group", "component", "wavenumber"), gas,
                         {"units": "cm", "long_name": "hard-sphere gas-like density of states (2PT)"}),
            "vdos_solid": (("group", "component", "wavenumber"), solid,
                           {"units": "cm", "long_name": "solid-like density of states (2PT): spectrum minus gas part"}),
        },
        coords={"group": ("group", np.array(names), {"long_name": "atom group"}),
                "component": ("component", np.array(COMPONENTS), {"long_name": "motion component"}),
                "wavenumber": ("wavenumber", wavenumber, {"units": "cm-1", "long_name": "wavenumber"})},
        attrs={"Conventions": "CF-1.11", "qcorr_file_kind": "two_phase_split"},
    )


def diffusion_summary(group: str, info: Mapping) -> str:
    """One line on a group's diffusion: D from the VACF integral, the MSD and S(0) (m²/s), which
    one the fluidicity used, and the fluidicities.

    Parameters
    ----------
    group : str
        Group name.
    info : mapping
        The group's entry of ``attrs["groups"]`` of a :func:`two_phase_properties` table.
    """
    d = [float("nan") if info.get(k) is None else info[k]
         for k in ("self_diffusion_from_vacf_integral_m2_per_s", "self_diffusion_from_msd_m2_per_s",
                   "self_diffusion_from_spectrum_m2_per_s")]
    return (f"group '{group}': D from the VACF integral = {d[0]:.4g} m2/s, from MSD = {d[1]:.4g} m2/s, "
            f"from S(0) = {d[2]:.4g} m2/s (used: {info.get('diffusion_source_used', '?')}); "
            + ", ".join(f"{comp} f = {c['fluidicity']:.4g}"
                        for comp, c in info["components"].items() if comp != "vibration"))
