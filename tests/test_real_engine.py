"""A real MD engine's trajectory: OpenMM NVE run of solid argon, written by a reporter of our own.

System (our own scenario): 108 argon atoms on an fcc lattice (3 × 3 × 3 cells,
a = 5.26 Å), Lennard-Jones σ = 3.4 Å, ε/k = 119.8 K (A. Rahman, Phys. Rev. 136,
A405 (1964)), cut off at 7.5 Å, 40 K.  Langevin equilibration, then NVE with
OpenMM's leap-frog ``VerletIntegrator`` (5 fs), a frame every 16 steps (80 fs,
Nyquist 6.25 THz = 208 cm⁻¹, well above the highest phonon of solid argon,
about 2 THz).  The reporter writes positions and velocities to a GROMACS TRR
with MDAnalysis' writer.

Checks (sources beside each):

1. Sum rule, exact form: with no taper and no overlap the raw integral is the
   plain mean over the frames of Σ m v²/kT, which the test computes itself from
   OpenMM's double-precision velocities; agreement to 1e-5 (float32 TRR storage).
2. Kinetic degrees of freedom: qcorr's kinetic temperature over 3N − 3 equals the
   temperature from OpenMM's own kinetic energy over OpenMM's own count of degrees of
   freedom (3N − 3 with a CMMotionRemover), within 1 % (requirement of issue 2; the
   leap-frog half-step velocities make OpenMM's on-step kinetic energy differ at
   O((ω δt)²) ≈ 1e-3).
3. Finite differences of positions, divided by sinc²(πνΔt), against the stored
   velocities below half Nyquist: "within 1 %" means that the raw spectra integrated
   over each 1-THz band up to half Nyquist differ by less than 1 % of the total raw
   integral below half Nyquist, and the totals below half Nyquist by less than 1 %.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

openmm = pytest.importorskip("openmm")
from openmm import app, unit

from qcorr.spectra.spectrum_file import raw_segments_of, read_spectrum

MASS_U = 39.948  # argon, standard atomic weight (IUPAC)
TEMPERATURE_K = 40.0
MD_STEP_PS = 0.005
STEPS_PER_FRAME = 16
PRODUCTION_FRAMES = 256


class TrrVelocityReporter:
    """OpenMM reporter that appends positions (Å) and velocities (Å/ps) to a TRR file.

    Also records Σ m v² (u Å² ps⁻², from OpenMM's double-precision velocities) and
    OpenMM's kinetic energy (kJ/mol) of every frame, for the checks.
    """

    def __init__(self, path, interval, masses_u):
        import MDAnalysis as mda

        self.interval = interval
        self.masses = np.asarray(masses_u)
        self.universe = mda.Universe.empty(len(self.masses), trajectory=True, velocities=True)
        self.writer = mda.Writer(str(path), n_atoms=len(self.masses))
        self.mass_v2 = []
        self.kinetic_kJ_mol = []

    def describeNextReport(self, simulation):
        steps = self.interval - simulation.currentStep % self.interval
        return {"steps": steps, "periodic": None, "include": ["positions", "velocities", "energy"]}

    def report(self, simulation, state):
        x = state.getPositions(asNumpy=True).value_in_unit(unit.angstrom)
        v = state.getVelocities(asNumpy=True).value_in_unit(unit.angstrom / unit.picosecond)
        box = state.getPeriodicBoxVectors(asNumpy=True).value_in_unit(unit.angstrom)
        ts = self.universe.trajectory.ts
        ts.positions = x
        ts.velocities = v
        ts.dimensions = [box[0, 0], box[1, 1], box[2, 2], 90.0, 90.0, 90.0]
        ts.time = state.getTime().value_in_unit(unit.picosecond)
        self.writer.write(self.universe.atoms)
        self.mass_v2.append(float(np.sum(self.masses[:, None] * v**2)))
        self.kinetic_kJ_mol.append(state.getKineticEnergy().value_in_unit(unit.kilojoule_per_mole))

    def close(self):
        self.writer.close()


@pytest.fixture(scope="module")
def argon_run(tmp_path_factory):
    """Run OpenMM once; return paths and the reporter's records."""
    d = tmp_path_factory.mktemp("openmm_argon")
    cells, a = 3, 5.26
    basis = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]])
    grid = np.array([[i, j, k] for i in range(cells) for j in range(cells) for k in range(cells)])
    positions_A = ((grid[:, None, :] + basis[None]) * a).reshape(-1, 3)
    n, edge_nm = len(positions_A), cells * a / 10

    topology = app.Topology()
    chain = topology.addChain()
    for _ in range(n):
        residue = topology.addResidue("AR", chain)
        topology.addAtom("AR", app.element.argon, residue)
    topology.setPeriodicBoxVectors(np.eye(3) * edge_nm)
    system = openmm.System()
    system.setDefaultPeriodicBoxVectors(*(openmm.Vec3(*row) for row in np.eye(3) * edge_nm))
    lj = openmm.NonbondedForce()
    lj.setNonbondedMethod(openmm.NonbondedForce.CutoffPeriodic)
    lj.setCutoffDistance(0.75)
    lj.setUseDispersionCorrection(False)
    epsilon_kJ_mol = 119.8 * unit.MOLAR_GAS_CONSTANT_R.value_in_unit(unit.kilojoule_per_mole / unit.kelvin)
    for _ in range(n):
        system.addParticle(MASS_U)
        lj.addParticle(0.0, 0.34, epsilon_kJ_mol)
    system.addForce(lj)
    system.addForce(openmm.CMMotionRemover())

    platform = openmm.Platform.getPlatformByName("CPU")
    props = {"Threads": "1"}
    langevin = openmm.LangevinMiddleIntegrator(TEMPERATURE_K, 10.0, MD_STEP_PS)
    langevin.setRandomNumberSeed(20261202)
    equil = app.Simulation(topology, system, langevin, platform, props)
    equil.context.setPositions(positions_A / 10)
    equil.context.setVelocitiesToTemperature(TEMPERATURE_K, 20261202)
    equil.step(1000)
    state = equil.context.getState(getPositions=True, getVelocities=True)

    nve = app.Simulation(topology, system, openmm.VerletIntegrator(MD_STEP_PS), platform, props)
    nve.context.setPositions(state.getPositions())
    nve.context.setVelocities(state.getVelocities())
    trr = d / "argon.trr"
    reporter = TrrVelocityReporter(trr, STEPS_PER_FRAME, np.full(n, MASS_U))
    nve.reporters.append(reporter)
    nve.step(STEPS_PER_FRAME * PRODUCTION_FRAMES)
    reporter.close()
    pdb = d / "argon.pdb"
    with open(pdb, "w") as fh:
        app.PDBFile.writeFile(topology, positions_A / 10 * unit.nanometer, fh)
    dof_openmm = system.getNumParticles() * 3 - 3  # CMMotionRemover removes 3 (OpenMM docs, StateDataReporter)
    return {"pdb": pdb, "trr": trr, "reporter": reporter, "n": n, "dof_openmm": dof_openmm, "dir": d}


def _spectrum(run_qcorr, argon_run, name, *extra):
    out = argon_run["dir"] / f"{name}.nc"
    code, _, err = run_qcorr(
        "spectrum", "--topology", argon_run["pdb"], "--trajectory", argon_run["trr"],
        "--temperature", TEMPERATURE_K, "--mass", f"Ar={MASS_U}", "--segment-ps", 2.56,
        "--progress", "never", "--output", out, *extra,
    )
    assert code == 0, err
    return read_spectrum(out)


def test_sum_rule_against_openmm_velocities_and_kinetic_energy(argon_run, run_qcorr):
    ds = _spectrum(run_qcorr, argon_run, "plain", "--taper", "none", "--overlap", "0")
    rep = argon_run["reporter"]
    used = int(ds.attrs["frames_used"])
    assert int(ds.attrs["frame_start"]) == 0
    # 1. exact sum rule: plain mean of sum m v^2 over the frames in segments, / kT (CODATA k via scipy)
    from scipy import constants as sc

    kT = sc.k * TEMPERATURE_K / (sc.atomic_mass * (sc.angstrom / sc.pico) ** 2)  # u A^2 ps^-2
    expected = np.mean(rep.mass_v2[:used]) / kT
    assert float(ds["raw_integral"].sel(group="total")) == pytest.approx(expected, rel=1e-5)
    # 2. kinetic temperature over 3N-3 against OpenMM's own kinetic energy and DoF count
    t_openmm = 2 * np.mean(rep.kinetic_kJ_mol[:used]) * 1e3 / (argon_run["dof_openmm"] * sc.R)
    assert float(ds["degrees_of_freedom"].sel(group="total")) == 3 * argon_run["n"] - 3
    assert float(ds["kinetic_temperature"].sel(group="total")) == pytest.approx(t_openmm, rel=0.01)
    # raw integral against the kinetic degrees of freedom (T_kin from OpenMM), 1 %
    assert float(ds["raw_integral"].sel(group="total")) == pytest.approx(
        argon_run["dof_openmm"] * t_openmm / TEMPERATURE_K, rel=0.01)


def test_finite_differences_match_stored_velocities_below_half_nyquist(argon_run, run_qcorr):
    stored = _spectrum(run_qcorr, argon_run, "stored")
    differenced = _spectrum(run_qcorr, argon_run, "differenced", "--velocities-from", "positions")
    wn = stored["wavenumber"].values
    half_nyquist = 0.5 * float(stored.attrs["nyquist_wavenumber"])
    thz = stored["frequency"].values
    raw_s = raw_segments_of(stored)[0].mean(axis=0)
    raw_d = raw_segments_of(differenced)[0].mean(axis=0)
    below = wn <= half_nyquist
    total_s = np.trapezoid(raw_s[below], wn[below])
    total_d = np.trapezoid(raw_d[below], wn[below])
    assert total_d == pytest.approx(total_s, rel=0.01)
    edges = np.arange(0.0, thz[below][-1] + 1.0, 1.0)  # 1-THz bands
    for lo, hi in itertools.pairwise(edges):
        band = below & (thz >= lo) & (thz <= hi)
        if band.sum() < 2:
            continue
        diff = np.trapezoid(raw_d[band], wn[band]) - np.trapezoid(raw_s[band], wn[band])
        assert abs(diff) < 0.01 * total_s, (lo, hi, diff / total_s)
    # the correction mattered: uncorrected differences would lose more than 1 % here
    from qcorr.spectra.raw_vdos import finite_difference_power_transfer

    h2 = finite_difference_power_transfer(thz * 1e12, float(stored.attrs["timestep_ps"]))
    assert np.trapezoid((raw_d * h2)[below], wn[below]) < 0.99 * total_s
