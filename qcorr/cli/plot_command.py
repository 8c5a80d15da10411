"""``qcorr plot``: figures of a spectrum file (parsing only; drawing and saving in :mod:`qcorr.outputs.figures`)."""

from __future__ import annotations

import argparse
from pathlib import Path

from qcorr.cli.option_types import finite_number
from qcorr.errors import ConfigError

NAME = "plot"
HELP = "draw the spectrum with the quantum weighting functions, and the cumulative corrections"
DESCRIPTION = (
    "Draw two figures from a spectrum file: the vibrational density of states of every "
    "atom group with the quantum weighting functions of heat capacity and thermal energy "
    "over it, and the running integral of each harmonic quantum correction (Berens et al., "
    "J. Chem. Phys. 79, 2375 (1983)) against the upper wavenumber, which shows the bands "
    "that carry each correction. The file extension (.svg, .png, .pdf) picks the format."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spectrum", metavar="SPECTRUM.nc", help="spectrum file from 'qcorr spectrum'")
    parser.add_argument(
        "--spectrum-figure", metavar="FILE",
        help="write the spectrum with the weighting functions here (.svg, .png or .pdf)",
    )
    parser.add_argument(
        "--cumulative-figure", metavar="FILE",
        help="write the cumulative corrections here (.svg, .png or .pdf)",
    )
    parser.add_argument(
        "--temperature", type=finite_number, metavar="K", default=None,
        help="temperature in K of the weighting functions (default: the temperature stored "
        "in the spectrum file; another value assumes the modes stay harmonic)",
    )
    parser.add_argument(
        "--group", default="total",
        help="atom group whose cumulative corrections are drawn",
    )
    parser.add_argument(
        "--basis", choices=("per_mole_molecules", "per_mole_atoms", "per_system"),
        default="per_mole_molecules",
        help="cumulative corrections per mole of molecules of the group (J/(mol K), kJ/mol), "
        "per mole of its atoms, or for the whole simulated system (J/K, kJ)",
    )
    parser.add_argument(
        "--max-wavenumber", type=finite_number, metavar="CM-1", default=None,
        help="upper end of the wavenumber axis in cm^-1 (default: where the total spectrum "
        "holds 99.9%% of its weight, plus 15%%)",
    )


def run(args: argparse.Namespace) -> int:
    from qcorr.outputs import figures
    from qcorr.safe_write import check_output
    from qcorr.spectra.spectrum_file import read_spectrum

    wanted = [(option, path) for option, path in (("--spectrum-figure", args.spectrum_figure),
                                                  ("--cumulative-figure", args.cumulative_figure))
              if path]
    if not wanted:
        raise ConfigError(
            "give --spectrum-figure FILE and/or --cumulative-figure FILE: nothing to draw"
        )
    for option, path in wanted:
        figures.figure_format(path, option)
        check_output(path, option, [args.spectrum])
    if len(wanted) == 2 and Path(wanted[0][1]).absolute() == Path(wanted[1][1]).absolute():
        raise ConfigError(f"--spectrum-figure and --cumulative-figure are both '{wanted[0][1]}'; give two names")
    ds = read_spectrum(args.spectrum)
    drawn = []  # every figure is drawn (and its options checked) before any is written
    for option, path in wanted:
        if option == "--spectrum-figure":
            figure = figures.spectrum_figure(ds, temperature_K=args.temperature,
                                             max_wavenumber_cm=args.max_wavenumber)
        else:
            figure = figures.cumulative_figure(ds, group=args.group, temperature_K=args.temperature,
                                               basis=args.basis, max_wavenumber_cm=args.max_wavenumber)
        drawn.append((figure, path, option))
    written = [figures.save_figure(figure, path, option=option) for figure, path, option in drawn]
    for path in written:
        print(f"qcorr plot: wrote {path}")
    return 0
