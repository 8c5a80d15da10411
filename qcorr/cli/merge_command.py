"""``qcorr merge``: concatenate property tables of many systems into one table.

Parsing and dispatch only; the work is in :func:`qcorr.outputs.table.merge_tables`.
"""

from __future__ import annotations

import argparse

from qcorr.outputs import table

NAME = "merge"
HELP = "concatenate property tables (CSV + JSON sidecar) of many systems into one"
DESCRIPTION = (
    "Concatenate tables written by 'qcorr properties' or 'qcorr liquid' into one CSV with a "
    "JSON sidecar that keeps every input's provenance. Tables with other columns, a missing "
    "sidecar, or rows repeating another table's (same system, group, method, property, "
    "temperature, basis) are refused."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("tables", metavar="TABLE.csv", nargs="+", help="tables to merge")
    parser.add_argument("--output", required=True, metavar="ALL.csv",
                        help="merged table to write (CSV); ALL.json is written beside it%(default).0s")


def run(args: argparse.Namespace) -> int:
    output = table.check_output_path(args.output, args.tables)
    for path in args.tables:  # refuse merging a table's own sidecar, too
        table.check_output_path(args.output, [table.sidecar_path(path)])
    frame = table.merge_tables(args.tables)
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs}
    table.write_table(frame, output)
    print(f"merged {len(frame)} rows from {len(args.tables)} tables into {output} "
          f"and {table.sidecar_path(output)}")
    return 0
