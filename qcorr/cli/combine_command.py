"""``qcorr combine``: frame-block spectrum files -> the single-job spectrum file."""

from __future__ import annotations

import argparse
from pathlib import Path

from qcorr.errors import ConfigError

NAME = "combine"
HELP = "join the block files of 'qcorr spectrum --block I-of-N' into one spectrum file"
DESCRIPTION = (
    "Join the N frame-block files written by 'qcorr spectrum --block I-of-N' (same inputs and "
    "settings) into the spectrum file a single run over all frames would give: segments are "
    "concatenated in order and the spectrum is normalised again to the degrees of freedom; "
    "blocks made with --molecular also join their molecular spectra, principal moments and "
    "mean-square displacements. Each block's SHA-256 record of a byte range of every input "
    "is kept, and the ranges must cover every file."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``qcorr combine``."""
    parser.add_argument("blocks", nargs="+", metavar="BLOCK.nc",
                        help="block files, in any order (each block 1..N exactly once)")
    parser.add_argument("--output", required=True, metavar="FILE.nc",
                        help="spectrum file to write (NetCDF-4)")


def run(args: argparse.Namespace) -> int:
    """Run ``qcorr combine``; returns the exit status."""
    from qcorr.cli.spectrum_report import write_with_report
    from qcorr.safe_write import check_writable
    from qcorr.spectra.blocks import combine_blocks
    from qcorr.spectra.diagnostics import announce, diagnose
    from qcorr.spectra.spectrum_file import read_spectrum

    out = Path(args.output).resolve()
    for name in args.blocks:
        if Path(name).resolve() == out:
            raise ConfigError(f"--output {args.output} is also a block file; choose another name")
    check_writable(args.output)
    datasets = [read_spectrum(name) for name in args.blocks]
    combined = combine_blocks(datasets, list(args.blocks), getattr(args, "command_line", "qcorr combine"))
    checks = diagnose(combined)
    announce(checks)
    write_with_report(combined, checks, args.output)
    return 0
