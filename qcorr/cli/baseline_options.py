"""Options shared by the commands that measure classical baselines (parsing only).

``qcorr corrected`` and ``qcorr liquid`` read an engine's energy file; ``corrected``,
``series`` and ``vaporisation`` take reference values with their sources.  This module
adds those options to a parser and turns their strings into library objects.
"""

from __future__ import annotations

import argparse
import math

from qcorr.errors import ConfigError

#: appended to helps that state their default in words (see properties_command)
NO_AUTO_DEFAULT = "%(default).0s"


def add_energy_file_arguments(parser: argparse.ArgumentParser) -> None:
    """``--energy-file``, ``--energy-format``, ``--lammps-units``, ``--energy-start``, ``--pressure``."""
    from qcorr.baselines.energy_files import ENERGY_FORMATS, LAMMPS_STYLES

    parser.add_argument("--energy-file", metavar="FILE", default=None,
                        help="the engine's energy output of the same run (whole system)" + NO_AUTO_DEFAULT)
    parser.add_argument("--energy-format", choices=ENERGY_FORMATS, default=None,
                        help="format of --energy-file: GROMACS .edr, LAMMPS log, OpenMM "
                             "StateDataReporter CSV, or a file ase.io reads" + NO_AUTO_DEFAULT)
    parser.add_argument("--lammps-units", choices=tuple(LAMMPS_STYLES), default=None,
                        help="LAMMPS unit style of a lammps-log energy file (default: the 'units' "
                             "command the log echoes)" + NO_AUTO_DEFAULT)
    parser.add_argument("--energy-start", metavar="PS", type=float, default=0.0,
                        help="drop energy samples before this time, ps (equilibration)")
    parser.add_argument("--pressure", metavar="BAR", type=float, default=None,
                        help="barostat reference pressure in bar for the enthalpy E + pV of an NPT run "
                             "(default: the energy file's record, GROMACS pV)" + NO_AUTO_DEFAULT)


def energy_series_from(args: argparse.Namespace):
    """The :class:`~qcorr.baselines.energy_files.EnergySeries` of the options, or None."""
    from qcorr.baselines.energy_files import read_energy_file

    if args.energy_file is None:
        if args.energy_format is not None or args.lammps_units is not None:
            raise ConfigError("--energy-format/--lammps-units need --energy-file")
        return None
    if args.energy_format is None:
        raise ConfigError(f"--energy-file '{args.energy_file}': give its --energy-format")
    return read_energy_file(args.energy_file, args.energy_format, lammps_units=args.lammps_units,
                            start_ps=args.energy_start)


def parse_value_and_error(text: str, option: str, item: str) -> tuple[float, float]:
    """``VALUE`` or ``VALUE,SE`` -> (value, standard error or NaN)."""
    parts = [p.strip() for p in text.split(",")]
    try:
        numbers = [float(p) for p in parts]
    except ValueError:
        raise ConfigError(f"{option} '{item}': '{text}' is not VALUE or VALUE,SE (numbers)") from None
    if len(numbers) not in (1, 2) or not all(math.isfinite(v) for v in numbers):
        raise ConfigError(f"{option} '{item}': give VALUE or VALUE,SE (finite numbers)")
    if len(numbers) == 2 and numbers[1] < 0:
        raise ConfigError(f"{option} '{item}': the standard error must be >= 0")
    return numbers[0], (numbers[1] if len(numbers) == 2 else math.nan)


def parse_references(items: list[str], option: str = "--reference") -> dict:
    """``PROPERTY=VALUE[,SE]:SOURCE`` strings -> ``{property: Reference}``."""
    from qcorr.baselines.corrected import Reference

    out = {}
    for item in items:
        name, sep, rest = item.partition("=")
        number, colon, where = rest.partition(":")
        if not sep or not colon or not name.strip() or not where.strip():
            raise ConfigError(f"{option} '{item}': expected PROPERTY=VALUE[,SE]:SOURCE, e.g. "
                              "isobaric_heat_capacity=75.33:IAPWS-95 (Wagner & Pruss 2002)")
        value, se = parse_value_and_error(number, option, item)
        if name.strip() in out:
            raise ConfigError(f"{option}: {name.strip()} given twice")
        out[name.strip()] = Reference(value, se, where.strip())
    return out


def parse_values(items: list[str], option: str) -> dict[str, float]:
    """``NAME=VALUE`` strings -> ``{name: value}`` (finite numbers, each name once)."""
    out: dict[str, float] = {}
    for item in items:
        name, sep, text = item.partition("=")
        if not sep or not name.strip():
            raise ConfigError(f"{option} '{item}': expected NAME=VALUE")
        value, se = parse_value_and_error(text, option, item)
        if not math.isnan(se):
            raise ConfigError(f"{option} '{item}': give a single value")
        if name.strip() in out:
            raise ConfigError(f"{option}: {name.strip()} given twice")
        out[name.strip()] = value
    return out
