"""``qcorr properties``: harmonic quantum corrections and properties from a spectrum file.

Parsing and dispatch only: :func:`qcorr.thermo.harmonic.harmonic_properties` makes the
table, :mod:`qcorr.outputs.table` writes and prints it.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

from qcorr.cli.option_types import finite_number
from qcorr.errors import ConfigError
from qcorr.outputs import summary, table
from qcorr.spectra.spectrum_file import read_spectrum
from qcorr.thermo.harmonic import harmonic_properties
from qcorr.thermo.spectrum_groups import DEFAULT_ZERO_FREQUENCY_THRESHOLD
from qcorr.thermo.weights import PROPERTIES, get_property

NAME = "properties"
HELP = "harmonic quantum corrections (heat capacity, ZPE, energy, entropy, free energy) from a spectrum"
DESCRIPTION = (
    "Evaluate the spectrum of every atom group with quantum and classical harmonic weighting "
    "functions (Berens, Mackay, White, Wilson, J. Chem. Phys. 79, 2375 (1983)): corrections, "
    "zero-point energy, absolute harmonic values for solids, mean-square displacement, with "
    "standard errors from the per-segment spectra. Writes a CSV table and a JSON sidecar with "
    "provenance. Harmonic approximation: results support, not replace, validated practice."
)


#: appended to helps that state their default in words: "%(default).0s" prints nothing,
#: and its presence stops ArgumentDefaultsHelpFormatter from adding "(default: None)"
_NO_AUTO_DEFAULT = "%(default).0s"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spectrum", metavar="SPECTRUM.nc", help="spectrum file from 'qcorr spectrum'")
    parser.add_argument("--output", required=True, metavar="TABLE.csv",
                        help="table to write (CSV); the sidecar TABLE.json is written beside it" + _NO_AUTO_DEFAULT)
    parser.add_argument("--system", metavar="ID", default=None,
                        help="system identifier for the table (default: the spectrum file's name "
                             "without extension)" + _NO_AUTO_DEFAULT)
    parser.add_argument("--temperatures", metavar="K", type=finite_number, nargs="+", default=None,
                        help="temperatures in K at which to evaluate the spectrum (default: the "
                             "spectrum's temperature; others are harmonic extrapolations)" + _NO_AUTO_DEFAULT)
    parser.add_argument("--properties", metavar="NAME", nargs="+", default=None,
                        help=f"properties to report (default: all): {', '.join(PROPERTIES)}" + _NO_AUTO_DEFAULT)
    parser.add_argument("--md-value", metavar="GROUP:PROPERTY=VALUE", action="extend", nargs="+",
                        default=[],
                        help="classical value from the MD run, per mole of molecules, in J/(mol K) "
                             "for heat_capacity and entropy, kJ/mol for energies, at the spectrum's "
                             "temperature; the quantum value is then this plus the correction" + _NO_AUTO_DEFAULT)
    parser.add_argument("--frozen-bond-wavenumbers", metavar="GROUP=W1,W2,...", action="extend",
                        nargs="+", default=[],
                        help="wavenumbers in cm-1 of the bonds constrained in the MD, per molecule "
                             "of GROUP; reported on separate rows (method frozen_bond_addon)" + _NO_AUTO_DEFAULT)
    parser.add_argument("--zero-frequency-threshold", metavar="FRACTION", type=finite_number,
                        default=DEFAULT_ZERO_FREQUENCY_THRESHOLD,
                        help="a group diffuses when S(0) exceeds this fraction of dof/<wavenumber> "
                             "(and 3 standard errors); its absolute entropy and free energy are refused")
    parser.add_argument("--quiet", action="store_true", help="do not print the table" + _NO_AUTO_DEFAULT)


def parse_md_values(items: list[str]) -> dict[tuple[str, str], float]:
    """``GROUP:PROPERTY=VALUE`` strings -> ``{(group, property): value}``."""
    out: dict[tuple[str, str], float] = {}
    for item in items:
        head, sep, value_text = item.partition("=")
        group, colon, prop = head.partition(":")
        if not sep or not colon or not group or not prop:
            raise ConfigError(
                f"--md-value '{item}': expected GROUP:PROPERTY=VALUE, e.g. total:heat_capacity=74.5"
            )
        get_property(prop, "--md-value")
        try:
            value = float(value_text)
        except ValueError:
            raise ConfigError(f"--md-value '{item}': '{value_text}' is not a number") from None
        if not math.isfinite(value):
            raise ConfigError(f"--md-value '{item}': the value must be finite")
        if (group, prop) in out:
            raise ConfigError(f"--md-value: {group}:{prop} given twice")
        out[(group, prop)] = value
    return out


def parse_frozen_bonds(items: list[str]) -> dict[str, list[float]]:
    """``GROUP=W1,W2,...`` strings -> ``{group: [wavenumber cm^-1, ...]}``."""
    out: dict[str, list[float]] = {}
    for item in items:
        group, sep, values = item.partition("=")
        if not sep or not group or not values:
            raise ConfigError(
                f"--frozen-bond-wavenumbers '{item}': expected GROUP=W1,W2,... in cm-1, "
                "e.g. water=3657,3756"
            )
        try:
            wns = [float(v) for v in values.split(",")]
        except ValueError:
            raise ConfigError(
                f"--frozen-bond-wavenumbers '{item}': the wavenumbers must be numbers in cm-1"
            ) from None
        if not all(math.isfinite(w) and w > 0 for w in wns):
            raise ConfigError(
                f"--frozen-bond-wavenumbers '{item}': wavenumbers must be positive (cm-1)"
            )
        out.setdefault(group, []).extend(wns)
    return out


def run(args: argparse.Namespace) -> int:
    spectrum_path = Path(args.spectrum)
    output = table.check_output_path(args.output, [spectrum_path])
    md_values = parse_md_values(args.md_value)
    frozen = parse_frozen_bonds(args.frozen_bond_wavenumbers)
    ds = read_spectrum(spectrum_path)
    frame = harmonic_properties(
        ds,
        system=args.system,
        temperatures_K=args.temperatures,
        properties=args.properties,
        md_values=md_values,
        frozen_bond_wavenumbers_cm=frozen,
        zero_frequency_threshold=args.zero_frequency_threshold,
        source=spectrum_path,
    )
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs,
                   "input_spectrum": table.file_record(spectrum_path)}
    table.write_table(frame, output)
    if not args.quiet:
        print(summary.summary_text(frame, "Values per mole of molecules (all bases in the CSV)."))
        print(f"wrote {output} and {table.sidecar_path(output)}")
    return 0
