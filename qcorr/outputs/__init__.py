"""Outputs: the property table (CSV + JSON sidecar) and figures."""
