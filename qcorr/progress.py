"""Progress of long loops: a bar on a terminal, short heartbeat lines in logs.

``mode="auto"`` (the default of every command) draws a tqdm bar when stderr is a
terminal; otherwise (a batch job, a Snakemake log) it prints one heartbeat line per
tenth of the work, for example::

    qcorr: frames 2000/10000 (20 %), 1850 frames/s, about 0:00:04 left

so a cluster log shows a long job is alive and how long it still needs.
``"always"`` forces the bar, ``"log"`` the heartbeat lines, ``"never"`` prints nothing.
"""

from __future__ import annotations

import math
import sys
import time
from collections.abc import Callable, Iterable, Iterator
from typing import Literal, TextIO, TypeVar

T = TypeVar("T")
ProgressMode = Literal["auto", "always", "log", "never"]

#: accepted values of ``--progress``
PROGRESS_MODES: tuple[str, ...] = ("auto", "always", "log", "never")
#: heartbeat lines per loop (one per tenth of the work)
HEARTBEAT_LINES = 10
#: without a known total, a heartbeat line at most this often (s)
HEARTBEAT_SECONDS = 60.0


def progress_style(mode: ProgressMode = "auto", stream: TextIO | None = None) -> str:
    """``"bar"``, ``"log"`` or ``"none"`` for *mode* ('auto': bar on a terminal, else log)."""
    if mode not in PROGRESS_MODES:
        raise ValueError(f"progress mode {mode!r}: choose one of {', '.join(PROGRESS_MODES)}")
    if mode == "never":
        return "none"
    if mode == "always":
        return "bar"
    if mode == "log":
        return "log"
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    return "bar" if isatty is not None and isatty() else "log"


def progress_enabled(mode: ProgressMode = "auto") -> bool:
    """True if a bar is drawn for *mode* (kept for callers that only want to know that)."""
    return progress_style(mode) == "bar"


def _clock_text(seconds: float) -> str:
    seconds = max(0, round(seconds))
    return f"{seconds // 3600}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"


def heartbeat_line(done: int, total: int | None, elapsed_s: float, desc: str, unit: str) -> str:
    """One heartbeat line: items done (of total), rate, and time left when the total is known."""
    rate = done / elapsed_s if elapsed_s > 0 else math.inf
    # whole numbers from 1000 on (never an exponent: 15460 frames/s, not 1.546e+04)
    number = (f"{rate:.0f}" if rate >= 1000 else f"{rate:.4g}") if math.isfinite(rate) else "-"
    rate_text = f"{number} {unit}s/s"
    if total:
        left = (total - done) / rate if rate > 0 and math.isfinite(rate) else 0.0
        return (f"qcorr: {desc} {done}/{total} ({100.0 * done / total:.0f} %), {rate_text}, "
                f"about {_clock_text(left)} left")
    return f"qcorr: {desc} {done} done, {rate_text}, {_clock_text(elapsed_s)} so far"


def progress(
    items: Iterable[T],
    *,
    total: int | None = None,
    desc: str = "",
    mode: ProgressMode = "auto",
    unit: str = "frame",
    stream: TextIO | None = None,
    clock: Callable[[], float] = time.monotonic,
) -> Iterator[T]:
    """Yield *items*, showing progress as :func:`progress_style` says.

    Parameters
    ----------
    items : iterable
    total : int, optional
        Number of items, for the percentage and the time left.
    desc : str
        What is counted (e.g. ``"frames"``).
    mode : {"auto", "always", "log", "never"}
    unit : str
        Name of one item, for the rate.
    stream : file, optional
        Where to write (default: stderr).
    clock : callable
        Seconds since an arbitrary origin (tests pass a fake clock).
    """
    stream = sys.stderr if stream is None else stream
    style = progress_style(mode, stream)
    if style == "none":
        yield from items
        return
    if style == "bar":
        from tqdm.auto import tqdm

        yield from tqdm(items, total=total, desc=desc, unit=unit, file=stream, leave=False)
        return
    start = clock()
    step = max(1, math.ceil(total / HEARTBEAT_LINES)) if total else 0
    last_line = start
    for done, item in enumerate(items, start=1):
        yield item
        now = clock()
        if (step and (done % step == 0 or done == total)) or (
                not step and now - last_line >= HEARTBEAT_SECONDS):
            print(heartbeat_line(done, total, now - start, desc, unit), file=stream, flush=True)
            last_line = now
