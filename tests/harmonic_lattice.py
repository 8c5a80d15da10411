"""An exactly harmonic crystal, integrated analytically through its normal modes.

A simple-cubic lattice of N = n³ equal masses with nearest-neighbour springs along the bonds
of a periodic box; each Cartesian component of the displacements moves in its own spring
network ("scalar" model), whose force constants are drawn at random (0.5–1.5 × κ₀) so that
no two modes share a frequency.  The dynamical matrix of a component is the weighted graph
Laplacian over m; its N − 1 non-zero eigenvalues ω² give the modes (the zero mode is the
uniform translation, absent: the centre of mass stays at rest).  So the crystal has
f = 3N − 3 kinetic and as many potential quadratic degrees of freedom, and its exact
classical heat capacity is C_V = f k (equipartition; any harmonic system).

The motion is exact: u(t) = Σ_k A_k e_k cos(ω_k t + φ_k), v = du/dt, with mode energies
E_k = m ω_k² A_k²/2.  The energies are the quantiles of the canonical distribution of a
mode's energy (exponential, mean kT), E = −kT ln(1 − (i − ½)/f), in random order, and the
phases are uniform: a deterministic, low-scatter stand-in for the canonical draw.  A
harmonic crystal does not exchange energy between its modes, so the kinetic energy's time
variance over infinite time is Σ_k E_k²/8 exactly (distinct frequencies), from which
:func:`infinite_time_heat_capacity` gives the value the Lebowitz–Percus–Verlet formula
must approach.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from qcorr import constants as C


@dataclass(frozen=True)
class HarmonicLattice:
    """Modes of the lattice: frequencies (rad/ps), unit eigenvectors, amplitudes (Å), phases."""

    n_side: int
    spacing_A: float
    mass_u: float
    omega_per_ps: np.ndarray  # (3, N - 1)
    vectors: np.ndarray  # (3, N, N - 1), columns orthonormal
    amplitude_A: np.ndarray  # (3, N - 1)
    phase: np.ndarray  # (3, N - 1)
    mode_energy_kJ_per_mol: np.ndarray  # (3, N - 1)

    @property
    def atoms(self) -> int:
        return self.n_side**3

    @property
    def degrees_of_freedom(self) -> int:
        return 3 * self.atoms - 3

    def velocities(self, time_ps: float) -> np.ndarray:
        """(N, 3) velocities in Å/ps at *time_ps*."""
        out = np.empty((self.atoms, 3))
        for axis in range(3):
            theta = self.omega_per_ps[axis] * time_ps + self.phase[axis]
            out[:, axis] = self.vectors[axis] @ (-self.amplitude_A[axis] * self.omega_per_ps[axis] * np.sin(theta))
        return out

    def positions(self, time_ps: float) -> np.ndarray:
        """(N, 3) positions in Å at *time_ps* (lattice sites plus displacements)."""
        grid = np.indices((self.n_side,) * 3).reshape(3, -1).T * self.spacing_A
        out = grid.astype(float)
        for axis in range(3):
            theta = self.omega_per_ps[axis] * time_ps + self.phase[axis]
            out[:, axis] += self.vectors[axis] @ (self.amplitude_A[axis] * np.cos(theta))
        return out


def make_lattice(n_side: int = 6, *, temperature_K: float = 100.0, mass_u: float = 39.948,
                 spacing_A: float = 3.8, spring_kJ_per_mol_A2: float = 5.0, seed: int = 17) -> HarmonicLattice:
    """The lattice and its modes (docstring of the module); units kJ/mol, Å, u, ps."""
    rng = np.random.default_rng(seed)
    n = n_side**3
    index = np.arange(n).reshape((n_side,) * 3)
    bonds = [(index, np.roll(index, -1, axis=a)) for a in range(3)]
    dof_per_axis = n - 1
    kT = C.gas_constant_J_per_mol_K * temperature_K / 1000.0
    quantiles = -kT * np.log(1.0 - (np.arange(3 * dof_per_axis) + 0.5) / (3 * dof_per_axis))
    energies = rng.permutation(quantiles).reshape(3, dof_per_axis)
    omegas, vectors, amplitudes = [], [], []
    for axis in range(3):
        laplacian = np.zeros((n, n))
        for a, b in bonds:
            k = spring_kJ_per_mol_A2 * rng.uniform(0.5, 1.5, size=n)
            np.add.at(laplacian, (a.ravel(), a.ravel()), k)
            np.add.at(laplacian, (b.ravel(), b.ravel()), k)
            np.add.at(laplacian, (a.ravel(), b.ravel()), -k)
            np.add.at(laplacian, (b.ravel(), a.ravel()), -k)
        # kJ/(mol Å² u) -> ps⁻²: 1 kJ/mol = 100 u Å²/ps²
        values, vecs = np.linalg.eigh(laplacian * 100.0 / mass_u)
        omega = np.sqrt(values[1:])  # drop the uniform translation (ω = 0)
        omegas.append(omega)
        vectors.append(vecs[:, 1:])
        amplitudes.append(np.sqrt(2 * energies[axis] * 100.0 / (mass_u * omega**2)))
    return HarmonicLattice(n_side, spacing_A, mass_u, np.array(omegas), np.array(vectors), np.array(amplitudes),
                           rng.uniform(0, 2 * np.pi, size=(3, dof_per_axis)), energies)


def infinite_time_heat_capacity(lattice: HarmonicLattice) -> float:
    """The Lebowitz–Percus–Verlet C_V (J/(mol K) per mole of lattices) of the infinite-time
    kinetic-energy statistics: ⟨K⟩ = ΣE/2, var K = ΣE²/8 (distinct frequencies)."""
    e = lattice.mode_energy_kJ_per_mol
    f = lattice.degrees_of_freedom
    x = f * (np.sum(e**2) / 8) / (2 * (np.sum(e) / 2) ** 2)
    return float(0.5 * f * C.gas_constant_J_per_mol_K / (1 - x))


def kinetic_energy_kJ_per_mol(lattice: HarmonicLattice, time_ps: float) -> float:
    """½ Σ m v² of the lattice at *time_ps*, kJ/mol."""
    v = lattice.velocities(time_ps)
    return 0.5 * lattice.mass_u * float(np.sum(v * v)) / 100.0
