"""Reading trajectories: opening files, the time axis, masses, atom groups, streamed velocities.

Everything that touches MDAnalysis' readers lives here; the rest of qcorr sees plain
arrays (masses in u, velocities in Å/ps, a uniform sampling interval in ps).
"""
