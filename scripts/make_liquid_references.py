#!/usr/bin/env python
"""Reference thermodynamics of Lennard-Jones liquids by thermodynamic integration (OpenMM).

The two-phase (2PT) entropy of a liquid needs an independent reference made with *the same
model*.  For each system below this script makes, with OpenMM:

1. an NVE production trajectory with velocities (Nosé–Hoover-chain equilibration, then
   OpenMM's ``VerletIntegrator``), written as the validation set writes its trajectories,
   plus an energy file from OpenMM's ``StateDataReporter``;
2. the absolute classical Helmholtz energy, internal energy and entropy of the model at
   the state point by thermodynamic integration (TI) from the ideal gas [1]_ [2]_:

   * along a supercritical isotherm T_iso, from the dilute gas to the target number
     density ρ, of the excess pressure:  βA_ex/N (T_iso, ρ) = ∫₀^ρ βP_ex(ρ')/ρ'² dρ';
   * along the isochore ρ, from β_iso = 1/(k T_iso) to the target β, of the excess
     (potential) energy, Gibbs–Helmholtz:  βA_ex/N (β) = βA_ex/N (β_iso) + ∫ U_ex/N dβ';
   * plus the ideal gas (mixture): A_id/N = kT [Σ_i x_i ln(x_i ρ Λ_i³) − 1],
     Λ_i = h / (2π m_i k T)^{1/2}, and S = (U − A)/T;

   both integrals by Gauss–Legendre quadrature on a main node set, repeated on a smaller
   check set with independent runs (the difference bounds the quadrature error);
3. the classical heat capacity C_V at the state point from dU/dT (weighted quadratic fit
   of ⟨U_ex⟩ against β through the colder half of the isochore) and, at every isochore node,
   from the canonical fluctuations C_V,ex = ⟨δU²⟩/(kT²) ([2]_ §2.5); ⟨E⟩ and ⟨δE²⟩ at every
   node.

Which model.  The force field is OpenMM's ``NonbondedForce``: Lennard-Jones truncated (not
shifted) at r_c, Lorentz–Berthelot mixing, with the long-range dispersion correction
E_disp = C/V ([2]_ §2.8).  OpenMM reports the energy U_T = Σ_{r<r_c} u(r) + C/V, but its forces
are those of the continuous truncated-and-*shifted* potential: a pair crossing the cutoff
gets no impulse.  Molecular dynamics therefore samples the Boltzmann distribution of

    U_S = Σ_{r<r_c} [u(r) − u(r_c)] + C/V  =  U_T − y,   y = Σ_{r<r_c} u_ij(r_c)

(U_S is continuous and its gradient is the force everywhere, so a thermostatted run samples
exp(−βU_S), and an NVE run conserves K + U_S, not K + U_T).  This is the model whose entropy a
2PT analysis of the trajectory measures, and the one integrated here: its pressure has no
impulsive term at r_c,

    P_ex = W/(3V) + C/V²,   W = Σ_{r<r_c} 4ε[12(σ/r)¹² − 6(σ/r)⁶]   (the virial),

and its energy is U_S.  OpenMM does not report the virial or y, so both are computed here
in numpy (double precision) for every sampled frame; each frame's numpy energy is compared
with OpenMM's (worst difference recorded).  The pressure is cross-checked at every pressure
point with the volume-perturbation formula of Harismiadis, Vorholz & Panagiotopoulos [6]_
(central difference of ln Q under scaled coordinates, exact energy changes of U_S).

Two more scales are reported.  *OpenMM's energy scale*: U with OpenMM's potential energy
⟨U_T⟩ (what ``energies.csv`` averages to, and what an analysis fed with the MD energy sees),
and A = U − TS with the same S.  *The full Lennard-Jones potential*: the truncated potential
with the dispersion correction is the full potential in the standard mean-field tail
approximation (g = 1 beyond r_c, [2]_ §2.8); the target run is reweighted from U_S to U_T by
free-energy perturbation (Zwanzig [5]_): A_T − A_S = −kT ln⟨exp(−βy)⟩_S, ⟨X⟩_T =
⟨X exp(−βy)⟩_S / ⟨exp(−βy)⟩_S, with X the energy U_T and the pressure of the truncated
potential, which has the impulsive term u(r_c)·(pairs in r_c(1 − h) ≤ r < r_c)/(3Vh).  These
are compared with published equations of state in the tests.

Systems
-------
``argon_liquid_86K``
    the validation set's argon exactly: ε/k = 119.8 K, σ = 3.405 Å (Rowley, Nicholson &
    Parsonage [3]_), m from MDAnalysis' guess for Ar, cutoff 3σ, dispersion correction, 500
    atoms, T* = 0.722, ρ* = 0.8442 (Verlet [4]_).  Isotherm T* = 2.0 (supercritical: the
    critical temperature of the Lennard-Jones fluid is about T* = 1.31, Johnson, Zollweg &
    Gubbins [7]_).
``argon_krypton_liquid_117K``
    250 Ar + 250 Kr; argon as above, krypton ε/k = 172.7 K, σ = 3.591 Å from its second
    virial coefficients (Beattie, Brierley & Barriault [8]_); Lorentz–Berthelot mixing
    (OpenMM's rule for ``NonbondedForce``); cutoff 10.5 Å; 117 K (just above krypton's
    triple point, 115.8 K, from memory), number density 19.0 nm⁻³ — in van der Waals
    one-fluid reduced units (ε_x/k = 146.1 K, σ_x = 3.499 Å) T* ≈ 0.80, ρ* ≈ 0.81, a
    compressed liquid.  Isotherm at 300 K (one-fluid T* ≈ 2.05).

Outputs, in ``<validation dir>/liquid_references/<system>/``
------------------------------------------------------------
``topology.pdb``, ``trajectory.trr``
    NVE production (positions Å, on-step velocities Å/ps, time ps), as
    ``scripts/make_validation_data.py`` writes them; one residue per atom, residue names
    ``AR`` / ``KR`` so that ``resname KR`` selects krypton.
``energies.csv``
    OpenMM ``StateDataReporter`` of the production: time (ps), potential, kinetic and total
    energy (kJ/mol, whole system), temperature (K, 3N − 3 degrees of freedom).
``state_points.csv``
    one row per simulated state point (quadrature nodes, the target point) with the
    sampled averages and standard errors, columns named with their units.
``reference.json``
    settings and their digest, the reference values with standard errors and units, the
    quadrature check, heat capacities, energy conservation of the production, file
    checksums, run times.  Written last: a system is reused while its digest and the
    files' SHA-256 match.

Velocities.  OpenMM's ``VerletIntegrator`` is a leapfrog scheme whose state holds v(t − dt/2);
the trajectory stores the on-step velocity v(t) = v(t − dt/2) + (dt/2) F(t)/m (the central
difference of the positions), the one OpenMM also uses for the reported kinetic energy.

Usage::

    python scripts/make_liquid_references.py [--output-dir DIR] [--systems NAME ...]
                                             [--jobs N] [--force]

``--output-dir`` is the validation directory (default ``$QCORR_VALIDATION_DIR`` or
``~/.cache/qcorr-validation``); the systems go to its ``liquid_references/`` folder.

References
----------
.. [1] D. Frenkel, B. Smit, Understanding Molecular Simulation, 2nd ed. (Academic Press,
       2002), §7.1 (thermodynamic integration from the ideal gas).
.. [2] M. P. Allen, D. J. Tildesley, Computer Simulation of Liquids, 2nd ed. (Oxford,
       2017): §2.5 (fluctuations), §2.8 (long-range corrections), §8.4 (block averages);
       section numbers from memory.
.. [3] L. A. Rowley, D. Nicholson, N. G. Parsonage, J. Comput. Phys. 17, 401 (1975).
.. [4] L. Verlet, Phys. Rev. 159, 98 (1967).
.. [5] R. W. Zwanzig, J. Chem. Phys. 22, 1420 (1954) (free-energy perturbation).
.. [6] V. I. Harismiadis, J. Vorholz, A. Z. Panagiotopoulos, J. Chem. Phys. 105, 8469 (1996).
.. [7] J. K. Johnson, J. A. Zollweg, K. E. Gubbins, Mol. Phys. 78, 591 (1993).
.. [8] J. A. Beattie, J. S. Brierley, R. J. Barriault, J. Chem. Phys. 20, 1615 (1952).
"""

from __future__ import annotations

import argparse
import concurrent.futures
import csv
import dataclasses
import hashlib
import json
import math
import multiprocessing
import os
import platform
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

# the validation set's script (this folder, put on the path above): its argon, recorder, helpers
from make_validation_data import (
    VALIDATION_SYSTEMS,
    TrajectoryRecorder,
    _mdanalysis_mass,
    _openmm_platform,
    cpu_features,
    default_output_dir,
    file_record,
)

from qcorr.constants import avogadro_per_mol, boltzmann_J_per_K, planck_J_s
from qcorr.errors import ConfigError, QcorrError
from qcorr.safe_write import atomic_path, write_text_atomic

#: Version of the recipe below; bump when a change alters the outputs.
RECIPE_VERSION = 1

SUBDIRECTORY = "liquid_references"
TOPOLOGY_NAME = "topology.pdb"
TRAJECTORY_NAME = "trajectory.trr"
ENERGIES_NAME = "energies.csv"
STATE_POINTS_NAME = "state_points.csv"
REFERENCE_NAME = "reference.json"
DATA_FILES = {"topology": TOPOLOGY_NAME, "trajectory": TRAJECTORY_NAME, "energies": ENERGIES_NAME,
              "state_points": STATE_POINTS_NAME}

#: Boltzmann constant in kJ/(mol K) (CODATA via scipy, see qcorr.constants)
BOLTZMANN_KJ_PER_MOL_K = boltzmann_J_per_K * avogadro_per_mol / 1000.0
#: 1 kJ/(mol nm³) in MPa
KJ_PER_MOL_NM3_IN_MPA = 1000.0 / avogadro_per_mol / 1e-27 / 1e6


# --------------------------------------------------------------------------------------
# Specifications
# --------------------------------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class Species:
    """One kind of Lennard-Jones atom."""

    element: str  # element symbol; MDAnalysis guesses the mass from it
    residue_name: str
    epsilon_over_k_K: float
    sigma_A: float
    parameter_source: str


#: the validation set's argon (scripts/make_validation_data.py), taken from there so that the
#: two stay the same model
VALIDATION_ARGON = VALIDATION_SYSTEMS["argon_liquid_86K"]
ARGON = Species("Ar", "AR", VALIDATION_ARGON.epsilon_over_k_K, VALIDATION_ARGON.sigma_A,
                "L. A. Rowley, D. Nicholson, N. G. Parsonage, J. Comput. Phys. 17, 401 (1975)")
KRYPTON = Species("Kr", "KR", 172.7, 3.591,
                  "J. A. Beattie, J. S. Brierley, R. J. Barriault, J. Chem. Phys. 20, 1615 (1952): "
                  "Lennard-Jones (6, 12) parameters from the second virial coefficients of krypton")


@dataclasses.dataclass(frozen=True)
class LiquidSpec:
    """A Lennard-Jones liquid, its state point and the integration path."""

    name: str
    species: tuple[Species, ...]
    atom_counts: tuple[int, ...]
    temperature_K: float
    number_density_per_nm3: float
    cutoff_nm: float
    isotherm_temperature_K: float
    seed: int
    state_point_source: str
    # quadrature: Gauss-Legendre nodes of the main rule and of the check rule
    isotherm_nodes: tuple[int, int] = (8, 6)
    isochore_nodes: tuple[int, int] = (6, 4)
    # every state point: Nose-Hoover chain, melt at the isotherm temperature, equilibrate, sample
    timestep_fs: float = 5.0
    melt_ps: float = 3.0  # at the isotherm temperature, for points colder than it
    equilibration_ps: float = 7.0
    sampling_ps: float = 30.0
    # longer where the error matters most: the dilute end of the isotherm (its integrand
    # βP_ex/ρ² is noisiest there, and it is compared with B₂), the colder half of the isochore
    # (the heat-capacity fit) and the target point (U_ex, C_V from fluctuations)
    dilute_sampling_ps: float = 120.0
    dilute_density_fraction: float = 0.1
    cold_isochore_sampling_ps: float = 120.0
    target_sampling_ps: float = 150.0
    sample_every_steps: int = 20  # pressure points (the virial decorrelates within ~0.1 ps)
    isochore_sample_every_steps: int = 40  # energy-only points (U decorrelates within ~0.25 ps)
    equilibration_collision_per_ps: float = 5.0
    # strong enough that the total energy decorrelates within ~0.25 ps (the canonical
    # fluctuations give C_V); a Nose-Hoover chain is canonical at any coupling
    sampling_collision_per_ps: float = 10.0
    blocks: int = 10  # block averages for standard errors
    cutoff_shell_fraction: float = 0.02  # shell r_c(1-h) <= r < r_c: impulsive term of the truncated potential
    volume_perturbation: float = 1.0e-3  # relative volume change of the cross-check
    random_start_below_density_fraction: float = 0.6  # random gas start below this fraction of ρ
    heat_capacity_fit_degree: int = 2  # in β, through the colder half of the isochore and the target
    heat_capacity_check_degree: int = 4  # in β, through every isochore node and the target
    # NVE production
    production_melt_ps: float = 5.0
    production_equilibration_ps: float = 10.0
    production_energy_average_ps: float = 8.0  # last part of the equilibration: <U_S> sets E
    production_ps: float = 50.0
    production_timestep_fs: float = 5.0
    production_steps_per_frame: int = 2  # frames every 10 fs
    kind: str = "lennard_jones_liquid"

    @property
    def atom_count(self) -> int:
        return sum(self.atom_counts)

    @property
    def mole_fractions(self) -> tuple[float, ...]:
        return tuple(n / self.atom_count for n in self.atom_counts)

    @property
    def box_nm(self) -> float:
        return (self.atom_count / self.number_density_per_nm3) ** (1.0 / 3.0)


def _argon_spec() -> LiquidSpec:
    v = VALIDATION_ARGON
    sigma_nm = v.sigma_A / 10.0
    return LiquidSpec(
        name=v.name,
        species=(ARGON,),
        atom_counts=(4 * v.cells_per_side**3,),
        temperature_K=v.temperature_K,
        number_density_per_nm3=v.reduced_density / sigma_nm**3,
        cutoff_nm=v.cutoff_sigma * sigma_nm,
        isotherm_temperature_K=2.0 * v.epsilon_over_k_K,
        seed=2001,
        state_point_source="T* = 0.722, rho* = 0.8442 (L. Verlet, Phys. Rev. 159, 98 (1967)); "
        "the validation set's argon_liquid_86K",
    )


def _argon_krypton_spec() -> LiquidSpec:
    return LiquidSpec(
        name="argon_krypton_liquid_117K",
        species=(ARGON, KRYPTON),
        atom_counts=(250, 250),
        temperature_K=117.0,
        number_density_per_nm3=19.0,
        cutoff_nm=1.05,
        isotherm_temperature_K=300.0,
        seed=2002,
        state_point_source="chosen here: equimolar liquid just above the krypton triple point "
        "(115.8 K, from memory); one-fluid T* = 0.80, rho* = 0.81",
    )


LIQUID_SYSTEMS: dict[str, LiquidSpec] = {s.name: s for s in (_argon_spec(), _argon_krypton_spec())}


def spec_settings(spec: LiquidSpec) -> dict[str, Any]:
    settings = dataclasses.asdict(spec)
    settings["recipe_version"] = RECIPE_VERSION
    return settings


def settings_digest(spec: LiquidSpec) -> str:
    return hashlib.sha256(json.dumps(spec_settings(spec), sort_keys=True).encode()).hexdigest()


# --------------------------------------------------------------------------------------
# The model: per-atom and per-pair parameters, OpenMM system, numpy pair sums
# --------------------------------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class StatePoint:
    """One simulation of the integration path."""

    label: str
    leg: str  # "isotherm", "isochore" or "target"
    rule: str  # "main", "check" or "" (target)
    node: int
    temperature_K: float
    number_density_per_nm3: float
    weight: float  # quadrature weight in the leg's variable (nm^-3 or mol/kJ); 0 for the target
    seed: int
    measure_pressure: bool
    sampling_ps: float


def atom_species(spec: LiquidSpec) -> np.ndarray:
    """Species index of every atom (species in blocks: all of the first, then the second…)."""
    return np.repeat(np.arange(len(spec.species)), spec.atom_counts)


def atom_masses_u(spec: LiquidSpec) -> np.ndarray:
    masses = np.array([_mdanalysis_mass(s.element) for s in spec.species])
    return masses[atom_species(spec)]


def epsilon_kJ_per_mol(species: Species) -> float:
    return species.epsilon_over_k_K * BOLTZMANN_KJ_PER_MOL_K


def pair_parameters(spec: LiquidSpec) -> tuple[np.ndarray, np.ndarray]:
    """σ_ij (nm) and ε_ij (kJ/mol) between species, Lorentz–Berthelot rules (arithmetic σ,
    geometric ε; OpenMM's rule for NonbondedForce)."""
    sigma = np.array([s.sigma_A / 10.0 for s in spec.species])
    eps = np.array([epsilon_kJ_per_mol(s) for s in spec.species])
    return 0.5 * (sigma[:, None] + sigma[None, :]), np.sqrt(eps[:, None] * eps[None, :])


def lennard_jones_kJ_per_mol(r_nm, sigma_nm, epsilon):
    s6 = (sigma_nm / r_nm) ** 6
    return 4.0 * epsilon * (s6 * s6 - s6)


def build_openmm_system(spec: LiquidSpec, box_nm: float):
    """The model as an OpenMM System (cutoff, no switching, dispersion correction, CM removal)."""
    import openmm as mm
    from openmm import unit

    system = mm.System()
    system.setDefaultPeriodicBoxVectors(
        mm.Vec3(box_nm, 0, 0) * unit.nanometer, mm.Vec3(0, box_nm, 0) * unit.nanometer,
        mm.Vec3(0, 0, box_nm) * unit.nanometer,
    )
    nonbonded = mm.NonbondedForce()
    nonbonded.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    nonbonded.setCutoffDistance(spec.cutoff_nm)
    nonbonded.setUseDispersionCorrection(True)
    nonbonded.setUseSwitchingFunction(False)
    masses = atom_masses_u(spec)
    for kind, mass in zip(atom_species(spec), masses):
        s = spec.species[kind]
        system.addParticle(float(mass))
        nonbonded.addParticle(0.0, s.sigma_A / 10.0, epsilon_kJ_per_mol(s))
    system.addForce(nonbonded)
    system.addForce(mm.CMMotionRemover())
    return system


def dispersion_coefficient_kJ_nm3_per_mol(spec: LiquidSpec) -> float:
    """C of OpenMM's dispersion correction E_disp = C/V, read from the engine itself.

    The atoms are put on a simple cubic lattice whose spacing exceeds the cutoff, so every
    pair term vanishes and OpenMM's potential energy is C/V alone (Reference platform,
    double precision).  For one species C = 8πN²ε[σ¹²/(9 r_c⁹) − σ⁶/(3 r_c³)]
    (Allen & Tildesley §2.8); ``analytic_dispersion_coefficient`` evaluates that form.
    """
    import openmm as mm
    from openmm import unit

    n = spec.atom_count
    per_side = math.ceil(n ** (1.0 / 3.0))
    spacing = 1.1 * spec.cutoff_nm
    box = per_side * spacing
    grid = np.array([[i, j, k] for i in range(per_side) for j in range(per_side)
                     for k in range(per_side)])[:n]
    system = build_openmm_system(spec, box)
    context = mm.Context(system, mm.VerletIntegrator(0.001), mm.Platform.getPlatformByName("Reference"))
    context.setPositions((grid + 0.5) * spacing * unit.nanometer)
    energy = context.getState(getEnergy=True).getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole)
    return energy * box**3


def analytic_dispersion_coefficient_kJ_nm3_per_mol(spec: LiquidSpec) -> float:
    """C of E_disp = C/V in closed form, with OpenMM's averaging over species pairs.

    Allen & Tildesley §2.8 give, for g(r) = 1 beyond the cutoff, E_disp = 2πN²/V Σ_ij x_i x_j
    ∫_rc^∞ u_ij r² dr = (8πN²/V) Σ_ij x_i x_j ε_ij [σ_ij¹²/(9 r_c⁹) − σ_ij⁶/(3 r_c³)].
    OpenMM replaces x_i x_j by the fraction of *unordered pairs including self-pairs*,
    n_i(n_i+1)/2 or n_i n_j over N(N+1)/2 (found by comparison with the engine, see
    ``dispersion_coefficient_kJ_nm3_per_mol``); for one species both are the same, for the
    equimolar Ar–Kr mixture of 500 atoms they differ by 5e-5 relative.
    """
    sigma, eps = pair_parameters(spec)
    counts = np.array(spec.atom_counts, dtype=float)
    total = counts.sum()
    rc = spec.cutoff_nm
    terms = eps * (sigma**12 / (9 * rc**9) - sigma**6 / (3 * rc**3))
    pairs = np.outer(counts, counts)
    pairs[np.diag_indices_from(pairs)] = counts * (counts + 1) / 2
    upper = np.triu(pairs * terms).sum()
    return float(8 * math.pi * total**2 * upper / (total * (total + 1) / 2))


class PairSums:
    """Pair sums of one frame, double-precision numpy (see the module docstring).

    Returns the truncated pair energy Σ_{r<r_c} u (kJ/mol), the shift sum y = Σ_{r<r_c} u_ij(r_c),
    the virial W, the shift sum over the shell r_c(1 − h) ≤ r < r_c (the impulsive pressure of
    the truncated potential), its pair count, and the changes of U_S when the volume is scaled
    by 1 ± δ with the coordinates (pairs entering or leaving the cutoff and the change of C/V
    included).  Pairs are found with a periodic k-d tree; minimum image in a cubic box.
    """

    def __init__(self, spec: LiquidSpec, dispersion_coefficient: float):
        self.kinds = atom_species(spec)
        sigma, epsilon = pair_parameters(spec)
        self.sigma2 = sigma**2
        self.epsilon4 = 4.0 * epsilon
        self.cutoff = spec.cutoff_nm
        self.dispersion_coefficient = dispersion_coefficient
        self.shell = spec.cutoff_shell_fraction
        self.delta = spec.volume_perturbation
        self.scale = ((1 + self.delta) ** (1 / 3), (1 - self.delta) ** (1 / 3))
        self.u_cut = lennard_jones_kJ_per_mol(self.cutoff, sigma, epsilon)

    def __call__(self, positions_nm: np.ndarray, box_nm: float) -> dict[str, float]:
        from scipy.spatial import cKDTree

        x = np.mod(positions_nm, box_nm)
        reach = self.cutoff / self.scale[1] * (1 + 1e-9)
        pairs = cKDTree(x, boxsize=box_nm).query_pairs(reach, output_type="ndarray")
        d = x[pairs[:, 0]] - x[pairs[:, 1]]
        d -= box_nm * np.round(d / box_nm)
        r2 = np.einsum("ij,ij->i", d, d)
        ki, kj = self.kinds[pairs[:, 0]], self.kinds[pairs[:, 1]]
        s6 = (self.sigma2[ki, kj] / r2) ** 3
        e12 = self.epsilon4[ki, kj] * s6 * s6
        e6 = self.epsilon4[ki, kj] * s6
        ucut = self.u_cut[ki, kj]
        rc2 = self.cutoff**2
        inside = r2 < rc2
        pair_energy = float((e12 - e6)[inside].sum())
        shift = float(ucut[inside].sum())
        in_shell = inside & (r2 >= rc2 * (1 - self.shell) ** 2)
        volume = box_nm**3
        c = self.dispersion_coefficient
        shifted = pair_energy - shift
        changes = []
        for scale, sign in zip(self.scale, (1, -1)):
            kept = r2 * scale**2 < rc2
            scaled = float((e12[kept] * scale**-12 - e6[kept] * scale**-6 - ucut[kept]).sum())
            changes.append(scaled + c / (volume * (1 + sign * self.delta)) - shifted - c / volume)
        return {
            "pair_energy": pair_energy,
            "shift_sum": shift,
            "virial": float((12 * e12 - 6 * e6)[inside].sum()),
            "shell_shift_sum": float(ucut[in_shell].sum()),
            "shell_pair_count": int(in_shell.sum()),
            "expansion_energy_change": changes[0],
            "compression_energy_change": changes[1],
        }


# --------------------------------------------------------------------------------------
# Statistics and quadrature
# --------------------------------------------------------------------------------------


def block_standard_error(values: np.ndarray, blocks: int) -> float:
    """Standard error of the mean from *blocks* contiguous block means (Allen & Tildesley §8.4)."""
    x = np.asarray(values, dtype=float)
    usable = len(x) - len(x) % blocks
    means = x[:usable].reshape(blocks, -1).mean(axis=1)
    return float(means.std(ddof=1) / math.sqrt(blocks))


def block_jackknife(columns: np.ndarray, blocks: int, estimator) -> tuple[np.ndarray, np.ndarray]:
    """Estimates and jackknife standard errors over contiguous blocks of frames (Efron &
    Tibshirani, An Introduction to the Bootstrap (1993), ch. 11) of a nonlinear *estimator*,
    a function of the frames (rows of *columns*) returning an array."""
    x = np.asarray(columns, dtype=float)
    usable = len(x) - len(x) % blocks
    parts = np.array_split(x[:usable], blocks)
    whole = np.asarray(estimator(x[:usable]), dtype=float)
    leave_one_out = np.array([estimator(np.concatenate(parts[:i] + parts[i + 1:])) for i in range(blocks)])
    se = np.sqrt((blocks - 1) / blocks * np.sum((leave_one_out - leave_one_out.mean(axis=0)) ** 2, axis=0))
    return whole, se


def log_mean_exp(values: np.ndarray) -> float:
    """ln ⟨exp(values)⟩, computed stably."""
    top = np.max(values)
    return float(top + np.log(np.mean(np.exp(values - top))))


def gauss_legendre(n: int, lower: float, upper: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of the n-point Gauss–Legendre rule on [lower, upper]
    (Abramowitz & Stegun, Handbook of Mathematical Functions, 25.4.29–30)."""
    x, w = np.polynomial.legendre.leggauss(n)
    half = 0.5 * (upper - lower)
    return lower + half * (x + 1.0), half * w


def ideal_gas_per_atom(spec: LiquidSpec, temperature_K: float) -> dict[str, float]:
    """Ideal gas (mixture) of the spec's atoms at its number density, per mole of atoms.

    A_id/N = kT[Σ x_i ln(x_i ρ Λ_i³) − 1], U_id/N = 3kT/2, S_id/N = k[5/2 − Σ x_i ln(x_i ρ Λ_i³)]
    (Sackur–Tetrode with the ideal entropy of mixing; McQuarrie, Statistical Mechanics,
    ch. 5; Λ_i = h/(2π m_i k T)^{1/2}, constants from scipy via qcorr.constants).
    """
    rho = spec.number_density_per_nm3 * 1e27  # m^-3
    kT = boltzmann_J_per_K * temperature_K
    total = 0.0
    for x, species in zip(spec.mole_fractions, spec.species):
        mass_kg = _mdanalysis_mass(species.element) * 1e-3 / avogadro_per_mol
        wavelength = planck_J_s / math.sqrt(2 * math.pi * mass_kg * kT)
        total += x * math.log(x * rho * wavelength**3)
    R = boltzmann_J_per_K * avogadro_per_mol
    return {
        "helmholtz_energy_kJ_per_mol": R * temperature_K * (total - 1.0) / 1000.0,
        "internal_energy_kJ_per_mol": 1.5 * R * temperature_K / 1000.0,
        "entropy_J_per_mol_K": R * (2.5 - total),
    }


# --------------------------------------------------------------------------------------
# State points
# --------------------------------------------------------------------------------------


def integration_points(spec: LiquidSpec) -> list[StatePoint]:
    """The isotherm and isochore quadrature nodes (main and check rules) and the target."""
    points = []
    seed = spec.seed * 1000
    k = BOLTZMANN_KJ_PER_MOL_K
    beta_iso, beta_target = 1 / (k * spec.isotherm_temperature_K), 1 / (k * spec.temperature_K)
    for rule, n in zip(("main", "check"), spec.isotherm_nodes):
        nodes, weights = gauss_legendre(n, 0.0, spec.number_density_per_nm3)
        for i, (rho, w) in enumerate(zip(nodes, weights)):
            seed += 1
            dilute = rho < spec.dilute_density_fraction * spec.number_density_per_nm3
            points.append(StatePoint(f"isotherm-{rule}-{i + 1}", "isotherm", rule, i + 1,
                                     spec.isotherm_temperature_K, float(rho), float(w), seed, True,
                                     spec.dilute_sampling_ps if dilute else spec.sampling_ps))
    for rule, n in zip(("main", "check"), spec.isochore_nodes):
        nodes, weights = gauss_legendre(n, beta_iso, beta_target)
        for i, (beta, w) in enumerate(zip(nodes, weights)):
            seed += 1
            cold = beta >= colder_half_beta(spec)
            points.append(StatePoint(f"isochore-{rule}-{i + 1}", "isochore", rule, i + 1,
                                     float(1 / (k * beta)), spec.number_density_per_nm3, float(w), seed, False,
                                     spec.cold_isochore_sampling_ps if cold else spec.sampling_ps))
    points.append(StatePoint("target", "target", "", 0, spec.temperature_K, spec.number_density_per_nm3,
                             0.0, seed + 1, True, spec.target_sampling_ps))
    return points


def colder_half_beta(spec: LiquidSpec) -> float:
    """β (mol/kJ) halfway along the isochore: nodes at or above it form its colder half."""
    k = BOLTZMANN_KJ_PER_MOL_K
    return 0.5 * (1 / (k * spec.isotherm_temperature_K) + 1 / (k * spec.temperature_K))


def starting_positions(spec: LiquidSpec, box_nm: float, number_density: float, rng) -> np.ndarray:
    """fcc lattice (dense points; melted before sampling) or, for a gas, random positions with
    no pair closer than 0.9 σ_ij (the ideal-gas structure, which relaxes within a collision)."""
    n = spec.atom_count
    kinds = atom_species(spec)
    if number_density >= spec.random_start_below_density_fraction * spec.number_density_per_nm3:
        cells = math.ceil((n / 4) ** (1.0 / 3.0))
        basis = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]]) + 0.25
        grid = np.array([[i, j, k] for i in range(cells) for j in range(cells) for k in range(cells)])
        sites = (grid[:, None, :] + basis[None, :, :]).reshape(-1, 3) * (box_nm / cells)
        return sites[rng.permutation(len(sites))[:n]]
    sigma, _ = pair_parameters(spec)
    closest = 0.9 * sigma
    placed = np.empty((0, 3))
    placed_kinds = np.empty(0, dtype=int)
    for kind in kinds:
        while True:
            trial = rng.uniform(0, box_nm, 3)
            d = placed - trial
            d -= box_nm * np.round(d / box_nm)
            if not len(placed) or np.all(np.sqrt((d * d).sum(axis=1)) >= closest[kind, placed_kinds]):
                break
        placed = np.vstack([placed, trial])
        placed_kinds = np.append(placed_kinds, kind)
    return placed


def _context(spec, system, integrator):
    import openmm as mm

    platform_, properties = _openmm_platform(1)
    return mm.Context(system, integrator, platform_, properties)


def sample_state_point(spec: LiquidSpec, point: StatePoint, dispersion_coefficient: float) -> dict[str, Any]:
    """Run one state point (Nosé–Hoover chain) and return its averages and standard errors.

    Energies per mole of atoms, pressures in MPa, heat capacities in J/(mol K).  "potential
    energy" is U_S, the sampled model's (see the module docstring); "reported" is OpenMM's U_T.
    """
    import openmm as mm
    from openmm import unit

    wall0, cpu0 = time.perf_counter(), time.process_time()
    rng = np.random.default_rng(point.seed)
    n = spec.atom_count
    box = (n / point.number_density_per_nm3) ** (1.0 / 3.0)
    system = build_openmm_system(spec, box)
    dt = spec.timestep_fs * unit.femtosecond
    T = point.temperature_K
    melt_T = max(T, spec.isotherm_temperature_K)
    integrator = mm.NoseHooverIntegrator(melt_T * unit.kelvin, spec.equilibration_collision_per_ps / unit.picosecond, dt)
    context = _context(spec, system, integrator)
    context.setPositions(starting_positions(spec, box, point.number_density_per_nm3, rng) * unit.nanometer)
    context.setVelocitiesToTemperature(melt_T * unit.kelvin, int(rng.integers(1, 2**31 - 1)))
    steps = lambda ps: round(ps * 1000 / spec.timestep_fs)
    if melt_T > T:
        integrator.step(steps(spec.melt_ps))
        integrator.setTemperature(T * unit.kelvin)
    integrator.step(steps(spec.equilibration_ps))
    integrator.setCollisionFrequency(spec.sampling_collision_per_ps / unit.picosecond)

    sums = PairSums(spec, dispersion_coefficient)
    every = spec.sample_every_steps if point.measure_pressure else spec.isochore_sample_every_steps
    frames = steps(point.sampling_ps) // every
    volume = box**3
    c = dispersion_coefficient
    table = np.empty((frames, 8))
    worst_energy_difference = 0.0
    shell_pairs = []
    for i in range(frames):
        integrator.step(every)
        state = context.getState(getEnergy=True, getPositions=True)
        reported = state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole)
        kinetic = state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole)
        v = sums(state.getPositions(asNumpy=True).value_in_unit(unit.nanometer), box)
        truncated = v["pair_energy"] + c / volume
        worst_energy_difference = max(worst_energy_difference, abs(truncated - reported))
        table[i] = (truncated - v["shift_sum"], truncated, v["shift_sum"], kinetic,
                    v["virial"] / (3 * volume) + c / volume**2, v["shell_shift_sum"] / (3 * volume * spec.cutoff_shell_fraction),
                    v["expansion_energy_change"], v["compression_energy_change"])
        shell_pairs.append(v["shell_pair_count"])
    u_s, u_t, y, kin, p_s, p_cut, up, down = table.T
    kT = BOLTZMANN_KJ_PER_MOL_K * T
    dof = 3 * n - 3
    b = spec.blocks
    total = kin + u_s
    out: dict[str, Any] = {
        "label": point.label, "leg": point.leg, "rule": point.rule, "node": point.node,
        "temperature_K": T, "number_density_per_nm3": point.number_density_per_nm3,
        "beta_mol_per_kJ": 1 / kT, "weight": point.weight, "seed": point.seed,
        "sampled_ps": frames * every * spec.timestep_fs / 1000.0, "frames": frames,
        "potential_energy_kJ_per_mol_atoms": u_s.mean() / n,
        "potential_energy_kJ_per_mol_atoms_se": block_standard_error(u_s, b) / n,
        "reported_potential_energy_kJ_per_mol_atoms": u_t.mean() / n,
        "reported_potential_energy_kJ_per_mol_atoms_se": block_standard_error(u_t, b) / n,
        "total_energy_kJ_per_mol_system": total.mean(),
        "total_energy_kJ_per_mol_system_se": block_standard_error(total, b),
        "total_energy_variance_kJ2_per_mol2_system": total.var(),
        "reported_total_energy_kJ_per_mol_system": (kin + u_t).mean(),
        "kinetic_temperature_K": 2 * kin.mean() / (dof * BOLTZMANN_KJ_PER_MOL_K),
    }
    # canonical fluctuations: C_V,ex = <dU^2>/(k T^2) (Allen & Tildesley §2.5), per mole of atoms
    cv, cv_se = block_jackknife(u_s[:, None], b, lambda x: [x[:, 0].var() / (BOLTZMANN_KJ_PER_MOL_K * T**2) * 1000.0 / n])
    out["excess_heat_capacity_fluctuation_J_per_mol_K"] = float(cv[0])
    out["excess_heat_capacity_fluctuation_J_per_mol_K_se"] = float(cv_se[0])
    if point.measure_pressure:
        rho = point.number_density_per_nm3
        p_se = block_standard_error(p_s, b)
        out["excess_pressure_MPa"] = p_s.mean() * KJ_PER_MOL_NM3_IN_MPA
        out["excess_pressure_MPa_se"] = p_se * KJ_PER_MOL_NM3_IN_MPA
        out["pressure_MPa"] = (p_s.mean() + rho * kT) * KJ_PER_MOL_NM3_IN_MPA
        out["isotherm_integrand_nm3"] = p_s.mean() / (kT * rho**2)
        out["isotherm_integrand_nm3_se"] = p_se / (kT * rho**2)

        def perturbation(x):  # Harismiadis et al. (1996): central difference of ln Q
            return [kT * (log_mean_exp(-x[:, 0] / kT) - log_mean_exp(-x[:, 1] / kT))
                    / (2 * spec.volume_perturbation * volume)]

        pv, pv_se = block_jackknife(np.stack([up, down], axis=1), b, perturbation)
        out["excess_pressure_volume_perturbation_MPa"] = float(pv[0]) * KJ_PER_MOL_NM3_IN_MPA
        out["excess_pressure_volume_perturbation_MPa_se"] = float(pv_se[0]) * KJ_PER_MOL_NM3_IN_MPA
        shell_volume = 4 / 3 * math.pi * spec.cutoff_nm**3 * (1 - (1 - spec.cutoff_shell_fraction) ** 3)
        out["pair_correlation_at_cutoff"] = float(np.mean(shell_pairs)) / (n * (n - 1) / 2 * shell_volume / volume)
    out["numpy_vs_openmm_energy_max_abs_kJ_per_mol"] = worst_energy_difference
    if point.leg == "target":
        # reweighting to the truncated potential U_T = U_S + y (Zwanzig 1954), per atom
        def truncated(x):
            _, u_t_, y_, p_t_ = x.T
            log_weights = -(y_ - y_.mean()) / kT
            w = np.exp(log_weights - log_weights.max())
            w /= w.sum()
            shift_free_energy = y_.mean() - kT * log_mean_exp(log_weights)
            return [shift_free_energy / n, w @ u_t_ / n, w @ p_t_,
                    (w @ u_t_ - shift_free_energy) / n]

        columns = np.stack([u_s, u_t, y, p_s + p_cut], axis=1)
        est, se = block_jackknife(columns, b, truncated)
        for key, value, error in zip(
            ("shift_free_energy_kJ_per_mol_atoms", "truncated_potential_energy_kJ_per_mol_atoms",
             "truncated_excess_pressure_MPa", "truncated_energy_minus_shift_free_energy_kJ_per_mol_atoms"),
            est, se,
        ):
            scale = KJ_PER_MOL_NM3_IN_MPA if key.endswith("MPa") else 1.0
            out[key] = float(value) * scale
            out[key + "_se"] = float(error) * scale
        out["shift_sum_standard_deviation_kJ_per_mol"] = float(y.std())
    out["wall_s"] = round(time.perf_counter() - wall0, 2)
    out["cpu_s"] = round(time.process_time() - cpu0, 2)
    return out


# --------------------------------------------------------------------------------------
# NVE production
# --------------------------------------------------------------------------------------


def run_production(spec: LiquidSpec, directory: Path, dispersion_coefficient: float) -> dict[str, Any]:
    """Melt, equilibrate (Nosé–Hoover chain), then NVE (VerletIntegrator) with frames and energies.

    Before the NVE run the velocities are scaled so that the conserved energy K + U_S equals
    its canonical mean ⟨U_S⟩ + (3N − 3)kT/2, ⟨U_S⟩ over the end of the equilibration: the
    microcanonical run then sits at the target temperature up to that average's error.
    Energy conservation is judged on K + U_S (the dynamics' Hamiltonian, every 10th frame);
    the energy file's total K + U_T also jumps by u(r_c) whenever a pair crosses the cutoff.
    """
    import openmm as mm
    from openmm import app, unit

    wall0, cpu0 = time.perf_counter(), time.process_time()
    directory.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(spec.seed)
    n = spec.atom_count
    box = spec.box_nm
    sums = PairSums(spec, dispersion_coefficient)
    system = build_openmm_system(spec, box)
    kinds = atom_species(spec)
    topology = app.Topology()
    chain = topology.addChain()
    for kind in kinds:
        species = spec.species[kind]
        residue = topology.addResidue(species.residue_name, chain)
        topology.addAtom(species.element, app.element.Element.getBySymbol(species.element), residue)
    topology.setPeriodicBoxVectors(np.eye(3) * box * unit.nanometer)
    platform_, properties = _openmm_platform(1)
    dt_eq = spec.timestep_fs * unit.femtosecond
    T = spec.temperature_K
    melt = mm.NoseHooverIntegrator(spec.isotherm_temperature_K * unit.kelvin,
                                   spec.equilibration_collision_per_ps / unit.picosecond, dt_eq)
    context = mm.Context(system, melt, platform_, properties)
    context.setPositions(starting_positions(spec, box, spec.number_density_per_nm3, rng) * unit.nanometer)
    context.setVelocitiesToTemperature(spec.isotherm_temperature_K * unit.kelvin, int(rng.integers(1, 2**31 - 1)))
    steps = lambda ps, dt_fs: round(ps * 1000 / dt_fs)
    melt.step(steps(spec.production_melt_ps, spec.timestep_fs))
    melt.setTemperature(T * unit.kelvin)
    average_steps = steps(spec.production_energy_average_ps, spec.timestep_fs)
    melt.step(steps(spec.production_equilibration_ps, spec.timestep_fs) - average_steps)

    def shifted_energy(state) -> float:
        x = state.getPositions(asNumpy=True).value_in_unit(unit.nanometer)
        return state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole) - sums(x, box)["shift_sum"]

    potentials = []
    for _ in range(average_steps // 20):
        melt.step(20)
        potentials.append(shifted_energy(context.getState(getEnergy=True, getPositions=True)))
    dof = 3 * n - 3
    target_energy = float(np.mean(potentials)) + 0.5 * dof * BOLTZMANN_KJ_PER_MOL_K * T
    state = context.getState(getPositions=True, getVelocities=True, getEnergy=True)
    kinetic = state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole)
    # the NH kinetic energy is on-step; scale it to put K + U_S at the canonical mean
    scale = math.sqrt(max(target_energy - shifted_energy(state), 0.1 * kinetic) / kinetic)
    velocities = state.getVelocities(asNumpy=True).value_in_unit(unit.nanometer / unit.picosecond) * scale
    positions = state.getPositions(asNumpy=True).value_in_unit(unit.nanometer)
    del context, melt

    dt_fs = spec.production_timestep_fs
    integrator = mm.VerletIntegrator(dt_fs * unit.femtosecond)
    simulation = app.Simulation(topology, system, integrator, platform_, properties)
    simulation.context.setPositions(positions * unit.nanometer)
    # leapfrog holds v(t - dt/2): start from v(0) - (dt/2) F(0)/m so that v(0) is the scaled one
    masses = atom_masses_u(spec)
    forces = simulation.context.getState(getForces=True).getForces(asNumpy=True).value_in_unit(
        unit.kilojoule_per_mole / unit.nanometer)
    half = 0.5 * dt_fs / 1000.0
    simulation.context.setVelocities((velocities - half * forces / masses[:, None]) * unit.nanometer / unit.picosecond)
    simulation.context.setTime(0.0)
    simulation.currentStep = 0

    names = [spec.species[k].element for k in kinds]
    resnames = [spec.species[k].residue_name for k in kinds]
    recorder = TrajectoryRecorder(directory, names, names, resnames, np.arange(n))
    recorder.write_topology(positions * 10.0, np.full(3, box * 10.0))
    n_frames = steps(spec.production_ps, dt_fs) // spec.production_steps_per_frame + 1
    energies = {"time": [], "kinetic": [], "potential": [], "kinetic_from_velocities": []}
    conserved = {"time": [], "energy": []}
    first = last = None
    with atomic_path(directory / ENERGIES_NAME) as energy_tmp, open(energy_tmp, "w") as energy_file:
        reporter = app.StateDataReporter(
            energy_file, spec.production_steps_per_frame, time=True, potentialEnergy=True,
            kineticEnergy=True, totalEnergy=True, temperature=True, separator=",",
        )
        simulation.reporters.append(reporter)
        with recorder:
            for frame in range(n_frames):
                if frame:
                    simulation.step(spec.production_steps_per_frame)
                state = simulation.context.getState(getPositions=True, getVelocities=True, getForces=True,
                                                    getEnergy=True)
                if frame == 0:
                    reporter.report(simulation, state)  # the reporter's first line is t = 0
                x = state.getPositions(asNumpy=True).value_in_unit(unit.nanometer)
                v_half = state.getVelocities(asNumpy=True).value_in_unit(unit.nanometer / unit.picosecond)
                f = state.getForces(asNumpy=True).value_in_unit(unit.kilojoule_per_mole / unit.nanometer)
                v = v_half + half * f / masses[:, None]
                step = frame * spec.production_steps_per_frame
                t_ps = step * dt_fs / 1000.0
                recorder.record(step, t_ps, x * 10.0, v * 10.0, np.full(3, box * 10.0))
                kinetic = state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole)
                energies["time"].append(t_ps)
                energies["kinetic"].append(kinetic)
                energies["potential"].append(state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole))
                energies["kinetic_from_velocities"].append(float(0.5 * np.sum(masses[:, None] * v * v)))
                if frame % 10 == 0:
                    conserved["time"].append(t_ps)
                    conserved["energy"].append(kinetic + shifted_energy(state))
                if first is None:
                    first = x.copy()
                last = x
        simulation.reporters.clear()

    kT = BOLTZMANN_KJ_PER_MOL_K * T
    kin = np.asarray(energies["kinetic"])

    def drift(t, e):
        t, e = np.asarray(t), np.asarray(e)
        slope, intercept = np.polyfit(t, e, 1)
        return float(slope), float(np.std(e - (slope * t + intercept))), float(np.max(np.abs(e - e[0])))

    slope, rms, excursion = drift(conserved["time"], conserved["energy"])
    reported_slope, reported_rms, _ = drift(energies["time"], kin + np.asarray(energies["potential"]))
    msd = float(np.mean(np.sum((last - first) ** 2, axis=1)) * 100.0)  # unwrapped: OpenMM keeps them
    temperature = 2 * kin / (dof * BOLTZMANN_KJ_PER_MOL_K)
    return {
        "frames": n_frames,
        "timestep_fs": dt_fs,
        "frame_interval_fs": dt_fs * spec.production_steps_per_frame,
        "production_ps": spec.production_ps,
        "target_conserved_energy_kJ_per_mol": target_energy,
        "mean_kinetic_temperature_K": float(temperature.mean()),
        "mean_kinetic_temperature_K_se": block_standard_error(temperature, spec.blocks),
        "mean_reported_potential_energy_kJ_per_mol_atoms": float(np.mean(energies["potential"]) / n),
        "conserved_energy_note": "K + U_S (kinetic + shifted-potential energy incl. C/V), every 10th frame",
        "energy_drift_kJ_per_mol_per_ps": slope,
        "energy_drift_kT_per_atom_per_ns": slope * 1000.0 / (n * kT),
        "total_energy_rms_about_trend_kJ_per_mol": rms,
        "total_energy_max_excursion_kJ_per_mol": excursion,
        "reported_total_energy_drift_kJ_per_mol_per_ps": reported_slope,
        "reported_total_energy_rms_about_trend_kJ_per_mol": reported_rms,
        "kinetic_energy_rms_kJ_per_mol": float(np.std(kin)),
        "kinetic_energy_from_stored_velocities_max_relative_difference": float(
            np.max(np.abs(np.asarray(energies["kinetic_from_velocities"]) - kin) / kin)),
        "final_mean_square_displacement_A2": msd,
        "wall_s": round(time.perf_counter() - wall0, 2),
        "cpu_s": round(time.process_time() - cpu0, 2),
    }


# --------------------------------------------------------------------------------------
# Thermodynamic integration
# --------------------------------------------------------------------------------------


def _quantity(value: float, se: float, unit: str) -> dict[str, Any]:
    return {"value": float(value), "standard_error": float(se), "unit": unit}


def heat_capacity_fit(rows: list[dict], degree: int, at_beta: float) -> tuple[float, float, float]:
    """dU_ex/dT per mole of atoms (J/(mol K)) at *at_beta* from a weighted polynomial fit of
    ⟨U_ex⟩/N against β; its standard error from the fit covariance, multiplied by
    sqrt(χ²/dof) when that exceeds 1 (the Birge ratio, R. T. Birge, Phys. Rev. 40, 207 (1932),
    from memory; the Particle Data Group's "scale factor"): scatter beyond the stated errors
    is not hidden; and χ²/dof."""
    beta = np.array([r["beta_mol_per_kJ"] for r in rows])
    u = np.array([r["potential_energy_kJ_per_mol_atoms"] for r in rows])
    se = np.array([r["potential_energy_kJ_per_mol_atoms_se"] for r in rows])
    design = np.vander(beta - at_beta, degree + 1, increasing=True) / se[:, None]
    coef, *_ = np.linalg.lstsq(design, u / se, rcond=None)
    cov = np.linalg.inv(design.T @ design)
    dof = len(u) - degree - 1
    chi2 = float(np.sum((design @ coef - u / se) ** 2) / dof) if dof > 0 else float("nan")
    inflation = math.sqrt(max(1.0, chi2)) if dof > 0 else 1.0
    factor = -BOLTZMANN_KJ_PER_MOL_K * at_beta**2 * 1000.0  # dU/dT = dU/dβ · (−k β²); kJ -> J
    return float(coef[1] * factor), float(math.sqrt(cov[1, 1]) * abs(factor) * inflation), chi2


def integrate(spec: LiquidSpec, rows: list[dict]) -> dict[str, Any]:
    """Combine the state points into the reference values (see the module docstring)."""
    k = BOLTZMANN_KJ_PER_MOL_K
    R = k * 1000.0
    T = spec.temperature_K
    beta_t = 1 / (k * T)
    by_leg = {(r["leg"], r["rule"]): [] for r in rows}
    for r in rows:
        by_leg[(r["leg"], r["rule"])].append(r)
    target = by_leg[("target", "")][0]

    def leg_sum(leg, rule, value, se):
        pts = by_leg[(leg, rule)]
        total = sum(p["weight"] * p[value] for p in pts)
        return total, math.sqrt(sum((p["weight"] * p[se]) ** 2 for p in pts))

    legs = {}
    for rule in ("main", "check"):
        iso = leg_sum("isotherm", rule, "isotherm_integrand_nm3", "isotherm_integrand_nm3_se")
        cho = leg_sum("isochore", rule, "potential_energy_kJ_per_mol_atoms", "potential_energy_kJ_per_mol_atoms_se")
        legs[rule] = {"isotherm": iso, "isochore": cho, "total": (iso[0] + cho[0], math.hypot(iso[1], cho[1]))}
    beta_a, beta_a_se = legs["main"]["total"]
    a_ex, a_ex_se = beta_a / beta_t, beta_a_se / beta_t
    u_ex, u_ex_se = target["potential_energy_kJ_per_mol_atoms"], target["potential_energy_kJ_per_mol_atoms_se"]
    s_ex = (u_ex - a_ex) / T * 1000.0
    s_ex_se = math.hypot(u_ex_se, a_ex_se) / T * 1000.0
    ideal = ideal_gas_per_atom(spec, T)
    s_total = ideal["entropy_J_per_mol_K"] + s_ex

    isochore_rows = [r for r in rows if r["leg"] in ("isochore", "target")]
    cold_rows = [r for r in isochore_rows if r["beta_mol_per_kJ"] >= colder_half_beta(spec)]
    cv_main = heat_capacity_fit(cold_rows, spec.heat_capacity_fit_degree, beta_t)
    cv_check = heat_capacity_fit(isochore_rows, spec.heat_capacity_check_degree, beta_t)
    cv_fluct = target["excess_heat_capacity_fluctuation_J_per_mol_K"]
    cv_fluct_se = target["excess_heat_capacity_fluctuation_J_per_mol_K_se"]
    curve = []
    for r in sorted(isochore_rows, key=lambda r: r["temperature_K"]):
        fit_value, fit_se, _ = heat_capacity_fit(isochore_rows, spec.heat_capacity_check_degree, r["beta_mol_per_kJ"])
        curve.append({
            "temperature_K": r["temperature_K"],
            "excess_heat_capacity_fit_all_nodes_J_per_mol_K": fit_value,
            "excess_heat_capacity_fit_all_nodes_J_per_mol_K_se": fit_se,
            "excess_heat_capacity_fluctuation_J_per_mol_K": r["excess_heat_capacity_fluctuation_J_per_mol_K"],
            "excess_heat_capacity_fluctuation_J_per_mol_K_se": r["excess_heat_capacity_fluctuation_J_per_mol_K_se"],
            "mean_total_energy_kJ_per_mol_system": r["total_energy_kJ_per_mol_system"],
            "mean_total_energy_kJ_per_mol_system_se": r["total_energy_kJ_per_mol_system_se"],
            "total_energy_variance_kJ2_per_mol2_system": r["total_energy_variance_kJ2_per_mol2_system"],
            "mean_reported_total_energy_kJ_per_mol_system": r["reported_total_energy_kJ_per_mol_system"],
        })

    # OpenMM's energy scale and the full potential (reweighting of the target run, see the docstring)
    u_reported, u_reported_se = (target["reported_potential_energy_kJ_per_mol_atoms"],
                                 target["reported_potential_energy_kJ_per_mol_atoms_se"])
    shift_a, shift_a_se = target["shift_free_energy_kJ_per_mol_atoms"], target["shift_free_energy_kJ_per_mol_atoms_se"]
    a_full = a_ex + shift_a
    u_full, u_full_se = (target["truncated_potential_energy_kJ_per_mol_atoms"],
                         target["truncated_potential_energy_kJ_per_mol_atoms_se"])
    s_full = (target["truncated_energy_minus_shift_free_energy_kJ_per_mol_atoms"] - a_ex) / T * 1000.0
    s_full_se = math.hypot(target["truncated_energy_minus_shift_free_energy_kJ_per_mol_atoms_se"], a_ex_se) / T * 1000.0
    rho_kT_MPa = spec.number_density_per_nm3 * k * T * KJ_PER_MOL_NM3_IN_MPA

    values = {
        "entropy": _quantity(s_total, s_ex_se, "J/(mol K)"),
        "helmholtz_energy": _quantity(ideal["helmholtz_energy_kJ_per_mol"] + a_ex, a_ex_se, "kJ/mol"),
        "internal_energy": _quantity(ideal["internal_energy_kJ_per_mol"] + u_ex, u_ex_se, "kJ/mol"),
        "heat_capacity": _quantity(1.5 * R + cv_main[0], cv_main[1], "J/(mol K)"),
        "heat_capacity_from_fluctuations": _quantity(1.5 * R + cv_fluct, cv_fluct_se, "J/(mol K)"),
        "pressure": _quantity(target["pressure_MPa"], target["excess_pressure_MPa_se"], "MPa"),
        "excess_entropy": _quantity(s_ex, s_ex_se, "J/(mol K)"),
        "excess_helmholtz_energy": _quantity(a_ex, a_ex_se, "kJ/mol"),
        "excess_internal_energy": _quantity(u_ex, u_ex_se, "kJ/mol"),
        "excess_heat_capacity": _quantity(cv_main[0], cv_main[1], "J/(mol K)"),
        "reduced_excess_helmholtz_energy": _quantity(beta_a, beta_a_se, "1 (A_ex/(N k T))"),
        "ideal_gas_entropy": _quantity(ideal["entropy_J_per_mol_K"], 0.0, "J/(mol K)"),
        "ideal_gas_helmholtz_energy": _quantity(ideal["helmholtz_energy_kJ_per_mol"], 0.0, "kJ/mol"),
        "ideal_gas_internal_energy": _quantity(ideal["internal_energy_kJ_per_mol"], 0.0, "kJ/mol"),
        "internal_energy_openmm_scale": _quantity(ideal["internal_energy_kJ_per_mol"] + u_reported, u_reported_se, "kJ/mol"),
        "helmholtz_energy_openmm_scale": _quantity(
            ideal["internal_energy_kJ_per_mol"] + u_reported - T * s_total / 1000.0,
            math.hypot(u_reported_se, T * s_ex_se / 1000.0), "kJ/mol"),
        "excess_helmholtz_energy_full_potential": _quantity(a_full, math.hypot(a_ex_se, shift_a_se), "kJ/mol"),
        "reduced_excess_helmholtz_energy_full_potential": _quantity(
            a_full * beta_t, math.hypot(a_ex_se, shift_a_se) * beta_t, "1 (A_ex/(N k T))"),
        "excess_internal_energy_full_potential": _quantity(u_full, u_full_se, "kJ/mol"),
        "excess_entropy_full_potential": _quantity(s_full, s_full_se, "J/(mol K)"),
        "pressure_full_potential": _quantity(target["truncated_excess_pressure_MPa"] + rho_kT_MPa,
                                             target["truncated_excess_pressure_MPa_se"], "MPa"),
    }
    return {
        "basis": "per mole of atoms",
        "temperature_K": T,
        "number_density_per_nm3": spec.number_density_per_nm3,
        "note": "entropy, helmholtz_energy, internal_energy, heat_capacity, pressure: the sampled model "
        "(shifted potential + dispersion correction, whose dynamics the trajectory follows); "
        "*_openmm_scale: with OpenMM's reported potential energy (truncated, unshifted) and the same entropy; "
        "*_full_potential: excess values of the full Lennard-Jones potential (truncated potential by "
        "reweighting the target run, plus the mean-field dispersion correction)",
        "values": values,
        "quadrature_check": {
            "note": "beta*A_ex/N at the target from the main and from the check node sets (independent "
            "runs); the check rule has fewer nodes, so |difference| bounds its quadrature error plus noise",
            **{f"{rule}_{leg}": {"value": legs[rule][leg][0], "standard_error": legs[rule][leg][1]}
               for rule in ("main", "check") for leg in ("isotherm", "isochore", "total")},
            "difference_total": legs["main"]["total"][0] - legs["check"]["total"][0],
            "difference_total_standard_error": math.hypot(legs["main"]["total"][1], legs["check"]["total"][1]),
        },
        "heat_capacity": {
            "note": "C_V = 3k/2 + dU_ex/dT per mole of atoms at the target; main: weighted polynomial of "
            f"degree {spec.heat_capacity_fit_degree} in beta through the colder half of the isochore and the "
            f"target; check: degree {spec.heat_capacity_check_degree} through every isochore node and the "
            "target; fluctuation: <dU^2>/(k T^2) of the target run (canonical). along_isochore: the check "
            "fit's derivative and the fluctuation value at every node, with <E> (K + U_S, and K + U_T as "
            "OpenMM reports it) and the variance of K + U_S",
            "excess_fit_colder_half": {"value": cv_main[0], "standard_error": cv_main[1],
                                       "reduced_chi2": cv_main[2], "points": len(cold_rows)},
            "excess_fit_all_nodes": {"value": cv_check[0], "standard_error": cv_check[1],
                                     "reduced_chi2": cv_check[2], "points": len(isochore_rows)},
            "excess_fluctuation_target": {"value": cv_fluct, "standard_error": cv_fluct_se},
            "unit": "J/(mol K)",
            "along_isochore": curve,
        },
        "shift_sum_standard_deviation_kJ_per_mol": target["shift_sum_standard_deviation_kJ_per_mol"],
    }


# --------------------------------------------------------------------------------------
# Driver, cache, loader
# --------------------------------------------------------------------------------------


def system_directory(output_dir: Path, name: str) -> Path:
    return output_dir / SUBDIRECTORY / name


def is_current(spec: LiquidSpec, directory: Path) -> bool:
    """True when *directory* holds this spec's outputs, unchanged since they were made."""
    path = directory / REFERENCE_NAME
    if not path.is_file():
        return False
    try:
        recorded = json.loads(path.read_text())
    except (OSError, json.JSONDecodeError):
        return False
    if recorded.get("settings_digest") != settings_digest(spec):
        return False
    for key, name in DATA_FILES.items():
        entry = recorded.get("files", {}).get(key, {})
        if entry.get("name") != name or not (directory / name).is_file():
            return False
        if file_record(directory / name)["sha256"] != entry.get("sha256"):
            return False
    return True


def _task(kind: str, spec: LiquidSpec, payload, output_dir: str):
    """One unit of work for the pool (a state point or a production run)."""
    if kind == "production":
        return kind, spec.name, None, run_production(spec, system_directory(Path(output_dir), spec.name), payload)
    coefficient, point = payload
    return kind, spec.name, point.label, sample_state_point(spec, point, coefficient)


def _cost(kind: str, spec: LiquidSpec, point=None) -> float:
    """Rough relative cost (longest first keeps both workers busy to the end)."""
    if kind == "production":
        return 3.0 * (spec.production_ps + spec.production_melt_ps + spec.production_equilibration_ps)
    density = point.number_density_per_nm3 / spec.number_density_per_nm3
    length = point.sampling_ps + spec.equilibration_ps + (spec.melt_ps if point.leg != "isotherm" else 0)
    return length * (0.3 + density) * (1.4 if point.measure_pressure else 1.0)


def write_state_points(path: Path, rows: list[dict]) -> None:
    columns = []
    for row in rows:
        columns.extend(c for c in row if c not in columns)
    with atomic_path(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=columns, restval="")
        writer.writeheader()
        for row in rows:
            writer.writerow({k: (repr(float(v)) if isinstance(v, (float, np.floating)) else v)
                             for k, v in row.items()})


def make_references(specs: list[LiquidSpec], output_dir: Path, jobs: int = 2, force: bool = False
                    ) -> dict[str, dict[str, Any]]:
    """Make (or reuse) every system in *specs*; return their reference.json contents."""
    results = {}
    todo = []
    for spec in specs:
        directory = system_directory(output_dir, spec.name)
        if not force and is_current(spec, directory):
            results[spec.name] = json.loads((directory / REFERENCE_NAME).read_text())
            print(f"{spec.name}: up to date in {directory}", file=sys.stderr)
        else:
            todo.append(spec)
    if not todo:
        return results
    start_wall = time.perf_counter()
    tasks = []
    for spec in todo:
        coefficient = dispersion_coefficient_kJ_nm3_per_mol(spec)
        tasks.append((_cost("production", spec), ("production", spec, coefficient)))
        for point in integration_points(spec):
            tasks.append((_cost("point", spec, point), ("point", spec, (coefficient, point))))
    tasks.sort(key=lambda t: -t[0])
    outcomes: dict[str, dict] = {spec.name: {"points": {}} for spec in todo}

    def collect(result):
        kind, name, label, value = result
        if kind == "production":
            outcomes[name]["production"] = value
        else:
            outcomes[name]["points"][label] = value

    if jobs > 1:
        # fresh interpreters ("spawn"), as in make_validation_data.make_systems: a fork of a
        # process that already ran OpenMM may hang; the children find this module on PYTHONPATH
        here = str(Path(__file__).resolve().parent)
        os.environ["PYTHONPATH"] = os.pathsep.join(p for p in (here, os.environ.get("PYTHONPATH", "")) if p)
        context = multiprocessing.get_context("spawn")
        with concurrent.futures.ProcessPoolExecutor(max_workers=jobs, mp_context=context) as pool:
            futures = [pool.submit(_task, kind, spec, payload, str(output_dir)) for _, (kind, spec, payload) in tasks]
            for future in concurrent.futures.as_completed(futures):
                collect(future.result())
    else:
        for _, (kind, spec, payload) in tasks:
            collect(_task(kind, spec, payload, str(output_dir)))
    wall = time.perf_counter() - start_wall

    for spec in todo:
        directory = system_directory(output_dir, spec.name)
        order = [p.label for p in integration_points(spec)]
        rows = [outcomes[spec.name]["points"][label] for label in order]
        write_state_points(directory / STATE_POINTS_NAME, rows)
        production = outcomes[spec.name]["production"]
        record = {
            "system": spec.name,
            "engine_code": "scripts/make_liquid_references.py",
            "settings": spec_settings(spec),
            "settings_digest": settings_digest(spec),
            "model": {
                "description": "Lennard-Jones, truncated (not shifted) at the cutoff, long-range dispersion "
                "correction on (OpenMM NonbondedForce), Lorentz-Berthelot mixing",
                "species": [{"element": s.element, "residue_name": s.residue_name, "count": c,
                             "epsilon_over_k_K": s.epsilon_over_k_K, "sigma_A": s.sigma_A,
                             "mass_u": _mdanalysis_mass(s.element), "parameter_source": s.parameter_source}
                            for s, c in zip(spec.species, spec.atom_counts)],
                "cutoff_A": spec.cutoff_nm * 10.0,
                "box_A": spec.box_nm * 10.0,
                "dispersion_coefficient_kJ_nm3_per_mol": dispersion_coefficient_kJ_nm3_per_mol(spec),
                "dispersion_coefficient_analytic_kJ_nm3_per_mol": analytic_dispersion_coefficient_kJ_nm3_per_mol(spec),
            },
            "state": {
                "temperature_K": spec.temperature_K,
                "number_density_per_nm3": spec.number_density_per_nm3,
                "atom_count": spec.atom_count,
                "mole_fractions": list(spec.mole_fractions),
                "isotherm_temperature_K": spec.isotherm_temperature_K,
                "state_point_source": spec.state_point_source,
            },
            "reference": integrate(spec, rows),
            "production": production,
            "files": {key: file_record(directory / name) for key, name in DATA_FILES.items()},
            "software": {
                "openmm": __import__("openmm").__version__,
                "python": platform.python_version(),
                "numpy": np.__version__,
                "mdanalysis": __import__("MDAnalysis").__version__,
                "machine": platform.machine(),
                "cpu_features": cpu_features(),
            },
            "timing": {
                "generation_wall_s": round(wall, 1),
                "generation_jobs": jobs,
                "systems_made_together": [s.name for s in todo],
                "cpu_s_this_system": round(production["cpu_s"] + sum(r["cpu_s"] for r in rows), 1),
            },
        }
        write_text_atomic(directory / REFERENCE_NAME, json.dumps(record, indent=2) + "\n")
        results[spec.name] = record
        print(f"{spec.name}: made in {directory} ({wall:.0f} s wall for this run)", file=sys.stderr)
    return results


@dataclasses.dataclass(frozen=True)
class LiquidReference:
    """Paths of one system's files and its reference values (see ``reference.json``)."""

    name: str
    directory: Path
    topology: Path
    trajectory: Path
    energies: Path
    state_points: Path
    values: dict[str, dict[str, Any]]  # name -> {"value", "standard_error", "unit"}, per mole of atoms
    record: dict[str, Any]

    def value(self, quantity: str) -> float:
        return self.values[quantity]["value"]

    def standard_error(self, quantity: str) -> float:
        return self.values[quantity]["standard_error"]


def load_liquid_reference(name: str, output_dir: Path | None = None, make: bool = True, jobs: int = 2
                          ) -> LiquidReference:
    """The reference of system *name*, made first when missing or out of date (and *make*)."""
    if name not in LIQUID_SYSTEMS:
        raise ConfigError(f"unknown liquid reference {name!r}; choose from {', '.join(LIQUID_SYSTEMS)}")
    output_dir = Path(output_dir) if output_dir is not None else default_output_dir()
    spec = LIQUID_SYSTEMS[name]
    directory = system_directory(output_dir, name)
    if not is_current(spec, directory):
        if not make:
            raise ConfigError(f"{directory} does not hold the current {name}; run scripts/make_liquid_references.py")
        make_references([spec], output_dir, jobs=jobs)
    record = json.loads((directory / REFERENCE_NAME).read_text())
    return LiquidReference(
        name=name, directory=directory,
        topology=directory / TOPOLOGY_NAME, trajectory=directory / TRAJECTORY_NAME,
        energies=directory / ENERGIES_NAME, state_points=directory / STATE_POINTS_NAME,
        values=record["reference"]["values"], record=record,
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Make the Lennard-Jones liquid references (TI entropies, NVE runs).")
    parser.add_argument("--output-dir", type=Path, default=None,
                        help="validation directory (default: $QCORR_VALIDATION_DIR or ~/.cache/qcorr-validation); "
                        f"systems go to its {SUBDIRECTORY}/ folder")
    parser.add_argument("--systems", nargs="+", default=None, metavar="NAME",
                        help=f"systems to make (default: all of {', '.join(LIQUID_SYSTEMS)})")
    parser.add_argument("--jobs", type=int, default=2, help="worker processes, one OpenMM thread each (default 2)")
    parser.add_argument("--force", action="store_true", help="remake systems even when up to date")
    args = parser.parse_args(argv)
    try:
        if args.jobs < 1:
            raise ConfigError(f"--jobs must be at least 1, got {args.jobs}")
        output_dir = args.output_dir or default_output_dir()
        if output_dir.exists() and not output_dir.is_dir():
            raise ConfigError(f"--output-dir {output_dir} exists and is not a directory; choose another path")
        names = args.systems or list(LIQUID_SYSTEMS)
        unknown = [n for n in names if n not in LIQUID_SYSTEMS]
        if unknown:
            raise ConfigError(f"--systems: unknown system {unknown[0]!r}; choose from {', '.join(LIQUID_SYSTEMS)}")
        start = time.perf_counter()
        results = make_references([LIQUID_SYSTEMS[n] for n in names], output_dir, jobs=args.jobs, force=args.force)
        for name, record in results.items():
            values = record["reference"]["values"]
            summary = ", ".join(f"{q} {values[q]['value']:.4g} ± {values[q]['standard_error']:.2g} {values[q]['unit']}"
                                for q in ("entropy", "helmholtz_energy", "internal_energy", "heat_capacity"))
            print(f"{name}: {summary} (per mole of atoms)", file=sys.stderr)
        print(f"liquid references ready in {system_directory(output_dir, '')} "
              f"({time.perf_counter() - start:.0f} s)", file=sys.stderr)
    except QcorrError as err:
        print(f"make_liquid_references: error: {err}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
