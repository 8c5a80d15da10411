"""Thermodynamics from a spectrum: harmonic weighting functions, harmonic (Berens et al.
1983) properties and corrections, and the two-phase (2PT) model for liquids."""
