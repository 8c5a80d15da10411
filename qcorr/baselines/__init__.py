"""Classical baselines measured from the same simulations, and the corrected observables.

A quantum correction is half an answer: what a group publishes is the classical MD value
plus the correction, next to experiment.  This subpackage measures the classical values
from the runs the spectrum came from and builds the ``corrected`` rows of the property
table (``DEVELOPERS.md``, "Classical baselines").

Modules, one concept each:

* ``energy_files``: the engines' energy output (GROMACS ``.edr`` via pyedr, LAMMPS logs
  via lammps-logfile, OpenMM ``StateDataReporter`` CSV via pandas, ASE trajectories via
  ``ase.io``) as one :class:`~qcorr.baselines.energy_files.EnergySeries` with explicit units;
* ``fluctuations``: block-averaged standard errors (Flyvbjerg & Petersen 1989) and the
  fluctuation formulas for C_V (canonical and Lebowitz–Percus–Verlet microcanonical) and C_P;
* ``classical``: the classical baselines of one system (heat capacities, mean energy and
  enthalpy) with their sources and the checks of the declared ensemble;
* ``corrected``: the corrected rows (classical baseline + harmonic correction) of one system;
* ``temperature_series``: C_P(T) from the slope of H(T) over systems at several temperatures,
  and its figure;
* ``vaporisation``: the corrected heat of vaporisation of a liquid–gas pair.
"""
