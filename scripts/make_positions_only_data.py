#!/usr/bin/env python
"""Engine trajectories saved both with velocities and as rounded positions (XTC), for issue 11.

For each system one run is recorded every 2 fs with positions and velocities (float32 TRR)
and then written again, every 2nd, 5th and 10th frame, as positions only in GROMACS XTC
with MDAnalysis' ``XTCWriter`` at its default precision (3 decimals in nm: the XTC rounding
of GROMACS, a step of 0.01 Å).  A spectrum from the XTC's differences of positions can
then be compared with the stored-velocity spectrum of the same frames (``--step`` 2, 5, 10
on the TRR).

============================  ==========================================================
system                        model / engine
============================  ==========================================================
``copper_crystal_297K``       fcc Cu, 3×3×3 cubic cells (108 atoms), effective-medium
                              theory (EMT, ASE [1]_), 297 K; velocity Verlet with Bussi
                              stochastic velocity rescaling [2]_
``argon_liquid_94K``          256 Lennard-Jones atoms (ε/k = 119.8 K, σ = 3.405 Å, Rowley,
                              Nicholson & Parsonage [3]_, cut off at 3σ with the
                              dispersion correction), the liquid state of Rahman [4]_:
                              94.4 K, 1.374 g/cm³; OpenMM [5]_, Nosé–Hoover chains
============================  ==========================================================

Files in ``<output-dir>/positions_only/<system>/``: ``topology.pdb``, ``trajectory.trr``
(2 fs), ``positions_4fs.xtc``, ``positions_10fs.xtc``, ``positions_20fs.xtc`` and
``settings.json`` (settings, SHA-256 of every file, wall and CPU time).  A system whose
settings and files match is reused.  Cost, measured on the shared 2-core machine: see
``settings.json`` (``wall_time_s``); EMT copper dominates (ASE's EMT evaluates atom by atom).

References
----------
.. [1] K. W. Jacobsen, P. Stoltze, J. K. Nørskov, Surf. Sci. 366, 394 (1996).
.. [2] G. Bussi, D. Donadio, M. Parrinello, J. Chem. Phys. 126, 014101 (2007).
.. [3] L. A. Rowley, D. Nicholson, N. G. Parsonage, J. Comput. Phys. 17, 401 (1975).
.. [4] A. Rahman, Phys. Rev. 136, A405 (1964).
.. [5] P. Eastman et al., J. Phys. Chem. B 128, 109 (2024) (OpenMM 8).

Usage::

    python scripts/make_positions_only_data.py [--output-dir DIR] [--systems NAME ...] [--force]
"""

from __future__ import annotations

import argparse
import dataclasses
import hashlib
import json
import platform
import sys
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

# the validation set's script (this folder): recorder, engines' helpers, cache location
from make_validation_data import (  # noqa: E402
    TOPOLOGY_NAME,
    TRAJECTORY_NAME,
    TrajectoryRecorder,
    _mdanalysis_mass,
    _nose_hoover_simulation,
    _openmm_platform,
    cpu_features,
    default_output_dir,
    equilibrium_lattice_constant_A,
    file_record,
)

from qcorr.constants import avogadro_per_mol  # noqa: E402
from qcorr.errors import ConfigError, QcorrError  # noqa: E402
from qcorr.safe_write import atomic_path, write_text_atomic  # noqa: E402

#: Version of the recipe below; bump when a change alters the outputs.
RECIPE_VERSION = 1
SUBDIRECTORY = "positions_only"
SETTINGS_NAME = "settings.json"
#: frame spacings of the XTC files (fs) and the TRR's own spacing
XTC_SPACINGS_FS = (4, 10, 20)
RECORD_SPACING_FS = 2
#: XTCWriter precision: decimals in nm (MDAnalysis' default, GROMACS' 1000 per nm)
XTC_DECIMALS = 3


def xtc_name(spacing_fs: int) -> str:
    return f"positions_{spacing_fs}fs.xtc"


@dataclasses.dataclass(frozen=True)
class CopperSpec:
    """fcc copper with ASE's EMT calculator."""

    name: str = "copper_crystal_297K"
    temperature_K: float = 297.0
    cells_per_side: int = 3
    seed: int = 1101
    equilibration_timestep_fs: float = 5.0
    equilibration_ps: float = 1.0
    equilibration_coupling_ps: float = 0.1
    production_ps: float = 4.0
    production_coupling_ps: float = 0.25
    kind: str = "copper"


@dataclasses.dataclass(frozen=True)
class ArgonSpec:
    """Lennard-Jones liquid argon in OpenMM at Rahman's state point."""

    name: str = "argon_liquid_94K"
    temperature_K: float = 94.4
    density_g_per_cm3: float = 1.374
    cells_per_side: int = 4
    seed: int = 1102
    epsilon_over_k_K: float = 119.8
    sigma_A: float = 3.405
    cutoff_sigma: float = 3.0
    equilibration_timestep_fs: float = 5.0
    melt_temperature_factor: float = 2.5
    melt_ps: float = 5.0
    equilibration_ps: float = 5.0
    equilibration_collision_per_ps: float = 5.0
    production_ps: float = 8.0
    production_collision_per_ps: float = 0.5
    kind: str = "argon"


SYSTEMS = {s.name: s for s in (CopperSpec(), ArgonSpec())}


def settings_digest(spec) -> str:
    settings = {**dataclasses.asdict(spec), "recipe_version": RECIPE_VERSION, "xtc_spacings_fs": XTC_SPACINGS_FS,
                "record_spacing_fs": RECORD_SPACING_FS, "xtc_decimals": XTC_DECIMALS}
    return hashlib.sha256(json.dumps(settings, sort_keys=True).encode()).hexdigest()


def data_files() -> list[str]:
    return [TOPOLOGY_NAME, TRAJECTORY_NAME, *(xtc_name(s) for s in XTC_SPACINGS_FS)]


def run_copper(spec: CopperSpec, directory: Path) -> dict[str, Any]:
    """EMT copper: Bussi equilibration (5 fs steps), production recorded every 2 fs step."""
    import ase
    from ase import units
    from ase.build import bulk
    from ase.calculators.emt import EMT
    from ase.constraints import FixCom
    from ase.md.bussi import Bussi
    from ase.md.velocitydistribution import MaxwellBoltzmannDistribution, Stationary

    rng = np.random.default_rng(spec.seed)
    atoms = bulk("Cu", "fcc", a=equilibrium_lattice_constant_A("Cu"), cubic=True).repeat(spec.cells_per_side)
    atoms.calc = EMT()
    atoms.set_constraint(FixCom())
    n = len(atoms)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        MaxwellBoltzmannDistribution(atoms, temperature_K=2 * spec.temperature_K, rng=rng)  # half goes to potential
    Stationary(atoms)
    Bussi(atoms, spec.equilibration_timestep_fs * units.fs, spec.temperature_K,
          spec.equilibration_coupling_ps * 1000 * units.fs, rng=rng).run(
        round(spec.equilibration_ps * 1000 / spec.equilibration_timestep_fs))
    production = Bussi(atoms, RECORD_SPACING_FS * units.fs, spec.temperature_K,
                       spec.production_coupling_ps * 1000 * units.fs, rng=rng)
    box = atoms.cell.lengths()
    recorder = TrajectoryRecorder(directory, ["Cu"] * n, ["Cu"] * n, ["CU"] * n, np.arange(n))
    recorder.write_topology(atoms.get_positions(), box)
    steps = round(spec.production_ps * 1000 / RECORD_SPACING_FS)
    with recorder:
        for step in range(steps + 1):
            if step:
                production.run(1)
            recorder.record(step, step * RECORD_SPACING_FS / 1000.0, atoms.get_positions(),
                            atoms.get_velocities() * 1000.0 * units.fs, box)
    return {"engine": f"ASE {ase.__version__}, EMT", "atoms": n, "frames": recorder.frames,
            "integrator": "velocity Verlet with Bussi rescaling (ase.md.bussi), 2 fs"}


def run_argon(spec: ArgonSpec, directory: Path) -> dict[str, Any]:
    """LJ argon: melt, cool, produce (Nosé–Hoover chains), production recorded every 2 fs step."""
    import openmm as mm
    import openmm.app as app
    import openmm.unit as unit

    from qcorr.constants import boltzmann_J_per_K

    rng = np.random.default_rng(spec.seed)
    cells = spec.cells_per_side
    n = 4 * cells**3
    mass = _mdanalysis_mass("Ar")
    box_nm = (n * mass / avogadro_per_mol / spec.density_g_per_cm3) ** (1.0 / 3.0) * 1e7
    basis = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]]) + 0.25
    grid = np.array([[i, j, k] for i in range(cells) for j in range(cells) for k in range(cells)])
    positions = (grid[:, None, :] + basis[None]).reshape(-1, 3) * box_nm / cells
    system = mm.System()
    system.setDefaultPeriodicBoxVectors(*(mm.Vec3(*row) * unit.nanometer for row in np.eye(3) * box_nm))
    nonbonded = mm.NonbondedForce()
    nonbonded.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    nonbonded.setCutoffDistance(spec.cutoff_sigma * spec.sigma_A / 10.0)
    nonbonded.setUseDispersionCorrection(True)
    epsilon = spec.epsilon_over_k_K * boltzmann_J_per_K * avogadro_per_mol / 1000.0
    for _ in range(n):
        system.addParticle(mass)
        nonbonded.addParticle(0.0, spec.sigma_A / 10.0, epsilon)
    system.addForce(nonbonded)
    system.addForce(mm.CMMotionRemover())
    topology = app.Topology()
    chain = topology.addChain()
    for _ in range(n):
        topology.addAtom("Ar", app.element.argon, topology.addResidue("AR", chain))
    topology.setPeriodicBoxVectors(np.eye(3) * box_nm * unit.nanometer)
    platform_, properties = _openmm_platform(1)
    seed = int(rng.integers(1, 2**31 - 1))
    dt_equil = spec.equilibration_timestep_fs * unit.femtosecond
    state = None
    for temperature, ps in ((spec.melt_temperature_factor * spec.temperature_K, spec.melt_ps),
                            (spec.temperature_K, spec.equilibration_ps)):
        sim = _nose_hoover_simulation(topology, system, temperature, spec.equilibration_collision_per_ps,
                                      dt_equil, platform_, properties)
        if state is None:
            sim.context.setPositions(positions * unit.nanometer)
            sim.context.setVelocitiesToTemperature(temperature * unit.kelvin, seed)
        else:
            sim.context.setState(state)
        sim.step(round(ps * 1000 / spec.equilibration_timestep_fs))
        state = sim.context.getState(getPositions=True, getVelocities=True)
    sim = _nose_hoover_simulation(topology, system, spec.temperature_K, spec.production_collision_per_ps,
                                  RECORD_SPACING_FS * unit.femtosecond, platform_, properties)
    sim.context.setState(state)
    recorder = TrajectoryRecorder(directory, ["Ar"] * n, ["Ar"] * n, ["AR"] * n, np.arange(n))
    recorder.write_topology(state.getPositions(asNumpy=True).value_in_unit(unit.angstrom), np.full(3, box_nm * 10))
    steps = round(spec.production_ps * 1000 / RECORD_SPACING_FS)
    with recorder:
        for step in range(steps + 1):
            if step:
                sim.step(1)
            s = sim.context.getState(getPositions=True, getVelocities=True)
            recorder.record(step, step * RECORD_SPACING_FS / 1000.0,
                            s.getPositions(asNumpy=True).value_in_unit(unit.angstrom),
                            s.getVelocities(asNumpy=True).value_in_unit(unit.angstrom / unit.picosecond),
                            np.full(3, box_nm * 10))
    return {"engine": f"OpenMM {mm.__version__}, CPU platform", "atoms": n, "frames": recorder.frames,
            "integrator": "Nose-Hoover chain (NoseHooverIntegrator), 2 fs", "box_A": box_nm * 10}


def write_xtc_files(directory: Path) -> None:
    """Every 2nd, 5th, 10th frame of the TRR as positions only (XTC, MDAnalysis' writer)."""
    import MDAnalysis as mda

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u = mda.Universe(str(directory / TOPOLOGY_NAME), str(directory / TRAJECTORY_NAME))
    for spacing in XTC_SPACINGS_FS:
        stride = spacing // RECORD_SPACING_FS
        with atomic_path(directory / xtc_name(spacing)) as tmp:
            with mda.Writer(str(tmp), format="XTC", n_atoms=u.atoms.n_atoms, precision=XTC_DECIMALS) as writer:
                for _ in u.trajectory[::stride]:
                    writer.write(u.atoms)


def system_directory(output_dir: Path, name: str) -> Path:
    return output_dir / SUBDIRECTORY / name


def is_current(spec, directory: Path) -> bool:
    """True when *directory* holds this spec's files, unchanged since they were made."""
    path = directory / SETTINGS_NAME
    try:
        recorded = json.loads(path.read_text())
    except (OSError, json.JSONDecodeError):
        return False
    if recorded.get("settings_digest") != settings_digest(spec):
        return False
    for name in data_files():
        entry = recorded.get("files", {}).get(name, {})
        if not (directory / name).is_file() or file_record(directory / name)["sha256"] != entry.get("sha256"):
            return False
    return True


def make_system(spec, output_dir: Path, force: bool = False) -> Path:
    """Make (or reuse) one system; return its directory."""
    directory = system_directory(output_dir, spec.name)
    if not force and is_current(spec, directory):
        return directory
    directory.mkdir(parents=True, exist_ok=True)
    start, cpu = time.perf_counter(), time.process_time()
    run = run_copper(spec, directory) if spec.kind == "copper" else run_argon(spec, directory)
    write_xtc_files(directory)
    record = {
        "system": spec.name, "engine_code": "scripts/make_positions_only_data.py",
        "settings": dataclasses.asdict(spec), "settings_digest": settings_digest(spec), "run": run,
        "record_spacing_fs": RECORD_SPACING_FS, "xtc_spacings_fs": list(XTC_SPACINGS_FS),
        "xtc_precision": f"{XTC_DECIMALS} decimals in nm (MDAnalysis XTCWriter)",
        "files": {name: file_record(directory / name) for name in data_files()},
        "software": {"python": platform.python_version(), "numpy": np.__version__,
                     "mdanalysis": __import__("MDAnalysis").__version__, "cpu_features": cpu_features()},
        "wall_time_s": round(time.perf_counter() - start, 1), "cpu_time_s": round(time.process_time() - cpu, 1),
    }
    write_text_atomic(directory / SETTINGS_NAME, json.dumps(record, indent=2) + "\n")
    return directory


def load_system(name: str, output_dir: Path | None = None) -> Path:
    """Directory of system *name*, made first when missing or out of date."""
    if name not in SYSTEMS:
        raise ConfigError(f"unknown system {name!r}; choose from {', '.join(SYSTEMS)}")
    return make_system(SYSTEMS[name], Path(output_dir) if output_dir else default_output_dir())


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Make trajectories with velocities and as XTC positions (issue 11).")
    parser.add_argument("--output-dir", type=Path, default=None,
                        help="validation directory (default: $QCORR_VALIDATION_DIR or ~/.cache/qcorr-validation)")
    parser.add_argument("--systems", nargs="+", default=None, metavar="NAME",
                        help=f"systems to make (default: all of {', '.join(SYSTEMS)})")
    parser.add_argument("--force", action="store_true", help="remake systems even when up to date")
    args = parser.parse_args(argv)
    try:
        names = args.systems or list(SYSTEMS)
        for name in names:
            if name not in SYSTEMS:
                raise ConfigError(f"--systems: unknown system {name!r}; choose from {', '.join(SYSTEMS)}")
        for name in names:
            directory = make_system(SYSTEMS[name], args.output_dir or default_output_dir(), args.force)
            wall = json.loads((directory / SETTINGS_NAME).read_text())["wall_time_s"]
            print(f"{name}: ready in {directory} (made in {wall} s)", file=sys.stderr)
    except QcorrError as err:
        print(f"make_positions_only_data: error: {err}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
