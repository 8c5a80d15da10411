"""Outputs: the property table (``table``: DataFrames, CSV + JSON sidecar, merging,
printing) and the figures (``figures``: matplotlib Figures and saving them)."""
