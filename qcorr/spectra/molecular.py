"""Molecular decomposition of atomic velocities: translation, rotation, vibration.

For every molecule i (a residue or a connected fragment) with atoms j, made
whole across periodic boundaries (each atom is moved to the minimum image of
the molecule's first atom), the velocities are split as (Lin, Maiti, Goddard
2010 [1]_; classical rigid-body kinematics, Goldstein, Classical Mechanics,
3rd ed., Ch. 5)::

    v_j = V_i + ω_i × r_j + v_j^vib,    r_j = position relative to the centre of mass
    V_i = Σ m_j v_j / M_i
    L_i = Σ m_j r_j × (v_j − V_i),   I_i = Σ m_j (|r_j|² 1 − r_j r_jᵀ),   ω_i = I_i⁻¹ L_i

Channels handed to the spectrum estimator (one vector of 3 components per
molecule and part):

* translation: ``V_i`` in Å/ps with weight ``M_i`` (u); the DoS integrates to
  3 per molecule;
* rotation, nonlinear molecules: ``(√I_k ω_k)_{k=1..3}`` with ω_k the
  projections on the instantaneous principal axes e_k (weight 1, value in
  √u Å/ps); the axes are followed in time (the permutation and signs that best
  match the previous frame are kept), so a label does not jump when two moments
  cross or an eigenvector flips sign; integrates to 3 per molecule;
* rotation, linear molecules (smallest principal moment below
  ``linear_ratio`` × largest in the first frame): ``√I_⊥ ω_⊥`` in the lab frame,
  where ω_⊥ is the angular velocity perpendicular to the axis and I_⊥ the mean
  of the two large moments; integrates to 2 per molecule.  The spin about the
  axis (tiny moment) is left to vibration;
* monatomic molecules: no rotation.

Vibration is given two ways, which differ by the spectra of cross-correlations
between the parts [1]_:

* the *difference* DoS, ``S_vib = S_atoms − S_trn − S_rot`` (``vdos_vibration``);
* the *residual-velocity* DoS, the spectrum of ``v_j^vib = v_j − V_i − ω_i × r_j``
  (``vdos_vibration_residual``).

Both integrate to the same number: at every instant Σ m v² = M V² + ω·I·ω +
Σ m |v^vib|² exactly, because Σ m v^vib = 0 and Σ m r × v^vib = L − Iω = 0.
The difference DoS, however, is negative near zero frequency: a rotating
molecule's atoms do not diffuse relative to its centre (the atomic S(0) equals
the translational one) while the angular velocity does (S_rot(0) > 0), so
``S_vib(0) = −S_rot(0)``; weighted by the entropy weight, which grows without
bound at low frequency, this gives spurious negative vibrational entropy.
The residual-velocity DoS is non-negative and is what ``qcorr liquid`` uses by
default.  Rigid molecules (no vibrational degree of freedom left after
constraints) get both set to 0 exactly; their difference integral is reported
as a check.

The decomposer also follows the unwrapped centres of mass, from which
:mod:`qcorr.spectra.molecular_pass` estimates the self-diffusion coefficient
(mean-square displacement).  That module holds the streaming pass of
``qcorr spectrum --molecular``.

References
----------
.. [1] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191
   (2010). doi:10.1021/jp103120q
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr.errors import ConfigError, TrajectoryError

MOLECULE_DEFINITIONS = ("residue", "fragment")
DEFAULT_LINEAR_RATIO = 1e-2

__all__ = [
    "DEFAULT_LINEAR_RATIO",
    "MOLECULE_DEFINITIONS",
    "MolecularDecomposer",
    "MoleculeLayout",
    "build_layout",
    "molecule_ids_from_universe",
]

_PERMUTATIONS = np.array(list(itertools.permutations(range(3))))


@dataclass(frozen=True)
class MoleculeLayout:
    """Which channels (atoms) form which molecule, fixed before the frame loop.

    Attributes
    ----------
    molecule_of_channel : int array (n_channels,)
        Molecule index 0 .. n_molecules-1 of every channel.
    order, starts : int arrays
        Channels sorted by molecule and the offsets where each molecule begins
        (for :func:`numpy.add.reduceat`).
    masses : float array (n_channels,)
        Atomic masses, u.
    molecule_mass : float array (n_molecules,)
        M_i, u.
    atom_count : int array (n_molecules,)
    first_channel : int array (n_molecules,)
        Reference atom for making the molecule whole.
    rotational_dof : int array (n_molecules,)
        0 (one atom), 2 (linear) or 3.
    group_molecules : bool array (n_groups, n_molecules)
        Molecules all of whose atoms belong to the group.
    group_whole : bool array (n_groups,)
        True if the group consists of whole molecules only.
    contiguous : bool
        True if every molecule's atoms are consecutive channels in molecule order
        (then no reordering is needed).
    """

    molecule_of_channel: NDArray[np.int64]
    order: NDArray[np.int64]
    starts: NDArray[np.int64]
    masses: NDArray[np.float64]
    molecule_mass: NDArray[np.float64]
    atom_count: NDArray[np.int64]
    first_channel: NDArray[np.int64]
    rotational_dof: NDArray[np.int64]
    group_molecules: NDArray[np.bool_]
    group_whole: NDArray[np.bool_]
    contiguous: bool = False

    @property
    def n_molecules(self) -> int:
        """Number of molecules."""
        return int(self.molecule_mass.size)


def molecule_ids_from_universe(universe, channel_indices: ArrayLike, definition: str = "residue"):
    """Molecule index of every channel atom: its residue, or its bonded fragment.

    Raises
    ------
    ConfigError
        Unknown definition, or ``fragment`` with a topology that has no bonds.
    """
    idx = np.asarray(channel_indices, dtype=np.int64)
    atoms = universe.atoms[idx]
    if definition == "residue":
        raw = atoms.resindices
    elif definition == "fragment":
        try:
            raw = atoms.fragindices
        except Exception as err:  # MDAnalysis raises NoDataError without bonds
            raise ConfigError(
                "--molecules fragment needs bonds in the topology (none found); use "
                "--molecules residue or a topology with bonds"
            ) from err
    else:
        raise ConfigError(f"--molecules {definition!r}: choose one of {', '.join(MOLECULE_DEFINITIONS)}")
    _, ids = np.unique(np.asarray(raw), return_inverse=True)
    return ids.astype(np.int64)


def _minimum_image(d: NDArray[np.float64], box: ArrayLike | None) -> NDArray[np.float64]:
    """Minimum-image vectors (Å) for an MDAnalysis box [a, b, c, α, β, γ]; no box: unchanged."""
    if box is None:
        return d
    box = np.asarray(box, dtype=np.float64)
    if box.shape != (6,) or not np.all(box[:3] > 0):
        return d
    if np.allclose(box[3:], 90.0):
        edge = box[:3]
        return d - edge * np.round(d / edge)
    from MDAnalysis.lib.distances import minimize_vectors

    return minimize_vectors(d.astype(np.float32), box.astype(np.float32)).astype(np.float64)


def _jacobi(a: NDArray[np.float64], sweeps: int = 4) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Cyclic Jacobi diagonalisation of symmetric 3×3 matrices (n, 3, 3).

    Returns the rotated matrices and the accumulated rotations V with
    ``Vᵀ a V`` (nearly) diagonal, using the element updates of Numerical Recipes,
    3rd ed., §11.1 (θ = (a_qq − a_pp)/(2 a_pq), t = sgn θ/(|θ| + √(θ² + 1)),
    c = 1/√(t² + 1), s = t c, τ = s/(1 + c)).  Sweeps stop early once every
    off-diagonal element is below 1e-15 of the trace.
    """
    a = a.copy()
    n = a.shape[0]
    v = np.broadcast_to(np.eye(3), (n, 3, 3)).copy()
    scale = np.abs(np.einsum("nii->n", a)) + 1e-300
    for _ in range(sweeps):
        off = np.abs(a[:, 0, 1]) + np.abs(a[:, 0, 2]) + np.abs(a[:, 1, 2])
        if np.all(off <= 1e-15 * scale):
            break
        for p, q in ((0, 1), (0, 2), (1, 2)):
            r = 3 - p - q  # the third index
            apq = a[:, p, q].copy()
            nz = apq != 0.0
            with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
                theta = (a[:, q, q] - a[:, p, p]) / (2.0 * np.where(nz, apq, 1.0))
                t = np.where(theta >= 0, 1.0, -1.0) / (np.abs(theta) + np.sqrt(theta * theta + 1.0))
            t = np.where(nz & np.isfinite(t), t, 0.0)
            c = 1.0 / np.sqrt(t * t + 1.0)
            s = t * c
            a[:, p, p] -= t * apq
            a[:, q, q] += t * apq
            a[:, p, q] = a[:, q, p] = 0.0
            arp, arq = a[:, r, p].copy(), a[:, r, q].copy()
            a[:, r, p] = a[:, p, r] = c * arp - s * arq
            a[:, r, q] = a[:, q, r] = s * arp + c * arq
            vp, vq = v[:, :, p].copy(), v[:, :, q].copy()
            v[:, :, p] = c[:, None] * vp - s[:, None] * vq
            v[:, :, q] = s[:, None] * vp + c[:, None] * vq
    return a, v


def _reduce(layout: MoleculeLayout, per_channel: NDArray[np.float64]) -> NDArray[np.float64]:
    """Sum per-channel rows over each molecule's atoms."""
    if layout.contiguous:
        return np.add.reduceat(per_channel, layout.starts, axis=0)
    return np.add.reduceat(per_channel[layout.order], layout.starts, axis=0)


def _whole(layout: MoleculeLayout, positions: NDArray[np.float64], box) -> NDArray[np.float64]:
    """Positions relative to each molecule's first atom, molecules made whole (Å)."""
    ref = positions[layout.first_channel][layout.molecule_of_channel]
    return _minimum_image(positions - ref, box)


def _inertia(layout: MoleculeLayout, rel: NDArray[np.float64]) -> NDArray[np.float64]:
    """Inertia tensors (n_molecules, 3, 3), u Å², from centre-of-mass-relative positions."""
    x, y, z = rel[:, 0], rel[:, 1], rel[:, 2]
    m = layout.masses
    six = _reduce(layout, np.stack(
        [m * (y * y + z * z), m * (x * x + z * z), m * (x * x + y * y), -m * x * y, -m * x * z,
         -m * y * z], axis=1))
    out = np.empty((six.shape[0], 3, 3))
    out[:, 0, 0], out[:, 1, 1], out[:, 2, 2] = six[:, 0], six[:, 1], six[:, 2]
    out[:, 0, 1] = out[:, 1, 0] = six[:, 3]
    out[:, 0, 2] = out[:, 2, 0] = six[:, 4]
    out[:, 1, 2] = out[:, 2, 1] = six[:, 5]
    return out


def build_layout(
    masses: ArrayLike,
    molecule_ids: ArrayLike,
    group_members: ArrayLike,
    first_positions: ArrayLike,
    box: ArrayLike | None = None,
    linear_ratio: float = DEFAULT_LINEAR_RATIO,
) -> MoleculeLayout:
    """Build the molecule layout from masses, molecule ids and the first frame.

    Parameters
    ----------
    masses : array (n_channels,)
        Atomic masses, u (> 0).
    molecule_ids : int array (n_channels,)
        Molecule index of each channel (any integers; renumbered 0..n-1).
    group_members : bool array (n_groups, n_channels)
    first_positions : array (n_channels, 3)
        Positions in Å of the first frame (to detect linear molecules).
    box : array (6,), optional
        MDAnalysis box [a, b, c, α, β, γ] (Å, degrees).
    linear_ratio : float
        A molecule whose smallest principal moment is below this fraction of the
        largest is treated as linear (2 rotational dof).

    Raises
    ------
    ConfigError
        Inconsistent shapes or non-positive masses.
    """
    masses = np.asarray(masses, dtype=np.float64)
    ids = np.asarray(molecule_ids)
    members = np.asarray(group_members, dtype=bool)
    pos = np.asarray(first_positions, dtype=np.float64)
    n = masses.size
    if ids.shape != (n,) or pos.shape != (n, 3) or members.ndim != 2 or members.shape[1] != n:
        raise ConfigError(
            f"molecular decomposition: masses {masses.shape}, molecule ids {ids.shape}, positions "
            f"{pos.shape} and groups {members.shape} do not describe the same {n} atoms"
        )
    if np.any(~np.isfinite(masses)) or np.any(masses <= 0):
        raise ConfigError("molecular decomposition needs positive masses for every atom (check --mass)")
    if not 0 < linear_ratio < 1:
        raise ConfigError(f"linear-molecule threshold {linear_ratio} must lie in (0, 1)")
    _, mol = np.unique(ids, return_inverse=True)
    mol = mol.astype(np.int64)
    order = np.argsort(mol, kind="stable")
    sorted_mol = mol[order]
    starts = np.flatnonzero(np.r_[True, sorted_mol[1:] != sorted_mol[:-1]])
    first = order[starts]
    atom_count = np.diff(np.r_[starts, n])
    n_mol = starts.size
    molecule_mass = np.add.reduceat(masses[order], starts)
    # group membership of whole molecules
    inside = np.stack([np.add.reduceat(g[order].astype(np.int64), starts) for g in members])
    group_molecules = inside == atom_count[None, :]
    group_whole = np.all((inside == 0) | group_molecules, axis=1)
    contiguous = bool(np.array_equal(order, np.arange(n)))
    provisional = MoleculeLayout(
        mol, order, starts, masses, molecule_mass, atom_count, first,
        np.zeros(n_mol, dtype=np.int64), group_molecules, group_whole, contiguous,
    )
    rel = _whole(provisional, pos, box)
    com = _reduce(provisional, masses[:, None] * rel) / molecule_mass[:, None]
    rel -= com[mol]
    moments = np.linalg.eigvalsh(_inertia(provisional, rel))
    rot = np.where(atom_count == 1, 0, np.where(moments[:, 0] < linear_ratio * moments[:, 2], 2, 3))
    return MoleculeLayout(
        mol, order, starts, masses, molecule_mass, atom_count, first,
        rot.astype(np.int64), group_molecules, group_whole, contiguous,
    )


class MolecularDecomposer:
    """Turns (positions, velocities, box) frames into translation and rotation channels.

    Holds the principal axes of the previous frame (to follow them in time), the
    running sum of principal moments, and the unwrapped centres of mass.

    Parameters
    ----------
    layout : MoleculeLayout
    """

    def __init__(self, layout: MoleculeLayout) -> None:
        self.layout = layout
        n_mol = layout.n_molecules
        self._axes: NDArray[np.float64] | None = None
        self.moment_sum = np.zeros((n_mol, 3))
        self.frames = 0
        self.counted_frames = 0
        self._raw_com: NDArray[np.float64] | None = None
        self.unwrapped_com: NDArray[np.float64] | None = None

    # channel description --------------------------------------------------
    def channel_weights(self, include_vibration: bool = False) -> NDArray[np.float64]:
        """Channel weights: molecular masses (u) for translation, ones for rotation, and
        with *include_vibration* the atomic masses (u) of the residual velocities."""
        w = np.r_[self.layout.molecule_mass, np.ones(self.layout.n_molecules)]
        return np.r_[w, self.layout.masses] if include_vibration else w

    def channel_groups(self, include_vibration: bool = False) -> NDArray[np.bool_]:
        """Membership: translation groups, then rotation groups (2·n_groups rows over
        2·n_molecules channels); with *include_vibration* also residual-velocity groups
        (3·n_groups rows; atoms of the group's whole molecules)."""
        g = self.layout.group_molecules
        z = np.zeros_like(g)
        if not include_vibration:
            return np.r_[np.c_[g, z], np.c_[z, g]]
        atoms = g[:, self.layout.molecule_of_channel]
        za = np.zeros_like(atoms)
        return np.r_[np.c_[g, z, za], np.c_[z, g, za], np.c_[z, z, atoms]]

    # one frame --------------------------------------------------------------
    def frame(
        self, positions_A: ArrayLike, velocities_A_per_ps: ArrayLike, box: ArrayLike | None = None,
        include_vibration: bool = False, count: bool = True,
    ) -> NDArray[np.float64]:
        """Channel values of one frame, shape (2·n_molecules, 3) (+ n_atoms rows).

        Rows 0..n-1: centre-of-mass velocities (Å/ps); rows n..2n-1: √I-weighted
        angular velocities (√u Å/ps), see the module docstring.  With
        *include_vibration*, then the residual atomic velocities
        ``v_j − V_i − ω_i × r_j`` (Å/ps; ω_⊥ for linear molecules), whose kinetic
        energy is exactly the total minus translation minus rotation.  The frame's
        principal moments, each molecule's sorted ascending, add to
        :meth:`mean_moments` when *count* is true.
        """
        lay = self.layout
        x = np.asarray(positions_A, dtype=np.float64)
        v = np.asarray(velocities_A_per_ps, dtype=np.float64)
        n = lay.masses.size
        if x.shape != (n, 3) or v.shape != (n, 3):
            raise TrajectoryError(
                f"frame {self.frames}: positions {x.shape} / velocities {v.shape} do not match the "
                f"{n} atoms of the molecular layout"
            )
        m = lay.masses[:, None]
        mol = lay.molecule_of_channel
        M = lay.molecule_mass[:, None]
        rel = _whole(lay, x, box)
        com_rel = _reduce(lay, m * rel) / M
        self._track_com(x[lay.first_channel] + com_rel, box)
        rel -= com_rel[mol]
        V = _reduce(lay, m * v) / M
        dv = v - V[mol]
        L = _reduce(lay, m * np.cross(rel, dv))
        inertia = _inertia(lay, rel)
        rot = np.zeros_like(V)
        omega = np.zeros_like(V)
        moments = np.zeros_like(V)
        nonlinear = lay.rotational_dof == 3
        if nonlinear.any():
            vals, vecs = self._principal_axes(nonlinear, inertia[nonlinear])
            # ω = I⁻¹L, so on principal axis k: ω_k = e_k·L / I_k and √I_k ω_k = e_k·L / √I_k
            projected = np.einsum("nij,ni->nj", vecs, L[nonlinear])
            rot[nonlinear] = projected / np.sqrt(vals)
            omega[nonlinear] = np.einsum("nij,nj->ni", vecs, projected / vals)
            moments[nonlinear] = vals
        linear = lay.rotational_dof == 2
        if linear.any():
            vals, vecs = np.linalg.eigh(inertia[linear])
            axis = vecs[:, :, 0]
            perp = 0.5 * (vals[:, 1] + vals[:, 2])
            Ll = L[linear]
            Lperp = Ll - np.einsum("ni,ni->n", Ll, axis)[:, None] * axis
            rot[linear] = Lperp / np.sqrt(perp)[:, None]  # √I ω⊥ = L⊥/√I
            omega[linear] = Lperp / perp[:, None]
            moments[linear] = vals
        if count:
            self.moment_sum += np.sort(moments, axis=1)
            self.counted_frames += 1
        self.frames += 1
        if not include_vibration:
            return np.r_[V, rot]
        residual = dv - np.cross(omega[mol], rel)
        return np.r_[V, rot, residual]

    def _principal_axes(self, select, inertia):
        """Principal moments and axes, followed from the previous frame.

        First frame: :func:`numpy.linalg.eigh`.  Later frames: the tensor is
        expressed in the previous frame's axes (nearly diagonal) and diagonalised
        by cyclic Jacobi rotations (Press et al., Numerical Recipes, 3rd ed. 2007,
        §11.1), which keeps each axis label and sign continuous in time and costs
        a few batched 3×3 products.  Molecules whose off-diagonal elements do not
        fall below 1e-12 of the trace fall back to ``eigh`` + :meth:`_follow_axes`.
        """
        if self._axes is None:
            vals, vecs = np.linalg.eigh(inertia)
            return self._follow_axes(select, vals, vecs)
        prev = self._axes[select]
        a = np.swapaxes(prev, 1, 2) @ inertia @ prev
        a, rotation = _jacobi(a)
        vecs = prev @ rotation
        vals = np.einsum("nii->ni", a).copy()
        off = np.abs(a[:, 0, 1]) + np.abs(a[:, 0, 2]) + np.abs(a[:, 1, 2])
        bad = ~(off <= 1e-12 * np.abs(vals).sum(axis=1))
        if bad.any():
            v2, e2 = np.linalg.eigh(inertia[bad])
            overlap = np.einsum("nik,nil->nkl", prev[bad], e2)
            scores = np.abs(overlap[:, np.arange(3)[None, :], _PERMUTATIONS]).sum(axis=-1)
            best = _PERMUTATIONS[np.argmax(scores, axis=1)]
            e2 = np.take_along_axis(e2, best[:, None, :], axis=2)
            v2 = np.take_along_axis(v2, best, axis=1)
            sign = np.sign(np.einsum("nik,nik->nk", prev[bad], e2))
            sign[sign == 0] = 1.0
            vecs[bad] = e2 * sign[:, None, :]
            vals[bad] = v2
        self._axes[select] = vecs
        return vals, vecs

    def _follow_axes(self, select, vals, vecs):
        """Permute/sign-flip eigenvectors to best match the previous frame's axes."""
        if self._axes is None:
            self._axes = np.zeros((self.layout.n_molecules, 3, 3))
            self._axes[select] = vecs
            return vals, vecs
        prev = self._axes[select]
        overlap = np.einsum("nik,nil->nkl", prev, vecs)  # prev axis k vs new axis l
        scores = np.abs(overlap[:, np.arange(3)[None, :], _PERMUTATIONS]).sum(axis=-1)
        best = _PERMUTATIONS[np.argmax(scores, axis=1)]  # (n, 3): new index for old axis k
        vecs = np.take_along_axis(vecs, best[:, None, :], axis=2)
        vals = np.take_along_axis(vals, best, axis=1)
        sign = np.sign(np.einsum("nik,nik->nk", prev, vecs))
        sign[sign == 0] = 1.0
        vecs = vecs * sign[:, None, :]
        self._axes[select] = vecs
        return vals, vecs

    def _track_com(self, com: NDArray[np.float64], box) -> None:
        if self._raw_com is None:
            self.unwrapped_com = com.copy()
        else:
            self.unwrapped_com = self.unwrapped_com + _minimum_image(com - self._raw_com, box)
        self._raw_com = com

    # summaries --------------------------------------------------------------
    def mean_moments(self) -> NDArray[np.float64]:
        """Mean over the counted frames of each molecule's principal moments (n_molecules, 3),
        u Å², sorted ascending in every frame."""
        if self.counted_frames == 0:
            raise TrajectoryError("no frame was given to the molecular decomposition")
        return self.moment_sum / self.counted_frames
