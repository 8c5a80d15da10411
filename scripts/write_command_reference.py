"""Write docs/commands.md: every ``qcorr`` command with every option, from the parsers.

The page is made from the same ``argparse`` parsers the command line uses, so an option
that exists is documented and a documented option exists.  ``tests/test_documents.py``
regenerates the text and fails when the file on disk differs (then run this script).

Usage::

    python scripts/write_command_reference.py            # writes docs/commands.md
    python scripts/write_command_reference.py --check    # exit 1 if the file is out of date
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PAGE = ROOT / "docs" / "commands.md"

HEADER = """# Command reference

Every `qcorr` command and every option, generated from the command-line parsers by
`scripts/write_command_reference.py` (`tests/test_documents.py` checks that this page is
current).  `qcorr <command> --help` prints the same text.  The workflow calls these
commands with the options of the systems sheet (`config/README.md`); from Python, the same
work is done by the functions of `docs/api.md`.
"""


def _cell(text: str) -> str:
    """One Markdown table cell: no line breaks, pipes escaped."""
    return " ".join(str(text).split()).replace("|", "\\|")


def _subparsers(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    return {}


def _option_rows(parser: argparse.ArgumentParser) -> list[str]:
    formatter = parser._get_formatter()
    rows = []
    for action in parser._actions:
        if isinstance(action, argparse._HelpAction):
            continue
        if action.option_strings:
            name = ", ".join(f"`{o}`" for o in action.option_strings)
        else:
            name = f"`{action.metavar or action.dest}` (positional)"
        if action.nargs == 0:
            value = "–"
        elif action.choices is not None:
            value = " / ".join(f"`{c}`" for c in action.choices)
        else:
            value = f"`{action.metavar or action.dest.upper()}`"
            if action.nargs in ("+", "*") or isinstance(action, argparse._AppendAction):
                value += " …"
        help_text = formatter._expand_help(action) if action.help else ""
        if action.required:
            help_text = f"(required) {help_text}"
        rows.append(f"| {name} | {_cell(value)} | {_cell(help_text)} |")
    return rows


def reference_text() -> str:
    """The whole page, from the parsers of every command."""
    from qcorr.cli import build_parser

    parser = build_parser(None)
    parts = [HEADER]
    for name, sub in _subparsers(parser).items():
        parts.append(f"\n## `qcorr {name}`\n")
        if sub.description:
            parts.append(" ".join(sub.description.split()) + "\n")
        parts.append("| option | value | meaning |\n|---|---|---|")
        parts.extend(_option_rows(sub))
    return "\n".join(parts) + "\n"


def main(argv: list[str] | None = None) -> int:
    options = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    options.add_argument("--check", action="store_true", help="only check that the page is current")
    args = options.parse_args(argv)
    text = reference_text()
    if args.check:
        current = PAGE.read_text(encoding="utf-8") if PAGE.exists() else ""
        if current != text:
            print(f"{PAGE.relative_to(ROOT)} is out of date: run python scripts/write_command_reference.py",
                  file=sys.stderr)
            return 1
        return 0
    tmp = PAGE.with_suffix(".md.part")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(PAGE)
    print(f"wrote {PAGE.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
