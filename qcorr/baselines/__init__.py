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
* ``kinetic``: the microcanonical heat capacity from the spectrum file's per-frame kinetic
  energy (the series itself is laid out by :mod:`qcorr.spectra.kinetic_series`);
* ``vaporisation``: the corrected heat of vaporisation of a liquid–gas pair.

Public functions: :func:`~qcorr.baselines.energy_files.read_energy_file`,
:func:`~qcorr.baselines.corrected.corrected_properties` (``qcorr corrected``),
:func:`~qcorr.baselines.temperature_series.temperature_series` and
:func:`~qcorr.baselines.temperature_series.series_figure` (``qcorr series``),
:func:`~qcorr.baselines.vaporisation.vaporisation_enthalpy` (``qcorr vaporisation``); the
building blocks :func:`~qcorr.baselines.classical.energy_file_baselines`,
:func:`~qcorr.baselines.kinetic.trajectory_baselines`,
:func:`~qcorr.baselines.fluctuations.blocked_standard_error`,
:func:`~qcorr.baselines.fluctuations.canonical_heat_capacity` and
:func:`~qcorr.baselines.fluctuations.microcanonical_heat_capacity`.  Tables follow the
property-table contract (``DEVELOPERS.md``) and carry their provenance in ``attrs``.
"""
