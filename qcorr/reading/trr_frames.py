"""Single-precision GROMACS TRR frames decoded with numpy (a vectorised byte swap).

A TRR file is plain XDR: every frame is a header of big-endian integers and then the box,
positions, velocities and forces as big-endian floats (GROMACS reference manual, "File
formats: trr").  MDAnalysis' decoder (``libmdaxdr``, the xdrfile library) converts them one
float at a time, about 24 ns per float on the machine of ``docs/performance.md``: for 4,000
atoms that is most of a ``qcorr spectrum`` run (issue 16).  Here a frame is read with one
``readinto`` at the byte offset MDAnalysis' reader computed, its header is checked field by
field, and the arrays are byte-swapped by numpy into float32 buffers; the values are those
of MDAnalysis' reader bit for bit (``tests/test_xdr_frames.py``; the byte swap of an IEEE
float is exact).

Only what can be checked is decoded this way: the version string ``GMX_trn_file``, single
precision (4-byte box and coordinates), no input-record, energy, topology or symmetry
blocks, the atom count of the reader, and a frame length that ends exactly where the next
frame begins (or the file ends).  :func:`trr_layout` returns None for anything else and the
caller uses MDAnalysis' decoder for the whole run; a later frame that fails the checks
raises OSError naming what differs (the caller names the frame).
"""

from __future__ import annotations

import struct
from pathlib import Path

import numpy as np

__all__ = ["HEADER", "trr_frames", "trr_layout"]

#: magic, string length + 1, XDR string length, version string, 13 sizes/counts, time, lambda
HEADER = struct.Struct(">iii12s13iff")
_MAGIC, _VERSION = 1993, b"GMX_trn_file"


def _header(buffer, offset: int = 0):
    magic, slen, xlen, version, *sizes, time_ps, _lam = HEADER.unpack_from(buffer, offset)
    if magic != _MAGIC or slen != 13 or xlen != 12 or version != _VERSION:
        return None
    ir, e, box, vir, pres, top, sym, x, v, f, natoms, step, nre = sizes
    return {"other": (ir, e, top, sym), "box": box, "vir": vir, "pres": pres, "x": x, "v": v, "f": f,
            "natoms": natoms, "time": time_ps}


def _single_precision(h: dict, n_atoms: int) -> bool:
    coordinates = 12 * n_atoms
    return (h["natoms"] == n_atoms and h["other"] == (0, 0, 0, 0) and h["box"] in (0, 36)
            and h["vir"] in (0, 36) and h["pres"] in (0, 36)
            and all(h[k] in (0, coordinates) for k in ("x", "v", "f")))


def trr_layout(filename, offsets, n_atoms: int) -> bool:
    """Whether the first frame of *filename* is one :func:`trr_frames` decodes (see the module docstring)."""
    if len(offsets) == 0:
        return False
    with open(filename, "rb") as handle:
        handle.seek(int(offsets[0]))
        head = handle.read(HEADER.size)
    if len(head) < HEADER.size:
        return False
    h = _header(head)
    return h is not None and _single_precision(h, n_atoms)


def trr_frames(filename, offsets, n_atoms: int, start: int, stop: int, frame, length_factor, speed_factor):
    """Decode frames ``start .. stop-1`` into *frame* (an :class:`~qcorr.reading.xdr_frames.XdrFrame`).

    Raises
    ------
    EOFError
        If the file has no frame *stop* - 1.
    OSError
        A frame whose header or length is not what the first frame's layout promises.
    """
    n_frames = len(offsets)
    size = Path(filename).stat().st_size
    coordinates = 3 * n_atoms
    longest = HEADER.size + 3 * 36 + 3 * 12 * n_atoms
    buffer = bytearray(longest)
    view = memoryview(buffer)
    swapped_box = np.zeros((3, 3), np.float32)
    x, v = frame.positions.reshape(-1), frame.velocities.reshape(-1)
    with open(filename, "rb", buffering=0) as handle:
        for index in range(start, stop):
            if index >= n_frames:
                raise EOFError("the trajectory ends before this frame")
            begin = int(offsets[index])
            end = int(offsets[index + 1]) if index + 1 < n_frames else size
            length = end - begin
            if not HEADER.size <= length <= longest:
                raise OSError(f"TRR frame of {length} bytes, not a single-precision frame of {n_atoms} atoms")
            handle.seek(begin)
            if handle.readinto(view[:length]) != length:
                raise OSError("TRR frame shorter than its offsets say (truncated file)")
            h = _header(buffer)
            if h is None or not _single_precision(h, n_atoms):
                raise OSError("TRR frame header unlike the first frame's (version, precision or atom count)")
            at = HEADER.size
            expected = at + h["box"] + h["vir"] + h["pres"] + h["x"] + h["v"] + h["f"]
            if expected != length:
                raise OSError(f"TRR frame of {length} bytes where its header says {expected}")
            if h["box"]:
                swapped_box.reshape(-1)[:] = np.frombuffer(buffer, ">f4", 9, at)
            else:
                swapped_box[:] = 0.0
            at += h["box"] + h["vir"] + h["pres"]
            frame.has_positions = bool(h["x"])
            if h["x"]:
                np.multiply(np.frombuffer(buffer, ">f4", coordinates, at), length_factor, out=x)
                at += h["x"]
            frame.has_velocities = bool(h["v"])
            if h["v"]:
                np.multiply(np.frombuffer(buffer, ">f4", coordinates, at), speed_factor, out=v)
            frame.frame = index
            frame.time = h["time"]
            frame._set_box(swapped_box)
            yield frame
