"""Thermodynamics from a spectrum Dataset: harmonic (Berens et al. 1983) properties and
corrections, and the two-phase (2PT) model for liquids.

Tables (pandas DataFrames in the property-table layout, provenance in ``attrs``):

* :func:`qcorr.thermo.harmonic.harmonic_properties` (``qcorr properties``);
* :func:`qcorr.thermo.twophase_table.two_phase_properties` and
  :func:`~qcorr.thermo.twophase_table.two_phase_split_spectra` (``qcorr liquid``).

Modules, one concept each: ``weights`` (harmonic weighting functions),
``spectrum_integrals`` (integrals of a spectrum against them, table units),
``segment_statistics`` (standard errors from the segments), ``spectrum_groups`` (the
groups of a Dataset and their checks), ``harmonic_rows`` / ``harmonic`` (the harmonic
table), ``hard_sphere_gas`` (fluidicity and the gas-like part), ``rigid_rotor``,
``twophase`` (2PT of one molecule type), ``twophase_inputs`` / ``twophase_rows`` /
``twophase_table`` (the 2PT table).
"""
