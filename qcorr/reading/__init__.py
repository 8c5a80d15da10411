"""Reading trajectories: opening files, masses, atom groups, the time axis, streamed velocities.

Everything that touches MDAnalysis' readers lives here; the rest of qcorr sees plain
arrays (masses in u, velocities in Å/ps, a uniform sampling interval in ps).

* :mod:`qcorr.reading.options` -- ``KEY=VALUE`` and ``I-of-N`` option values;
* :mod:`qcorr.reading.universe` -- opening files as a Universe, formats, LAMMPS units, truncation;
* :mod:`qcorr.reading.input_files` -- name, size and SHA-256 of the inputs (whole or by byte range);
* :mod:`qcorr.reading.masses` -- masses, per-type overrides, virtual sites;
* :mod:`qcorr.reading.groups` -- named groups on the atoms with mass, degrees of freedom;
* :mod:`qcorr.reading.time_axis` -- the frame window and its time step;
* :mod:`qcorr.reading.stream` -- centre-of-mass-free velocity samples, frame by frame.
"""
