"""Parsing of the ``qcorr liquid`` option values (text -> plain Python values; no physics)."""

from __future__ import annotations

import math

from qcorr.errors import ConfigError

__all__ = ["parse_md_energies", "parse_mixtures", "parse_symmetry_numbers"]


def parse_symmetry_numbers(items: list[str]) -> tuple[int | None, dict[str, int]]:
    """``N`` and ``GROUP=N`` strings -> (default for all groups or None, per-group dict)."""
    default: int | None = None
    per: dict[str, int] = {}
    for item in items:
        group, sep, text = item.rpartition("=")
        try:
            value = int(text)
        except ValueError:
            raise ConfigError(f"--symmetry-number '{item}': expected N or GROUP=N with N an integer >= 1") from None
        if value < 1:
            raise ConfigError(f"--symmetry-number '{item}': the symmetry number must be >= 1")
        if sep:
            per[group] = value
        else:
            default = value
    return default, per


def parse_md_energies(items: list[str]) -> dict[str, float]:
    """``GROUP=KJ_PER_MOL`` strings -> ``{group: value}``."""
    out: dict[str, float] = {}
    for item in items:
        group, sep, text = item.partition("=")
        try:
            value = float(text)
        except ValueError:
            value = float("nan")
        if not sep or not group or not math.isfinite(value):
            raise ConfigError(f"--md-energy '{item}': expected GROUP=KJ_PER_MOL with a finite number")
        out[group] = value
    return out


def parse_mixtures(items: list[str]) -> dict[str, list[str]]:
    """``NAME=GROUP1,GROUP2,...`` strings -> ``{name: [groups]}``."""
    out: dict[str, list[str]] = {}
    for item in items:
        name, sep, text = item.partition("=")
        members = [m for m in text.split(",") if m]
        if not sep or not name or len(members) < 2:
            raise ConfigError(f"--mixture '{item}': expected NAME=GROUP1,GROUP2,... with at least two groups")
        if name in out:
            raise ConfigError(f"--mixture '{item}': mixture '{name}' is given twice")
        out[name] = members
    return out
