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
import ast
import importlib
import importlib.util
import shlex
import sys
import warnings
from collections.abc import Sequence

from qcorr import __version__
from qcorr.errors import QcorrError, QcorrWarning

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


class _CommandSummary:
    """``NAME``/``HELP``/``DESCRIPTION`` of a command module read from its source, not imported.

    Some command modules import heavy libraries (xarray, pandas, scipy.optimize) at the
    top; reading their constant strings with :mod:`ast` keeps ``qcorr --help`` and the
    parsing of another command fast.  Only used for subcommands that are not run.
    """

    def __init__(self, name: str) -> None:
        self.NAME = name
        self.HELP = ""
        spec = importlib.util.find_spec(f"qcorr.cli.{name}_command")
        if spec is None or spec.origin is None:
            raise ModuleNotFoundError(name=f"qcorr.cli.{name}_command")
        with open(spec.origin, encoding="utf-8") as fh:
            tree = ast.parse(fh.read(), filename=spec.origin)
        for node in tree.body:
            if isinstance(node, ast.Assign) and len(node.targets) == 1:
                target = node.targets[0]
                if isinstance(target, ast.Name) and target.id in ("NAME", "HELP", "DESCRIPTION"):
                    try:
                        setattr(self, target.id, ast.literal_eval(node.value))
                    except ValueError:
                        pass

    @staticmethod
    def add_arguments(parser: argparse.ArgumentParser) -> None:
        """Not run: no options are needed."""

    @staticmethod
    def run(args: argparse.Namespace) -> int:  # pragma: no cover - never selected
        raise RuntimeError("summary of a command that was not loaded")


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
                commands.append(_CommandSummary(name))
        except ModuleNotFoundError as err:
            if err.name != full:
                raise
    return commands


class UsageError(QcorrError):
    """The command line itself is wrong (unknown, missing, abbreviated or badly typed option)."""


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one ``qcorr: error:`` line, and that takes no
    abbreviated options (``--temp`` for ``--temperature`` would silently change meaning when
    a second option starting the same way is added)."""

    def __init__(self, *args, **kwargs) -> None:
        kwargs.setdefault("allow_abbrev", False)
        super().__init__(*args, **kwargs)

    def error(self, message: str):
        raise UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")

    def parse_known_args(self, args=None, namespace=None):
        words = list(sys.argv[1:] if args is None else args)
        for word in words:
            if word == "--":
                break
            option = word.split("=", 1)[0]
            if option.startswith("--") and option not in self._option_string_actions:
                if any(known.startswith(option) for known in self._option_string_actions):
                    self.error(_unknown_arguments([option], self))
            elif not word.startswith("-") and self._subparsers is not None:
                break  # the subcommand: its own parser checks the rest
        return super().parse_known_args(args, namespace)

    def parse_args(self, args=None, namespace=None):
        parsed, extras = self.parse_known_args(args, namespace)
        if extras:
            parser = self
            command = getattr(parsed, "command", None)
            if command and self._subparsers is not None:
                parser = self._subparsers._group_actions[0].choices.get(command, self)
            parser.error(_unknown_arguments(extras, parser))
        return parsed


def _unknown_arguments(extras: list[str], parser: argparse.ArgumentParser) -> str:
    """What to say about unrecognised arguments: for an option, the options it abbreviates."""
    options = [word for word in extras if word.startswith("-")]
    if not options:
        return f"unexpected arguments: {' '.join(extras)}"
    word = options[0].split("=", 1)[0]
    meant = sorted(o for o in parser._option_string_actions if o.startswith(word) and o != word)
    if meant:
        return (f"unknown option {word}: options are not abbreviated; did you mean "
                f"{' or '.join(meant)}?")
    return f"unknown option {word}"


def build_parser(argv: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """The ``qcorr`` parser.

    Parameters
    ----------
    argv : sequence of str, optional
        The command line to be parsed.  When given, only the subcommand it names is
        imported and gets its full options (the others are listed by name and help line);
        when None every command module is imported.
    """
    parser = _Parser(
        prog="qcorr",
        description=(
            "Harmonic quantum corrections for classical MD: trajectory -> vibrational "
            "density of states -> corrected heat capacity, zero-point energy, energy, "
            "entropy and free energy. Results rest on the harmonic approximation; they "
            "support, not replace, validated practice."
        ),
    )
    parser.add_argument("--version", action="version", version=f"qcorr {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True, parser_class=_Parser)
    for module in _commands_for(argv):
        p = sub.add_parser(
            module.NAME,
            help=module.HELP,
            description=getattr(module, "DESCRIPTION", module.HELP),
            formatter_class=_DefaultsHelpFormatter,
        )
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


class _DefaultsHelpFormatter(argparse.HelpFormatter):
    """Append "(default: X)" to an option's help unless the help already states its default
    or there is no meaningful default (None, False, empty list)."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        default = action.default
        if (
            "default" in text
            or default is argparse.SUPPRESS
            or default is None
            or default is False
            or default == []
            or action.option_strings == []
        ):
            return text
        return f"{text} (default: %(default)s)"


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
    from qcorr.unused_modules import leave_out

    try:
        with leave_out():  # xarray would import dask, distributed and pint for nothing (issue 16)
            return int(args._run(args) or 0)
    except QcorrError as err:
        print(f"qcorr: error: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        print("qcorr: interrupted; no output was written", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
