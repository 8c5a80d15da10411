"""Consecutive frames of a GROMACS TRR or XTC file, decoded without MDAnalysis' per-frame Timestep work.

MDAnalysis' XDR readers decode a frame in C (``libmdaxdr``) and then spend about as
long again in Python on the Timestep: the box matrix becomes lengths and angles
(``triclinic_box``) every frame, the decoded arrays are copied into the Timestep and
converted to MDAnalysis units one by one (issue 16: 1.96 s of a 3.8 s bare read of
10,001 frames of 648 atoms).  :func:`xdr_frames` reads the same frames through the
same decoder (MDAnalysis' ``TRRFile`` / ``XTCFile``, with the reader's frame offsets)
into buffers allocated once, converts nm → Å and nm/ps → Å/ps in place with the
factors of MDAnalysis' own unit conversion and converts the box only when its bytes change.  The
values are bit for bit those of the MDAnalysis reader (tested in
``tests/test_xdr_frames.py``).

It is used only where it gives the reader's result exactly: a TRR or XTC reader of
MDAnalysis' own class with unit conversion on, no ``dt`` override, no atom subset,
no on-the-fly transformations and no auxiliary data (:func:`fast_reader_for`);
everything else is read through MDAnalysis' iteration.
"""

from __future__ import annotations

import numpy as np

__all__ = ["XdrFrame", "fast_reader_for", "xdr_frames"]



class XdrFrame:
    """The part of an MDAnalysis Timestep that qcorr reads, for one decoded XDR frame.

    Like MDAnalysis' Timestep it is one object updated in place frame after frame:
    ``positions`` and ``velocities`` are the same buffers every frame (copy what must
    outlive the frame).
    """

    __slots__ = ("frame", "time", "has_positions", "has_velocities", "positions", "velocities",
                 "_box", "_dimensions", "_length_factor")

    def __init__(self, n_atoms: int, length_factor: np.float32) -> None:
        self._length_factor = length_factor
        self.frame = -1
        self.time = 0.0
        self.has_positions = False
        self.has_velocities = False
        self.positions = np.empty((n_atoms, 3), np.float32)
        self.velocities = np.empty((n_atoms, 3), np.float32)
        self._box = b""
        self._dimensions = None

    @property
    def dimensions(self):
        """Box lengths (Å) and angles (degrees) as MDAnalysis gives them; None without a box."""
        return self._dimensions

    def _set_box(self, box: np.ndarray) -> None:
        key = box.tobytes()
        if key == self._box:
            return
        from MDAnalysis.lib.mdamath import triclinic_box

        dims = np.zeros(6, np.float32)
        dims[:] = triclinic_box(*box)  # as the reader's Timestep stores it (float32)
        if (dims[:3] == 0).all():  # the Timestep's rule: no box
            self._dimensions = None
        else:
            dims[:3] *= self._length_factor
            self._dimensions = dims
        self._box = key


def fast_reader_for(reader):
    """``("trr" | "xtc", offsets)`` if *reader* can be read by :func:`xdr_frames` with its exact result, else None."""
    try:
        from MDAnalysis.coordinates.TRR import TRRReader
        from MDAnalysis.coordinates.XTC import XTCReader
    except ImportError:  # pragma: no cover - MDAnalysis always ships them
        return None
    kind = {TRRReader: "trr", XTCReader: "xtc"}.get(type(reader))
    if kind is None:
        return None
    if (getattr(reader, "_sub", None) is not None or reader._kwargs.get("dt") is not None
            or not reader.convert_units or getattr(reader, "_transformations", None)
            or getattr(reader, "_auxs", None) or reader.ts.data.get("time_offset", 0)):
        return None
    xdr = getattr(reader, "_xdr", None)
    offsets = None if xdr is None else getattr(xdr, "offsets", None)
    if offsets is None or len(offsets) != reader.n_frames:
        return None
    return kind, np.asarray(offsets)


def xdr_frames(reader, start: int, stop: int):
    """Frames ``start .. stop-1`` of the XDR *reader*'s file, as :class:`XdrFrame` (one object).

    The file is opened a second time (the reader's own position is left alone), seeks
    once with the reader's offsets and decodes on.  Returns None when
    :func:`fast_reader_for` refuses the reader.

    Raises
    ------
    EOFError
        If the file has no frame *stop* - 1 (as :func:`qcorr.reading.stream.consecutive_frames`).
    OSError
        A frame that cannot be decoded (the caller names it).
    """
    found = fast_reader_for(reader)
    if found is None:
        return None
    kind, offsets = found
    from MDAnalysis.units import get_conversion_factor

    length = np.float32(get_conversion_factor("length", reader.units["length"], "Angstrom"))
    speed = (np.float32(get_conversion_factor("speed", reader.units["velocity"], "Angstrom/ps"))
             if kind == "trr" else None)
    return _decode(reader.filename, kind, offsets, reader.n_atoms, int(start), int(stop), reader.n_frames,
                   length, speed)


def _decode(filename, kind: str, offsets, n_atoms: int, start: int, stop: int, n_frames: int,
            length_factor, speed_factor):
    from MDAnalysis.lib.formats.libmdaxdr import TRRFile, XTCFile

    if stop <= start:
        return
    frame = XdrFrame(n_atoms, length_factor)
    if kind == "trr":
        from qcorr.reading.trr_frames import trr_frames, trr_layout

        if trr_layout(filename, offsets, n_atoms):  # single precision: numpy's byte swap
            yield from trr_frames(filename, offsets, n_atoms, start, stop, frame, length_factor, speed_factor)
            return
    forces = np.empty((n_atoms, 3), np.float32) if kind == "trr" else None
    handle = (TRRFile if kind == "trr" else XTCFile)(str(filename))
    try:
        handle.set_offsets(offsets)
        handle.seek(start)
        x, v = frame.positions, frame.velocities
        for index in range(start, stop):
            if index >= n_frames:
                raise EOFError("the trajectory ends before this frame")
            if forces is not None:
                raw = handle.read_direct_xvf(x, v, forces)
                frame.has_positions, frame.has_velocities = bool(raw.hasx), bool(raw.hasv)
            else:
                raw = handle.read_direct_x(x)
                frame.has_positions, frame.has_velocities = True, False
            if frame.has_positions:
                np.multiply(x, length_factor, out=x)
            if frame.has_velocities:
                np.multiply(v, speed_factor, out=v)
            frame.frame = index
            frame.time = raw.time
            frame._set_box(raw.box)
            yield frame
    finally:
        handle.close()
