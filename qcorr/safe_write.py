"""Write outputs atomically and refuse outputs that cannot or must not be written.

Every output goes to a temporary file beside the target (``.NAME.XXXXXXXX.part``) and
is renamed onto the target once complete (``rename(2)`` replaces the target atomically,
POSIX.1-2017), so a failed or interrupted run never leaves a half-written output and an
existing file is only replaced by its complete successor.

Rules (DEVELOPERS.md, "Errors and outputs"):

* Only regular files are replaced.  A directory, a symbolic link (even one pointing at
  a regular file), a device node, a FIFO or a socket at the output path is refused:
  ``rename(2)`` would put a plain file in its place (for a symbolic link: the link itself,
  not the file it points to).
* :func:`check_output` runs before any computation: the output path must not be an
  input, the nearest existing parent must be a directory in which a file can really be
  created and written (a probe file of one byte, removed at once: this sees read-only
  mounts, missing permission and a full device the way the real write would), and the
  names must fit the file system's name length.
* Writing errors (no space, read-only file system, no permission, quota, ...) become one
  :class:`~qcorr.errors.OutputError` line naming the file, the POSIX error name
  (``ENOSPC``, ``EROFS``, ...) and what to do; the temporary file and any directory made
  for the output are removed.
"""

from __future__ import annotations

import contextlib
import errno
import os
import stat
import tempfile
from collections.abc import Iterable, Iterator, Mapping
from pathlib import Path

from qcorr.errors import ConfigError, OutputError

__all__ = [
    "atomic_path",
    "check_output",
    "special_file_kind",
    "write_bytes_atomic",
    "write_files_atomic",
    "write_text_atomic",
]

#: what to do after a writing error, by POSIX error number
_ADVICE: dict[int, str] = {
    errno.ENOSPC: "free space on that device or write somewhere else",
    errno.EDQUOT: "free space within your quota or write somewhere else",
    errno.EFBIG: "write to a file system that takes larger files",
    errno.EROFS: "write to a file system mounted read-write",
    errno.EACCES: "write to a directory you may write in",
    errno.EPERM: "write to a directory you may write in",
    errno.ENAMETOOLONG: "choose a shorter file name",
    errno.ENOTDIR: "a part of the path is a file, not a directory; choose another path",
    errno.EISDIR: "give a file name, not a directory",
    errno.EIO: "the device reported an input/output error; check it and write somewhere else",
}

#: prefix and suffix of the temporary files (mkstemp adds 8 random characters)
_TMP_SUFFIX = ".part"
_TMP_RANDOM = 8


def _what(target: Path, option: str | None) -> str:
    return f"{option} '{target}'" if option else f"'{target}'"


def special_file_kind(path: str | os.PathLike[str]) -> str | None:
    """What stands at *path* if it is not a regular file: "a directory", "a symbolic link to
    '...'", "a device node", "a FIFO (named pipe)", "a socket"; None if nothing is there or a
    regular file is (symbolic links are not followed)."""
    try:
        mode = os.lstat(path).st_mode
    except OSError:
        return None  # nothing there, a parent is a file, or the name is too long: reported later
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISLNK(mode):
        return f"a symbolic link to '{os.readlink(path)}'"
    if stat.S_ISDIR(mode):
        return "a directory"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device node"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _refuse_special(target: Path, option: str | None) -> None:
    kind = special_file_kind(target)
    if kind is not None:
        raise OutputError(
            f"{_what(target, option)} is {kind}; qcorr replaces only regular files: give the "
            "name of a new file (or of a regular file to replace)"
        )


def _error_name(err: OSError) -> str:
    return errno.errorcode.get(err.errno or 0, "error")


def output_error(err: OSError, target: Path, option: str | None = None) -> OutputError:
    """One-line :class:`OutputError` for an OSError met while writing *target*."""
    reason = err.strerror or str(err)
    advice = _ADVICE.get(err.errno or 0, "check the path and the device, or write somewhere else")
    return OutputError(f"cannot write {_what(target, option)}: {reason} ({_error_name(err)}); {advice}")


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.resolve() == b.resolve():
            return True
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def _nearest_existing(directory: Path) -> Path:
    while not os.path.lexists(directory) and directory != directory.parent:
        directory = directory.parent
    return directory


def _check_name_length(directory: Path, target: Path, option: str | None) -> None:
    try:
        limit = os.pathconf(directory, "PC_NAME_MAX")
    except (OSError, ValueError):
        return
    longest = len(os.fsencode(f".{target.name}.")) + _TMP_RANDOM + len(_TMP_SUFFIX)
    if limit and longest > limit:
        raise OutputError(
            f"{_what(target, option)}: the name is too long for its file system ({limit} bytes at "
            f"most, qcorr's temporary name needs {longest}) (ENAMETOOLONG); choose a shorter file name"
        )


def _probe(directory: Path, target: Path, option: str | None) -> None:
    """Create, write one byte to and remove a file in *directory*; raise OutputError if that fails."""
    try:
        fd, name = tempfile.mkstemp(prefix=".qcorr-probe.", suffix=_TMP_SUFFIX, dir=directory)
    except OSError as err:
        raise output_error(err, target, option) from None
    try:
        os.write(fd, b"\0")
    except OSError as err:
        raise output_error(err, target, option) from None
    finally:
        os.close(fd)
        with contextlib.suppress(OSError):
            os.unlink(name)


def check_output(
    target: str | os.PathLike[str],
    option: str = "--output",
    inputs: Iterable[str | os.PathLike[str]] = (),
    outputs: Iterable[str | os.PathLike[str]] = (),
) -> Path:
    """Check, before any computation, that *target* can be written and replaces nothing it must not.

    Parameters
    ----------
    target : path
        Output file.
    option : str
        The option (or argument) that named it, for the message.
    inputs : iterable of path
        Input files; the output may be none of them (same path or the same file).
    outputs : iterable of path
        The command's other outputs; the output may be none of them either.

    Returns
    -------
    pathlib.Path
        *target*.

    Raises
    ------
    ConfigError
        The name is empty, or the output is one of the inputs or of the other outputs.
    OutputError
        Something other than a regular file stands at *target*, a part of its directory is
        a file, or no file can be written there (read-only, no permission, no space, name
        too long), naming the POSIX error.
    """
    if os.fspath(target) == "":
        raise ConfigError(f"{option} is empty; give a file name")
    path = Path(target)
    _refuse_special(path, option)
    for item in inputs:
        if _same_file(path, Path(item)):
            raise ConfigError(f"{option} '{path}' is also an input file ('{item}'); choose another output name")
    for item in outputs:
        if _same_file(path, Path(item)):
            raise ConfigError(f"{option} '{path}' is also written as another output ('{item}'); give each "
                              "output its own name")
    directory = _nearest_existing(path.absolute().parent)
    if not directory.is_dir():
        raise OutputError(
            f"{_what(path, option)}: '{directory}' is not a directory (ENOTDIR); choose another path"
        )
    _check_name_length(directory, path, option)
    _probe(directory, path, option)
    return path


def _make_parents(directory: Path, target: Path, option: str | None) -> list[Path]:
    """Create *directory* and its missing parents; return those made (deepest last)."""
    missing = []
    while not os.path.lexists(directory) and directory != directory.parent:
        missing.append(directory)
        directory = directory.parent
    made = []
    try:
        for folder in reversed(missing):
            folder.mkdir()
            made.append(folder)
    except OSError as err:
        _remove_dirs(made)
        raise output_error(err, target, option) from None
    return made


def _remove_dirs(made: list[Path]) -> None:
    for folder in reversed(made):
        with contextlib.suppress(OSError):
            folder.rmdir()


def _new_temporary(target: Path, option: str | None) -> Path:
    try:
        fd, name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=_TMP_SUFFIX, dir=target.parent)
    except OSError as err:
        raise output_error(err, target, option) from None
    os.close(fd)
    return Path(name)


def _publish(tmp: Path, target: Path, option: str | None) -> None:
    """Give *tmp* the permissions of a new file (0666 minus the umask) and rename it onto *target*."""
    # mkstemp creates the file readable by its owner only
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    _refuse_special(target, option)  # something may have appeared since the check
    os.replace(tmp, target)


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike[str], option: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside *target*; rename it onto *target* when the block succeeds.

    The missing parent directories of *target* are made.  On any exception the temporary
    file and the directories made are removed and *target* is left untouched; an OSError of
    writing (no space, read-only, permission, ...) is raised as one-line
    :class:`~qcorr.errors.OutputError` naming *target* (and *option*).

    Raises
    ------
    OutputError
        Something other than a regular file stands at *target*, or writing failed.
    """
    target = Path(target)
    _refuse_special(target, option)
    made = _make_parents(target.parent, target, option)
    try:
        tmp = _new_temporary(target, option)
    except OutputError:
        _remove_dirs(made)
        raise
    try:
        yield tmp
        _publish(tmp, target, option)
    except BaseException as err:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        _remove_dirs(made)
        if isinstance(err, OSError) and not isinstance(err, OutputError):
            raise output_error(err, target, option) from None
        raise


def _write_all(path: Path, data: bytes | memoryview) -> None:
    view = memoryview(data).cast("B")
    with open(path, "wb") as handle:
        handle.writelines(view[first : first + (1 << 24)] for first in range(0, len(view), 1 << 24))


def write_bytes_atomic(target: str | os.PathLike[str], data: bytes | memoryview,
                       option: str | None = None) -> Path:
    """Write *data* to *target* atomically (see :func:`atomic_path`)."""
    with atomic_path(target, option) as tmp:
        _write_all(tmp, data)
    return Path(target)


def write_text_atomic(target: str | os.PathLike[str], text: str, option: str | None = None) -> Path:
    """Write *text* to *target* atomically (UTF-8; see :func:`atomic_path`)."""
    return write_bytes_atomic(target, text.encode("utf-8"), option)


def write_files_atomic(contents: Mapping[str | os.PathLike[str], bytes], option: str | None = None) -> None:
    """Write several files that belong together: every temporary file first, then the renames.

    If any write fails, every temporary file (and directory made) is removed and no
    target is touched; the message names the file whose write failed.

    Raises
    ------
    OutputError
        As :func:`atomic_path`, naming the file at fault.
    """
    targets = [Path(t) for t in contents]
    for target in targets:
        _refuse_special(target, option)
    made: list[Path] = []
    written: list[tuple[Path, Path]] = []
    try:
        for target, data in zip(targets, contents.values()):
            made += _make_parents(target.parent, target, option)
            tmp = _new_temporary(target, option)
            written.append((tmp, target))
            try:
                _write_all(tmp, data)
            except OSError as err:
                raise output_error(err, target, option) from None
        for tmp, target in written:
            try:
                _publish(tmp, target, option)
            except OSError as err:
                raise output_error(err, target, option) from None
    except BaseException:
        for tmp, _ in written:
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()
        _remove_dirs(made)
        raise
