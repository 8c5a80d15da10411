"""Evaluating two-phase thermodynamics (2PT) on the groups and mixtures of a spectrum Dataset.

:func:`checked_options` checks the options of ``qcorr liquid`` (names as keywords of
:func:`qcorr.thermo.twophase_table.two_phase_properties`); :func:`evaluate` runs the
one-kind 2PT of :mod:`qcorr.thermo.twophase` on every chosen group (and on each of its
segments, for the standard errors) and combines the components of each mixture
(:mod:`qcorr.thermo.twophase_mixture`).  The table rows are made by
:mod:`qcorr.thermo.twophase_rows`, the cautions by :mod:`qcorr.thermo.twophase_checks`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from qcorr.errors import ConfigError, PhysicsError
from qcorr.spectra.spectrum_file import group_names
from qcorr.thermo.diffusion import GreenKuboDiffusion, green_kubo_diffusion
from qcorr.thermo.hard_sphere_gas import (
    GAS_VOLUME_CHOICES,
    HARD_SPHERE_FORMS,
    finite_size_diffusion_correction,
    self_diffusion_from_zero_frequency,
    zero_frequency_from_self_diffusion,
)
from qcorr.thermo.segment_statistics import segment_effective_count
from qcorr.thermo.spectrum_groups import spectrum_temperature
from qcorr.thermo.twophase import ROTATIONAL_FLUIDICITY_CHOICES, GroupResult, two_phase_group
from qcorr.thermo.twophase_inputs import (
    VIBRATION_SPECTRA,
    GroupInput,
    check_molecular_variables,
    diffusion_temperature,
    group_input,
    segments_rescaled,
)
from qcorr.thermo.twophase_mixture import ideal_mixing_entropy, mixture_result

#: where the translational zero-frequency value comes from: the taper-free one available
#: (auto), the Green-Kubo integral of the VACF, the MSD slope, or the spectrum's S(0)
DIFFUSION_SOURCES = ("auto", "vacf-integral", "msd", "spectrum")
#: D from the VACF integral and from the MSD disagree beyond this share (plus 3 standard errors)
DIFFUSION_DISAGREEMENT = 0.05

__all__ = [
    "DIFFUSION_SOURCES",
    "GroupEvaluation",
    "MixtureEvaluation",
    "TwoPhaseOptions",
    "checked_options",
    "evaluate",
    "json_number",
]


@dataclass(frozen=True)
class TwoPhaseOptions:
    """The 2PT options, checked (units in the names; see ``two_phase_properties``)."""

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
    mixtures: dict[str, list[str]] = field(default_factory=dict)
    temperatures_K: list[float] = field(default_factory=list)
    frozen_bond_wavenumbers_cm: dict[str, list[float]] = field(default_factory=dict)
    pressure_bar: float | None = None


@dataclass
class GroupEvaluation:
    """2PT of one group: inputs, results, the sidecar's diagnostics and the cautions.

    Attributes
    ----------
    gin : GroupInput
    result : GroupResult
        Of the averaged spectrum.
    segment_results : list of GroupResult
        Of each segment (empty without segments).
    info : dict
        The sidecar's entry of the group.
    notes : list of str
        Cautions.
    note : str
        The ``note`` cell of its entropy and heat-capacity rows.
    mixture : str or None
        Name of the mixture the group is a component of.
    """

    gin: GroupInput
    result: GroupResult
    segment_results: list[GroupResult]
    info: dict
    notes: list[str] = field(default_factory=list)
    note: str = ""
    mixture: str | None = None


@dataclass
class MixtureEvaluation:
    """2PT of a mixture: per molecule of the mixture (:mod:`qcorr.thermo.twophase_mixture`).

    Attributes
    ----------
    name : str
        Name of the mixture (its rows' ``group``).
    members : list of str
        Its component groups.
    molecule_counts : list of float
        Molecules of each component.
    result : GroupResult
    segment_results : list of GroupResult
    info : dict
        The sidecar's entry.
    """

    name: str
    members: list[str]
    molecule_counts: list[float]
    result: GroupResult
    segment_results: list[GroupResult]
    info: dict


def json_number(value: float) -> float | None:
    """JSON has no NaN: undefined numbers become null."""
    value = float(value)
    return value if math.isfinite(value) else None


def checked_options(
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
    md_energies_kJ_per_mol: Mapping[str, float] | None = None,
    mixtures: Mapping[str, Sequence[str]] | None = None,
    temperatures_K: Sequence[float] | None = None,
    frozen_bond_wavenumbers_cm: Mapping[str, Sequence[float]] | None = None,
    pressure_bar: float | None = None,
) -> TwoPhaseOptions:
    """Check the options that do not depend on the spectrum (messages name the ``qcorr liquid``
    options); the keywords are those of ``two_phase_properties``.

    Raises
    ------
    ConfigError
        A value outside its choices or range.
    """
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
    mixes = {str(name): [str(m) for m in members] for name, members in (mixtures or {}).items()}
    seen: dict[str, str] = {}
    for name, members in mixes.items():
        if len(members) < 2 or len(set(members)) != len(members) or name in members:
            raise ConfigError(f"--mixture {name}={','.join(members)}: give at least two different "
                              "component groups, none named like the mixture")
        for m in members:
            if m in seen:
                raise ConfigError(f"--mixture: group '{m}' is a component of both '{seen[m]}' and '{name}'")
            seen[m] = name
    temps = [float(t) for t in (temperatures_K or [])]
    for t in temps:
        if not (math.isfinite(t) and t > 0):
            raise ConfigError(f"--temperatures: {t:g} K is not a positive temperature; give values > 0 K")
    frozen = {str(g): [float(w) for w in wns] for g, wns in (frozen_bond_wavenumbers_cm or {}).items()}
    for g, wns in frozen.items():
        if not wns or not all(math.isfinite(w) and w > 0 for w in wns):
            raise ConfigError(f"--frozen-bond-wavenumbers {g}: wavenumbers must be positive numbers in cm-1")
    if pressure_bar is not None and not (math.isfinite(pressure_bar) and pressure_bar >= 0):
        raise ConfigError(f"--pressure {pressure_bar}: give the mean MD pressure in bar (>= 0)")
    return TwoPhaseOptions(
        groups=list(groups) if groups else None,
        symmetry_number=None if symmetry_number is None else int(symmetry_number),
        group_symmetry_numbers={g: int(n) for g, n in per_group.items()},
        rotational_fluidicity=rotational_fluidicity, hard_sphere_entropy=hard_sphere_entropy,
        gas_volume=gas_volume, diffusion_from=diffusion_from,
        viscosity_Pa_s=None if viscosity_Pa_s is None else float(viscosity_Pa_s),
        vibration_spectrum=vibration_spectrum,
        volume_A3=None if volume_A3 is None else float(volume_A3),
        md_energies_kJ_per_mol=energies, mixtures=mixes, temperatures_K=temps,
        frozen_bond_wavenumbers_cm=frozen,
        pressure_bar=None if pressure_bar is None else float(pressure_bar),
    )


#: the VACF integral is well conditioned when its relative standard error is below this
WELL_CONDITIONED_RELATIVE_ERROR = 0.10


def well_conditioned(gk: GreenKuboDiffusion) -> bool:
    """True if the Green-Kubo D is positive with a relative standard error below
    :data:`WELL_CONDITIONED_RELATIVE_ERROR` (our limit); ``auto`` then prefers it to the MSD."""
    return gk.value > 0 and math.isfinite(gk.standard_error) and (
        gk.standard_error < WELL_CONDITIONED_RELATIVE_ERROR * gk.value)


def vacf_diffusion(ds: xr.Dataset, g: int, gin: GroupInput, effective_segments: float
                   ) -> GreenKuboDiffusion | None:
    """Green-Kubo D of group *g* from the spectrum file's per-segment VACF (m²/s), or None.

    From the centre-of-mass VACF of ``qcorr spectrum --molecular``
    (``vacf_translation_segments_raw``, Σ M ⟨V(0)·V(t)⟩ in g/mol Å²/ps²) divided by the
    molecules' total mass; for one-atom molecules without it, from the atomic VACF
    (``vacf_segments_raw`` divided by the group's mass), which is the same thing
    (:func:`qcorr.thermo.diffusion.green_kubo_diffusion`).  None when neither is there.
    """
    if "vacf_translation_segments_raw" in ds.variables and gin.source == "molecular decomposition":
        raw = np.asarray(ds["vacf_translation_segments_raw"].values[g], dtype=float)
        mass = gin.molecule_count * gin.mass_u
    elif int(ds["atom_count"].values[g]) == gin.molecule_count and "vacf_segments_raw" in ds.variables:
        raw = np.asarray(ds["vacf_segments_raw"].values[g], dtype=float)
        mass = float(ds["group_mass"].values[g])
    else:
        return None  # molecules of several atoms in an older file: no centre-of-mass VACF
    if not (mass > 0 and raw.shape[-1] >= 8 and np.all(np.isfinite(raw))):
        return None
    return green_kubo_diffusion(ds["lag"].values, raw / mass, effective_segments)


def _evaluate_group(ds: xr.Dataset, g: int, gin: GroupInput, opts: TwoPhaseOptions, *,
                    temperature: float, volume: float, with_segments: bool,
                    density_molecule_count: float | None = None) -> GroupEvaluation:
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
    gk = vacf_diffusion(ds, g, gin, segment_effective_count(ds))
    source = opts.diffusion_from
    has_msd = math.isfinite(gin.msd_diffusion_m2_per_s)
    if source == "auto":
        source = ("vacf-integral" if gk is not None and (well_conditioned(gk) or not has_msd) and gk.value > 0
                  else "msd" if has_msd else "spectrum")
        if source == "spectrum":
            notes.append(f"group '{name}': no taper-free diffusion coefficient in the spectrum file (no VACF of "
                         "the molecules, no MSD); the fluidicity uses S(0) of the tapered spectrum, biased high")
    if source == "msd" and not math.isfinite(gin.msd_diffusion_m2_per_s):
        raise PhysicsError(f"group '{name}': --diffusion-from msd needs the MSD diffusion coefficient, "
                           "which the spectrum file lacks; remake it with 'qcorr spectrum --molecular'")
    if source == "vacf-integral" and gk is None:
        raise PhysicsError(f"group '{name}': --diffusion-from vacf-integral needs the VACF of the molecules' "
                           "centres of mass, which this spectrum file lacks; remake it with this qcorr's "
                           "'qcorr spectrum --molecular' or use --diffusion-from msd")
    if source == "vacf-integral" and not gk.value > 0:
        raise PhysicsError(f"group '{name}': the VACF integral over one segment ({gk.window_ps:g} ps) gives "
                           f"D = {gk.value:.3g} m2/s, not positive; use longer segments (--segment-ps) or "
                           "--diffusion-from msd")
    d_correction = 0.0
    if opts.viscosity_Pa_s is not None:
        d_correction = finite_size_diffusion_correction(temperature, opts.viscosity_Pa_s,
                                                        volume ** (1.0 / 3.0))

    def s0_of(d_m2_per_s: float) -> float:
        return zero_frequency_from_self_diffusion(d_m2_per_s, gin.molecule_count, t_kin, gin.mass_u)

    n_seg = ds.sizes["segment"]
    gin = segments_rescaled(gin, wavenumber)
    if source == "msd":
        d_used = gin.msd_diffusion_m2_per_s + d_correction
        if d_used < 0:  # a slope of a non-diffusing group's MSD that scatters below zero
            notes.append(f"group '{name}': D from the MSD is {d_used:.3g} m2/s, below zero (a group that does "
                         "not diffuse); taken as 0, so the translation is solid-like")
            d_used = 0.0
        s0_segments = [s0_of(d_used)] * n_seg
    elif source == "vacf-integral":
        d_used = gk.value + d_correction
        if min(gk.per_segment, default=0.0) + d_correction > 0:
            s0_segments = [s0_of(d + d_correction) for d in gk.per_segment]
        else:  # a segment's integral is not positive: hold S(0) fixed, as for the MSD
            s0_segments = [s0_of(d_used)] * n_seg
            notes.append(f"group '{name}': a segment's VACF integral is not positive; S(0) is held at the "
                         "mean for the standard errors, which then leave out its scatter")
    else:
        d_used = d_spectrum + d_correction
        s0_segments = [float(v[0]) + s0_of(d_correction) for v in gin.part_segments["translation"]]
    s0 = s0_of(d_used) if source != "spectrum" else s0_spectrum + s0_of(d_correction)
    if gk is not None and math.isfinite(gin.msd_diffusion_m2_per_s):
        gap = abs(gk.value - gin.msd_diffusion_m2_per_s)
        allowed = DIFFUSION_DISAGREEMENT * gin.msd_diffusion_m2_per_s + 3.0 * (
            gk.standard_error if math.isfinite(gk.standard_error) else 0.0)
        if gap > allowed:
            notes.append(f"group '{name}': D from the VACF integral ({gk.value:.4g} m2/s) and from the MSD "
                         f"({gin.msd_diffusion_m2_per_s:.4g} m2/s) disagree by more than 5 % and 3 standard "
                         "errors; use longer segments or a longer trajectory")
    settings = {"molecule_count": gin.molecule_count, "temperature_K": temperature,
                "mass_u": gin.mass_u, "volume_A3": volume,
                "principal_moments_u_A2": gin.principal_moments, "symmetry_number": sigma,
                "hard_sphere_form": opts.hard_sphere_entropy, "gas_volume": opts.gas_volume,
                "rotational_fluidicity": opts.rotational_fluidicity,
                "rotational_dof_per_molecule": gin.rotational_dof,
                "density_molecule_count": density_molecule_count}
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
        "density_molecule_count": gin.molecule_count if density_molecule_count is None
        else density_molecule_count,
        "symmetry_number": sigma,
        "self_diffusion_from_spectrum_m2_per_s": json_number(d_spectrum),
        "self_diffusion_from_msd_m2_per_s": json_number(gin.msd_diffusion_m2_per_s),
        "self_diffusion_from_vacf_integral_m2_per_s": json_number(gk.value) if gk else None,
        "self_diffusion_from_vacf_integral_se_m2_per_s": json_number(gk.standard_error) if gk else None,
        "vacf_long_lag_tail_m2_per_s": json_number(gk.tail_estimate) if gk else None,
        "vacf_window_ps": gk.window_ps if gk else None,
        "diffusion_source_used": source,
        "finite_size_correction_m2_per_s": json_number(d_correction),
        "self_diffusion_used_m2_per_s": json_number(d_used),
        "temperature_for_diffusion_K": t_kin,
        "components": {
            comp: {
                "degrees_of_freedom_per_molecule": json_number(c.dof_per_molecule),
                "normalized_diffusivity": json_number(c.normalized_diffusivity),
                "fluidicity": json_number(c.fluidicity),
                "packing_fraction": json_number(c.packing_fraction),
                "gas_entropy_per_molecule_k": json_number(c.gas_entropy),
                "solid_entropy_per_molecule_k": json_number(c.solid_entropy),
                "solid_dos_minimum_cm_per_molecule": json_number(c.solid_dos_minimum),
            }
            for comp, c in result.components.items()
        },
    }
    note = (f"2PT per mole of molecules; hard-sphere entropy {opts.hard_sphere_entropy}, gas volume "
            f"{opts.gas_volume}, rotational fluidicity {opts.rotational_fluidicity}, zero-frequency "
            f"value from {source}, vibration spectrum {opts.vibration_spectrum}"
            + (f" + Yeh-Hummer correction (viscosity {opts.viscosity_Pa_s:g} Pa s)"
               if opts.viscosity_Pa_s else ""))
    return GroupEvaluation(gin, result, segment_results, info, notes, note)


def _mixture(name: str, members: list[str], evaluations: dict[str, GroupEvaluation]) -> MixtureEvaluation:
    """Combine the evaluated components of one mixture."""
    counts = [evaluations[m].gin.molecule_count for m in members]
    result = mixture_result([evaluations[m].result for m in members], counts)
    n_seg = min(len(evaluations[m].segment_results) for m in members)
    segs = [mixture_result([evaluations[m].segment_results[i] for m in members], counts)
            for i in range(n_seg)]
    info = {
        "components": members,
        "molecule_counts": counts,
        "mole_fractions": [c / sum(counts) for c in counts],
        "ideal_mixing_entropy_per_molecule_k": ideal_mixing_entropy(counts),
        "rule": "each component as a pure fluid at the total number density, plus the ideal mixing "
                "entropy -k sum N_i ln x_i (qcorr.thermo.twophase_mixture; our derivation)",
    }
    return MixtureEvaluation(name, members, counts, result, segs, info)


def evaluate(ds: xr.Dataset, source: str, opts: TwoPhaseOptions, *, with_segments: bool
             ) -> tuple[dict[str, GroupEvaluation], dict[str, MixtureEvaluation], dict[str, str], float, float]:
    """2PT of every chosen group and mixture.

    Returns
    -------
    evaluations, mixtures, skipped, temperature_K, volume_A3
        Group evaluations by name, mixture evaluations by name, skipped groups with the
        reason, the spectrum's temperature (K) and the volume (Å³).

    Raises
    ------
    ConfigError
        An option names a group the file lacks.
    PhysicsError
        No volume; no group can be evaluated; a chosen group or a mixture component cannot be.
    """
    check_molecular_variables(ds, source)
    names = group_names(ds)
    members_of = {m: mix for mix, ms in opts.mixtures.items() for m in ms}
    for option, given in (("--symmetry-number", opts.group_symmetry_numbers),
                          ("--md-energy", opts.md_energies_kJ_per_mol),
                          ("--frozen-bond-wavenumbers", opts.frozen_bond_wavenumbers_cm),
                          ("--groups", opts.groups or []), ("--mixture", members_of)):
        for gname in given:
            if gname not in names and not (option == "--md-energy" and gname in opts.mixtures):
                raise ConfigError(f"{option}: no group '{gname}' in spectrum file '{source}'; "
                                  f"groups: {', '.join(names)}")
    temperature = spectrum_temperature(ds, source)
    volume = opts.volume_A3 if opts.volume_A3 is not None else float(ds.attrs["mean_box_volume_A3"])
    if not volume > 0:
        raise PhysicsError(f"spectrum file '{source}' has no box volume (mean_box_volume_A3 = "
                           f"{volume}); 2PT needs the volume: pass --volume in cubic angstrom")
    chosen = list(opts.groups or names)
    chosen += [m for m in members_of if m not in chosen]
    inputs: dict[str, GroupInput] = {}
    skipped: dict[str, str] = {}
    for name in chosen:
        if name in opts.mixtures:
            continue  # a group named like a mixture is replaced by the mixture's rows
        gin = group_input(ds, names.index(name), name, source, opts.vibration_spectrum)
        if isinstance(gin, str):
            if opts.groups or name in members_of:
                where = f" (component of mixture '{members_of[name]}')" if name in members_of else ""
                raise PhysicsError(f"spectrum file '{source}', group '{name}'{where} {gin}")
            skipped[name] = gin
            continue
        inputs[name] = gin
    for mix, members in opts.mixtures.items():
        if mix in names:
            atoms = int(ds["atom_count"].values[names.index(mix)])
            parts = sum(int(ds["atom_count"].values[names.index(m)]) for m in members)
            if atoms != parts:
                raise ConfigError(f"--mixture {mix}: group '{mix}' has {atoms} atoms but its components "
                                  f"{', '.join(members)} have {parts}; name the mixture differently or "
                                  "give components that make up the group")
    evaluations: dict[str, GroupEvaluation] = {}
    for name, gin in inputs.items():
        mix = members_of.get(name)
        density = (sum(inputs[m].molecule_count for m in opts.mixtures[mix]) if mix else None)
        ev = _evaluate_group(ds, names.index(name), gin, opts, temperature=temperature, volume=volume,
                             with_segments=with_segments, density_molecule_count=density)
        if mix:
            ev.mixture = mix
            ev.note += f"; component of mixture '{mix}', evaluated at the total density, mixing entropy in the mixture's rows"
        evaluations[name] = ev
    mixtures = {mix: _mixture(mix, members, evaluations) for mix, members in opts.mixtures.items()}
    if not evaluations:
        raise PhysicsError(f"spectrum file '{source}': no group can be evaluated by 2PT ("
                           + "; ".join(f"{k}: {v}" for k, v in skipped.items()) + ")")
    return evaluations, mixtures, skipped, temperature, volume
