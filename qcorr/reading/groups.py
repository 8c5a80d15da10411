"""Named atom groups on the spectrum's channels, and their degrees of freedom.

A group is given as an MDAnalysis selection string or an AtomGroup; it is expressed on
the *channels* (the atoms with mass, :func:`qcorr.reading.masses.massive_atoms`).  The
group ``total`` (every channel) is always first.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from qcorr.errors import ConfigError
from qcorr.reading.masses import MassCheck
from qcorr.reading.universe import first_line

__all__ = ["GroupInfo", "assign_degrees_of_freedom", "index_selection", "select_groups"]


@dataclass
class GroupInfo:
    """One named atom group, expressed on the channels (the massive atoms of the total).

    Attributes
    ----------
    name : str
    selection : str
        MDAnalysis selection string (for a group given as an AtomGroup, an ``index``
        selection of its atoms, :func:`index_selection`).
    members : bool ndarray (n_channels,)
    atom_count, molecule_count : int
        Atoms and residues (molecules) in the group.
    mass : float
        Total mass of the group's atoms, u (g/mol).
    constraints : float
        Holonomic constraints subtracted (set by :func:`assign_degrees_of_freedom`).
    degrees_of_freedom : float
        3N - constraints - centre-of-mass share (set by :func:`assign_degrees_of_freedom`).
    """

    name: str
    selection: str
    members: NDArray[np.bool_]
    atom_count: int
    molecule_count: int
    mass: float
    constraints: float = 0.0
    degrees_of_freedom: float = field(default=0.0)


def index_selection(indices) -> str:
    """MDAnalysis selection string that picks exactly these atom indices, ranges joined.

    ``[0, 1, 2, 5, 7, 8]`` -> ``"index 0:2 5 7:8"`` (MDAnalysis ``index`` ranges are
    inclusive).  An empty list gives ``"index -1"`` (selects nothing).
    """
    values = np.unique(np.asarray(indices, dtype=np.int64))
    if values.size == 0:
        return "index -1"
    breaks = np.flatnonzero(np.diff(values) != 1)
    firsts = np.r_[values[0], values[breaks + 1]]
    lasts = np.r_[values[breaks], values[-1]]
    parts = [str(a) if a == b else f"{a}:{b}" for a, b in zip(firsts.tolist(), lasts.tolist())]
    return "index " + " ".join(parts)


def _picked_atoms(atoms, name: str, selection):
    """The atoms group *name* picks: a selection string evaluated on *atoms*, or an AtomGroup."""
    from MDAnalysis.core.groups import AtomGroup

    if isinstance(selection, AtomGroup):
        if selection.universe is not atoms.universe:
            raise ConfigError(
                f"--group {name}: the AtomGroup belongs to another Universe; select it from the "
                "Universe being analysed"
            )
        outside = np.setdiff1d(selection.indices, atoms.indices)
        if outside.size:
            raise ConfigError(
                f"--group {name}: {outside.size} of its atoms (first: atom index {outside[0]}) are "
                "not among the atoms analysed; select the group from them"
            )
        return selection, index_selection(selection.indices)
    if not isinstance(selection, str):
        raise ConfigError(
            f"--group {name}={selection!r}: give an MDAnalysis selection string or an AtomGroup"
        )
    try:
        return atoms.select_atoms(selection), selection
    except Exception as err:
        raise ConfigError(
            f"--group {name}={selection!r}: MDAnalysis cannot parse the selection ({first_line(err)})"
        ) from err


def select_groups(atoms, channels: MassCheck, selections: Mapping[str, object]) -> list[GroupInfo]:
    """Build the group list: ``total`` (all channels) first, then each user group in order.

    Atoms a group picks that are not channels (virtual sites) are left out.

    Parameters
    ----------
    atoms : MDAnalysis.Universe or MDAnalysis.AtomGroup
        The atoms analysed; selection strings are evaluated among them
        (:meth:`MDAnalysis.core.groups.AtomGroup.select_atoms`).
    channels : MassCheck
        The atoms with mass among *atoms*.
    selections : mapping of str to (str or AtomGroup)
        Group name -> MDAnalysis selection string or AtomGroup.

    Raises
    ------
    ConfigError
        Reserved or malformed group name, invalid selection, an AtomGroup of another
        Universe or with atoms outside *atoms*, or a group with no massive atom (names
        the group and the selection).
    """
    atoms = atoms.atoms
    universe = atoms.universe
    n_atoms = universe.atoms.n_atoms
    position = np.full(n_atoms, -1, dtype=np.int64)
    position[channels.indices] = np.arange(len(channels.indices))
    total_atoms = universe.atoms[channels.indices]
    groups = [
        GroupInfo(
            name="total",
            selection="all atoms with mass",
            members=np.ones(len(channels.indices), dtype=bool),
            atom_count=len(channels.indices),
            molecule_count=int(total_atoms.n_residues),
            mass=float(channels.masses.sum()),
        )
    ]
    for name, selection in selections.items():
        if name == "total":
            raise ConfigError("--group total=...: the name 'total' is reserved for all atoms; pick another name")
        if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9_.+-]+", name):
            raise ConfigError(
                f"--group {name}=...: group names may hold letters, digits and _ . + - only"
            )
        picked_atoms, text = _picked_atoms(atoms, name, selection)
        pos = position[picked_atoms.indices]
        pos = pos[pos >= 0]
        if len(pos) == 0:
            raise ConfigError(
                f"--group {name}={text!r} selects no atom with mass; check the selection "
                "against the topology's names/types/residues"
            )
        members = np.zeros(len(channels.indices), dtype=bool)
        members[pos] = True
        picked = universe.atoms[channels.indices[members]]
        groups.append(
            GroupInfo(
                name=name,
                selection=text,
                members=members,
                atom_count=int(members.sum()),
                molecule_count=int(picked.n_residues),
                mass=float(channels.masses[members].sum()),
            )
        )
    return groups


def assign_degrees_of_freedom(
    groups: list[GroupInfo],
    constraints: Mapping[str, str | float] | None = None,
    constraints_per_molecule: Mapping[str, str | float] | None = None,
    *,
    remove_com: bool = True,
) -> None:
    """Set ``constraints`` and ``degrees_of_freedom`` of every group in place.

    The total has ``3N - c - 3`` degrees of freedom (the centre-of-mass velocity of
    the total is removed every frame).  A group g of N_g atoms, mass M_g, out of the
    total mass M, has ``3 N_g - c_g - 3 M_g / M``.

    Derivation of the centre-of-mass share [derived for qcorr; re-check]: with
    independent Maxwell velocities (each Cartesian component of atom i has
    variance kT/m_i), the centre-of-mass velocity V = Σ m_i v_i / M has variance
    kT/M per component and Cov(v_i, V) = kT/M.  Hence for the group,
    E[Σ_{i∈g} m_i (v_i − V)²] = Σ_{i∈g} m_i (3kT/m_i − 2·3kT/M + 3kT/M)
    = 3kT (N_g − M_g/M), i.e. the group loses 3 M_g/M degrees of freedom; summed
    over disjoint groups covering the total this gives back the 3 of the total
    (equipartition, e.g. D. A. McQuarrie, *Statistical Mechanics*, ch. 7).

    Constraint counts: ``constraints[name]`` is a count for the group,
    ``constraints_per_molecule[name]`` a count per residue of the group.  For the
    total, when not given, the sum over the user groups is used if the groups are
    disjoint; overlapping constrained groups need an explicit total.

    Raises
    ------
    ConfigError
        Unknown group name, negative or non-numeric count, a group given both ways,
        overlapping constrained groups without an explicit total, or a count that
        leaves no degree of freedom.
    """
    constraints = dict(constraints or {})
    per_molecule = dict(constraints_per_molecule or {})
    by_name = {g.name: g for g in groups}
    for option, table in (("--constraints", constraints), ("--constraints-per-molecule", per_molecule)):
        for name, value in table.items():
            if name not in by_name:
                raise ConfigError(
                    f"{option} {name}=...: no group named {name!r}; groups are {', '.join(by_name)}"
                )
            try:
                count = float(value)
            except (TypeError, ValueError) as err:
                raise ConfigError(f"{option} {name}={value}: the count must be a number") from err
            if not np.isfinite(count) or count < 0:
                raise ConfigError(f"{option} {name}={value}: the count must be zero or positive")
            table[name] = count
    for name in set(constraints) & set(per_molecule):
        raise ConfigError(
            f"group {name!r} has both --constraints and --constraints-per-molecule; give one"
        )
    for group in groups:
        if group.name in constraints:
            group.constraints = constraints[group.name]
        elif group.name in per_molecule:
            group.constraints = per_molecule[group.name] * group.molecule_count
    total = groups[0]
    if "total" not in constraints and "total" not in per_molecule:
        users = groups[1:]
        constrained = [g for g in users if g.constraints > 0]
        if constrained:
            stack = np.sum([g.members for g in users], axis=0)
            if np.any(stack > 1):
                raise ConfigError(
                    "the groups overlap and carry constraints, so the total's count is ambiguous; "
                    "pass --constraints total=N"
                )
            total.constraints = float(sum(g.constraints for g in users))
    com = 3.0 if remove_com else 0.0
    for group in groups:
        share = com * group.mass / total.mass
        group.degrees_of_freedom = 3.0 * group.atom_count - group.constraints - share
        if group.degrees_of_freedom <= 0:
            raise ConfigError(
                f"group {group.name!r}: {group.constraints:g} constraints leave "
                f"{group.degrees_of_freedom:g} degrees of freedom for {group.atom_count} atoms; "
                "check --constraints"
            )
