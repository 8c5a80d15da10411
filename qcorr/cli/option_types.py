"""Types of command-line option values, checked while the command line is parsed.

Each function takes the text typed and returns the value, or raises
:class:`argparse.ArgumentTypeError` with what is wrong and what is allowed; the parser
prints it as one ``qcorr: error:`` line naming the option.
"""

from __future__ import annotations

import argparse
import math

__all__ = ["count", "finite_number", "frame_index"]


def _integer(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None


def frame_index(text: str) -> int:
    """A trajectory frame index: a whole number >= 0 (counted from the first frame, 0).

    Negative indices (Python's "from the end") are refused: which frames they select
    depends on the trajectory's length, which a command line written in advance for a
    batch of trajectories does not know.
    """
    value = _integer(text)
    if value < 0:
        raise argparse.ArgumentTypeError(
            f"{value} is negative; frames are counted from 0 at the start of the trajectory "
            "(use --stop to end the window early)"
        )
    return value


def count(text: str) -> int:
    """A count of at least 1 (frames per step, processes)."""
    value = _integer(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value}: give a whole number of at least 1")
    return value


def finite_number(text: str) -> float:
    """A finite floating-point number (not nan, inf or out of the double range)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    return value
