"""Atomic masses: the topology's (or MDAnalysis' guess), overrides per atom type, virtual sites.

Masses come from the topology, overridden per atom type by the user.  Atoms of zero
mass are *virtual sites* and are excluded (with a note) when their name or type looks
like one (:data:`VIRTUAL_SITE_PATTERN`) or when the user asks for it; any other zero,
negative or undefined mass is an error, because a guessed mass of 0 usually means
MDAnalysis did not recognise the element.  All masses are in u (= g/mol).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from qcorr.errors import ConfigError, TrajectoryError

__all__ = [
    "VIRTUAL_SITE_PATTERN",
    "MassCheck",
    "apply_masses_by_type",
    "masses_with_overrides",
    "massive_atoms",
]

#: atom names/types (case-insensitive, whole name) that mark a massless virtual site:
#: TIP4P-style "M"/"MW"/"EPW", extra points "EP1", lone pairs "LP1", generic "VS"/"VSITE", dummies "DUM".
VIRTUAL_SITE_PATTERN = re.compile(r"^(M|MW\d*|EPW\d*|EP\d*|LP\d*|VS\d*|VSITE\d*|DUM\w*)$", re.IGNORECASE)


def masses_with_overrides(atoms, masses_by_type: Mapping[str, float | str] | None = None) -> NDArray[np.float64]:
    """Masses (u) of *atoms* with every atom of each given type set to the given mass.

    Pure: the topology is not changed.

    Parameters
    ----------
    atoms : MDAnalysis.AtomGroup or MDAnalysis.Universe
    masses_by_type : mapping of str to float, optional
        Atom type -> mass in u (``--mass TYPE=AMU``).

    Returns
    -------
    ndarray (n_atoms,)
        The topology's masses (zeros if it has none) with the overrides applied.

    Raises
    ------
    ConfigError
        If a type does not occur among *atoms*, or a mass is not positive and finite.
    """
    atoms = atoms.atoms
    if hasattr(atoms, "masses"):
        masses = np.array(atoms.masses, dtype=float)
    else:
        masses = np.zeros(atoms.n_atoms)
    if not masses_by_type:
        return masses
    types = np.asarray(atoms.types).astype(str) if hasattr(atoms, "types") else np.full(atoms.n_atoms, "")
    for atom_type, value in masses_by_type.items():
        try:
            mass = float(value)
        except (TypeError, ValueError) as err:
            raise ConfigError(f"--mass {atom_type}={value}: the mass must be a number in u") from err
        if not np.isfinite(mass) or mass <= 0:
            raise ConfigError(f"--mass {atom_type}={value}: the mass must be positive (u = g/mol)")
        hit = types == atom_type
        if not hit.any():
            known = ", ".join(sorted(set(types))[:20])
            raise ConfigError(
                f"--mass {atom_type}=...: no atom has type {atom_type!r}; types in the topology: {known}"
            )
        masses[hit] = mass
    return masses


def apply_masses_by_type(universe, masses_by_type: Mapping[str, float | str]) -> None:
    """Set the mass (u) of every atom of each given type, in the Universe's in-memory topology.

    See :func:`masses_with_overrides` (the same rule without changing the topology).

    Raises
    ------
    ConfigError
        If a type does not occur in the topology, or a mass is not positive and finite.
    """
    if not masses_by_type:
        return
    masses = masses_with_overrides(universe, masses_by_type)
    if not hasattr(universe.atoms, "masses"):
        universe.add_TopologyAttr("masses", masses)
    universe.atoms.masses = masses


@dataclass
class MassCheck:
    """Result of :func:`massive_atoms`: the atoms kept and a note on those dropped.

    Attributes
    ----------
    indices : ndarray of int (n_kept,)
        Indices of the kept atoms in ``universe.atoms`` (the spectrum's channels).
    masses : ndarray (n_kept,)
        Their masses, u.
    note : str
        What was excluded (empty if nothing).
    """

    indices: NDArray[np.int64]
    masses: NDArray[np.float64]
    note: str = ""


def massive_atoms(atoms, *, masses: NDArray[np.float64] | None = None, exclude_massless: bool = False,
                  topology_name: str = "topology") -> MassCheck:
    """Atoms that carry mass (the channels of the spectrum), with virtual sites excluded.

    Rule: an atom of mass exactly 0 is a virtual site and is dropped when its name or
    type matches :data:`VIRTUAL_SITE_PATTERN`, or when *exclude_massless* is true.  Any
    other zero mass, and every negative or undefined (NaN) mass, is an error.

    Parameters
    ----------
    atoms : MDAnalysis.Universe or MDAnalysis.AtomGroup
        The atoms considered.
    masses : ndarray (n_atoms,), optional
        Masses of *atoms* in u (e.g. from :func:`masses_with_overrides`); default the
        topology's.
    exclude_massless : bool
        Drop every atom of zero mass whatever its name.
    topology_name : str
        Used in messages.

    Returns
    -------
    MassCheck
        Indices (into ``universe.atoms``) and masses (u) of the kept atoms, and a note
        (empty if nothing was dropped).

    Raises
    ------
    TrajectoryError
        Zero/negative/NaN masses that are not virtual sites (names the atoms and types
        and suggests ``--mass TYPE=AMU``), or no atom with mass at all.
    """
    atoms = atoms.atoms
    if masses is None:
        if not hasattr(atoms, "masses"):
            raise TrajectoryError(
                f"{topology_name} has no masses and MDAnalysis could not guess them; "
                "give them with --mass TYPE=AMU"
            )
        masses = atoms.masses
    masses = np.asarray(masses, dtype=float)
    if masses.shape != (atoms.n_atoms,):
        raise ConfigError(f"{masses.size} masses given for {atoms.n_atoms} atoms; give one mass per atom")
    names = np.asarray(atoms.names).astype(str) if hasattr(atoms, "names") else np.full(len(masses), "")
    types = np.asarray(atoms.types).astype(str) if hasattr(atoms, "types") else np.full(len(masses), "")
    zero = masses == 0.0
    looks_virtual = np.array(
        [bool(VIRTUAL_SITE_PATTERN.match(n) or VIRTUAL_SITE_PATTERN.match(t)) for n, t in zip(names, types)],
        dtype=bool,
    )
    dropped = zero & (looks_virtual | exclude_massless)
    bad = (~np.isfinite(masses) | (masses < 0) | zero) & ~dropped
    if bad.any():
        idx = np.flatnonzero(bad)
        bad_types = sorted(set(types[idx]))
        first = idx[0]
        raise TrajectoryError(
            f"{len(idx)} atoms in {topology_name} have zero, negative or undefined mass (first: atom "
            f"index {atoms.indices[first]} name {str(names[first])!r} type {str(types[first])!r}; types "
            f"{', '.join(bad_types[:10])}); give masses with --mass TYPE=AMU, or pass --exclude-massless "
            "if they are virtual sites"
        )
    keep = np.flatnonzero(~dropped)
    if len(keep) == 0:
        raise TrajectoryError(f"no atom in {topology_name} has a mass; give masses with --mass TYPE=AMU")
    note = ""
    if dropped.any():
        dropped_names = sorted(set(names[dropped]))
        note = (
            f"excluded {int(dropped.sum())} massless virtual-site atoms (names "
            f"{', '.join(dropped_names[:10])}) from every group"
        )
    return MassCheck(indices=atoms.indices[keep].astype(np.int64), masses=masses[keep], note=note)
