"""``qcorr corrected``: corrected observables of one run (classical baseline + harmonic correction).

Parsing and dispatch only: :func:`qcorr.baselines.corrected.corrected_properties` makes the
table, :mod:`qcorr.outputs.table` writes it.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from qcorr.cli.baseline_options import (
    NO_AUTO_DEFAULT,
    add_energy_file_arguments,
    energy_series_from,
    parse_references,
    parse_values,
)

NAME = "corrected"
HELP = "corrected observables (C_V, C_P, E, H, A, G): classical values measured from the run plus the harmonic correction"
DESCRIPTION = (
    "Measure the classical baselines of one run (mean energy and enthalpy and fluctuation heat "
    "capacities from the engine's energy file; the ensemble is declared and checked) and add the "
    "harmonic quantum corrections of the run's spectrum at the same temperature (Berens, Mackay, "
    "White, Wilson, J. Chem. Phys. 79, 2375 (1983)). Values per mole of molecules; writes a CSV "
    "table (method 'corrected') and its JSON sidecar."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spectrum", metavar="SPECTRUM.nc", help="spectrum file of the run, from 'qcorr spectrum'")
    parser.add_argument("--output", required=True, metavar="TABLE.csv",
                        help="table to write (CSV); the sidecar TABLE.json is written beside it" + NO_AUTO_DEFAULT)
    parser.add_argument("--ensemble", required=True, choices=("nve", "nvt", "npt"),
                        help="ensemble the run sampled (decides the fluctuation formula; checked "
                             "against the data)" + NO_AUTO_DEFAULT)
    parser.add_argument("--system", metavar="ID", default=None,
                        help="system identifier (default: the spectrum file's name without extension)" + NO_AUTO_DEFAULT)
    parser.add_argument("--group", metavar="NAME", default="total",
                        help="group whose spectrum gives the corrections; energy-file baselines need "
                             "one holding every atom")
    add_energy_file_arguments(parser)
    parser.add_argument("--classical-value", metavar="PROPERTY=VALUE", action="extend", nargs="+", default=[],
                        help="classical value typed in (takes precedence), per mole of molecules in "
                             "J/(mol K) or kJ/mol at the spectrum's temperature; PROPERTY one of "
                             "heat_capacity, isobaric_heat_capacity, energy, enthalpy, "
                             "helmholtz_free_energy, gibbs_free_energy" + NO_AUTO_DEFAULT)
    parser.add_argument("--two-phase-table", metavar="TABLE.csv", default=None,
                        help="the 'qcorr liquid' table of this spectrum: its classical 2PT entropy makes "
                             "A = <E> - TS and G = <H> - TS" + NO_AUTO_DEFAULT)
    parser.add_argument("--reference", metavar="PROPERTY=VALUE[,SE]:SOURCE", action="extend", nargs="+",
                        default=[],
                        help="reference value (experiment or published) for a corrected row, in its "
                             "unit, with its source; fills the reference and deviation columns" + NO_AUTO_DEFAULT)
    parser.add_argument("--quiet", action="store_true", help="do not print the table" + NO_AUTO_DEFAULT)


def run(args: argparse.Namespace) -> int:
    from qcorr.baselines.corrected import corrected_properties
    from qcorr.outputs import summary, table
    from qcorr.spectra.spectrum_file import read_spectrum

    spectrum_path = Path(args.spectrum)
    inputs = [spectrum_path] + [Path(p) for p in (args.energy_file, args.two_phase_table) if p]
    output = table.check_output_path(args.output, inputs)
    classical = parse_values(args.classical_value, "--classical-value")
    references = parse_references(args.reference)
    series = energy_series_from(args)
    ds = read_spectrum(spectrum_path)
    frame = corrected_properties(
        ds, ensemble=args.ensemble, system=args.system, group=args.group, energy_series=series,
        pressure_bar=args.pressure, classical_values=classical, two_phase_table=args.two_phase_table,
        references=references, source=spectrum_path,
    )
    records = {"input_spectrum": table.file_record(spectrum_path)}
    if series is not None:
        records["energy_file"] = {**frame.attrs["energy_file"], **table.file_record(args.energy_file)}
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs, **records}
    table.write_table(frame, output)
    if not args.quiet:
        print(summary.summary_text(frame, "Corrected observables per mole of molecules."))
        for prop, need in frame.attrs.get("missing", {}).items():
            print(f"no {prop}: needs {need}")
        print(f"wrote {output} and {table.sidecar_path(output)}")
    return 0
