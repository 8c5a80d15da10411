"""Spectra: the streaming segment-averaged estimator, the molecular decomposition, the
spectrum-file contract (NetCDF) and the checks run on a finished spectrum."""
