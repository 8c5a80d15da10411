"""The unit strings qcorr writes, each spelled one way: UDUNITS-2 syntax.

Every unit in a spectrum file's ``units`` attributes, in a property table's ``unit``
column and in its column schema is one of these strings, written in the syntax of
Unidata's UDUNITS-2 package as the CF conventions require (CF 1.11, §3.1 "Units"):
products separated by spaces, powers as trailing integers (``cm-1``, ``angstrom2``),
``1`` for dimensionless.  Tools that read CF units parse them, for example
``pint-xarray`` with the ``cf_xarray.units`` registry (``ds.pint.quantify()``).

Human-facing output (printed tables, Markdown and HTML summaries, figure labels) shows
the same units in the usual typographic form, :func:`pretty`.
"""

from __future__ import annotations

#: heat capacity or entropy per mole
MOLAR_HEAT_CAPACITY = "J mol-1 K-1"
#: energy per mole
MOLAR_ENERGY = "kJ mol-1"
#: heat capacity or entropy of the whole simulated system
SYSTEM_HEAT_CAPACITY = "J K-1"
#: energy of the whole simulated system
SYSTEM_ENERGY = "kJ"
#: mean-square displacement
AREA = "angstrom2"
#: volume
VOLUME = "angstrom3"
#: a ratio or a count
DIMENSIONLESS = "1"
#: wavenumber
WAVENUMBER = "cm-1"
#: density of states per unit wavenumber (its integral over wavenumber is a count)
PER_WAVENUMBER = "cm"
#: frequency
FREQUENCY = "THz"
#: time (lags, frame spacing)
TIME = "ps"
#: temperature
TEMPERATURE = "K"
#: molar mass (atomic mass unit per particle)
MOLAR_MASS = "g mol-1"
#: moment of inertia
MOMENT_OF_INERTIA = "g mol-1 angstrom2"
#: mass-weighted velocity product, Σ m v·v
MASS_VELOCITY_SQUARED = "g mol-1 angstrom2 ps-2"
#: momentum of a set of atoms (mass in u × velocity in Å/ps)
MOMENTUM = "g mol-1 angstrom ps-1"
#: diffusion coefficient
DIFFUSION = "m2 s-1"

_PRETTY = {
    MOLAR_HEAT_CAPACITY: "J/(mol K)",
    MOLAR_ENERGY: "kJ/mol",
    SYSTEM_HEAT_CAPACITY: "J/K",
    SYSTEM_ENERGY: "kJ",
    AREA: "Å²",
    VOLUME: "Å³",
    DIMENSIONLESS: "",
    WAVENUMBER: "cm⁻¹",
    PER_WAVENUMBER: "cm",
    FREQUENCY: "THz",
    TIME: "ps",
    TEMPERATURE: "K",
    MOLAR_MASS: "g/mol",
    MOMENT_OF_INERTIA: "g/mol Å²",
    MASS_VELOCITY_SQUARED: "g/mol Å²/ps²",
    MOMENTUM: "g/mol Å/ps",
    DIFFUSION: "m²/s",
}

#: every unit string qcorr writes
ALL_UNITS: tuple[str, ...] = tuple(_PRETTY)


def pretty(unit: str) -> str:
    """The usual typographic form of a UDUNITS unit string (unknown strings unchanged).

    >>> pretty("J mol-1 K-1")
    'J/(mol K)'
    """
    return _PRETTY.get(unit, unit)
