#!/usr/bin/env python
"""Make the validation trajectories: real MD engines, fixed seeds, settings recorded.

Systems (issue 5, item 1), each written to ``<output-dir>/<system>/`` as

* ``topology.pdb``   – atom names, residues, elements (MDAnalysis guesses the masses
  from the elements: IUPAC standard atomic weights as tabulated in MDAnalysis);
* ``trajectory.trr`` – GROMACS TRR, float32, positions (Å→nm) and velocities (Å/ps→nm/ps),
  box, time stamps in ps; production frames only;
* ``settings.json``  – every setting (engine and version, model parameters with their
  sources, integrator, thermostat, seeds) and what the run observed (kinetic
  temperature, potential energy, mean squared force for the Wigner–Kirkwood check).

The engines use the same atomic masses that MDAnalysis guesses from the topology, so the
kinetic temperature a reader computes equals the engine's.

============================  ==========================================================
system                        model / engine
============================  ==========================================================
``copper_100K``, ``_300K``    fcc Cu, 4×4×4 cubic cells (256 atoms), effective-medium
                              theory (EMT) as shipped with ASE [1]_; well below and near
                              the Debye temperature (343 K, Kittel [2]_)
``water_flexible_298K``       216 flexible TIP3P molecules [3]_ with the CHARMM force
                              field's harmonic O–H bond and H–O–H angle terms (OpenMM's
                              ``charmm36/water.xml``; constraints off), PME, OpenMM [4]_
``argon_liquid_86K``          500 Lennard-Jones atoms, ε/k = 119.8 K, σ = 3.405 Å
                              (Rowley, Nicholson & Parsonage [5]_), at the state point
                              T* = 0.722, ρ* = 0.8442 studied by Verlet [6]_ (86.5 K,
                              1.4185 g/cm³), near argon's triple point (83.8058 K, ITS-90
                              [7]_); OpenMM
============================  ==========================================================

Thermostats: equilibration with a strongly coupled thermostat, production with a *global*
thermostat – Bussi stochastic velocity rescaling [8]_ (ASE, time constant 0.25 ps) or a
Nosé–Hoover chain (OpenMM, collision frequency 0.5/ps).  Global thermostats act on the
total kinetic energy only, one degree of freedom out of 3N, and leave the vibrational
dynamics essentially unchanged even at short coupling times [8]_ [9]_, while the ensemble
stays canonical, so the stated temperature is the ensemble temperature.  A short NVE run
of a few hundred atoms would not have a well-defined one, and with weaker coupling the
total energy of a small crystal relaxes so slowly (it fluctuates by 1/sqrt(3N) ≈ 4 % for
256 atoms) that a 10 ps run's mean temperature can miss the target by a few per cent.

References
----------
.. [1] K. W. Jacobsen, P. Stoltze, J. K. Nørskov, Surf. Sci. 366, 394 (1996).
.. [2] C. Kittel, Introduction to Solid State Physics (Wiley), table "Debye temperature".
.. [3] W. L. Jorgensen et al., J. Chem. Phys. 79, 926 (1983); bond and angle terms of the
       CHARMM22 force field, A. D. MacKerell Jr. et al., J. Phys. Chem. B 102, 3586 (1998),
       as shipped in OpenMM's ``charmm36/water.xml`` (k_OH = 376560 kJ/(mol nm²),
       k_HOH = 460.24 kJ/(mol rad²)).  OpenMM's plain ``tip3p.xml`` is *not* used: its
       angle constant (836.8 kJ/(mol rad²), AMBER's, meant for constrained water) puts the
       H–O–H bend near 2350 cm⁻¹ instead of ≈ 1650 cm⁻¹.
.. [4] P. Eastman et al., J. Phys. Chem. B 128, 109 (2024) (OpenMM 8).
.. [5] L. A. Rowley, D. Nicholson, N. G. Parsonage, J. Comput. Phys. 17, 401 (1975).
.. [6] L. Verlet, Phys. Rev. 159, 98 (1967).
.. [7] H. Preston-Thomas, Metrologia 27, 3 (1990) (ITS-90 defining fixed points).
.. [8] G. Bussi, D. Donadio, M. Parrinello, J. Chem. Phys. 126, 014101 (2007).
.. [9] G. Bussi, M. Parrinello, Comput. Phys. Commun. 179, 26 (2008).
.. [10] E. Wigner, Phys. Rev. 40, 749 (1932); J. G. Kirkwood, Phys. Rev. 44, 31 (1933).

Usage::

    python scripts/make_validation_data.py [--output-dir DIR] [--systems NAME ...] [--jobs N]

The output directory defaults to ``$QCORR_VALIDATION_DIR`` or
``~/.cache/qcorr-validation``.  A system whose ``settings.json`` matches the current
settings and whose files match their recorded SHA-256 is reused, not recomputed.
"""

from __future__ import annotations

import argparse
import concurrent.futures
import dataclasses
import hashlib
import json
import math
import multiprocessing
import os
import platform
import sys
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from qcorr.constants import avogadro_per_mol, boltzmann_J_per_K, hbar_J_s
from qcorr.errors import ConfigError, QcorrError
from qcorr.safe_write import atomic_path, write_text_atomic

SETTINGS_NAME = "settings.json"
TOPOLOGY_NAME = "topology.pdb"
TRAJECTORY_NAME = "trajectory.trr"
ENERGIES_NAME = "energies.csv"

#: Version of the recipe below; bump when a change alters the trajectories.
RECIPE_VERSION = 1


# --------------------------------------------------------------------------------------
# System specifications
# --------------------------------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class CrystalSpec:
    """fcc copper with ASE's EMT calculator."""

    name: str
    temperature_K: float
    cells_per_side: int
    seed: int
    timestep_fs: float = 5.0
    steps_per_frame: int = 2
    equilibration_ps: float = 2.0
    production_ps: float = 10.0
    equilibration_coupling_ps: float = 0.1
    production_coupling_ps: float = 0.25
    segment_ps: float = 2.0
    kind: str = "crystal"


@dataclasses.dataclass(frozen=True)
class WaterSpec:
    """Flexible TIP3P water (CHARMM bond and angle terms) in OpenMM."""

    name: str
    temperature_K: float
    molecules_per_side: int
    cutoff_nm: float
    seed: int
    forcefield: str = "charmm36/water.xml"  # flexible CHARMM terms; see reference [3]
    density_g_per_cm3: float = 0.997  # liquid water at 25 °C, 1 atm (common practice)
    timestep_fs: float = 0.5
    steps_per_frame: int = 4
    equilibration_ps: float = 5.0
    production_ps: float = 10.0
    equilibration_collision_per_ps: float = 5.0
    production_collision_per_ps: float = 0.5
    deterministic_forces: bool = True  # OpenMM CPU platform property, see _openmm_platform
    segment_ps: float = 1.0
    kind: str = "water"
    # Move the force field's tabulated Lennard-Jones term into the standard nonbonded force
    # (same potential, see fold_tabulated_lennard_jones); about 14x faster on the CPU platform.
    fold_tabulated_lennard_jones: bool = False
    # Write OpenMM's StateDataReporter CSV of the production (energies.csv: time, potential,
    # kinetic and total energy, temperature, volume at every frame) for classical baselines
    # (issue 13); reporting does not change the dynamics.
    energy_file: bool = False


@dataclasses.dataclass(frozen=True)
class ArgonSpec:
    """Lennard-Jones argon in OpenMM (liquid near the triple point)."""

    name: str
    reduced_temperature: float
    reduced_density: float
    cells_per_side: int  # fcc start lattice, 4 atoms per cubic cell
    seed: int
    epsilon_over_k_K: float = 119.8  # Rowley, Nicholson & Parsonage (1975)
    sigma_A: float = 3.405  # Rowley, Nicholson & Parsonage (1975)
    cutoff_sigma: float = 3.0
    timestep_fs: float = 5.0
    steps_per_frame: int = 2
    melt_temperature_factor: float = 2.5
    melt_ps: float = 10.0
    equilibration_ps: float = 10.0
    production_ps: float = 30.0
    equilibration_collision_per_ps: float = 5.0
    production_collision_per_ps: float = 0.5
    deterministic_forces: bool = True  # OpenMM CPU platform property, see _openmm_platform
    segment_ps: float = 6.0  # Hann-window resolution bias of <nu^2> ~ 1/(3 T_seg^2): 0.6 % here
    kind: str = "argon"

    @property
    def temperature_K(self) -> float:
        return self.reduced_temperature * self.epsilon_over_k_K


Spec = CrystalSpec | WaterSpec | ArgonSpec

VALIDATION_SYSTEMS: dict[str, Spec] = {
    s.name: s
    for s in (
        CrystalSpec("copper_100K", temperature_K=100.0, cells_per_side=4, seed=1001),
        CrystalSpec("copper_300K", temperature_K=300.0, cells_per_side=4, seed=1002),
        WaterSpec(
            "water_flexible_298K", temperature_K=298.15, molecules_per_side=6, cutoff_nm=0.9, seed=1003,
            fold_tabulated_lennard_jones=True,
        ),
        ArgonSpec(
            "argon_liquid_86K", reduced_temperature=0.722, reduced_density=0.8442, cells_per_side=5,
            seed=1004,
        ),
    )
}


def spec_settings(spec: Spec) -> dict[str, Any]:
    """The settings that define a trajectory (what the cache digest is made from)."""
    settings = dataclasses.asdict(spec)
    # recorded only when used, so settings written before the option existed stay current
    for optional in ("fold_tabulated_lennard_jones", "energy_file"):
        if settings.get(optional) is False:
            del settings[optional]
    settings["temperature_K"] = spec.temperature_K
    settings["recipe_version"] = RECIPE_VERSION
    return settings


def settings_digest(spec: Spec) -> str:
    text = json.dumps(spec_settings(spec), sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()


# --------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------


def cpu_features() -> str:
    """The CPU code paths NumPy and its BLAS chose here, e.g. ``"numpy AVX512F,... ; blas Haswell"``.

    Vectorised loops and BLAS kernels sum in different orders on different instruction
    sets, so a chaotic MD run is bitwise reproducible only where these match (common
    practice); ``platform.machine()`` alone ("x86_64") does not tell.  Uses NumPy's
    dispatch tables (as ``numpy.show_runtime`` does) and threadpoolctl when installed.
    """
    try:
        from numpy._core._multiarray_umath import __cpu_dispatch__, __cpu_features__

        simd = ",".join(sorted(f for f in __cpu_dispatch__ if __cpu_features__.get(f)))
    except ImportError:
        simd = "unknown"
    try:
        from threadpoolctl import threadpool_info

        blas = ",".join(sorted({str(i.get("architecture")) for i in threadpool_info()
                                if i.get("user_api") == "blas"})) or "none"
    except ImportError:
        blas = "unknown"
    return f"numpy {simd}; blas {blas}"


def file_record(path: Path) -> dict[str, Any]:
    """Name, size and SHA-256 of a file."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return {"name": path.name, "size_bytes": path.stat().st_size, "sha256": digest.hexdigest()}


class TrajectoryRecorder:
    """Stream frames into a float32 TRR through MDAnalysis and write a PDB topology.

    Parameters
    ----------
    directory : Path
        System directory; files appear there only when complete (atomic rename).
    names, elements, resnames : list of str
        Per atom (``resnames`` per residue).
    residue_of_atom : array of int
        Residue index of each atom (0-based).
    """

    def __init__(self, directory: Path, names, elements, resnames, residue_of_atom):
        import MDAnalysis as mda

        self.directory = directory
        n_atoms = len(names)
        n_residues = len(resnames)
        u = mda.Universe.empty(
            n_atoms,
            n_residues=n_residues,
            atom_resindex=np.asarray(residue_of_atom),
            trajectory=True,
            velocities=True,
        )
        u.add_TopologyAttr("names", list(names))
        u.add_TopologyAttr("types", [e.upper() for e in elements])
        u.add_TopologyAttr("elements", list(elements))
        u.add_TopologyAttr("resnames", list(resnames))
        u.add_TopologyAttr("resids", np.arange(1, n_residues + 1))
        for attr, value in (
            ("altLocs", " "), ("chainIDs", "A"), ("occupancies", 1.0), ("tempfactors", 0.0),
            ("record_types", "ATOM"), ("formalcharges", 0),
        ):
            u.add_TopologyAttr(attr, [value] * n_atoms)
        u.add_TopologyAttr("icodes", [" "] * n_residues)
        u.add_TopologyAttr("segids", ["SYS"])
        self.universe = u
        self._writer = None
        self._tmp_context = None
        self.frames = 0

    def write_topology(self, positions_A: np.ndarray, box_A: np.ndarray) -> None:
        import MDAnalysis as mda

        ts = self.universe.trajectory.ts
        ts.positions = positions_A
        ts.dimensions = [*box_A, 90.0, 90.0, 90.0]
        with atomic_path(self.directory / TOPOLOGY_NAME) as tmp:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                with mda.Writer(str(tmp), format="PDB", n_atoms=self.universe.atoms.n_atoms) as writer:
                    writer.write(self.universe.atoms)

    def __enter__(self):
        import MDAnalysis as mda

        self._tmp_context = atomic_path(self.directory / TRAJECTORY_NAME)
        tmp = self._tmp_context.__enter__()
        self._writer = mda.Writer(str(tmp), format="TRR", n_atoms=self.universe.atoms.n_atoms)
        return self

    def record(self, step: int, time_ps: float, positions_A, velocities_A_per_ps, box_A) -> None:
        ts = self.universe.trajectory.ts
        ts.positions = positions_A
        ts.velocities = velocities_A_per_ps
        ts.dimensions = [*box_A, 90.0, 90.0, 90.0]
        ts.data["time"] = float(time_ps)
        ts.data["step"] = int(step)
        self._writer.write(self.universe.atoms)
        self.frames += 1

    def __exit__(self, exc_type, exc, tb):
        self._writer.close()
        return self._tmp_context.__exit__(exc_type, exc, tb)


class RunningObservables:
    """Per-frame observables reduced to means and block standard errors."""

    def __init__(self) -> None:
        self.series: dict[str, list[float]] = {}

    def add(self, **values: float) -> None:
        for key, value in values.items():
            self.series.setdefault(key, []).append(float(value))

    def summary(self, blocks: int = 10) -> dict[str, dict[str, float]]:
        out = {}
        for key, values in self.series.items():
            x = np.asarray(values)
            usable = len(x) - len(x) % blocks
            means = x[:usable].reshape(blocks, -1).mean(axis=1)
            out[key] = {
                "mean": float(x.mean()),
                "block_standard_error": float(means.std(ddof=1) / math.sqrt(blocks)),
                "blocks": blocks,
            }
        return out


def wigner_kirkwood_free_energy_kJ_per_mol(
    mean_force_squared_over_mass_SI: float, temperature_K: float
) -> float:
    """First quantum correction to the Helmholtz energy per mole of atoms.

    ΔA = ħ² ⟨Σ_i |F_i|²/m_i⟩ / (24 (kT)²) per system (Wigner 1932, Kirkwood 1933; Landau &
    Lifshitz, Statistical Physics Part 1, §33).  The argument is ⟨Σ_i |F_i|²/m_i⟩ / N in
    N²/kg (per atom); the result is in kJ/mol of atoms.  For a harmonic mode of angular
    frequency ω it gives kT u²/24 with u = ħω/kT, the leading term of the harmonic quantum
    correction to A.
    """
    kT = boltzmann_J_per_K * temperature_K
    per_atom_J = hbar_J_s**2 * mean_force_squared_over_mass_SI / (24.0 * kT**2)
    return per_atom_J * avogadro_per_mol / 1000.0


# --------------------------------------------------------------------------------------
# Engines
# --------------------------------------------------------------------------------------


def equilibrium_lattice_constant_A(element: str = "Cu") -> float:
    """Lattice constant (Å) minimising the EMT energy of the fcc primitive cell at 0 K."""
    from ase.build import bulk
    from ase.calculators.emt import EMT
    from scipy.optimize import minimize_scalar

    def energy(a: float) -> float:
        atoms = bulk(element, "fcc", a=a)
        atoms.calc = EMT()
        return atoms.get_potential_energy()

    result = minimize_scalar(energy, bracket=(3.5, 3.6, 3.7), tol=1e-8)
    return float(result.x)


def run_crystal(spec: CrystalSpec, directory: Path) -> dict[str, Any]:
    """fcc copper with EMT; Bussi thermostat; returns the observed summary."""
    import ase
    from ase import units
    from ase.build import bulk
    from ase.calculators.emt import EMT
    from ase.constraints import FixCom
    from ase.md.bussi import Bussi
    from ase.md.velocitydistribution import MaxwellBoltzmannDistribution, Stationary

    rng = np.random.default_rng(spec.seed)
    a = equilibrium_lattice_constant_A("Cu")
    atoms = bulk("Cu", "fcc", a=a, cubic=True).repeat(spec.cells_per_side)
    atoms.calc = EMT()
    atoms.set_constraint(FixCom())  # removes the 3 centre-of-mass dof from the thermostat
    n = len(atoms)
    dof = atoms.get_number_of_degrees_of_freedom()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # ASE >= 3.29 prefers thermalize_momenta
        MaxwellBoltzmannDistribution(atoms, temperature_K=spec.temperature_K, rng=rng)
    Stationary(atoms)
    dt = spec.timestep_fs * units.fs
    equilibration = Bussi(atoms, dt, spec.temperature_K, spec.equilibration_coupling_ps * 1000 * units.fs, rng=rng)
    equilibration.run(round(spec.equilibration_ps * 1000 / spec.timestep_fs))
    production = Bussi(atoms, dt, spec.temperature_K, spec.production_coupling_ps * 1000 * units.fs, rng=rng)

    velocity_to_A_per_ps = 1000.0 * units.fs  # ASE velocity unit -> Å/ps
    force_to_SI = (units.eV / units.J) / 1e-10  # eV/Å -> N, with the eV of ASE's own unit system
    amu_kg = units._amu
    masses = atoms.get_masses()
    box = atoms.cell.lengths()
    recorder = TrajectoryRecorder(
        directory, ["Cu"] * n, ["Cu"] * n, ["CU"] * n, np.arange(n)
    )
    recorder.write_topology(atoms.get_positions(), box)
    observed = RunningObservables()
    start_positions = atoms.get_positions().copy()
    n_frames = round(spec.production_ps * 1000 / (spec.timestep_fs * spec.steps_per_frame)) + 1
    with recorder:
        for frame in range(n_frames):
            if frame:
                production.run(spec.steps_per_frame)
            step = frame * spec.steps_per_frame
            forces_N = atoms.get_forces() * force_to_SI
            kinetic_eV = atoms.get_kinetic_energy()
            observed.add(
                kinetic_temperature_K=2 * kinetic_eV / (dof * units.kB),
                potential_energy_kJ_per_mol_atoms=atoms.get_potential_energy() / n * units.mol / units.kJ,
                force_squared_over_mass_per_atom_SI=float(
                    np.sum(forces_N**2 / (masses[:, None] * amu_kg)) / n
                ),
            )
            recorder.record(
                step,
                step * spec.timestep_fs / 1000.0,
                atoms.get_positions(),
                atoms.get_velocities() * velocity_to_A_per_ps,
                box,
            )
    msd = float(np.mean(np.sum((atoms.get_positions() - start_positions) ** 2, axis=1)))
    return {
        "engine": {"name": "ASE", "version": ase.__version__, "calculator": "EMT (ase.calculators.emt)"},
        "model": {
            "description": "fcc copper, effective-medium theory",
            "reference": "K. W. Jacobsen, P. Stoltze, J. K. Norskov, Surf. Sci. 366, 394 (1996)",
            "lattice_constant_A": a,
            "lattice_constant_source": "minimum of the EMT energy of the fcc cell at 0 K (computed here)",
        },
        "state": {
            "temperature_K": spec.temperature_K,
            "box_A": list(map(float, box)),
            "atom_count": n,
            "molecule_count": n,
            "degrees_of_freedom": dof,
        },
        "run": {
            "integrator": "velocity Verlet with Bussi stochastic velocity rescaling (ase.md.bussi)",
            "timestep_fs": spec.timestep_fs,
            "frame_interval_fs": spec.timestep_fs * spec.steps_per_frame,
            "equilibration_ps": spec.equilibration_ps,
            "equilibration_thermostat": f"Bussi, time constant {spec.equilibration_coupling_ps} ps",
            "production_ps": spec.production_ps,
            "production_thermostat": f"Bussi, time constant {spec.production_coupling_ps} ps (global)",
            "initial_velocities": "Maxwell-Boltzmann at the target temperature, zero total momentum",
            "centre_of_mass": "fixed (ase.constraints.FixCom)",
            "seed": spec.seed,
            "random_generator": "numpy.random.default_rng(seed), shared by all stochastic steps",
            "frames": recorder.frames,
        },
        "observed": observed.summary(),
        "observed_final_mean_square_displacement_A2": msd,
    }


def fold_tabulated_lennard_jones(system) -> None:
    """Replace a tabulated Lennard-Jones CustomNonbondedForce by per-atom sigma/epsilon in the
    system's NonbondedForce, when the tables follow the Lorentz-Berthelot rules.

    OpenMM's CHARMM water file writes the Lennard-Jones term as
    ``acoef(type1, type2)/r^12 - bcoef(type1, type2)/r^6`` (A = 4 eps sigma^12,
    B = 4 eps sigma^6).  Per type, sigma = (A/B)^(1/6) and eps = B^2/(4A); every pair of the
    tables is checked against the Lorentz-Berthelot combination (arithmetic sigma, geometric
    epsilon, the CHARMM rule for Rmin and epsilon; MacKerell et al., J. Phys. Chem. B 102,
    3586 (1998)) before anything is changed, so the potential is the same, only evaluated by
    OpenMM's optimised standard kernel.  Cut-off and long-range correction are carried over.
    """
    import openmm as mm
    from openmm import unit

    forces = list(system.getForces())
    custom = [i for i, f in enumerate(forces) if isinstance(f, mm.CustomNonbondedForce)]
    nonbonded = [f for f in forces if isinstance(f, mm.NonbondedForce)]
    if len(custom) != 1 or len(nonbonded) != 1:
        raise ValueError("expected one CustomNonbondedForce and one NonbondedForce")
    table_force, nb = forces[custom[0]], nonbonded[0]
    if table_force.getEnergyFunction().replace(" ", "").rstrip(";") != (
        "acoef(type1,type2)/r^12-bcoef(type1,type2)/r^6"
    ):
        raise ValueError("the CustomNonbondedForce is not a tabulated Lennard-Jones term")
    names = [table_force.getTabulatedFunctionName(i)
             for i in range(table_force.getNumTabulatedFunctions())]

    def table(name: str) -> np.ndarray:
        width, height, values = table_force.getTabulatedFunction(names.index(name)).getFunctionParameters()
        return np.array(values, dtype=float).reshape(height, width)

    a, b = table("acoef"), table("bcoef")
    sigma = (np.diag(a) / np.diag(b)) ** (1.0 / 6.0)
    epsilon = np.diag(b) ** 2 / (4.0 * np.diag(a))
    s_pair = 0.5 * (sigma[:, None] + sigma[None, :])
    e_pair = np.sqrt(epsilon[:, None] * epsilon[None, :])
    if not (np.allclose(4 * e_pair * s_pair**12, a, rtol=1e-9, atol=0)
            and np.allclose(4 * e_pair * s_pair**6, b, rtol=1e-9, atol=0)):
        raise ValueError("the Lennard-Jones tables do not follow the Lorentz-Berthelot rules")
    cutoffs_nm = [f.getCutoffDistance().value_in_unit(unit.nanometer) for f in (table_force, nb)]
    if abs(cutoffs_nm[0] - cutoffs_nm[1]) > 1e-12:
        raise ValueError("the two nonbonded forces use different cut-offs")
    for particle in range(system.getNumParticles()):
        charge, _, _ = nb.getParticleParameters(particle)
        kind = int(round(table_force.getParticleParameters(particle)[0]))
        nb.setParticleParameters(particle, charge, sigma[kind], epsilon[kind])
    nb.setUseDispersionCorrection(table_force.getUseLongRangeCorrection())
    system.removeForce(custom[0])


def _openmm_platform(threads: int = 1):
    """OpenMM's CPU platform, set up to give the same bits in every process.

    ``DeterministicForces`` makes the force sums independent of thread scheduling and of
    the FFT plan the PME code picks at run time (without it two processes with the same
    seeds were found to differ after the first PME evaluation, OpenMM 8.6).
    """
    import openmm as mm

    platform_ = mm.Platform.getPlatformByName("CPU")
    return platform_, {"Threads": str(threads), "DeterministicForces": "true"}


def _nose_hoover_simulation(topology, system, temperature_K, collision_per_ps, timestep, platform_, properties):
    """OpenMM simulation with a Nosé–Hoover chain (chain length 3) on the CPU platform.

    Used for every OpenMM stage: unlike OpenMM's Langevin integrators, whose random
    numbers on the CPU platform were found to differ between two runs with the same seed
    (checked with OpenMM 8.6), the chain is deterministic, so the data regenerate bitwise.
    """
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    integrator = mm.NoseHooverIntegrator(
        temperature_K * unit.kelvin, collision_per_ps / unit.picosecond, timestep
    )
    return app.Simulation(topology, system, integrator, platform_, properties)


def _mdanalysis_mass(element: str) -> float:
    """Mass (u) MDAnalysis assigns to *element* when it reads the topology."""
    from MDAnalysis.guesser.default_guesser import DefaultGuesser

    mass = float(DefaultGuesser(None).get_atom_mass(element))
    if not mass > 0:
        raise ConfigError(f"MDAnalysis has no mass for element {element!r}; add it to the topology")
    return mass


def _record_openmm_production(
    simulation, recorder: TrajectoryRecorder, spec, masses_amu: np.ndarray, dof: int,
    energies_path: Path | None = None,
) -> tuple[RunningObservables, float]:
    import contextlib

    import openmm.app as app

    with contextlib.ExitStack() as stack:
        reporter = None
        if energies_path is not None:
            handle = stack.enter_context(open(stack.enter_context(atomic_path(energies_path)), "w"))
            reporter = app.StateDataReporter(handle, spec.steps_per_frame, time=True, potentialEnergy=True,
                                             kineticEnergy=True, totalEnergy=True, temperature=True,
                                             volume=True)
        return _record_frames(simulation, recorder, spec, masses_amu, dof, reporter)


def _record_frames(simulation, recorder, spec, masses_amu, dof, reporter):
    """The production frames (and, with a reporter, its line for every frame)."""
    import openmm.unit as unit

    n = len(masses_amu)
    observed = RunningObservables()
    n_frames = round(spec.production_ps * 1000 / (spec.timestep_fs * spec.steps_per_frame)) + 1
    force_to_SI = 1000.0 / avogadro_per_mol / 1e-9  # kJ/(mol nm) -> N
    amu_kg = 1e-3 / avogadro_per_mol
    first_positions = None
    last_positions = None
    for frame in range(n_frames):
        if frame:
            simulation.step(spec.steps_per_frame)
        state = simulation.context.getState(
            getPositions=True, getVelocities=True, getForces=True, getEnergy=True
        )
        positions_A = state.getPositions(asNumpy=True).value_in_unit(unit.angstrom)
        velocities = state.getVelocities(asNumpy=True).value_in_unit(unit.angstrom / unit.picosecond)
        forces_N = state.getForces(asNumpy=True).value_in_unit(unit.kilojoule_per_mole / unit.nanometer) * force_to_SI
        box = np.diag(state.getPeriodicBoxVectors(asNumpy=True).value_in_unit(unit.angstrom))
        kinetic_kJ_mol = state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole)
        if reporter is not None:
            reporter.report(simulation, state)
        observed.add(
            kinetic_temperature_K=2 * kinetic_kJ_mol * 1000.0 / (dof * boltzmann_J_per_K * avogadro_per_mol),
            potential_energy_kJ_per_mol_atoms=state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole) / n,
            force_squared_over_mass_per_atom_SI=float(np.sum(forces_N**2 / (masses_amu[:, None] * amu_kg)) / n),
        )
        step = frame * spec.steps_per_frame
        recorder.record(step, step * spec.timestep_fs / 1000.0, positions_A, velocities, box)
        if first_positions is None:
            first_positions = positions_A.copy()
        last_positions = positions_A
    msd = float(np.mean(np.sum((last_positions - first_positions) ** 2, axis=1)))
    return observed, msd


def _random_rotation(rng: np.random.Generator) -> np.ndarray:
    """Uniform random rotation matrix from a random unit quaternion (Shoemake 1992)."""
    q = rng.normal(size=4)
    q /= np.linalg.norm(q)
    w, x, y, z = q
    return np.array(
        [
            [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
            [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
            [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
        ]
    )


def run_water(spec: WaterSpec, directory: Path, threads: int = 1) -> dict[str, Any]:
    """Flexible TIP3P (OpenMM): Nosé–Hoover-chain equilibration (strong) and production (weak)."""
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    rng = np.random.default_rng(spec.seed)
    n_side = spec.molecules_per_side
    n_mol = n_side**3
    molar_mass = 2 * _mdanalysis_mass("H") + _mdanalysis_mass("O")
    volume_cm3 = n_mol * molar_mass / (spec.density_g_per_cm3 * avogadro_per_mol)
    box_nm = (volume_cm3 * 1e21) ** (1.0 / 3.0)
    spacing = box_nm / n_side

    topology = app.Topology()
    chain = topology.addChain()
    r_oh, angle = 0.09572, math.radians(104.52)  # TIP3P geometry (Jorgensen et al. 1983)
    template = np.array([[0.0, 0.0, 0.0], [r_oh, 0.0, 0.0], [r_oh * math.cos(angle), r_oh * math.sin(angle), 0.0]])
    template -= template.mean(axis=0)
    positions = []
    for i in range(n_side):
        for j in range(n_side):
            for k in range(n_side):
                residue = topology.addResidue("TIP3", chain)
                o = topology.addAtom("OH2", app.element.oxygen, residue)
                h1 = topology.addAtom("H1", app.element.hydrogen, residue)
                h2 = topology.addAtom("H2", app.element.hydrogen, residue)
                topology.addBond(o, h1)
                topology.addBond(o, h2)
                centre = (np.array([i, j, k]) + 0.5) * spacing
                positions.extend(centre + template @ _random_rotation(rng).T)
    topology.setPeriodicBoxVectors(np.eye(3) * box_nm * unit.nanometer)
    positions = np.array(positions)

    forcefield = app.ForceField(spec.forcefield)
    system = forcefield.createSystem(
        topology,
        nonbondedMethod=app.PME,
        nonbondedCutoff=spec.cutoff_nm * unit.nanometer,
        constraints=None,
        rigidWater=False,
        removeCMMotion=True,
    )
    if spec.fold_tabulated_lennard_jones:
        fold_tabulated_lennard_jones(system)
    elements = [atom.element.symbol for atom in topology.atoms()]
    masses = np.array([_mdanalysis_mass(e) for e in elements])
    for index, mass in enumerate(masses):
        system.setParticleMass(index, mass)
    dof = 3 * system.getNumParticles() - 3  # no constraints; centre-of-mass motion removed

    platform_, properties = _openmm_platform(threads)
    seed_openmm = int(rng.integers(1, 2**31 - 1))
    dt = spec.timestep_fs * unit.femtosecond
    simulation = _nose_hoover_simulation(
        topology, system, spec.temperature_K, spec.equilibration_collision_per_ps, dt, platform_, properties
    )
    simulation.context.setPositions(positions * unit.nanometer)
    simulation.minimizeEnergy(maxIterations=500)
    simulation.context.setVelocitiesToTemperature(spec.temperature_K * unit.kelvin, seed_openmm)
    simulation.step(round(spec.equilibration_ps * 1000 / spec.timestep_fs))
    state = simulation.context.getState(getPositions=True, getVelocities=True)

    simulation = _nose_hoover_simulation(
        topology, system, spec.temperature_K, spec.production_collision_per_ps, dt, platform_, properties
    )
    simulation.context.setState(state)

    residue_of_atom = [atom.residue.index for atom in topology.atoms()]
    recorder = TrajectoryRecorder(
        directory, [a.name for a in topology.atoms()], elements, ["TIP3"] * n_mol, residue_of_atom
    )
    recorder.write_topology(state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), np.full(3, box_nm * 10))
    with recorder:
        observed, msd = _record_openmm_production(
            simulation, recorder, spec, masses, dof, directory / ENERGIES_NAME if spec.energy_file else None
        )
    return {
        "engine": {"name": "OpenMM", "version": mm.__version__, "platform": "CPU", "threads": threads,
                   "deterministic_forces": True},
        "model": {
            "description": "flexible TIP3P water: OpenMM charmm36/water.xml with rigidWater=False, constraints=None",
            "reference": "W. L. Jorgensen et al., J. Chem. Phys. 79, 926 (1983); CHARMM bond and angle terms "
            "(A. D. MacKerell Jr. et al., J. Phys. Chem. B 102, 3586 (1998)): bond k = 376560 kJ/(mol nm^2), "
            "angle k = 460.24 kJ/(mol rad^2), as in OpenMM's charmm36/water.xml",
            "electrostatics": f"PME, cutoff {spec.cutoff_nm} nm, long-range dispersion correction on",
            "masses": "set to the values MDAnalysis assigns from the elements (O 15.999, H 1.008 u)",
            "density_g_per_cm3": spec.density_g_per_cm3,
            "density_source": "liquid water at 25 C and 1 atm (common practice)",
        },
        "state": {
            "temperature_K": spec.temperature_K,
            "box_A": [box_nm * 10] * 3,
            "atom_count": system.getNumParticles(),
            "molecule_count": n_mol,
            "degrees_of_freedom": dof,
        },
        "run": {
            "integrator": "Nose-Hoover chain (NoseHooverIntegrator, chain length 3), strongly coupled for "
            "equilibration, weakly coupled for production",
            "timestep_fs": spec.timestep_fs,
            "frame_interval_fs": spec.timestep_fs * spec.steps_per_frame,
            "equilibration_ps": spec.equilibration_ps,
            "equilibration_thermostat": f"Nose-Hoover chain, collision frequency {spec.equilibration_collision_per_ps}/ps",
            "production_ps": spec.production_ps,
            "production_thermostat": f"Nose-Hoover chain, collision frequency {spec.production_collision_per_ps}/ps (weak, global)",
            "initial_structure": "cubic grid, random orientations, energy minimised (500 iterations)",
            "seed": spec.seed,
            "openmm_seed": seed_openmm,
            "frames": recorder.frames,
        },
        "observed": observed.summary(),
        "observed_final_mean_square_displacement_A2": msd,
    }


def run_argon(spec: ArgonSpec, directory: Path, threads: int = 1) -> dict[str, Any]:
    """Lennard-Jones argon (OpenMM): melt, cool, produce, all with Nosé–Hoover chains."""
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    rng = np.random.default_rng(spec.seed)
    n_cells = spec.cells_per_side
    n = 4 * n_cells**3
    sigma_nm = spec.sigma_A / 10.0
    box_nm = (n / spec.reduced_density) ** (1.0 / 3.0) * sigma_nm
    cell = box_nm / n_cells
    basis = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]]) + 0.25
    grid = np.array([[i, j, k] for i in range(n_cells) for j in range(n_cells) for k in range(n_cells)])
    positions = ((grid[:, None, :] + basis[None, :, :]).reshape(-1, 3)) * cell
    mass = _mdanalysis_mass("Ar")
    epsilon_kJ_mol = spec.epsilon_over_k_K * boltzmann_J_per_K * avogadro_per_mol / 1000.0

    system = mm.System()
    system.setDefaultPeriodicBoxVectors(
        mm.Vec3(box_nm, 0, 0) * unit.nanometer, mm.Vec3(0, box_nm, 0) * unit.nanometer,
        mm.Vec3(0, 0, box_nm) * unit.nanometer,
    )
    nonbonded = mm.NonbondedForce()
    nonbonded.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    nonbonded.setCutoffDistance(spec.cutoff_sigma * sigma_nm)
    nonbonded.setUseDispersionCorrection(True)
    nonbonded.setUseSwitchingFunction(False)
    for _ in range(n):
        system.addParticle(mass)
        nonbonded.addParticle(0.0, sigma_nm, epsilon_kJ_mol)
    system.addForce(nonbonded)
    system.addForce(mm.CMMotionRemover())
    dof = 3 * n - 3

    topology = app.Topology()
    chain = topology.addChain()
    for _ in range(n):
        residue = topology.addResidue("AR", chain)
        topology.addAtom("Ar", app.element.argon, residue)
    topology.setPeriodicBoxVectors(np.eye(3) * box_nm * unit.nanometer)

    platform_, properties = _openmm_platform(threads)
    seed_openmm = int(rng.integers(1, 2**31 - 1))
    dt = spec.timestep_fs * unit.femtosecond
    melt_T = spec.melt_temperature_factor * spec.temperature_K
    simulation = _nose_hoover_simulation(
        topology, system, melt_T, spec.equilibration_collision_per_ps, dt, platform_, properties
    )
    simulation.context.setPositions(positions * unit.nanometer)
    simulation.context.setVelocitiesToTemperature(melt_T * unit.kelvin, seed_openmm)
    simulation.step(round(spec.melt_ps * 1000 / spec.timestep_fs))
    state = simulation.context.getState(getPositions=True, getVelocities=True)
    simulation = _nose_hoover_simulation(
        topology, system, spec.temperature_K, spec.equilibration_collision_per_ps, dt, platform_, properties
    )
    simulation.context.setState(state)
    simulation.step(round(spec.equilibration_ps * 1000 / spec.timestep_fs))
    state = simulation.context.getState(getPositions=True, getVelocities=True)

    simulation = _nose_hoover_simulation(
        topology, system, spec.temperature_K, spec.production_collision_per_ps, dt, platform_, properties
    )
    simulation.context.setState(state)
    masses = np.full(n, mass)
    recorder = TrajectoryRecorder(directory, ["Ar"] * n, ["Ar"] * n, ["AR"] * n, np.arange(n))
    recorder.write_topology(state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), np.full(3, box_nm * 10))
    with recorder:
        observed, msd = _record_openmm_production(simulation, recorder, spec, masses, dof)
    density = n * mass / avogadro_per_mol / (box_nm * 1e-7) ** 3
    return {
        "engine": {"name": "OpenMM", "version": mm.__version__, "platform": "CPU", "threads": threads,
                   "deterministic_forces": True},
        "model": {
            "description": "Lennard-Jones argon, truncated at the cutoff with the long-range dispersion correction",
            "epsilon_over_k_K": spec.epsilon_over_k_K,
            "sigma_A": spec.sigma_A,
            "parameter_source": "L. A. Rowley, D. Nicholson, N. G. Parsonage, J. Comput. Phys. 17, 401 (1975)",
            "cutoff_A": spec.cutoff_sigma * spec.sigma_A,
            "mass_u": mass,
            "state_point_source": "T* = 0.722, rho* = 0.8442: L. Verlet, Phys. Rev. 159, 98 (1967)",
        },
        "state": {
            "temperature_K": spec.temperature_K,
            "reduced_temperature": spec.reduced_temperature,
            "reduced_density": spec.reduced_density,
            "density_g_per_cm3": density,
            "box_A": [box_nm * 10] * 3,
            "atom_count": n,
            "molecule_count": n,
            "degrees_of_freedom": dof,
        },
        "run": {
            "integrator": "Nose-Hoover chain (NoseHooverIntegrator, chain length 3): strongly coupled for "
            "melting and cooling, weakly coupled for production",
            "timestep_fs": spec.timestep_fs,
            "frame_interval_fs": spec.timestep_fs * spec.steps_per_frame,
            "melt_ps": spec.melt_ps,
            "melt_temperature_K": melt_T,
            "equilibration_ps": spec.equilibration_ps,
            "equilibration_thermostat": f"Nose-Hoover chain, collision frequency {spec.equilibration_collision_per_ps}/ps",
            "production_ps": spec.production_ps,
            "production_thermostat": f"Nose-Hoover chain, collision frequency {spec.production_collision_per_ps}/ps (weak, global)",
            "initial_structure": "fcc lattice at the target density, melted",
            "seed": spec.seed,
            "openmm_seed": seed_openmm,
            "frames": recorder.frames,
        },
        "observed": observed.summary(),
        "observed_final_mean_square_displacement_A2": msd,
    }


# --------------------------------------------------------------------------------------
# Driver
# --------------------------------------------------------------------------------------


def is_current(spec: Spec, directory: Path) -> bool:
    """True when *directory* holds this spec's files, unchanged since they were made."""
    settings_path = directory / SETTINGS_NAME
    if not settings_path.is_file():
        return False
    try:
        recorded = json.loads(settings_path.read_text())
    except (OSError, json.JSONDecodeError):
        return False
    if recorded.get("settings_digest") != settings_digest(spec):
        return False
    for key in ("topology", "trajectory") + (("energies",) if getattr(spec, "energy_file", False) else ()):
        entry = recorded.get("files", {}).get(key, {})
        path = directory / entry.get("name", "")
        if not path.is_file() or file_record(path)["sha256"] != entry.get("sha256"):
            return False
    return True


def _make_readable(path: Path) -> None:
    """Give a finished output the usual permissions (temporary files are created 0600)."""
    umask = os.umask(0)
    os.umask(umask)
    path.chmod(0o666 & ~umask)


def make_system(spec: Spec, directory: Path, threads: int = 1) -> dict[str, Any]:
    """Run one system into *directory* and write its settings.json; return the settings."""
    directory.mkdir(parents=True, exist_ok=True)
    start = time.perf_counter()
    cpu_start = time.process_time()
    if spec.kind == "crystal":
        result = run_crystal(spec, directory)
    elif spec.kind == "water":
        result = run_water(spec, directory, threads)
    else:
        result = run_argon(spec, directory, threads)
    wall = time.perf_counter() - start
    cpu = time.process_time() - cpu_start
    wk = result["observed"]["force_squared_over_mass_per_atom_SI"]["mean"]
    result["wigner_kirkwood_free_energy_correction_kJ_per_mol_atoms"] = wigner_kirkwood_free_energy_kJ_per_mol(
        wk, spec.temperature_K
    )
    settings = {
        "system": spec.name,
        "engine_code": "scripts/make_validation_data.py",
        "settings": spec_settings(spec),
        "settings_digest": settings_digest(spec),
        **result,
        "recommended_analysis": {
            "temperature_K": spec.temperature_K,
            "segment_ps": spec.segment_ps,
            "constraints": 0,
        },
        "files": {
            "topology": file_record(directory / TOPOLOGY_NAME),
            "trajectory": file_record(directory / TRAJECTORY_NAME),
            **({"energies": file_record(directory / ENERGIES_NAME)}
               if getattr(spec, "energy_file", False) else {}),
        },
        "software": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "mdanalysis": __import__("MDAnalysis").__version__,
            "machine": platform.machine(),
            "cpu_features": cpu_features(),
        },
        "wall_time_s": round(wall, 1),
        "cpu_time_s": round(cpu, 1),
    }
    write_text_atomic(directory / SETTINGS_NAME, json.dumps(settings, indent=2) + "\n")
    for name in (TOPOLOGY_NAME, TRAJECTORY_NAME, SETTINGS_NAME, ENERGIES_NAME):
        if (directory / name).is_file():
            _make_readable(directory / name)
    return settings


def default_output_dir() -> Path:
    env = os.environ.get("QCORR_VALIDATION_DIR")
    return Path(env) if env else Path.home() / ".cache" / "qcorr-validation"


def make_systems(
    specs: list[Spec], output_dir: Path, jobs: int = 1, force: bool = False, threads: int = 1
) -> dict[str, dict[str, Any]]:
    """Make (or reuse) every system in *specs* under *output_dir*; return their settings."""
    results: dict[str, dict[str, Any]] = {}
    todo = []
    for spec in specs:
        directory = output_dir / spec.name
        if not force and is_current(spec, directory):
            results[spec.name] = json.loads((directory / SETTINGS_NAME).read_text())
            print(f"{spec.name}: up to date in {directory}", file=sys.stderr)
        else:
            todo.append(spec)
    if jobs > 1 and len(todo) > 1:
        # Fresh interpreters ("spawn"), not fork: a process that already ran OpenMM (a test
        # session) holds thread pools whose locks a forked child inherits but cannot release
        # (a fork of a threaded process may only call async-signal-safe functions, POSIX
        # fork(2)); a forked OpenMM water run was seen to hang.  The children find this module
        # through PYTHONPATH.
        here = str(Path(__file__).resolve().parent)
        os.environ["PYTHONPATH"] = os.pathsep.join(
            p for p in (here, os.environ.get("PYTHONPATH", "")) if p
        )
        context = multiprocessing.get_context("spawn")
        with concurrent.futures.ProcessPoolExecutor(max_workers=jobs, mp_context=context) as pool:
            futures = {pool.submit(make_system, s, output_dir / s.name, threads): s for s in todo}
            for future in concurrent.futures.as_completed(futures):
                spec = futures[future]
                results[spec.name] = future.result()
                print(f"{spec.name}: made in {results[spec.name]['wall_time_s']} s", file=sys.stderr)
    else:
        for spec in todo:
            results[spec.name] = make_system(spec, output_dir / spec.name, threads)
            print(f"{spec.name}: made in {results[spec.name]['wall_time_s']} s", file=sys.stderr)
    return results


def parse_arguments(argv: list[str] | None, systems: dict[str, Spec], description: str):
    parser = argparse.ArgumentParser(description=description)
    parser.add_argument(
        "--output-dir", type=Path, default=None,
        help="directory for the trajectories (default: $QCORR_VALIDATION_DIR or ~/.cache/qcorr-validation)",
    )
    parser.add_argument(
        "--systems", nargs="+", default=None, metavar="NAME",
        help=f"systems to make (default: all of {', '.join(systems)})",
    )
    parser.add_argument("--jobs", type=int, default=1, help="systems run at once, one process each (default 1)")
    parser.add_argument("--force", action="store_true", help="remake systems even when up to date")
    return parser.parse_args(argv)


def select_specs(names: list[str] | None, systems: dict[str, Spec]) -> list[Spec]:
    if names is None:
        return list(systems.values())
    unknown = [n for n in names if n not in systems]
    if unknown:
        raise ConfigError(f"--systems: unknown system {unknown[0]!r}; choose from {', '.join(systems)}")
    return [systems[n] for n in names]


def main(argv: list[str] | None = None) -> int:
    args = parse_arguments(argv, VALIDATION_SYSTEMS, "Make the qcorr validation trajectories.")
    try:
        if args.jobs < 1:
            raise ConfigError(f"--jobs must be at least 1, got {args.jobs}")
        output_dir = args.output_dir or default_output_dir()
        if output_dir.exists() and not output_dir.is_dir():
            raise ConfigError(f"--output-dir {output_dir} exists and is not a directory; choose another path")
        specs = select_specs(args.systems, VALIDATION_SYSTEMS)
        start = time.perf_counter()
        make_systems(specs, output_dir, jobs=args.jobs, force=args.force)
        print(f"all systems ready in {output_dir} ({time.perf_counter() - start:.0f} s)", file=sys.stderr)
    except QcorrError as err:
        print(f"make_validation_data: error: {err}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
