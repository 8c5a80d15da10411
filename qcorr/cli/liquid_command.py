"""``qcorr liquid``: absolute entropy, free energy, energy and heat capacity of liquids (2PT).

Parsing, reading the spectrum file and writing the table only; the physics is
in :mod:`qcorr.thermo.twophase`, the table layout in :mod:`qcorr.outputs.table`.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from qcorr import constants as C
from qcorr.errors import ConfigError, PhysicsError, QcorrWarning, SpectrumFileError
from qcorr.outputs import table
from qcorr.spectra.spectrum_file import group_names, read_spectrum
from qcorr.thermo import hard_sphere_gas, twophase
from qcorr.thermo.segment_statistics import segment_effective_count, segment_standard_error

NAME = "liquid"
HELP = "absolute entropy, free energy, energy, heat capacity of liquids by the two-phase model (2PT)"
DESCRIPTION = (
    "Two-phase thermodynamics (Lin, Blanco, Goddard, J. Chem. Phys. 119, 11792 (2003); Lin, "
    "Maiti, Goddard, J. Phys. Chem. B 114, 8191 (2010)): each group of identical molecules has "
    "its translational and rotational density of states split into a hard-sphere gas part and a "
    "solid-like part; the solid-like parts and the intramolecular vibrations get quantum "
    "harmonic weights. Needs a spectrum file from 'qcorr spectrum --molecular' (or, for "
    "one-atom molecules such as argon, any spectrum file). Writes a CSV table and a JSON "
    "sidecar. Model results: they support, not replace, validated practice."
)

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


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spectrum", metavar="SPECTRUM.nc", help="spectrum file from 'qcorr spectrum'")
    parser.add_argument("--output", required=True, metavar="TABLE.csv",
                        help="table to write (CSV); the sidecar TABLE.json is written beside it")
    parser.add_argument("--system", metavar="ID", default=None,
                        help="system identifier (default: the spectrum file's name without extension)")
    parser.add_argument("--groups", metavar="NAME", nargs="+", default=None,
                        help="groups to evaluate (default: every group made of whole molecules of "
                             "one kind); each must hold identical molecules")
    parser.add_argument("--symmetry-number", metavar="[GROUP=]N", action="extend", nargs="+",
                        default=[],
                        help="rotational symmetry number (count; 2 for water, 1 if not given), for "
                             "all groups or per group as GROUP=N")
    parser.add_argument("--rotational-fluidicity", choices=twophase.ROTATIONAL_FLUIDICITY_CHOICES,
                        default="from-rotation",
                        help="from-rotation: solve the fluidicity equation with the rotational "
                             "zero-frequency value (default, published form); same-as-translation: "
                             "reuse the translational fluidicity")
    parser.add_argument("--hard-sphere-entropy", choices=hard_sphere_gas.HARD_SPHERE_FORMS,
                        default="published",
                        help="published: with ln z(y) (reference gas at the hard-sphere pressure; "
                             "default); constant-volume: Carnahan-Starling entropy at fixed N, V, T")
    parser.add_argument("--gas-volume", choices=hard_sphere_gas.GAS_VOLUME_CHOICES, default="gas-particles",
                        help="volume per gas particle in the hard-sphere entropy: V/(fN) "
                             "(gas-particles, default) or V/N (all-particles)")
    parser.add_argument("--diffusion-from", choices=("spectrum", "msd"), default="spectrum",
                        help="translational zero-frequency value from the spectrum S(0) (default) or "
                             "from the mean-square-displacement diffusion coefficient; both are "
                             "always reported")
    parser.add_argument("--viscosity", metavar="PA_S", type=float, default=None,
                        help="shear viscosity in Pa s: add the Yeh-Hummer finite-size correction "
                             "2.837297 kT/(6 pi eta L) (cubic box, L = volume^(1/3)) to the "
                             "self-diffusion coefficient before 2PT (default: none, the periodic "
                             "system's own diffusion)")
    parser.add_argument("--vibration-spectrum", choices=("residual", "difference"), default="residual",
                        help="intramolecular vibration: spectrum of the residual velocities v - V - "
                             "w x r (default; non-negative) or the difference spectrum vdos - "
                             "translation - rotation (negative near zero frequency by the "
                             "rotational S(0)); both integrate to the vibrational dof")
    parser.add_argument("--volume", metavar="A3", type=float, default=None,
                        help="system volume in cubic angstrom (default: the mean box volume of the "
                             "spectrum file)")
    parser.add_argument("--md-energy", metavar="GROUP=KJ_PER_MOL", action="extend", nargs="+",
                        default=[],
                        help="mean total (kinetic + potential) MD energy of the group per mole of "
                             "its molecules, kJ/mol; makes energy and free energy absolute")
    parser.add_argument("--split-output", metavar="SPLIT.nc", default=None,
                        help="also write the gas-like and solid-like spectra of every component "
                             "(NetCDF, cm per cm-1)")
    parser.add_argument("--quiet", action="store_true", help="do not print the table")


# ------------------------------------------------------------------ option parsing
def parse_symmetry_numbers(items: list[str]) -> tuple[int | None, dict[str, int]]:
    """``N`` and ``GROUP=N`` strings -> (default for all groups or None, per-group dict)."""
    default: int | None = None
    per: dict[str, int] = {}
    for item in items:
        group, sep, text = item.rpartition("=")
        try:
            value = int(text)
        except ValueError:
            raise ConfigError(f"--symmetry-number '{item}': expected N or GROUP=N with N an integer >= 1") from None
        if value < 1:
            raise ConfigError(f"--symmetry-number '{item}': the symmetry number must be >= 1")
        if sep:
            per[group] = value
        else:
            default = value
    return default, per


def parse_md_energies(items: list[str]) -> dict[str, float]:
    """``GROUP=KJ_PER_MOL`` strings -> ``{group: value}``."""
    out: dict[str, float] = {}
    for item in items:
        group, sep, text = item.partition("=")
        try:
            value = float(text)
        except ValueError:
            value = float("nan")
        if not sep or not group or not math.isfinite(value):
            raise ConfigError(f"--md-energy '{item}': expected GROUP=KJ_PER_MOL with a finite number")
        out[group] = value
    return out


# ------------------------------------------------------------------ reading one group
@dataclass
class GroupInput:
    """What 2PT needs of one group, read from the spectrum file."""

    name: str
    molecule_count: float
    mass_u: float
    parts: dict[str, np.ndarray]
    part_segments: dict[str, np.ndarray]
    principal_moments: np.ndarray | None
    msd_diffusion_m2_per_s: float
    source: str
    rotational_dof: int | None = None


#: variables of 'qcorr spectrum --molecular' that 2PT reads
_NEEDED_MOLECULAR_VARIABLES = (
    "vdos_translation", "vdos_rotation", "vdos_vibration", "vdos_translation_segments",
    "vdos_rotation_segments", "vdos_vibration_segments", "whole_molecule_count",
    "molecule_kind_count", "molecule_mass", "principal_moments", "rotational_dof_per_molecule",
    "vibrational_dof_per_molecule", "self_diffusion_msd",
)


def _check_molecular_variables(ds, path) -> None:
    """A file with molecular spectra must hold all of them (names the missing one)."""
    if "vdos_translation" not in ds.variables:
        return
    for name in _NEEDED_MOLECULAR_VARIABLES:
        if name not in ds.variables:
            raise SpectrumFileError(
                f"spectrum file '{path}' has molecular spectra but lacks '{name}'; remake it with "
                "'qcorr spectrum --molecular'"
            )


def _group_input(ds, g: int, name: str, path, vibration: str = "residual") -> GroupInput | str:
    """The group's 2PT input, or a string saying why the group cannot be used."""
    if "vdos_translation" in ds.variables:
        count = int(ds["whole_molecule_count"].values[g])
        if count == 0:
            return "not made of whole molecules"
        if int(ds["molecule_kind_count"].values[g]) != 1:
            return "holds more than one kind of molecule (mixtures are not supported)"
        parts = {"translation": ds["vdos_translation"].values[g]}
        segs = {"translation": ds["vdos_translation_segments"].values[g]}
        rot_dof = float(ds["rotational_dof_per_molecule"].values[g])
        if rot_dof > 0:
            parts["rotation"] = ds["vdos_rotation"].values[g]
            segs["rotation"] = ds["vdos_rotation_segments"].values[g]
        if float(ds["vibrational_dof_per_molecule"].values[g]) > 0:
            name_vib = "vdos_vibration_residual" if vibration == "residual" else "vdos_vibration"
            if name_vib not in ds.variables:
                raise SpectrumFileError(
                    f"spectrum file '{path}' has no '{name_vib}'; remake it with this qcorr's "
                    "'qcorr spectrum --molecular' or pass --vibration-spectrum difference"
                )
            parts["vibration"] = ds[name_vib].values[g]
            segs["vibration"] = ds[name_vib + "_segments"].values[g]
        return GroupInput(
            name, count, float(ds["molecule_mass"].values[g]), parts, segs,
            ds["principal_moments"].values[g] if rot_dof > 0 else None,
            float(ds["self_diffusion_msd"].values[g]), "molecular decomposition",
            round(rot_dof) if rot_dof > 0 else None,
        )
    atoms = int(ds["atom_count"].values[g])
    molecules = int(ds["molecule_count"].values[g])
    if atoms != molecules:
        return ("has molecules of several atoms but the spectrum file has no molecular "
                "decomposition; remake it with 'qcorr spectrum --molecular'")
    mass = float(ds["group_mass"].values[g]) / atoms
    return GroupInput(
        name, molecules, mass, {"translation": ds["vdos"].values[g]},
        {"translation": ds["vdos_segments"].values[g]}, None, float("nan"),
        "atomic spectrum (one-atom molecules)",
    )


def _segments_rescaled(gin: GroupInput, wavenumber: np.ndarray) -> GroupInput:
    """Rescale each segment's component spectra by one common factor so that, summed over
    the components, the segment integrates to the same total as the averaged spectrum.

    The averaged spectrum is normalised to the degrees of freedom as a whole (a ratio of
    power to total power); evaluating 2PT on segments scaled the same way makes their
    scatter include the fluctuation of that normalisation (delta-method variance of a
    ratio estimator), as :func:`qcorr.thermo.segment_statistics.normalised_segments` does for the harmonic
    table.  The component split inside a segment is left as measured.
    """
    names = list(gin.part_segments)
    target = sum(float(np.trapezoid(gin.parts[c], wavenumber)) for c in names)
    totals = sum(np.trapezoid(np.asarray(gin.part_segments[c], dtype=float), wavenumber, axis=-1)
                 for c in names)
    factor = np.where(totals > 0, target / np.where(totals > 0, totals, 1.0), 1.0)
    scaled = {c: np.asarray(gin.part_segments[c], dtype=float) * factor[:, None] for c in names}
    return dataclasses.replace(gin, part_segments=scaled)


# ------------------------------------------------------------------ rows
_PROPS = {
    "entropy": ("J/(mol K)", "entropy", "entropy_classical", None),
    "heat_capacity": ("J/(mol K)", "heat_capacity", "heat_capacity_classical", None),
}


def _json_number(value: float) -> float | None:
    """JSON has no NaN: undefined numbers become null."""
    value = float(value)
    return value if math.isfinite(value) else None


def _kJ_per_mol(value_kT: float, temperature_K: float) -> float:
    return value_kT * C.gas_constant_J_per_mol_K * temperature_K * 1e-3


def _rows(system, gin, result, seg_results, k_eff, temperature, md_energy, note):
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
        rows.append(table.TableRow(**base, property=prop, unit="J/(mol K)", classical=c, quantum=q,
                                   correction=q - c, classical_se=se(cs), quantum_se=se(qs),
                                   correction_se=se(qs - cs), classical_source="harmonic_model",
                                   note=note))
    for comp, cres in result.components.items():
        q, c = cres.entropy * R, cres.entropy_classical * R
        qs = np.array(per_seg("entropy", comp)) * R
        cs = np.array(per_seg("entropy_classical", comp)) * R
        rows.append(table.TableRow(**base, property=f"entropy_{comp}", unit="J/(mol K)", classical=c,
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
    rows.append(table.TableRow(**base, property="zero_point_energy", unit="kJ/mol", classical=0.0,
                               quantum=zpe, correction=zpe, classical_se=0.0, quantum_se=se(zpe_s),
                               correction_se=se(zpe_s), classical_source="harmonic_model",
                               note="of the solid-like parts"))
    if md_energy is None:
        why = "absolute value needs --md-energy (mean MD energy per mole of molecules)"
        rows.append(table.TableRow(**base, property="energy", unit="kJ/mol", correction=de,
                                   correction_se=se(de_s), note=why))
        rows.append(table.TableRow(**base, property="helmholtz_free_energy", unit="kJ/mol",
                                   correction=da, correction_se=se(da_s), note=why))
    else:
        e_c = md_energy
        a_c = e_c - temperature * s_c * 1e-3
        a_s = e_c - temperature * ds_c * 1e-3
        rows.append(table.TableRow(**base, property="energy", unit="kJ/mol", classical=e_c,
                                   quantum=e_c + de, correction=de, classical_se=float("nan"),
                                   quantum_se=se(de_s), correction_se=se(de_s),
                                   classical_source="md_value",
                                   note="E = E_MD + kT * integral S_solid (W_E^q - 1); E_MD error not included"))
        rows.append(table.TableRow(**base, property="helmholtz_free_energy", unit="kJ/mol",
                                   classical=a_c, quantum=a_c + da, correction=da,
                                   classical_se=se(a_s), quantum_se=se(a_s + da_s),
                                   correction_se=se(da_s), classical_source="md_value",
                                   note="A = E - T S; E_MD error not included"))
    return rows


# ------------------------------------------------------------------ run
def _warn_checks(gin, result, seg_results, k_eff, wavenumber, temperature):
    """Fluidicity near 0 or 1, negative solid-like DoS beyond noise."""
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
            mean = np.trapezoid(wavenumber * total, wavenumber) / np.trapezoid(total, wavenumber)
            low = wavenumber <= mean
            bad = low & (c.solid_dos < -3.0 * noise) & (c.solid_dos < 0)
            if bad.any():
                k = int(np.flatnonzero(bad)[0])
                notes.append(
                    f"group '{gin.name}' {comp}: the solid-like density of states is negative beyond "
                    f"3 standard errors at low frequency, {wavenumber[k]:.3g} cm-1 (min {c.solid_dos.min() / gin.molecule_count:.3g} "
                    "cm per molecule); the hard-sphere gas exceeds the spectrum there")
    return notes


def run(args: argparse.Namespace) -> int:
    spectrum_path = Path(args.spectrum)
    output = table.check_output_path(args.output, [spectrum_path])
    if args.split_output is not None:
        table.check_output_path(args.split_output, [spectrum_path], "--split-output")
    default_sigma, sigma_per = parse_symmetry_numbers(args.symmetry_number)
    md_energy = parse_md_energies(args.md_energy)
    if args.viscosity is not None and not (math.isfinite(args.viscosity) and args.viscosity > 0):
        raise ConfigError(f"--viscosity {args.viscosity}: give a positive shear viscosity in Pa s")
    if args.volume is not None and not (math.isfinite(args.volume) and args.volume > 0):
        raise ConfigError(f"--volume {args.volume}: give a positive volume in cubic angstrom")
    system = args.system if args.system is not None else spectrum_path.stem
    if not system.strip():
        raise ConfigError("--system: give a non-empty identifier")

    ds = read_spectrum(spectrum_path)
    _check_molecular_variables(ds, spectrum_path)
    names = group_names(ds)
    for option, given in (("--symmetry-number", sigma_per), ("--md-energy", md_energy)):
        for gname in given:
            if gname not in names:
                raise ConfigError(f"{option}: no group '{gname}' in spectrum file '{spectrum_path}'; "
                                  f"groups: {', '.join(names)}")
    if args.groups:
        for gname in args.groups:
            if gname not in names:
                raise ConfigError(f"--groups: no group '{gname}' in spectrum file '{spectrum_path}'; "
                                  f"groups: {', '.join(names)}")
    temperature = float(ds.attrs["temperature_K"])
    volume = args.volume if args.volume is not None else float(ds.attrs["mean_box_volume_A3"])
    if not volume > 0:
        raise PhysicsError(f"spectrum file '{spectrum_path}' has no box volume (mean_box_volume_A3 = "
                           f"{volume}); 2PT needs the volume: pass --volume in cubic angstrom")
    wavenumber = ds["wavenumber"].values
    k_eff = segment_effective_count(ds)
    rows, notes, info, skipped, splits = [], [], {}, {}, {}
    wanted = args.groups or names
    for name in wanted:
        g = names.index(name)
        gin = _group_input(ds, g, name, spectrum_path, args.vibration_spectrum)
        if isinstance(gin, str):
            if args.groups:
                raise PhysicsError(f"spectrum file '{spectrum_path}', group '{name}' {gin}")
            skipped[name] = gin
            continue
        sigma = sigma_per.get(name, default_sigma)
        if "rotation" in gin.parts and sigma is None:
            notes.append(f"group '{name}': no --symmetry-number given, 1 assumed (water: 2, NH3: 3, CH4: 12)")
            sigma = 1
        sigma = sigma or 1
        # the spectrum is normalised to the degrees of freedom, i.e. with the group's kinetic
        # temperature: convert between S(0) and D with that temperature (Green-Kubo)
        t_kin = float(ds["kinetic_temperature"].values[g])
        t_kin = t_kin if math.isfinite(t_kin) and t_kin > 0 else temperature

        def s0_of(d_m2_per_s: float, gin=gin, t_kin=t_kin) -> float:
            return (d_m2_per_s * 12.0 * gin.mass_u * C.atomic_mass_kg * gin.molecule_count
                    / (C.boltzmann_J_per_K * t_kin) * C.speed_of_light_cm_per_s)

        s0_spectrum = float(gin.parts["translation"][0])
        d_spectrum = hard_sphere_gas.self_diffusion_from_zero_frequency(s0_spectrum, gin.molecule_count,
                                                                 t_kin, gin.mass_u)
        if args.diffusion_from == "msd" and not math.isfinite(gin.msd_diffusion_m2_per_s):
            raise PhysicsError(f"group '{name}': --diffusion-from msd needs the MSD diffusion coefficient, "
                               "which the spectrum file lacks; remake it with 'qcorr spectrum --molecular'")
        d_correction = 0.0
        if args.viscosity is not None:
            d_correction = hard_sphere_gas.finite_size_diffusion_correction(
                temperature, args.viscosity, volume ** (1.0 / 3.0))
        n_seg = ds.sizes["segment"]
        gin = _segments_rescaled(gin, wavenumber)
        if args.diffusion_from == "msd":
            s0 = s0_of(gin.msd_diffusion_m2_per_s + d_correction)
            s0_segments = [s0] * n_seg
            d_used = gin.msd_diffusion_m2_per_s + d_correction
        else:
            s0 = s0_spectrum + s0_of(d_correction)
            s0_segments = [float(v[0]) + s0_of(d_correction)
                           for v in gin.part_segments["translation"]]
            d_used = d_spectrum + d_correction
        options = {"molecule_count": gin.molecule_count, "temperature_K": temperature, "mass_u": gin.mass_u,
                       "volume_A3": volume, "principal_moments_u_A2": gin.principal_moments,
                       "symmetry_number": sigma, "hard_sphere_form": args.hard_sphere_entropy,
                       "gas_volume": args.gas_volume, "rotational_fluidicity": args.rotational_fluidicity,
                       "rotational_dof_per_molecule": gin.rotational_dof}
        result = twophase.two_phase_group(wavenumber, gin.parts, translation_zero_frequency_cm=s0,
                                          **options)
        seg_results = [
            twophase.two_phase_group(wavenumber, {k: v[i] for k, v in gin.part_segments.items()},
                                     translation_zero_frequency_cm=s0_segments[i], **options)
            for i in range(n_seg)
        ] if n_seg >= 2 else []
        notes += _warn_checks(gin, result, seg_results, k_eff, wavenumber, temperature)
        note = (f"2PT per mole of molecules; hard-sphere entropy {args.hard_sphere_entropy}, gas volume "
                f"{args.gas_volume}, rotational fluidicity {args.rotational_fluidicity}, zero-frequency "
                f"value from {args.diffusion_from}, vibration spectrum {args.vibration_spectrum}"
                + (f" + Yeh-Hummer correction (viscosity {args.viscosity:g} Pa s)" if args.viscosity else ""))
        rows += _rows(system, gin, result, seg_results, k_eff, temperature, md_energy.get(name), note)
        info[name] = {
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
        splits[name] = result
        print(f"qcorr: group '{name}': D from S(0) = {d_spectrum:.4g} m2/s, from MSD = "
              f"{gin.msd_diffusion_m2_per_s:.4g} m2/s; "
              + ", ".join(f"{comp} f = {c.fluidicity:.4g}" for comp, c in result.components.items()
                          if comp != "vibration"),
              file=sys.stderr)
    for name, why in skipped.items():
        notes.append(f"group '{name}' skipped: {why}")
    if not rows:
        raise PhysicsError(f"spectrum file '{spectrum_path}': no group can be evaluated by 2PT ("
                           + "; ".join(f"{k}: {v}" for k, v in skipped.items()) + ")")
    frame = table.rows_to_frame(rows)
    provenance = {
        "command_line": getattr(args, "command_line", ""),
        "method": "two-phase thermodynamics (Lin, Blanco, Goddard, J. Chem. Phys. 119, 11792 (2003); "
                  "Lin, Maiti, Goddard, J. Phys. Chem. B 114, 8191 (2010))",
        "input_spectrum": table.file_record(spectrum_path),
        "options": {
            "system": system,
            "symmetry_number": {"default": default_sigma, "per_group": sigma_per},
            "rotational_fluidicity": args.rotational_fluidicity,
            "hard_sphere_entropy": args.hard_sphere_entropy,
            "gas_volume": args.gas_volume,
            "diffusion_from": args.diffusion_from,
            "viscosity_Pa_s": args.viscosity,
            "vibration_spectrum": args.vibration_spectrum,
            "volume_A3": volume,
            "md_energy_kJ_per_mol": md_energy,
        },
        "choices_offered": {
            "hard_sphere_entropy": {"published": "with ln z(y) (default)",
                                    "constant-volume": "Carnahan-Starling at fixed N, V, T, no ln z"},
            "gas_volume": {"gas-particles": "V/(fN) (default)", "all-particles": "V/N"},
            "rotational_fluidicity": {"from-rotation": "Delta from the rotational S(0) (default)",
                                      "same-as-translation": "f_rot = f_trans"},
        },
        "standard_errors": "per-segment spectra; s / sqrt(K_eff), Welch (1967) effective segment count",
        "effective_segment_count": k_eff,
        "groups": info,
        "skipped_groups": skipped,
        "cautions": list(TWO_PHASE_CAUTIONS) + notes,
    }
    if args.split_output is not None:
        _write_split(args.split_output, wavenumber, splits)
    table.write_table(frame, output, provenance)
    for n in notes:
        warnings.warn(n, QcorrWarning, stacklevel=1)
    if not args.quiet:
        print(table.format_table(frame, "per_mole_molecules"))
        print()
        print("2PT values per mole of molecules. Cautions:")
        for caution in list(TWO_PHASE_CAUTIONS) + notes:
            print(f"- {caution}")
        print(f"wrote {output} and {table.sidecar_path(output)}")
    return 0


def _write_split(path, wavenumber, results) -> None:
    """Gas-like and solid-like spectra (group, component, wavenumber), cm."""
    import xarray as xr

    from qcorr.safe_write import atomic_path

    comps = ["translation", "rotation", "vibration"]
    groups = list(results)
    gas = np.full((len(groups), 3, wavenumber.size), np.nan)
    solid = np.full_like(gas, np.nan)
    for i, g in enumerate(groups):
        for j, comp in enumerate(comps):
            if comp in results[g].components:
                gas[i, j] = results[g].components[comp].gas_dos
                solid[i, j] = results[g].components[comp].solid_dos
    ds = xr.Dataset(
        {
            "vdos_gas": (("group", "component", "wavenumber"), gas,
                         {"units": "cm", "long_name": "hard-sphere gas-like density of states (2PT)"}),
            "vdos_solid": (("group", "component", "wavenumber"), solid,
                           {"units": "cm", "long_name": "solid-like density of states (2PT): spectrum minus gas part"}),
        },
        coords={"group": ("group", np.array(groups), {"long_name": "atom group"}),
                "component": ("component", np.array(comps), {"long_name": "motion component"}),
                "wavenumber": ("wavenumber", wavenumber, {"units": "cm-1", "long_name": "wavenumber"})},
        attrs={"Conventions": "CF-1.11", "qcorr_file_kind": "two_phase_split"},
    )
    with atomic_path(path) as tmp:
        ds.to_netcdf(tmp, engine="h5netcdf")
