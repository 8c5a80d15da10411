"""The ``qcorr`` console command: argument parsing and dispatch only, no physics.

Each subcommand lives in its own module ``qcorr/cli/<name>_command.py`` that defines

* ``NAME`` (the subcommand), ``HELP`` (one line),
* ``add_arguments(parser)`` (every option documents its unit), and
* ``run(args) -> int`` (exit status).

Only the subcommand named on the command line is imported (its module imports its
heavy libraries inside ``run``, or at the top); the other subcommands are listed from
the ``NAME``/``HELP``/``DESCRIPTION`` strings of their sources, so keep those plain
string literals.

Errors of the :class:`qcorr.errors.QcorrError` family, and command-line errors found by
the parser (unknown, missing, abbreviated or badly typed options), are printed as one line,
``qcorr: error: ...``, and give a non-zero exit status (2).  Options must be spelled out
in full: an abbreviation such as ``--temp`` is refused, not guessed.
"""

from __future__ import annotations

import argparse
import importlib
import shlex
import sys
import warnings
from collections.abc import Sequence

from qcorr import __version__
from qcorr.cli.parsing import CommandSummary, DefaultsHelpFormatter, Parser, UsageError
from qcorr.errors import QcorrError, QcorrWarning
from qcorr.unused_modules import leave_out

#: subcommand modules, in the order they appear in ``qcorr --help``
COMMAND_MODULES = (
    "spectrum",
    "combine",
    "properties",
    "liquid",
    "corrected",
    "series",
    "vaporisation",
    "merge",
    "plot",
)


def _load_commands() -> list:
    modules = []
    for name in COMMAND_MODULES:
        full = f"qcorr.cli.{name}_command"
        try:
            modules.append(importlib.import_module(full))
        except ModuleNotFoundError as err:
            if err.name != full:
                raise
    return modules


def _chosen_command(argv: Sequence[str]) -> str | None:
    """The subcommand named on the command line (the first word not starting with '-')."""
    for word in argv:
        if word == "--":
            return None
        if not word.startswith("-"):
            return word
    return None


def _commands_for(argv: Sequence[str] | None) -> list:
    """Command modules for *argv*: only the chosen one is imported, the others summarised."""
    if argv is None:
        return _load_commands()
    chosen = _chosen_command(argv)
    commands = []
    for name in COMMAND_MODULES:
        full = f"qcorr.cli.{name}_command"
        try:
            if name == chosen:
                commands.append(importlib.import_module(full))
            else:
                commands.append(CommandSummary(name))
        except ModuleNotFoundError as err:
            if err.name != full:
                raise
    return commands


def build_parser(argv: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """The ``qcorr`` parser.

    Parameters
    ----------
    argv : sequence of str, optional
        The command line to be parsed.  When given, only the subcommand it names is
        imported and gets its full options (the others are listed by name and help line);
        when None every command module is imported.
    """
    parser = Parser(
        prog="qcorr",
        description=(
            "Harmonic quantum corrections for classical MD: trajectory -> vibrational "
            "density of states -> corrected heat capacity, zero-point energy, energy, "
            "entropy and free energy. Results rest on the harmonic approximation; they "
            "support, not replace, validated practice."
        ),
    )
    parser.add_argument("--version", action="version", version=f"qcorr {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True, parser_class=Parser)
    for module in _commands_for(argv):
        p = sub.add_parser(
            module.NAME,
            help=module.HELP,
            description=getattr(module, "DESCRIPTION", module.HELP),
            formatter_class=DefaultsHelpFormatter,
        )
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    stream = file or sys.stderr
    if issubclass(category, QcorrWarning):
        print(f"qcorr: warning: {message}", file=stream)
    else:
        print(warnings.formatwarning(message, category, filename, lineno, line), end="", file=stream)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``qcorr`` console script."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(argv)
    try:
        args = parser.parse_args(argv)
    except UsageError as err:
        print(f"qcorr: error: {err}", file=sys.stderr)
        return err.exit_code
    args.command_line = shlex.join(["qcorr", *argv])
    warnings.showwarning = _show_warning
    try:
        with leave_out():  # xarray would import dask, distributed and pint for nothing (issue 16)
            return int(args._run(args) or 0)
    except QcorrError as err:
        print(f"qcorr: error: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        print("qcorr: interrupted; no output was written", file=sys.stderr)
        return 130


def console_main() -> int:
    """The ``qcorr`` executable: :func:`main`, then a quick exit.

    Before the interpreter ends, every object made so far is moved out of the cyclic
    garbage collector's reach (:func:`gc.freeze`): its final pass over the ~10^5 objects of
    MDAnalysis, xarray and pandas is skipped.  That pass and the module teardown took
    0.48 s per command on the machine of ``docs/performance.md`` (issue 16); with the
    freeze 0.1 s.  Exit handlers still run and every output is already complete and
    closed; only memory the operating system reclaims anyway is left unswept.  Not for
    :func:`main` itself, which tests and scripts call many times in one process.
    """
    import gc

    status = main()
    gc.freeze()
    return status


if __name__ == "__main__":  # pragma: no cover
    sys.exit(console_main())
