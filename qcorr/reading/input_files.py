"""Provenance of the inputs: name, size and SHA-256 of every file, whole or in byte ranges.

The SHA-256 (FIPS 180-4, via :mod:`hashlib`) of a large trajectory costs about a tenth
of reading it with MDAnalysis; :class:`FileDescriptions` computes it in a background
thread while the frames are read.  A frame-block job (``--block I-of-N``) hashes only
the I-th of N equal byte ranges of each file, so N blocks hash every file once between
them; ``qcorr combine`` checks that the ranges cover every file.
"""

from __future__ import annotations

import hashlib
import os
import threading
from collections.abc import Sequence
from pathlib import Path

from qcorr.errors import ConfigError, TrajectoryError

__all__ = [
    "FileDescriptions",
    "byte_range_of_part",
    "describe_files",
    "name_and_size",
    "start_describing_files",
]


def byte_range_of_part(size: int, part: int, parts: int) -> tuple[int, int]:
    """Byte range ``[first, stop)`` of part *part* (0-based) of *parts* equal shares of a file.

    Part ``i`` of ``N`` is ``[floor(i size / N), floor((i + 1) size / N))``; the parts of
    ``i = 0 .. N-1`` cover the file once, in order.
    """
    if parts < 1 or not 0 <= part < parts:
        raise ConfigError(f"file part {part + 1} of {parts}: the part must be between 1 and {parts}")
    return (part * size) // parts, ((part + 1) * size) // parts


def describe_files(
    paths: Sequence[str | os.PathLike[str]], _cancel: threading.Event | None = None,
    *, part: int = 0, parts: int = 1,
) -> list[dict[str, object]]:
    """Name, size (bytes) and SHA-256 (FIPS 180-4, via :mod:`hashlib`) of each input file.

    Files are read in 16 MiB blocks into one reused buffer, so large trajectories are not
    held in memory; hashlib releases the GIL while it digests a block, so this can run in
    a background thread beside the frame loop (:func:`start_describing_files`).

    With ``parts > 1`` (a frame-block job, ``--block I-of-N``) only the byte range
    :func:`byte_range_of_part` of each file is hashed, and the record holds
    ``"sha256_parts": [{"first_byte", "stop_byte", "sha256"}]`` instead of ``"sha256"``.
    The N block jobs then hash each file once between them instead of N times;
    ``qcorr combine`` checks that the parts cover every file and lists them all.  A part
    can be checked with standard tools, e.g. ``tail -c +$((first+1)) FILE | head -c
    $((stop-first)) | sha256sum``.

    Raises
    ------
    TrajectoryError
        If a file cannot be read (names the file).
    """
    records = []
    # 16 MiB reads: the thread needs the GIL between reads, and a frame loop in the main
    # thread holds it for milliseconds at a time (1 MiB reads made the hash of a 736 MiB
    # file last ~4 s of wall time beside the loop instead of ~0.5 s)
    buffer = bytearray(16 << 20)
    view = memoryview(buffer)
    for path in paths:
        path = Path(path)
        digest = hashlib.sha256()
        try:
            size = path.stat().st_size
            first, stop = byte_range_of_part(size, part, parts)
            left = stop - first
            with path.open("rb", buffering=0) as fh:
                fh.seek(first)
                while left > 0:
                    if _cancel is not None and _cancel.is_set():
                        return records
                    n = fh.readinto(view[: min(left, len(buffer))])
                    if not n:
                        break
                    digest.update(view[:n])
                    left -= n
        except OSError as err:
            raise TrajectoryError(
                f"cannot read '{path}' to record its SHA-256 ({err.strerror or err}); "
                "check that the file exists and is readable"
            ) from None
        if left > 0:
            raise TrajectoryError(
                f"'{path}' became shorter while its SHA-256 was computed ({size} bytes when "
                "started); do not change input files while qcorr reads them"
            )
        record: dict[str, object] = {"name": path.name, "size_bytes": size}
        if parts == 1:
            record["sha256"] = digest.hexdigest()
        else:
            record["sha256_parts"] = [{"first_byte": first, "stop_byte": stop,
                                       "sha256": digest.hexdigest()}]
        records.append(record)
    return records


class FileDescriptions:
    """:func:`describe_files` running in a background thread; :meth:`result` waits for it.

    The SHA-256 of a large trajectory costs about as much CPU as a tenth of reading
    it with MDAnalysis; hashing while the frames are read hides that time on a machine
    with a free core.  :meth:`cancel` stops the thread at the next 16 MiB block (used when
    the command fails).
    """

    def __init__(self, paths: Sequence[str | os.PathLike[str]], part: int = 0, parts: int = 1) -> None:
        self._paths = list(paths)
        self._part, self._parts = part, parts
        self._cancel = threading.Event()
        self._records: list[dict[str, object]] | None = None
        self._error: BaseException | None = None
        self._thread = threading.Thread(target=self._work, name="qcorr-sha256", daemon=True)
        self._thread.start()

    def _work(self) -> None:
        try:
            self._records = describe_files(self._paths, self._cancel, part=self._part, parts=self._parts)
        except BaseException as err:  # noqa: BLE001 -- handed to the caller's thread by result()
            self._error = err

    def result(self) -> list[dict[str, object]]:
        """The records of :func:`describe_files` (waits; re-raises its error here)."""
        self._thread.join()
        if self._error is not None:
            raise self._error
        if self._records is None or self._cancel.is_set():
            raise RuntimeError("file hashing was cancelled; no records")
        return self._records

    def cancel(self) -> None:
        """Stop hashing (the records are then incomplete and not returned)."""
        self._cancel.set()
        self._thread.join()


def start_describing_files(paths: Sequence[str | os.PathLike[str]], part: int = 0,
                           parts: int = 1) -> FileDescriptions:
    """Start :func:`describe_files` in a background thread; see :class:`FileDescriptions`."""
    return FileDescriptions(paths, part, parts)


def name_and_size(paths: Sequence[str | os.PathLike[str]]) -> list[dict[str, object]]:
    """Name and size (bytes) of each file, without a checksum (when hashing is switched off).

    Raises
    ------
    TrajectoryError
        If a file cannot be read (names the file).
    """
    records: list[dict[str, object]] = []
    for path in paths:
        path = Path(path)
        try:
            records.append({"name": path.name, "size_bytes": path.stat().st_size})
        except OSError as err:
            raise TrajectoryError(
                f"cannot read '{path}' to record its size ({err.strerror or err}); "
                "check that the file exists"
            ) from None
    return records
