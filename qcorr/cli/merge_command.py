"""``qcorr merge``: concatenate property tables of many systems into one table.

Parsing and dispatch only; the work is in :func:`qcorr.outputs.table.merge_tables`.
"""

from __future__ import annotations

import argparse

from qcorr.outputs import summary, table
from qcorr.safe_write import check_output, write_text_atomic

NAME = "merge"
HELP = "concatenate property tables (CSV + JSON sidecar) of many systems into one"
DESCRIPTION = (
    "Concatenate tables written by 'qcorr properties' or 'qcorr liquid' into one CSV with a "
    "JSON sidecar that keeps every input's provenance and a column schema (TABLE.schema.json). "
    "Tables with other columns, a missing sidecar, contents that differ from what their "
    "sidecar records (cut short or edited), or rows repeating another table's (same system, "
    "group, method, property, temperature, basis) are refused. Optionally also writes a "
    "summary for people (Markdown, HTML) with each value rounded to its standard error."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("tables", metavar="TABLE.csv", nargs="+", help="tables to merge")
    parser.add_argument("--output", required=True, metavar="ALL.csv",
                        help="merged table to write (CSV); ALL.json (provenance) and "
                             "ALL.schema.json (columns, units) are written beside it")
    parser.add_argument("--summary-markdown", metavar="FILE.md", default=None,
                        help="also write the summary (values per mole of molecules, rounded "
                             "to their standard errors, and the cautions) as Markdown")
    parser.add_argument("--summary-html", metavar="FILE.html", default=None,
                        help="also write that summary as a self-contained HTML page whose "
                             "table sorts by a click on a column head")


def run(args: argparse.Namespace) -> int:
    inputs = [*args.tables, *(table.sidecar_path(path) for path in args.tables)]
    output = table.check_output_path(args.output, inputs)
    written = [output, table.sidecar_path(output), table.schema_path(output)]
    extra = {"--summary-markdown": args.summary_markdown, "--summary-html": args.summary_html}
    for option, path in extra.items():
        if path is not None:
            check_output(path, option, inputs, written)
            written.append(path)
    frame = table.merge_tables(args.tables)
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs}
    pages = {
        args.summary_markdown: summary.summary_markdown,
        args.summary_html: summary.summary_html,
    }
    texts = {path: render(frame) for path, render in pages.items() if path is not None}
    table.write_table(frame, output)
    for path, text in texts.items():
        write_text_atomic(path, text, "--summary-markdown" if path == args.summary_markdown else "--summary-html")
    print(f"merged {len(frame)} rows from {len(args.tables)} tables into {output} "
          f"and {table.sidecar_path(output)}")
    return 0
