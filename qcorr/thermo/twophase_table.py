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

import math
import os
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import xarray as xr

from qcorr.errors import ConfigError, PhysicsError, QcorrWarning
from qcorr.outputs.table import rows_to_frame
from qcorr.spectra.spectrum_file import group_names
from qcorr.thermo.hard_sphere_gas import (
    GAS_VOLUME_CHOICES,
    HARD_SPHERE_FORMS,
    finite_size_diffusion_correction,
    self_diffusion_from_zero_frequency,
    zero_frequency_from_self_diffusion,
)
from qcorr.thermo.segment_statistics import segment_effective_count
from qcorr.thermo.spectrum_groups import spectrum_source, spectrum_temperature, system_name
from qcorr.thermo.twophase import ROTATIONAL_FLUIDICITY_CHOICES, GroupResult, two_phase_group
from qcorr.thermo.twophase_inputs import (
    VIBRATION_SPECTRA,
    GroupInput,
    check_molecular_variables,
    diffusion_temperature,
    group_input,
    segments_rescaled,
)
from qcorr.thermo.twophase_rows import model_checks, two_phase_rows

#: where the translational zero-frequency value comes from
DIFFUSION_SOURCES = ("spectrum", "msd")

#: cautions written with every 2PT table
TWO_PHASE_CAUTIONS = (
    (
        "Two-phase model: the gas-like part is a hard-sphere gas with an exponential velocity "
        "autocorrelation (Enskog) and the solid-like part a set of harmonic oscillators; the "
        "hard-sphere tail is unphysical at high frequency and the heat capacity lacks the "
        "anharmonic (configurational) part (Madarasz et al. 2021)."
    ),
    (
        "Published-form choices (hard-sphere entropy with ln z, rotational fluidicity) follow the "
        "team's reconstruction of Lin et al. (2003, 2010); the printed equations were not re-read "
        "for this version. The alternatives are options and are listed in this sidecar."
    ),
    (
        "The classical column uses classical harmonic weights on the solid-like part (compare with "
        "classical references such as a Lennard-Jones equation of state); the quantum column uses "
        "quantum weights. Energy and free energy are absolute only with --md-energy."
    ),
    (
        "Standard errors come from the per-segment spectra (fluidicity solved per segment); with "
        "--diffusion-from msd the zero-frequency value is held fixed and its error is not included."
    ),
)

#: the model choices offered, as recorded in the sidecar
CHOICES_OFFERED = {
    "hard_sphere_entropy": {"published": "with ln z(y) (default)",
                            "constant-volume": "Carnahan-Starling at fixed N, V, T, no ln z"},
    "gas_volume": {"gas-particles": "V/(fN) (default)", "all-particles": "V/N"},
    "rotational_fluidicity": {"from-rotation": "Delta from the rotational S(0) (default)",
                              "same-as-translation": "f_rot = f_trans"},
}

#: components of the split spectra, in order
COMPONENTS = ("translation", "rotation", "vibration")


@dataclass(frozen=True)
class _Options:
    """The 2PT options, checked (units in the names)."""

    groups: list[str] | None
    symmetry_number: int | None
    group_symmetry_numbers: dict[str, int]
    rotational_fluidicity: str
    hard_sphere_entropy: str
    gas_volume: str
    diffusion_from: str
    viscosity_Pa_s: float | None
    vibration_spectrum: str
    volume_A3: float | None
    md_energies_kJ_per_mol: dict[str, float]


@dataclass
class _Evaluation:
    """2PT of one group: inputs, results, the sidecar's diagnostics and the cautions."""

    gin: GroupInput
    result: GroupResult
    segment_results: list[GroupResult]
    info: dict
    notes: list[str] = field(default_factory=list)
    note: str = ""


def _json_number(value: float) -> float | None:
    """JSON has no NaN: undefined numbers become null."""
    value = float(value)
    return value if math.isfinite(value) else None


def _checked_options(
    groups, symmetry_number, group_symmetry_numbers, rotational_fluidicity, hard_sphere_entropy,
    gas_volume, diffusion_from, viscosity_Pa_s, vibration_spectrum, volume_A3,
    md_energies_kJ_per_mol,
) -> _Options:
    """Check the options that do not depend on the spectrum (messages name the options)."""
    for keyword, value, allowed in (
        ("rotational_fluidicity", rotational_fluidicity, ROTATIONAL_FLUIDICITY_CHOICES),
        ("hard_sphere_entropy", hard_sphere_entropy, HARD_SPHERE_FORMS),
        ("gas_volume", gas_volume, GAS_VOLUME_CHOICES),
        ("diffusion_from", diffusion_from, DIFFUSION_SOURCES),
        ("vibration_spectrum", vibration_spectrum, VIBRATION_SPECTRA),
    ):
        if value not in allowed:
            raise ConfigError(f"{keyword}={value!r}: choose one of {', '.join(allowed)}")
    per_group = {str(g): n for g, n in (group_symmetry_numbers or {}).items()}
    for label, n in [("", symmetry_number), *((f"{g}=", n) for g, n in per_group.items())]:
        if n is not None and (not isinstance(n, (int, np.integer)) or isinstance(n, bool) or n < 1):
            raise ConfigError(f"--symmetry-number {label}{n}: the symmetry number must be an integer >= 1")
    if viscosity_Pa_s is not None and not (math.isfinite(viscosity_Pa_s) and viscosity_Pa_s > 0):
        raise ConfigError(f"--viscosity {viscosity_Pa_s}: give a positive shear viscosity in Pa s")
    if volume_A3 is not None and not (math.isfinite(volume_A3) and volume_A3 > 0):
        raise ConfigError(f"--volume {volume_A3}: give a positive volume in cubic angstrom")
    energies = {str(g): float(v) for g, v in (md_energies_kJ_per_mol or {}).items()}
    for g, v in energies.items():
        if not math.isfinite(v):
            raise ConfigError(f"--md-energy {g}={v}: expected GROUP=KJ_PER_MOL with a finite number")
    return _Options(
        groups=list(groups) if groups else None,
        symmetry_number=None if symmetry_number is None else int(symmetry_number),
        group_symmetry_numbers={g: int(n) for g, n in per_group.items()},
        rotational_fluidicity=rotational_fluidicity, hard_sphere_entropy=hard_sphere_entropy,
        gas_volume=gas_volume, diffusion_from=diffusion_from,
        viscosity_Pa_s=None if viscosity_Pa_s is None else float(viscosity_Pa_s),
        vibration_spectrum=vibration_spectrum,
        volume_A3=None if volume_A3 is None else float(volume_A3),
        md_energies_kJ_per_mol=energies,
    )


def _evaluate_group(ds: xr.Dataset, g: int, gin: GroupInput, opts: _Options, *, temperature: float,
                    volume: float, with_segments: bool) -> _Evaluation:
    """2PT of one group (and of each of its segments when *with_segments*)."""
    name, notes = gin.name, []
    wavenumber = ds["wavenumber"].values
    sigma = opts.group_symmetry_numbers.get(name, opts.symmetry_number)
    if "rotation" in gin.parts and sigma is None:
        notes.append(f"group '{name}': no --symmetry-number given, 1 assumed (water: 2, NH3: 3, CH4: 12)")
        sigma = 1
    sigma = sigma or 1
    t_kin = diffusion_temperature(ds, g, temperature)
    s0_spectrum = float(gin.parts["translation"][0])
    d_spectrum = self_diffusion_from_zero_frequency(s0_spectrum, gin.molecule_count, t_kin, gin.mass_u)
    if opts.diffusion_from == "msd" and not math.isfinite(gin.msd_diffusion_m2_per_s):
        raise PhysicsError(f"group '{name}': --diffusion-from msd needs the MSD diffusion coefficient, "
                           "which the spectrum file lacks; remake it with 'qcorr spectrum --molecular'")
    d_correction = 0.0
    if opts.viscosity_Pa_s is not None:
        d_correction = finite_size_diffusion_correction(temperature, opts.viscosity_Pa_s,
                                                        volume ** (1.0 / 3.0))

    def s0_of(d_m2_per_s: float) -> float:
        return zero_frequency_from_self_diffusion(d_m2_per_s, gin.molecule_count, t_kin, gin.mass_u)

    n_seg = ds.sizes["segment"]
    gin = segments_rescaled(gin, wavenumber)
    if opts.diffusion_from == "msd":
        s0 = s0_of(gin.msd_diffusion_m2_per_s + d_correction)
        s0_segments = [s0] * n_seg
        d_used = gin.msd_diffusion_m2_per_s + d_correction
    else:
        s0 = s0_spectrum + s0_of(d_correction)
        s0_segments = [float(v[0]) + s0_of(d_correction) for v in gin.part_segments["translation"]]
        d_used = d_spectrum + d_correction
    settings = {"molecule_count": gin.molecule_count, "temperature_K": temperature,
                "mass_u": gin.mass_u, "volume_A3": volume,
                "principal_moments_u_A2": gin.principal_moments, "symmetry_number": sigma,
                "hard_sphere_form": opts.hard_sphere_entropy, "gas_volume": opts.gas_volume,
                "rotational_fluidicity": opts.rotational_fluidicity,
                "rotational_dof_per_molecule": gin.rotational_dof}
    result = two_phase_group(wavenumber, gin.parts, translation_zero_frequency_cm=s0, **settings)
    segment_results = [
        two_phase_group(wavenumber, {k: v[i] for k, v in gin.part_segments.items()},
                        translation_zero_frequency_cm=s0_segments[i], **settings)
        for i in range(n_seg)
    ] if with_segments and n_seg >= 2 else []
    info = {
        "source": gin.source,
        "molecule_count": gin.molecule_count,
        "molecule_mass_u": gin.mass_u,
        "volume_A3": volume,
        "symmetry_number": sigma,
        "self_diffusion_from_spectrum_m2_per_s": _json_number(d_spectrum),
        "self_diffusion_from_msd_m2_per_s": _json_number(gin.msd_diffusion_m2_per_s),
        "finite_size_correction_m2_per_s": _json_number(d_correction),
        "self_diffusion_used_m2_per_s": _json_number(d_used),
        "temperature_for_diffusion_K": t_kin,
        "components": {
            comp: {
                "degrees_of_freedom_per_molecule": _json_number(c.dof_per_molecule),
                "normalized_diffusivity": _json_number(c.normalized_diffusivity),
                "fluidicity": _json_number(c.fluidicity),
                "packing_fraction": _json_number(c.packing_fraction),
                "gas_entropy_per_molecule_k": _json_number(c.gas_entropy),
                "solid_entropy_per_molecule_k": _json_number(c.solid_entropy),
                "solid_dos_minimum_cm_per_molecule": _json_number(c.solid_dos_minimum),
            }
            for comp, c in result.components.items()
        },
    }
    note = (f"2PT per mole of molecules; hard-sphere entropy {opts.hard_sphere_entropy}, gas volume "
            f"{opts.gas_volume}, rotational fluidicity {opts.rotational_fluidicity}, zero-frequency "
            f"value from {opts.diffusion_from}, vibration spectrum {opts.vibration_spectrum}"
            + (f" + Yeh-Hummer correction (viscosity {opts.viscosity_Pa_s:g} Pa s)"
               if opts.viscosity_Pa_s else ""))
    return _Evaluation(gin, result, segment_results, info, notes, note)


def _evaluate(ds: xr.Dataset, source: str, opts: _Options, *, with_segments: bool
              ) -> tuple[dict[str, _Evaluation], dict[str, str], float, float]:
    """2PT of every chosen group: (evaluations, skipped groups with the reason, T in K, V in Å³)."""
    check_molecular_variables(ds, source)
    names = group_names(ds)
    for option, given in (("--symmetry-number", opts.group_symmetry_numbers),
                          ("--md-energy", opts.md_energies_kJ_per_mol)):
        for gname in given:
            if gname not in names:
                raise ConfigError(f"{option}: no group '{gname}' in spectrum file '{source}'; "
                                  f"groups: {', '.join(names)}")
    for gname in opts.groups or []:
        if gname not in names:
            raise ConfigError(f"--groups: no group '{gname}' in spectrum file '{source}'; "
                              f"groups: {', '.join(names)}")
    temperature = spectrum_temperature(ds, source)
    volume = opts.volume_A3 if opts.volume_A3 is not None else float(ds.attrs["mean_box_volume_A3"])
    if not volume > 0:
        raise PhysicsError(f"spectrum file '{source}' has no box volume (mean_box_volume_A3 = "
                           f"{volume}); 2PT needs the volume: pass --volume in cubic angstrom")
    evaluations: dict[str, _Evaluation] = {}
    skipped: dict[str, str] = {}
    for name in opts.groups or names:
        g = names.index(name)
        gin = group_input(ds, g, name, source, opts.vibration_spectrum)
        if isinstance(gin, str):
            if opts.groups:
                raise PhysicsError(f"spectrum file '{source}', group '{name}' {gin}")
            skipped[name] = gin
            continue
        evaluations[name] = _evaluate_group(ds, g, gin, opts, temperature=temperature, volume=volume,
                                            with_segments=with_segments)
    if not evaluations:
        raise PhysicsError(f"spectrum file '{source}': no group can be evaluated by 2PT ("
                           + "; ".join(f"{k}: {v}" for k, v in skipped.items()) + ")")
    return evaluations, skipped, temperature, volume


def two_phase_properties(
    ds: xr.Dataset,
    *,
    system: str | None = None,
    groups: Sequence[str] | None = None,
    symmetry_number: int | None = None,
    group_symmetry_numbers: Mapping[str, int] | None = None,
    rotational_fluidicity: str = "from-rotation",
    hard_sphere_entropy: str = "published",
    gas_volume: str = "gas-particles",
    diffusion_from: str = "spectrum",
    viscosity_Pa_s: float | None = None,
    vibration_spectrum: str = "residual",
    volume_A3: float | None = None,
    md_energies_kJ_per_mol: Mapping[str, float] | None = None,
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
    gas_volume : {"gas-particles", "all-particles"}
        Volume per gas particle: V/(fN) or V/N.
    diffusion_from : {"spectrum", "msd"}
        Translational zero-frequency value from the spectrum S(0) or from the
        mean-square-displacement diffusion coefficient (both are reported).
    viscosity_Pa_s : float, optional
        Shear viscosity in Pa s: adds the Yeh–Hummer correction 2.837297 kT/(6 π η L)
        (cubic box, L = volume^(1/3)) to the self-diffusion coefficient [3]_.
    vibration_spectrum : {"residual", "difference"}
        Intramolecular vibration from the residual-velocity spectrum or the difference
        spectrum (vdos − translation − rotation).
    volume_A3 : float, optional
        System volume in Å³; default the spectrum's ``mean_box_volume_A3``.
    md_energies_kJ_per_mol : mapping of str to float, optional
        Mean total (kinetic + potential) MD energy per mole of molecules of a group,
        kJ/mol; makes its energy and free energy absolute.
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
    opts = _checked_options(groups, symmetry_number, group_symmetry_numbers, rotational_fluidicity,
                            hard_sphere_entropy, gas_volume, diffusion_from, viscosity_Pa_s,
                            vibration_spectrum, volume_A3, md_energies_kJ_per_mol)
    name = spectrum_source(ds, source)
    system = system_name(system, name)
    evaluations, skipped, temperature, volume = _evaluate(ds, name, opts, with_segments=True)
    k_eff = segment_effective_count(ds)
    wavenumber = ds["wavenumber"].values
    rows, notes = [], []
    for gname, ev in evaluations.items():
        notes += ev.notes + model_checks(ev.gin, ev.result, ev.segment_results, k_eff, wavenumber)
        rows += two_phase_rows(system, ev.gin, ev.result, ev.segment_results, k_eff, temperature,
                               opts.md_energies_kJ_per_mol.get(gname), ev.note)
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
        },
        "choices_offered": CHOICES_OFFERED,
        "standard_errors": "per-segment spectra; s / sqrt(K_eff), Welch (1967) effective segment count",
        "effective_segment_count": k_eff,
        "groups": {gname: ev.info for gname, ev in evaluations.items()},
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
    gas_volume: str = "gas-particles",
    diffusion_from: str = "spectrum",
    viscosity_Pa_s: float | None = None,
    vibration_spectrum: str = "residual",
    volume_A3: float | None = None,
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
    opts = _checked_options(groups, symmetry_number, group_symmetry_numbers, rotational_fluidicity,
                            hard_sphere_entropy, gas_volume, diffusion_from, viscosity_Pa_s,
                            vibration_spectrum, volume_A3, None)
    evaluations, _, _, _ = _evaluate(ds, spectrum_source(ds, source), opts, with_segments=False)
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
    """One line on a group's diffusion: D from S(0) and from the MSD (m²/s), and the fluidicities.

    Parameters
    ----------
    group : str
        Group name.
    info : mapping
        The group's entry of ``attrs["groups"]`` of a :func:`two_phase_properties` table.
    """
    d = [float("nan") if v is None else v for v in (info["self_diffusion_from_spectrum_m2_per_s"],
                                                    info["self_diffusion_from_msd_m2_per_s"])]
    return (f"group '{group}': D from S(0) = {d[0]:.4g} m2/s, from MSD = {d[1]:.4g} m2/s; "
            + ", ".join(f"{comp} f = {c['fluidicity']:.4g}"
                        for comp, c in info["components"].items() if comp != "vibration"))
