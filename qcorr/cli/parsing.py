"""The parser classes of the ``qcorr`` command line (used by :mod:`qcorr.cli`).

* :class:`CommandSummary`: a subcommand listed from its module's source, not imported;
* :class:`Parser`: errors as one ``qcorr: error:`` line (:class:`UsageError`), no
  abbreviated options;
* :class:`DefaultsHelpFormatter`: "(default: X)" after an option's help.
"""

from __future__ import annotations

import argparse
import ast
import importlib.util
import sys

from qcorr.errors import QcorrError

__all__ = ["CommandSummary", "DefaultsHelpFormatter", "Parser", "UsageError"]


class CommandSummary:
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


class UsageError(QcorrError):
    """The command line itself is wrong (unknown, missing, abbreviated or badly typed option)."""


class Parser(argparse.ArgumentParser):
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


class DefaultsHelpFormatter(argparse.HelpFormatter):
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
