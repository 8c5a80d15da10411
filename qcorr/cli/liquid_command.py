"""``qcorr liquid``: absolute entropy, free energy, energy and heat capacity of liquids (2PT).

Parsing and dispatch only: :func:`qcorr.thermo.twophase_table.two_phase_properties` makes
the table (and :func:`~qcorr.thermo.twophase_table.two_phase_split_spectra` the split
spectra), :mod:`qcorr.outputs.table` writes and prints it.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from qcorr.cli.liquid_options import parse_md_energies, parse_mixtures, parse_symmetry_numbers
from qcorr.cli.option_types import finite_number
from qcorr.cli.properties_command import parse_frozen_bonds
from qcorr.outputs import summary, table
from qcorr.safe_write import check_output
from qcorr.spectra.spectrum_file import read_spectrum, write_netcdf_atomic
from qcorr.thermo import twophase_table
from qcorr.thermo.hard_sphere_gas import GAS_VOLUME_CHOICES, HARD_SPHERE_FORMS
from qcorr.thermo.twophase import ROTATIONAL_FLUIDICITY_CHOICES
from qcorr.thermo.twophase_evaluation import DIFFUSION_SOURCES

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
    parser.add_argument("--rotational-fluidicity", choices=ROTATIONAL_FLUIDICITY_CHOICES,
                        default="from-rotation",
                        help="from-rotation: solve the fluidicity equation with the rotational "
                             "zero-frequency value (default, published form); same-as-translation: "
                             "reuse the translational fluidicity")
    parser.add_argument("--hard-sphere-entropy", choices=HARD_SPHERE_FORMS,
                        default="published",
                        help="published: with ln z(y) (reference gas at the hard-sphere pressure; "
                             "default); constant-volume: Carnahan-Starling entropy at fixed N, V, T")
    parser.add_argument("--gas-volume", choices=GAS_VOLUME_CHOICES, default="all-particles",
                        help="volume per gas particle in the hard-sphere entropy: V/(fN) "
                             "(gas-particles) or V/N (all-particles, default: closest to thermodynamic "
                             "integration on Lennard-Jones liquids, see docs/liquids.md)")
    parser.add_argument("--diffusion-from", choices=DIFFUSION_SOURCES, default="auto",
                        help="translational zero-frequency value: auto (default: the VACF integral when it "
                             "is positive with a relative standard error below 10 %%, else the MSD), "
                             "vacf-integral (Green-Kubo "
                             "integral over one segment), msd (Einstein slope), or spectrum (S(0) of the "
                             "tapered spectrum, biased high); all are reported")
    parser.add_argument("--viscosity", metavar="PA_S", type=finite_number, default=None,
                        help="shear viscosity in Pa s: add the Yeh-Hummer finite-size correction "
                             "2.837297 kT/(6 pi eta L) (cubic box, L = volume^(1/3)) to the "
                             "self-diffusion coefficient before 2PT (default: none, the periodic "
                             "system's own diffusion)")
    parser.add_argument("--vibration-spectrum", choices=("residual", "difference"), default="residual",
                        help="intramolecular vibration: spectrum of the residual velocities v - V - "
                             "w x r (default; non-negative) or the difference spectrum vdos - "
                             "translation - rotation (negative near zero frequency by the "
                             "rotational S(0)); both integrate to the vibrational dof")
    parser.add_argument("--volume", metavar="A3", type=finite_number, default=None,
                        help="system volume in cubic angstrom (default: the mean box volume of the "
                             "spectrum file)")
    parser.add_argument("--md-energy", metavar="GROUP=KJ_PER_MOL", action="extend", nargs="+",
                        default=[],
                        help="mean total (kinetic + potential) MD energy of the group per mole of "
                             "its molecules, kJ/mol; makes energy and free energy absolute")
    parser.add_argument("--pressure", metavar="BAR", type=finite_number, default=None,
                        help="mean MD pressure in bar: with --md-energy adds enthalpy H = E + pV and Gibbs "
                             "energy G = A + pV (kJ/mol) for a group holding every atom, or a mixture")
    parser.add_argument("--mixture", metavar="NAME=GROUP1,GROUP2,...", action="extend", nargs="+", default=[],
                        help="groups (one kind of molecule each) that together form a liquid mixture: "
                             "each is evaluated at the total density and rows NAME (per mole of all "
                             "their molecules) add the ideal mixing entropy")
    parser.add_argument("--temperatures", metavar="K", type=finite_number, nargs="+", default=None,
                        help="temperature scan in K: at each other temperature, only the quantum "
                             "corrections of the solid-like parts (spectrum of the MD temperature)")
    parser.add_argument("--frozen-bond-wavenumbers", metavar="GROUP=W1,W2,...", action="extend", nargs="+",
                        default=[], help="wavenumbers in cm-1 of the bonds constrained in the MD (rigid "
                                         "models), per molecule of GROUP: rows of method frozen_bond_addon")
    parser.add_argument("--split-output", metavar="SPLIT.nc", default=None,
                        help="also write the gas-like and solid-like spectra of every component "
                             "(NetCDF, cm per cm-1)")
    parser.add_argument("--quiet", action="store_true", help="do not print the table")


def run(args: argparse.Namespace) -> int:
    spectrum_path = Path(args.spectrum)
    output = table.check_output_path(args.output, [spectrum_path])
    if args.split_output is not None:
        check_output(args.split_output, "--split-output", [spectrum_path],
                     [output, table.sidecar_path(output), table.schema_path(output)])
    default_sigma, sigma_per = parse_symmetry_numbers(args.symmetry_number)
    options = {
        "groups": args.groups, "symmetry_number": default_sigma, "group_symmetry_numbers": sigma_per,
        "rotational_fluidicity": args.rotational_fluidicity,
        "hard_sphere_entropy": args.hard_sphere_entropy, "gas_volume": args.gas_volume,
        "diffusion_from": args.diffusion_from, "viscosity_Pa_s": args.viscosity,
        "vibration_spectrum": args.vibration_spectrum, "volume_A3": args.volume,
        "mixtures": parse_mixtures(args.mixture), "source": spectrum_path,
    }
    md_energies = parse_md_energies(args.md_energy)
    ds = read_spectrum(spectrum_path)
    frame = twophase_table.two_phase_properties(
        ds, system=args.system, md_energies_kJ_per_mol=md_energies, temperatures_K=args.temperatures,
        frozen_bond_wavenumbers_cm=parse_frozen_bonds(args.frozen_bond_wavenumbers),
        pressure_bar=args.pressure, **options)
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs,
                   "input_spectrum": table.file_record(spectrum_path)}
    for name, info in frame.attrs["groups"].items():
        print(f"qcorr: {twophase_table.diffusion_summary(name, info)}", file=sys.stderr)
    if args.split_output is not None:
        split = twophase_table.two_phase_split_spectra(ds, **options)
        write_netcdf_atomic(split, args.split_output, option="--split-output")
    table.write_table(frame, output)
    if not args.quiet:
        print(summary.summary_text(frame, "2PT values per mole of molecules."))
        print(f"wrote {output} and {table.sidecar_path(output)}")
    return 0

