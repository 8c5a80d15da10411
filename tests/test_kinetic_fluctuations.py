"""The microcanonical heat capacity from the kinetic energy of the spectrum pass (issue 13, item 1).

Outside references, named at each check:

* an exactly harmonic crystal integrated analytically (``tests/harmonic_lattice.py``): its
  per-frame kinetic energy ½ Σ m v² computed here from the analytic velocities; its classical
  heat capacity f k (equipartition), reached by the Lebowitz–Percus–Verlet formula on its
  infinite-time kinetic-energy statistics to 0.6 % (the deterministic quadrature of the mode
  energies, :func:`harmonic_lattice.infinite_time_heat_capacity`);
* a microcanonical Lennard-Jones liquid made with OpenMM here (256 atoms, T* ≈ 1.0, ρ* = 0.8442,
  equilibrated at T* = 1.02 so that the NVE run stays where JZG is reliable, T* ≥ 1):
  its C_V against the Johnson–Zollweg–Gubbins equation of state (Mol. Phys. 78, 591 (1993)),
  with the difference to Kolafa–Nezbeda (Fluid Phase Equilib. 100, 1 (1994)) as that equation's
  uncertainty (``tests/lennard_jones_eos.py``; at T* ≥ 1 the two agree within 3 %, while near the
  triple point JZG's C_V is unreliable, see tests/test_liquid_references.py); and OpenMM's own
  kinetic energy in its StateDataReporter file (the energy-file route) for the same frames;
* the same box under a Langevin thermostat without centre-of-mass removal, declared NVE: refused.

Why the crystal is sampled at frames 37.3 ps apart: a harmonic crystal does not exchange energy
between its modes, so its kinetic energy is quasi-periodic and a dense run of a few hundred ps
keeps beats between nearly equal frequencies that no block average can see; frames far apart
sample its time average as independent draws, which is what the standard error assumes.

Cost: about 2 minutes (OpenMM 300 ps of 256 atoms, spectra of 15000 and 4000 frames).
"""

from __future__ import annotations

import math
import warnings

import engine_energies as engines
import harmonic_lattice
import lennard_jones_eos as eos
import numpy as np
import pytest
import xarray as xr

from qcorr import constants as C
from qcorr.cli import main as qcorr_main
from qcorr.outputs import table

R = C.gas_constant_J_per_mol_K


def _qcorr(*argv) -> int:
    return qcorr_main([str(a) for a in argv])


def _write_lattice_trajectory(lattice, directory, frames: int, spacing_ps: float):
    """PDB + TRR of the analytic crystal (positions Å, velocities Å/ps, time ps)."""
    import MDAnalysis as mda

    n = lattice.atoms
    u = mda.Universe.empty(n, n_residues=n, atom_resindex=np.arange(n), trajectory=True, velocities=True)
    u.add_TopologyAttr("names", ["AR"] * n)
    u.add_TopologyAttr("elements", ["Ar"] * n)
    u.add_TopologyAttr("resnames", ["AR"] * n)
    u.add_TopologyAttr("resids", np.arange(1, n + 1))
    u.add_TopologyAttr("masses", np.full(n, lattice.mass_u))
    box = [lattice.n_side * lattice.spacing_A] * 3 + [90.0] * 3
    u.dimensions = box
    u.atoms.positions = lattice.positions(0.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u.atoms.write(str(directory / "lattice.pdb"))
        kinetic = []
        with mda.Writer(str(directory / "lattice.trr"), n_atoms=n) as writer:
            for i in range(frames):
                t = i * spacing_ps
                ts = u.trajectory.ts
                ts.positions = lattice.positions(t)
                ts.velocities = lattice.velocities(t)
                ts.dimensions = box
                ts.data["time"] = t
                ts.data["step"] = i
                writer.write(u.atoms)
                kinetic.append(harmonic_lattice.kinetic_energy_kJ_per_mol(lattice, t))
    return np.array(kinetic)


@pytest.mark.slow
def test_harmonic_crystal_kinetic_energy_and_heat_capacity(tmp_path):
    """The spectrum pass stores the analytic kinetic energy of every frame (float32 velocities:
    relative 1e-5), and the NVE heat capacity from it is the crystal's f k within 3 standard
    errors + the 0.6 % quadrature offset of its mode energies.

    Two runs of the same crystal: a densely sampled one (0.02 ps, 25 frames per shortest period)
    through ``qcorr spectrum``, whose stored kinetic energies are checked frame by frame; and
    the sparse one (37.3 ps, module docstring) for the heat capacity: its frames are too far
    apart for a spectrum (``qcorr spectrum`` refuses them: the positions do not follow the
    velocities), so its analytic kinetic energies replace the dense file's series and go
    through ``corrected_properties``, the library call of ``qcorr corrected``."""
    from qcorr import corrected_properties
    from qcorr.spectra.kinetic_series import (
        FRAME_TIME,
        KINETIC_ENERGY,
        KJ_PER_MOL_IN_U_A2_PER_PS2,
        TOTAL_MOMENTUM,
        kinetic_variables,
    )

    lattice = harmonic_lattice.make_lattice(5, temperature_K=100.0)
    dense = tmp_path / "dense"
    dense.mkdir()
    dense_kinetic = _write_lattice_trajectory(lattice, dense, 400, 0.02)
    spectrum = dense / "lattice.nc"
    assert _qcorr("spectrum", "--topology", dense / "lattice.pdb", "--trajectory", dense / "lattice.trr",
                  "--temperature", 100, "--segment-ps", 2.0, "--output", spectrum, "--progress", "never") == 0
    ds = xr.load_dataset(spectrum)
    stored = ds[KINETIC_ENERGY].values
    count = stored.size  # the frames the segments cover
    assert count >= 0.99 * 400
    np.testing.assert_allclose(stored, dense_kinetic[:count], rtol=1e-5)
    assert float(ds["degrees_of_freedom"].sel(group="total")) == lattice.degrees_of_freedom

    spacing, frames = 37.3, 4000
    times = np.arange(frames) * spacing
    sparse = np.array([harmonic_lattice.kinetic_energy_kJ_per_mol(lattice, t) for t in times])
    series = kinetic_variables(times, sparse * KJ_PER_MOL_IN_U_A2_PER_PS2, np.zeros((frames, 3)))
    sparse_ds = ds.drop_vars([KINETIC_ENERGY, TOTAL_MOMENTUM, FRAME_TIME]).assign(series)
    frame = corrected_properties(sparse_ds, ensemble="nve", system="lattice")
    row = frame[(frame["property"] == "heat_capacity") & (frame["basis"] == "per_mole_atoms")].iloc[0]
    assert row["classical_source"] == "kinetic_fluctuation"
    f_k = lattice.degrees_of_freedom * R / lattice.atoms  # per mole of atoms
    infinite = harmonic_lattice.infinite_time_heat_capacity(lattice) / lattice.atoms
    assert abs(infinite / f_k - 1) < 0.01
    print(f"harmonic crystal: C_V {row['classical']:.3f} ± {row['classical_se']:.3f}, infinite-time "
          f"{infinite:.3f}, f k {f_k:.3f} J/(mol K) per mole of atoms")
    assert abs(row["classical"] - infinite) <= 3 * row["classical_se"]
    assert row["classical_se"] < 0.05 * row["classical"]


@pytest.fixture(scope="module")
def lennard_jones_nve(tmp_path_factory):
    """300 ps of NVE Lennard-Jones argon (OpenMM), its spectrum, and both corrected tables."""
    directory = tmp_path_factory.mktemp("lj_nve")
    run = engines.openmm_argon_nve(directory, reduced_temperature=1.02, production_ps=300.0)
    spectrum = directory / "spectrum.nc"
    temperature = f"{run['mean_temperature_K']:.4f}"
    assert _qcorr("spectrum", "--topology", directory / "topology.pdb", "--trajectory", directory / "trajectory.trr",
                  "--temperature", temperature, "--segment-ps", 4, "--output", spectrum, "--progress", "never") == 0
    tables = {}
    for route, extra in (("trajectory", []), ("energy_file", ["--energy-file", directory / "energies.csv",
                                                              "--energy-format", "openmm-csv"])):
        out = directory / f"{route}.csv"
        if route == "energy_file":
            # the trajectory's value takes precedence; read the energy file's own value from a run
            # whose spectrum has no per-frame series
            ds = xr.open_dataset(spectrum).load()
            bare = directory / "bare.nc"
            ds.drop_vars(["kinetic_energy", "total_momentum", "frame_time"]).to_netcdf(bare, engine="h5netcdf")
            source = bare
        else:
            source = spectrum
        assert _qcorr("corrected", source, "--ensemble", "nve", *extra, "--output", out, "--quiet") == 0
        tables[route] = table.read_table(out)
    return run, tables


def _cv(frame):
    row = frame[(frame["property"] == "heat_capacity") & (frame["basis"] == "per_mole_atoms")].iloc[0]
    return row


@pytest.mark.slow
def test_lennard_jones_liquid_agrees_with_the_equation_of_state(lennard_jones_nve):
    """C_V per atom from the trajectory's kinetic-energy fluctuations against JZG at the run's
    own kinetic temperature; tolerance 3 standard errors + |JZG − KN|."""
    run, tables = lennard_jones_nve
    row = _cv(tables["trajectory"])
    assert row["classical_source"] == "kinetic_fluctuation"
    t_star = run["mean_temperature_K"] / engines.EPSILON_K
    jzg = (1.5 + eos.residual_heat_capacity(eos.jzg_residual_helmholtz, t_star, 0.8442)) * R
    kn = (1.5 + eos.residual_heat_capacity(eos.kn_residual_helmholtz, t_star, 0.8442)) * R
    print(f"LJ NVE at T* = {t_star:.4f}: C_V {row['classical']:.3f} ± {row['classical_se']:.3f}, JZG {jzg:.3f}, "
          f"KN {kn:.3f} J/(mol K) per mole of atoms")
    assert abs(row["classical"] - jzg) <= 3 * row["classical_se"] + abs(jzg - kn)
    assert row["classical_se"] < 0.05 * row["classical"]


@pytest.mark.slow
def test_trajectory_and_energy_file_routes_agree(lennard_jones_nve):
    """The spectrum pass's kinetic energy and OpenMM's reported one are the same numbers up to the
    TRR's single precision, so both routes give the same C_V (to a tenth of its standard error)."""
    _, tables = lennard_jones_nve
    a, b = _cv(tables["trajectory"]), _cv(tables["energy_file"])
    assert b["classical_source"] == "energy_file"
    assert abs(a["classical"] - b["classical"]) < 0.1 * a["classical_se"]


@pytest.mark.slow
def test_langevin_run_declared_nve_is_refused(tmp_path, run_qcorr):
    """Langevin dynamics without centre-of-mass removal thermalises the total momentum: refused,
    one line, exit 2, no table."""
    engines.openmm_argon_nve(tmp_path, equilibration_ps=5.0, production_ps=10.0,
                             production_friction_per_ps=1.0)
    spectrum = tmp_path / "spectrum.nc"
    assert _qcorr("spectrum", "--topology", tmp_path / "topology.pdb", "--trajectory", tmp_path / "trajectory.trr",
                  "--temperature", 119.8, "--segment-ps", 2, "--output", spectrum, "--progress", "never") == 0
    out = tmp_path / "nve.csv"
    code, _, err = run_qcorr("corrected", spectrum, "--ensemble", "nve", "--output", out)
    lines = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code == 2 and len(lines) == 1 and "total momentum changes" in lines[0] and "spectrum.nc" in lines[0]
    assert not out.exists()
    assert math.isfinite(float(xr.open_dataset(spectrum)["kinetic_energy"].mean()))
