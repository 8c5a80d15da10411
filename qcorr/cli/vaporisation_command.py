"""``qcorr vaporisation``: the corrected heat of vaporisation of a liquid and a gas-phase run.

Parsing and dispatch only: :func:`qcorr.baselines.vaporisation.vaporisation_enthalpy` makes the table.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from qcorr.cli.baseline_options import NO_AUTO_DEFAULT, parse_value_and_error
from qcorr.errors import ConfigError

NAME = "vaporisation"
HELP = "corrected heat of vaporisation from a liquid and a gas-phase run of the same molecule"
DESCRIPTION = (
    "From the 'qcorr corrected' tables of a liquid run and a gas-phase run of the same molecule "
    "and force field at one temperature: the classical heat of vaporisation H_gas - H_liquid (ideal "
    "gas H = E + RT unless the gas run is NPT) plus the difference of the two phases' harmonic "
    "energy corrections, per mole of molecules, in kJ/mol. The assumptions are written to the "
    "sidecar and printed."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--liquid", required=True, metavar="TABLE.csv",
                        help="'qcorr corrected' table of the liquid run" + NO_AUTO_DEFAULT)
    parser.add_argument("--gas", required=True, metavar="TABLE.csv",
                        help="'qcorr corrected' table of the gas-phase run" + NO_AUTO_DEFAULT)
    parser.add_argument("--output", required=True, metavar="PAIR.csv",
                        help="table to write (CSV, with its JSON sidecar)" + NO_AUTO_DEFAULT)
    parser.add_argument("--name", required=True, metavar="ID",
                        help="name of the pair (the system column of the row)" + NO_AUTO_DEFAULT)
    parser.add_argument("--reference", metavar="VALUE[,SE]:SOURCE", default=None,
                        help="reference heat of vaporisation in kJ/mol with its source" + NO_AUTO_DEFAULT)
    parser.add_argument("--quiet", action="store_true", help="do not print the table" + NO_AUTO_DEFAULT)


def run(args: argparse.Namespace) -> int:
    from qcorr.baselines.corrected import Reference
    from qcorr.baselines.vaporisation import vaporisation_enthalpy
    from qcorr.outputs import summary, table

    output = table.check_output_path(args.output, [Path(args.liquid), Path(args.gas)])
    reference = None
    if args.reference is not None:
        number, colon, where = args.reference.partition(":")
        if not colon or not where.strip():
            raise ConfigError(f"--reference '{args.reference}': expected VALUE[,SE]:SOURCE in kJ/mol, "
                              "e.g. 43.99:IAPWS-95 (Wagner & Pruss 2002)")
        reference = Reference(*parse_value_and_error(number, "--reference", args.reference), where.strip())
    frame = vaporisation_enthalpy(args.liquid, args.gas, name=args.name, reference=reference)
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs,
                   "inputs": {"liquid": table.file_record(args.liquid), "gas": table.file_record(args.gas)}}
    table.write_table(frame, output)
    if not args.quiet:
        print(summary.summary_text(frame, "Heat of vaporisation per mole of molecules."))
        print(f"wrote {output} and {table.sidecar_path(output)}")
    return 0
