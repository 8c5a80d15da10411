"""Write outputs atomically: to a temporary file beside the target, then rename.

A failed or interrupted run therefore never leaves a half-written output, and an
existing file is only replaced once its successor is complete.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path in the target's directory; rename it onto *target* on success.

    On any exception the temporary file is removed and *target* is left untouched.
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        # mkstemp creates the file readable by its owner only; give the output the
        # permissions an ordinary new file gets (0666 minus the process umask)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def write_text_atomic(target: str | os.PathLike[str], text: str) -> None:
    """Write *text* to *target* atomically (UTF-8)."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


def check_writable(target: str | os.PathLike[str], option: str = "--output") -> None:
    """Fail early if *target*'s directory (or its nearest existing parent) is not writable.

    Parameters
    ----------
    target : path
        The output file to be written.
    option : str
        The option that named it, for the message.

    Raises
    ------
    qcorr.errors.ConfigError
        Naming the option, the file and the directory.
    """
    from qcorr.errors import ConfigError

    parent = Path(target).resolve().parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not os.access(parent, os.W_OK | os.X_OK):
        raise ConfigError(f"{option} {target}: cannot write in '{parent}'; choose a writable directory")
