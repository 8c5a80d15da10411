#!/usr/bin/env python
"""Corrected C_P and heat of vaporisation of rigid SPC/E water against published values.

A benchmark, not a test: the runs took 93 minutes of wall time on one core of a shared
2-core machine, too long for CI.  It
makes its OpenMM runs once (cached, like the validation set), runs qcorr on them and writes
``docs/corrected_water.md`` with ``docs/figures/corrected_water_cp.svg``.

The model is SPC/E (H. J. C. Berendsen, J. R. Grigera, T. P. Straatsma, J. Phys. Chem. 91,
6269 (1987)) as OpenMM ships it (``spce.xml``), rigid (SETTLE), PME with a 0.9 nm cutoff and
the long-range dispersion correction, 216 molecules.  Runs:

* liquid, NPT at 1 bar (Monte Carlo barostat every 25 steps; Nosé–Hoover chain, collision
  frequency 5/ps for 50 ps of equilibration, 1/ps for production), 2 fs steps, at
  :data:`TEMPERATURES_K`; energies every 50 fs over :data:`PRODUCTION_PS` (OpenMM
  ``StateDataReporter``), positions and velocities every 8 fs over the first
  :data:`TRAJECTORY_PS` of production (Nyquist 2085 cm⁻¹, above rigid water's librations);
* gas at 298.15 K: the ideal gas of the model, 64 rigid SPC/E molecules with the
  intermolecular terms switched off (see :data:`GAS_SETTINGS`), Langevin thermostat (1/ps; free
  molecules need a local thermostat to be ergodic), 1 fs steps, no centre-of-mass removal,
  100 ps.

What qcorr computes: spectra (3 constraints per molecule), ``qcorr corrected`` (NPT energy
file: ⟨H⟩ and the enthalpy-fluctuation C_P; gas: NVT, ⟨E⟩), ``qcorr series`` (C_P(T) from
the slope of H(T)), ``qcorr vaporisation`` (ΔH_vap at 298.15 K).

Published values compared (all J/(mol K) or kJ/mol per mole of molecules):

* classical C_P of SPC/E at 298.15 K, 1 atm: 87.4, 87.3 and 87 (three sources compiled in
  Berta, Ferenc, Bakó, Madarász, J. Chem. Theory Comput. 16, 3316 (2020), Table 1, column
  c_p,cl; most converted from C_V with + 0.8);
* quantum-corrected C_P of SPC/E in the same table: 73.0 (1PT + anharmonic correction),
  76.7 and 68 (2PT): other correction methods, not the harmonic one used here;
* classical ΔH_vap of SPC/E: the negative excess enthalpy −11.66 kcal/mol (Shirts' free
  energies, no polarisation correction) in Wang, Abel, Friesner, Berne, J. Chem. Theory
  Comput. 5, 1462 (2009), Table 3: 48.79 kJ/mol;
* experiment: C_P and ΔH_vap of water from IAPWS-95 (W. Wagner, A. Pruß, J. Phys. Chem. Ref.
  Data 31, 387 (2002)) through the ``iapws`` package.

Usage::

    python benchmarks/corrected_water.py [--data-dir DIR] [--work-dir DIR] [--make-only]
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "scripts"))

import make_validation_data as engines  # noqa: E402

from qcorr.safe_write import atomic_path, write_text_atomic  # noqa: E402

TEMPERATURES_K = (278.15, 288.15, 298.15, 308.15, 318.15)
GAS_TEMPERATURE_K = 298.15
MOLECULES = 216
GAS_MOLECULES = 64
TIMESTEP_FS = 2.0
EQUILIBRATION_PS = 50.0
PRODUCTION_PS = 300.0
GAS_PS = 100.0
TRAJECTORY_PS = 20.0
STEPS_PER_FRAME = 4
STEPS_PER_ENERGY = 25
CUTOFF_NM = 0.9
SEED = 1301
RECIPE = {"model": "spce.xml (rigid)", "molecules": MOLECULES, "gas_molecules": GAS_MOLECULES,
          "timestep_fs": TIMESTEP_FS, "equilibration_ps": EQUILIBRATION_PS, "production_ps": PRODUCTION_PS,
          "gas_ps": GAS_PS, "trajectory_ps": TRAJECTORY_PS, "steps_per_frame": STEPS_PER_FRAME,
          "steps_per_energy": STEPS_PER_ENERGY, "cutoff_nm": CUTOFF_NM, "seed": SEED, "version": 1}


def run_name(temperature_K: float, phase: str) -> str:
    return f"spce_{phase}_{temperature_K:.2f}K".replace(".", "p")


#: the gas run's own settings (part of its digest only): the ideal gas of the model, i.e. its
#: rigid molecules with the intermolecular charges and Lennard-Jones terms switched off (a rigid
#: molecule has no intramolecular potential energy, so the gas's potential energy is exactly 0,
#: the reference of a heat of vaporisation).  First attempts kept the interactions: with a 1 nm
#: cutoff (OpenMM's reaction field) or without cutoff, the 64 molecules in vacuum attracted each
#: other into clusters and the "gas" had -2.8 and -6.9 kJ/mol of potential energy.  A 1 fs step:
#: OpenMM's LangevinMiddleIntegrator reported a mean temperature 1.3 % high at 2 fs.
GAS_SETTINGS = {"gas_nonbonded": "intermolecular terms off", "gas_timestep_fs": 1.0}


def digest(phase: str, temperature_K: float) -> str:
    extra = GAS_SETTINGS if phase == "gas" else {}
    text = json.dumps({**RECIPE, **extra, "phase": phase, "temperature_K": temperature_K}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()


def is_current(directory: Path, phase: str, temperature_K: float) -> bool:
    record = directory / "settings.json"
    if not record.is_file():
        return False
    settings = json.loads(record.read_text())
    if settings.get("digest") != digest(phase, temperature_K):
        return False
    return all((directory / f["name"]).is_file() and engines.file_record(directory / f["name"]) == f
               for f in settings["files"])


def _water_topology(count: int, liquid: bool):
    """SPC/E molecules: a pre-equilibrated liquid box (OpenMM Modeller) or a dilute grid."""
    import openmm.app as app
    import openmm.unit as unit

    forcefield = app.ForceField("spce.xml")
    modeller = app.Modeller(app.Topology(), [])
    modeller.addSolvent(forcefield, model="spce", numAdded=count if liquid else 1)
    if liquid:
        return forcefield, modeller.topology, np.array(modeller.getPositions().value_in_unit(unit.nanometer))
    one = np.array(modeller.getPositions().value_in_unit(unit.nanometer))[:3]
    one -= one.mean(axis=0)
    topology = app.Topology()
    chain = topology.addChain()
    positions = []
    side = math.ceil(count ** (1 / 3))
    for index in range(count):
        residue = topology.addResidue("HOH", chain)
        o = topology.addAtom("O", app.element.oxygen, residue)
        h1 = topology.addAtom("H1", app.element.hydrogen, residue)
        h2 = topology.addAtom("H2", app.element.hydrogen, residue)
        topology.addBond(o, h1)
        topology.addBond(o, h2)
        i, j, k = index // side**2, (index // side) % side, index % side
        positions.extend(one + 3.0 * np.array([i, j, k]))
    return forcefield, topology, np.array(positions)


def make_run(directory: Path, phase: str, temperature_K: float) -> None:
    """One OpenMM run (liquid NPT or gas) with trajectory, energies and settings."""
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    start = time.perf_counter()
    directory.mkdir(parents=True, exist_ok=True)
    liquid = phase == "liquid"
    forcefield, topology, positions = _water_topology(MOLECULES if liquid else GAS_MOLECULES, liquid)
    if liquid:
        system = forcefield.createSystem(topology, nonbondedMethod=app.PME, nonbondedCutoff=CUTOFF_NM * unit.nanometer,
                                         rigidWater=True, removeCMMotion=True)
        system.addForce(mm.MonteCarloBarostat(1.0 * unit.bar, temperature_K * unit.kelvin, 25))
        integrator = mm.NoseHooverIntegrator(temperature_K * unit.kelvin, 5.0 / unit.picosecond,
                                             TIMESTEP_FS * unit.femtosecond)
    else:
        system = forcefield.createSystem(topology, nonbondedMethod=app.NoCutoff, rigidWater=True,
                                         removeCMMotion=False)
        for force in system.getForces():  # the ideal gas: no intermolecular interactions
            if isinstance(force, mm.NonbondedForce):
                for index in range(force.getNumParticles()):
                    force.setParticleParameters(index, 0.0, 0.1, 0.0)
        integrator = mm.LangevinMiddleIntegrator(temperature_K * unit.kelvin, 1.0 / unit.picosecond,
                                                 GAS_SETTINGS["gas_timestep_fs"] * unit.femtosecond)
        integrator.setRandomNumberSeed(SEED)
    platform = mm.Platform.getPlatformByName("CPU")
    simulation = app.Simulation(topology, system, integrator, platform, {"Threads": "1"})
    simulation.context.setPositions(positions * unit.nanometer)
    simulation.minimizeEnergy(maxIterations=500)
    simulation.context.setVelocitiesToTemperature(temperature_K * unit.kelvin, SEED)
    timestep_fs = TIMESTEP_FS if liquid else GAS_SETTINGS["gas_timestep_fs"]
    steps = lambda ps: round(ps * 1000 / timestep_fs)  # noqa: E731
    simulation.step(steps(EQUILIBRATION_PS))
    if liquid:
        integrator.setCollisionFrequency(1.0 / unit.picosecond)
    names = [a.name for a in topology.atoms()]
    elements = [a.element.symbol for a in topology.atoms()]
    residues = [a.residue.index for a in topology.atoms()]
    recorder = engines.TrajectoryRecorder(directory, names, elements, ["HOH"] * topology.getNumResidues(), residues)
    state = simulation.context.getState(getPositions=True)
    box = np.diag(state.getPeriodicBoxVectors(asNumpy=True).value_in_unit(unit.angstrom)) if liquid else np.full(3, 200.0)
    recorder.write_topology(state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), box)
    production = PRODUCTION_PS if liquid else GAS_PS
    per_frame = STEPS_PER_FRAME if liquid else round(STEPS_PER_FRAME * TIMESTEP_FS / timestep_fs)
    per_energy = STEPS_PER_ENERGY if liquid else round(STEPS_PER_ENERGY * TIMESTEP_FS / timestep_fs)
    frames = steps(TRAJECTORY_PS) // per_frame + 1
    with atomic_path(directory / "energies.csv") as tmp, open(tmp, "w") as energy_file:
        reporter = app.StateDataReporter(energy_file, per_energy, time=True, potentialEnergy=True,
                                         kineticEnergy=True, totalEnergy=True, temperature=True,
                                         volume=liquid, separator=",")
        simulation.reporters.append(reporter)
        simulation.currentStep = 0
        simulation.context.setTime(0.0)
        with recorder:
            for frame in range(frames):
                if frame:
                    simulation.step(per_frame)
                state = simulation.context.getState(getPositions=True, getVelocities=True)
                step = frame * per_frame
                if liquid:
                    box = np.diag(state.getPeriodicBoxVectors(asNumpy=True).value_in_unit(unit.angstrom))
                recorder.record(step, step * timestep_fs / 1000.0,
                                state.getPositions(asNumpy=True).value_in_unit(unit.angstrom),
                                state.getVelocities(asNumpy=True).value_in_unit(unit.angstrom / unit.picosecond), box)
        simulation.step(steps(production) - (frames - 1) * per_frame)
        simulation.reporters.clear()
    files = [engines.file_record(directory / n) for n in ("topology.pdb", "trajectory.trr", "energies.csv")]
    settings = {"digest": digest(phase, temperature_K), "recipe": RECIPE, "phase": phase,
                "temperature_K": temperature_K, "openmm": mm.__version__,
                "wall_s": round(time.perf_counter() - start, 1), "files": files}
    write_text_atomic(directory / "settings.json", json.dumps(settings, indent=2) + "\n")


def make_all(data_dir: Path) -> dict[str, Path]:
    """Make (or reuse) every run; return {run name: directory}."""
    runs = {run_name(t, "liquid"): ("liquid", t) for t in TEMPERATURES_K}
    runs[run_name(GAS_TEMPERATURE_K, "gas")] = ("gas", GAS_TEMPERATURE_K)
    out = {}
    for name, (phase, t) in runs.items():
        directory = data_dir / name
        if not is_current(directory, phase, t):
            print(f"making {name} ...", file=sys.stderr, flush=True)
            make_run(directory, phase, t)
        out[name] = directory
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--data-dir", type=Path, default=None,
                        help="where the runs are cached (default: $QCORR_VALIDATION_DIR/corrected_water)")
    parser.add_argument("--work-dir", type=Path, default=None, help="where qcorr's outputs go (default: data dir/qcorr)")
    parser.add_argument("--make-only", action="store_true", help="only make the runs")
    parser.add_argument("--output", type=Path, default=ROOT / "docs" / "corrected_water.md")
    args = parser.parse_args(argv)
    data_dir = args.data_dir or engines.default_output_dir() / "corrected_water"
    start = time.perf_counter()
    runs = make_all(data_dir)
    print(f"runs ready in {data_dir} ({time.perf_counter() - start:.0f} s)", file=sys.stderr)
    if args.make_only:
        return 0
    from corrected_water_report import report  # noqa: PLC0415  (benchmarks/ is on sys.path when run)

    report(runs, args.work_dir or data_dir / "qcorr", args.output)
    return 0


if __name__ == "__main__":
    sys.exit(main())
