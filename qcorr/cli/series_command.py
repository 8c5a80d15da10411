"""``qcorr series``: C_P(T) from the slope of H(T) over runs at several temperatures, corrected.

Parsing and dispatch only: :func:`qcorr.baselines.temperature_series.temperature_series` makes
the table, :func:`~qcorr.baselines.temperature_series.series_figure` the figure.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

from qcorr.cli.baseline_options import NO_AUTO_DEFAULT, parse_value_and_error
from qcorr.errors import ConfigError

NAME = "series"
HELP = "heat capacity from the slope of <H>(T) over runs at several temperatures, plus the harmonic correction"
DESCRIPTION = (
    "Fit a weighted polynomial to the mean enthalpy (NPT runs) or energy (fixed-volume runs) of "
    "runs of one model at several temperatures, from their 'qcorr corrected' tables; its slope is "
    "the classical C_P (or C_V), to which each run's harmonic correction is added. Writes a CSV "
    "table (system = the series name) and, on request, a figure with the fluctuation values and "
    "reference points."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("tables", metavar="TABLE.csv", nargs="+",
                        help="'qcorr corrected' tables of the runs, one per temperature")
    parser.add_argument("--output", required=True, metavar="SERIES.csv",
                        help="table to write (CSV, with its JSON sidecar)" + NO_AUTO_DEFAULT)
    parser.add_argument("--name", required=True, metavar="ID",
                        help="name of the series (the system column of its rows)" + NO_AUTO_DEFAULT)
    parser.add_argument("--fit-degree", metavar="N", type=int, default=None,
                        help="degree of the polynomial in T (default: 1 for two or three runs, 2 for "
                             "four or more)" + NO_AUTO_DEFAULT)
    parser.add_argument("--figure", metavar="FILE.svg", default=None,
                        help="draw C(T): classical from fluctuations and slope, corrected, references "
                             "(svg, png or pdf)" + NO_AUTO_DEFAULT)
    parser.add_argument("--experiment", metavar="T=VALUE[,SE]", action="extend", nargs="+", default=[],
                        help="extra reference points for the figure: temperature in K, value and "
                             "standard error in J/(mol K)" + NO_AUTO_DEFAULT)
    parser.add_argument("--experiment-source", metavar="TEXT", default=None,
                        help="source of the --experiment points (required with them)" + NO_AUTO_DEFAULT)
    parser.add_argument("--quiet", action="store_true", help="do not print the table" + NO_AUTO_DEFAULT)


def parse_experiment(items: list[str]) -> list[tuple[float, float, float]]:
    """``T=VALUE[,SE]`` strings -> [(T in K, value, standard error or NaN)]."""
    points = []
    for item in items:
        temperature, sep, rest = item.partition("=")
        try:
            t = float(temperature)
        except ValueError:
            t = float("nan")
        if not sep or not t > 0:
            raise ConfigError(f"--experiment '{item}': expected T=VALUE[,SE] with T > 0 in K")
        points.append((t, *parse_value_and_error(rest, "--experiment", item)))
    return points


def run(args: argparse.Namespace) -> int:
    from qcorr.baselines.temperature_series import series_figure, temperature_series
    from qcorr.outputs import figures, summary, table

    output = table.check_output_path(args.output, [Path(t) for t in args.tables])
    experiment = parse_experiment(args.experiment)
    if experiment and not (args.experiment_source and args.experiment_source.strip()):
        raise ConfigError("--experiment: give the points' source with --experiment-source")
    if args.figure:
        figures.figure_format(args.figure, "--figure")
    frame = temperature_series(args.tables, name=args.name, degree=args.fit_degree)
    figure = series_figure(frame, experiment, args.experiment_source or "") if args.figure else None
    frame.attrs = {"command_line": getattr(args, "command_line", ""), **frame.attrs,
                   "members": [{**m, **table.file_record(m["table"])} for m in frame.attrs["members"]],
                   "experiment": {"points": [[t, v, None if math.isnan(e) else e] for t, v, e in experiment],
                                  "source": args.experiment_source}}
    table.write_table(frame, output)
    if figure is not None:
        figures.save_figure(figure, args.figure, option="--figure")
    if not args.quiet:
        print(summary.summary_text(frame, "Heat capacity of the series per mole of molecules."))
        print(f"wrote {output} and {table.sidecar_path(output)}" + (f" and {args.figure}" if args.figure else ""))
    return 0
