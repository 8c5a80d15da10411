"""Progress bars: shown on a terminal, silent in logs and batch jobs."""

from __future__ import annotations

import sys
from collections.abc import Iterable, Iterator
from typing import Literal, TypeVar

from tqdm.auto import tqdm

T = TypeVar("T")
ProgressMode = Literal["auto", "always", "never"]


def progress_enabled(mode: ProgressMode = "auto") -> bool:
    """True if a bar should be drawn: 'auto' means only when stderr is a terminal."""
    if mode == "always":
        return True
    if mode == "never":
        return False
    return sys.stderr.isatty()


def progress(
    items: Iterable[T], *, total: int | None = None, desc: str = "", mode: ProgressMode = "auto"
) -> Iterator[T]:
    """Wrap *items* in a tqdm bar when :func:`progress_enabled` says so."""
    if not progress_enabled(mode):
        yield from items
        return
    yield from tqdm(items, total=total, desc=desc, unit="frame", file=sys.stderr, leave=False)
