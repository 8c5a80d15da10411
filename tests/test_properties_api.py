"""Tests of the library functions on spectrum Datasets: harmonic_properties,
two_phase_properties, two_phase_split_spectra, the table functions and the figures.

Oracles (named again beside each check):

* Einstein solid: A. Einstein, Ann. Phys. 22, 180 (1907), closed forms per mode.
* Debye solid: P. Debye, Ann. Phys. 39, 789 (1912): heat capacity by scipy quadrature of
  the Debye function, zero-point energy (9/8) N k theta_D.
* Dilute monatomic gas: the Sackur-Tetrode entropy S/R = 5/2 + ln(kT / (p Lambda^3)),
  computed here from CODATA constants (scipy), and the CODATA key value for argon,
  S(298.15 K, 1 bar) = 154.846 +- 0.003 J/(mol K) (Cox, Wagman, Medvedev, CODATA Key
  Values for Thermodynamics, 1989); Cv = 3R/2.  2PT tends to the ideal gas as its
  fluidicity tends to 1 (Lin, Blanco, Goddard, J. Chem. Phys. 119, 11792 (2003)).
* The weighting function drawn in the spectrum figure: the Einstein heat-capacity
  function u^2 e^u / (e^u - 1)^2 (Einstein 1907).
* The API against the commands: the same spectrum file through 'qcorr properties' /
  'qcorr liquid' / 'qcorr merge' must give the same table to the last bit, since both
  are the documented route to one result (DEVELOPERS.md, "The property table").
"""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import spectra
import xarray as xr
from matplotlib.figure import Figure
from scipy import constants as sc
from scipy.integrate import quad

from qcorr.cli import main
from qcorr.errors import ConfigError, PhysicsError, QcorrError, QcorrWarning
from qcorr.outputs import figures, table
from qcorr.spectra.spectrum_file import read_spectrum
from qcorr.thermo.harmonic import HARMONIC_CAUTIONS, harmonic_properties
from qcorr.thermo.twophase_table import (
    TWO_PHASE_CAUTIONS,
    two_phase_properties,
    two_phase_split_spectra,
)
from qcorr.thermo.weights import PROPERTIES

R = sc.R  # CODATA via scipy, J/(mol K)
T298 = 298.15
DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo"


def _one(frame: pd.DataFrame, **where) -> pd.Series:
    sel = frame
    for column, value in where.items():
        sel = sel[sel[column] == value]
    assert len(sel) == 1, where
    return sel.iloc[0]


def _qcorr(*argv) -> None:
    """Run the command in this process; it must succeed.  Restores the warning printer."""
    saved = warnings.showwarning
    try:
        assert main([str(a) for a in argv]) == 0, argv
    finally:
        warnings.showwarning = saved


def _as_json(value: dict) -> dict:
    """What the sidecar holds of a dict: its JSON round trip (numpy numbers as Python's)."""
    return json.loads(json.dumps(value, default=lambda v: v.item() if hasattr(v, "item") else v.tolist()))


# ------------------------------------------------------------------ analytic spectra
def test_einstein_solid_through_the_table() -> None:
    """Einstein (1907): per mole of atoms Cv, E, S, A and ZPE of 3 modes per atom at u = theta/T."""
    theta, temperature = 240.0, 120.0
    ds = spectra.einstein_solid_dataset(einstein_temperature_K=theta, temperature_K=temperature)
    frame = harmonic_properties(ds, system="einstein")
    # the grid point that carries the modes is theta/c2 up to rounding: use its exact u
    nu_e = float(ds["wavenumber"].values[int(np.argmax(ds["vdos"].values[0]))])
    x = sc.h * sc.c * 100 * nu_e / (sc.k * temperature)
    expected = {
        "heat_capacity": 3 * R * x**2 * math.exp(x) / math.expm1(x) ** 2,
        "energy": 3 * R * temperature * (x / 2 + x / math.expm1(x)) / 1000,
        "zero_point_energy": 3 * R * temperature * (x / 2) / 1000,
        "entropy": 3 * R * (x / math.expm1(x) - math.log(-math.expm1(-x))),
        "helmholtz_free_energy": 3 * R * temperature * (x / 2 + math.log(-math.expm1(-x))) / 1000,
    }
    for name, value in expected.items():
        row = _one(frame, property=name, basis="per_mole_atoms", method="harmonic")
        # one grid bin carries every mode: the integral is exact up to round-off
        assert row["quantum"] == pytest.approx(value, rel=1e-10), name
    assert tuple(frame.columns) == table.TABLE_COLUMNS
    assert set(frame["system"]) == {"einstein"} and set(frame["method"]) == {"harmonic"}


def test_debye_solid_heat_capacity_and_zero_point_energy() -> None:
    """Debye (1912): Cv by quadrature of the Debye function and ZPE = (9/8) N k theta_D."""
    theta, temperature, atoms = 343.0, 200.0, 4
    ds = spectra.debye_solid_dataset(debye_temperature_K=theta, temperature_K=temperature,
                                     atoms=atoms, points_below_debye=4000)
    frame = harmonic_properties(ds, properties=["heat_capacity", "zero_point_energy"],
                                include_msd=False)
    xd = theta / temperature
    cv = 9 * R / xd**3 * quad(lambda x: x**4 * math.exp(x) / math.expm1(x) ** 2, 0, xd,
                              epsabs=0, epsrel=1e-13)[0]
    # trapezoid rule on 4000 points below nu_D: O(h^2) ~ 1e-8 relative
    assert _one(frame, property="heat_capacity", basis="per_mole_atoms")["quantum"] == pytest.approx(cv, rel=1e-6)
    zpe = _one(frame, property="zero_point_energy", basis="per_system")["quantum"]
    assert zpe == pytest.approx(9 / 8 * atoms * sc.k * theta / 1000, rel=1e-6)  # kJ per system
    assert set(frame["property"]) == {"heat_capacity", "zero_point_energy"}  # no MSD rows asked


def _dilute_argon(self_diffusion_m2_s: float = 1e-2) -> xr.Dataset:
    """Argon at 298.15 K and 1 bar, one-atom molecules with an exponential-VACF (Lorentzian)
    spectrum S(0) = c 12 m N D / kT (Green-Kubo; Lin, Blanco, Goddard 2003).  A large D puts
    the fluidicity within ~1e-7 of 1, the ideal-gas limit under test."""
    n, m = 1000, 39.948
    volume = n * sc.k * T298 / sc.bar / 1e-30  # ideal gas, A^3
    s0 = 12 * m * sc.atomic_mass * n * self_diffusion_m2_s / (sc.k * T298) * sc.c * 100
    x = np.linspace(0, 4000 * 2 * 3 * n / (math.pi * s0), 160001)  # 4000 Lorentzian widths
    s = s0 / (1 + (math.pi * s0 * x / (2 * 3 * n)) ** 2)
    g = spectra.GroupSpec(s, float(np.trapezoid(s, x)), n, n, m * n, selection="name Ar")
    return spectra.spectrum_dataset(x, {"total": g}, temperature_K=T298, n_segments=3,
                                    attrs_override={"mean_box_volume_A3": volume})


def test_dilute_gas_gives_sackur_tetrode() -> None:
    """2PT of a dilute monatomic gas: Sackur-Tetrode entropy and Cv = 3R/2 (ideal gas)."""
    ds = _dilute_argon()
    with pytest.warns(QcorrWarning, match="near 1"):
        frame = two_phase_properties(ds, system="argon")
    wavelength = sc.h / math.sqrt(2 * math.pi * 39.948 * sc.atomic_mass * sc.k * T298)
    sackur_tetrode = R * (2.5 + math.log(sc.k * T298 / sc.bar / wavelength**3))
    assert sackur_tetrode == pytest.approx(154.846, abs=0.003)  # CODATA key value (Cox et al. 1989)
    fluidicity = frame.attrs["groups"]["total"]["components"]["translation"]["fluidicity"]
    assert 0 < 1 - fluidicity < 1e-6
    # the departure from the ideal gas is of order 1 - f (a solid-like share of that size)
    entropy = _one(frame, property="entropy")
    assert entropy["quantum"] == pytest.approx(sackur_tetrode, rel=10 * (1 - fluidicity))
    assert entropy["classical"] == pytest.approx(sackur_tetrode, rel=10 * (1 - fluidicity))
    assert _one(frame, property="heat_capacity")["quantum"] == pytest.approx(1.5 * R, rel=10 * (1 - fluidicity))
    assert set(frame["method"]) == {"2pt"} and set(frame["basis"]) == {"per_mole_molecules"}
    energy = _one(frame, property="energy")
    assert math.isnan(energy["quantum"]) and "--md-energy" in energy["note"]
    assert frame.attrs["cautions"][: len(TWO_PHASE_CAUTIONS)] == list(TWO_PHASE_CAUTIONS)


def test_split_spectra_add_up_and_the_gas_part_holds_f_of_the_dof() -> None:
    """gas + solid = the spectrum (by construction); the gas part integrates to 3 f N over
    [0, inf) (Lorentzian; Lin, Blanco, Goddard 2003), here up to the grid's missing tail."""
    ds = _dilute_argon(self_diffusion_m2_s=1.8e-5)  # kinetic-theory order of magnitude, f < 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", QcorrWarning)
        frame = two_phase_properties(ds)
    split = two_phase_split_spectra(ds)
    gas = split["vdos_gas"].sel(group="total", component="translation").values
    solid = split["vdos_solid"].sel(group="total", component="translation").values
    np.testing.assert_allclose(gas + solid, ds["vdos"].values[0], rtol=1e-12)
    f = frame.attrs["groups"]["total"]["components"]["translation"]["fluidicity"]
    x = split["wavenumber"].values
    # the Lorentzian's tail beyond 4000 widths holds 2/(pi 4000) = 1.6e-4 of its weight
    assert np.trapezoid(gas, x) == pytest.approx(3 * f * 1000, rel=2e-4)
    assert np.isnan(split["vdos_gas"].sel(component="rotation")).all()  # no rotation in argon
    assert split["vdos_gas"].attrs["units"] == "cm" and split["wavenumber"].attrs["units"] == "cm-1"


def test_attrs_hold_the_provenance_and_warnings_name_the_group() -> None:
    """A diffusing group: absolute entropy refused, a QcorrWarning, cautions and diagnostics in attrs."""
    x = np.linspace(0, 800, 801)
    liquid = spectra.normalise(
        x, 0.5 * spectra.debye_vdos(x, 300.0, 30.0) + spectra.lorentzian_vdos(x, 2.0, 15.0), 30.0)
    ds = spectra.spectrum_dataset(
        x, {"total": spectra.GroupSpec(liquid, 30.0, 10, 10, 399.48, segment_scatter=0.02)},
        temperature_K=90.0)
    with pytest.warns(QcorrWarning) as record:
        frame = harmonic_properties(ds, system="liquid", temperatures_K=[90.0, 60.0])
    issued = [str(w.message) for w in record]
    assert any(m.startswith("Group 'total' diffuses") for m in issued)
    assert any(m.startswith("Temperature scan") for m in issued)
    assert all(m in frame.attrs["cautions"] for m in issued)
    assert frame.attrs["cautions"][: len(HARMONIC_CAUTIONS)] == list(HARMONIC_CAUTIONS)
    assert frame.attrs["groups"]["total"]["diffusing"] is True
    assert frame.attrs["options"]["temperatures_K"] == [90.0, 60.0]
    assert frame.attrs["options"]["properties"] == list(PROPERTIES)
    assert frame.attrs["input_spectrum"] == {"name": "<in memory>"}
    entropy = _one(frame, property="entropy", basis="per_mole_molecules", temperature_K=90.0)
    assert math.isnan(entropy["quantum"]) and entropy["correction"] > 0


def test_system_defaults_to_the_file_name(tmp_path) -> None:
    """system defaults to the stem of the file xarray read; 'spectrum' for a Dataset in memory."""
    ds = spectra.einstein_solid_dataset(einstein_temperature_K=240.0, temperature_K=300.0, points=401)
    assert set(harmonic_properties(ds, include_msd=False)["system"]) == {"spectrum"}
    path = spectra.write_spectrum_file(ds, tmp_path / "einstein_cu.nc")
    frame = harmonic_properties(read_spectrum(path), include_msd=False)
    assert set(frame["system"]) == {"einstein_cu"}
    assert frame.attrs["input_spectrum"]["name"] == str(path)


# ------------------------------------------------------------------ the API equals the commands
@pytest.fixture(scope="module")
def demo_spectra(tmp_path_factory) -> dict[str, Path]:
    """Spectrum files of the demo copper (300 K) and, with --molecular, the demo water."""
    d = tmp_path_factory.mktemp("demo_spectra")
    cu, water = d / "copper_300K.nc", d / "water_298K.nc"
    _qcorr("spectrum", "--topology", DEMO / "copper_300K" / "topology.pdb", "--trajectory",
           DEMO / "copper_300K" / "trajectory.trr", "--temperature", 300, "--segment-ps", 2,
           "--progress", "never", "--output", cu)
    _qcorr("spectrum", "--topology", DEMO / "water_flexible_298K" / "topology.pdb", "--trajectory",
           DEMO / "water_flexible_298K" / "trajectory.trr", "--temperature", T298, "--segment-ps", 1,
           "--molecular", "--group", "water=resname TIP3", "--group", "oxygen=name OH2",
           "--progress", "never", "--output", water)
    return {"copper": cu, "water": water, "dir": d}


#: sidecar items the command adds or sets at writing (the rest is the DataFrame's attrs)
_WRITTEN_BY_THE_COMMAND = ("qcorr_file_kind", "table", "columns", "versions", "command_line",
                           "input_spectrum", "csv_rows", "csv_sha256")


def _same_table(api: pd.DataFrame, csv: Path) -> None:
    back = table.read_table(csv)
    pd.testing.assert_frame_equal(api, back, check_exact=True)
    side = {k: v for k, v in back.attrs.items() if k not in _WRITTEN_BY_THE_COMMAND}
    assert side == _as_json({k: v for k, v in api.attrs.items() if k != "input_spectrum"})
    assert back.attrs["input_spectrum"]["name"] == api.attrs["input_spectrum"]["name"]


def test_harmonic_table_equals_the_command(demo_spectra, tmp_path) -> None:
    csv = tmp_path / "cu.csv"
    _qcorr("properties", demo_spectra["copper"], "--output", csv, "--quiet", "--system", "cu",
           "--temperatures", 300, 100, "--md-value", "total:heat_capacity=24.44",
           "--frozen-bond-wavenumbers", "total=200,250")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", QcorrWarning)
        api = harmonic_properties(
            read_spectrum(demo_spectra["copper"]), system="cu", temperatures_K=[300, 100],
            md_values={("total", "heat_capacity"): 24.44},
            frozen_bond_wavenumbers_cm={"total": [200, 250]}, source=demo_spectra["copper"])
    _same_table(api, csv)
    assert len(api) == 2 * (len(PROPERTIES) * 3 * 2 + 2)  # 2 T x (6 props x 3 bases x 2 methods + MSD)


def test_two_phase_table_and_split_equal_the_command(demo_spectra, tmp_path) -> None:
    csv, split = tmp_path / "water.csv", tmp_path / "split.nc"
    _qcorr("liquid", demo_spectra["water"], "--output", csv, "--quiet", "--symmetry-number", 2,
           "--md-energy", "water=-35.2", "--split-output", split)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", QcorrWarning)  # the oxygen group is skipped, with a warning
        api = two_phase_properties(read_spectrum(demo_spectra["water"]), symmetry_number=2,
                                   md_energies_kJ_per_mol={"water": -35.2},
                                   source=demo_spectra["water"])
    _same_table(api, csv)
    assert set(api["group"]) == {"total", "water"} and "oxygen" in api.attrs["skipped_groups"]
    api_split = two_phase_split_spectra(read_spectrum(demo_spectra["water"]), symmetry_number=2)
    with xr.open_dataset(split, engine="h5netcdf") as written:
        xr.testing.assert_identical(api_split, written.load())


def test_merged_tables_equal_the_command(demo_spectra, tmp_path) -> None:
    a, b, merged = tmp_path / "a.csv", tmp_path / "b.csv", tmp_path / "all.csv"
    _qcorr("properties", demo_spectra["copper"], "--output", a, "--quiet", "--system", "a")
    _qcorr("properties", demo_spectra["copper"], "--output", b, "--quiet", "--system", "b")
    _qcorr("merge", a, b, "--output", merged)
    api = table.merge_tables([a, b])
    pd.testing.assert_frame_equal(api, table.read_table(merged), check_exact=True)
    assert _as_json(api.attrs)["merged_from"] == table.read_table(merged).attrs["merged_from"]


# ------------------------------------------------------------------ figures
def test_spectrum_figure_draws_every_group_and_the_weights() -> None:
    ds = spectra.debye_solid_dataset(debye_temperature_K=343.0, temperature_K=300.0,
                                     points_below_debye=400)
    figure = figures.spectrum_figure(ds, temperature_K=150.0, max_wavenumber_cm=300.0)
    assert isinstance(figure, Figure)
    spectrum_axes, weight_axes = figure.axes
    assert [line.get_label() for line in spectrum_axes.get_lines()] == ["VDOS, group total"]
    assert spectrum_axes.get_xlim() == (0.0, 300.0)
    assert spectrum_axes.get_xlabel() == "wavenumber (cm⁻¹)"
    labels = [line.get_label() for line in weight_axes.get_lines()]
    assert labels == ["quantum weight, heat capacity", "quantum weight, thermal energy"]
    # the heat-capacity weight is Einstein's function u^2 e^u/(e^u - 1)^2 at u = h c nu~/(k T)
    x, y = weight_axes.get_lines()[0].get_data()
    u = sc.h * sc.c * 100 * x[100] / (sc.k * 150.0)
    assert y[100] == pytest.approx(u**2 * math.exp(u) / math.expm1(u) ** 2, rel=1e-12)
    assert "150 K" in weight_axes.get_ylabel()


def test_cumulative_figure_ends_at_the_debye_correction() -> None:
    """Left panel: the running heat-capacity correction ends at Cv - 3R of the Debye solid
    (Debye 1912, quadrature), per mole of atoms; right panel: the three energies."""
    theta, temperature = 343.0, 200.0
    ds = spectra.debye_solid_dataset(debye_temperature_K=theta, temperature_K=temperature,
                                     points_below_debye=4000)
    figure = figures.cumulative_figure(ds, basis="per_mole_atoms")
    assert isinstance(figure, Figure)
    left, right = figure.axes
    lines = {line.get_label(): line for line in left.get_lines()}
    assert {"heat capacity ΔCv", "entropy ΔS"} <= set(lines)
    assert {"energy ΔE (with ZPE)", "free energy ΔA", "zero-point energy"} <= {
        line.get_label() for line in right.get_lines()}
    xd = theta / temperature
    cv = 9 * R / xd**3 * quad(lambda x: x**4 * math.exp(x) / math.expm1(x) ** 2, 0, xd,
                              epsabs=0, epsrel=1e-13)[0]
    assert lines["heat capacity ΔCv"].get_ydata()[-1] == pytest.approx(cv - 3 * R, rel=1e-6)
    assert left.get_ylabel() == "cumulative correction (J/(mol K))"
    assert right.get_ylabel() == "cumulative correction (kJ/mol)"


def test_save_figure_writes_only_known_formats(tmp_path) -> None:
    figure = figures.spectrum_figure(spectra.debye_solid_dataset(
        debye_temperature_K=343.0, temperature_K=300.0, points_below_debye=400))
    written = figures.save_figure(figure, tmp_path / "s.svg")
    assert written.read_text().lstrip().startswith("<?xml")
    with pytest.raises(ConfigError, match=r"path '.*s\.jpg': the file name must end in \.svg"):
        figures.save_figure(figure, tmp_path / "s.jpg")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.svg"]


# ------------------------------------------------------------------ bad input
def _debye():
    return spectra.debye_solid_dataset(debye_temperature_K=343.0, temperature_K=300.0,
                                       points_below_debye=400)


@pytest.mark.parametrize(
    "kwargs, error, fragment",
    [
        ({"temperatures_K": [300.0, -1.0]}, ConfigError, "--temperatures: -1 K is not a positive"),
        ({"properties": ["enthalpy"]}, ConfigError, "'enthalpy'"),
        ({"md_values": {("water", "energy"): 1.0}}, ConfigError, "no group 'water'"),
        ({"md_values": {("total", "energy"): float("nan")}}, ConfigError, "not a finite number"),
        ({"frozen_bond_wavenumbers_cm": {"total": [0.0]}}, ConfigError, "positive numbers in cm-1"),
        ({"zero_frequency_threshold": 0.0}, ConfigError, "--zero-frequency-threshold"),
        ({"system": "  "}, ConfigError, "--system"),
    ],
)
def test_harmonic_bad_input(kwargs, error, fragment) -> None:
    with pytest.raises(error) as info:
        harmonic_properties(_debye(), **kwargs)
    assert fragment in str(info.value) and "\n" not in str(info.value)


@pytest.mark.parametrize(
    "kwargs, error, fragment",
    [
        ({"gas_volume": "nope"}, ConfigError, "gas_volume='nope': choose one of gas-particles"),
        ({"diffusion_from": "nmr"}, ConfigError, "diffusion_from='nmr'"),
        ({"symmetry_number": 0}, ConfigError, "symmetry number must be an integer >= 1"),
        ({"group_symmetry_numbers": {"ghost": 2}}, ConfigError, "no group 'ghost'"),
        ({"viscosity_Pa_s": -1.0}, ConfigError, "--viscosity"),
        ({"volume_A3": 0.0}, ConfigError, "--volume"),
        ({"groups": ["ghost"]}, ConfigError, "--groups: no group 'ghost'"),
        ({"md_energies_kJ_per_mol": {"total": float("inf")}}, ConfigError, "--md-energy"),
        ({}, PhysicsError, "has no box volume"),
    ],
)
def test_two_phase_bad_input(kwargs, error, fragment) -> None:
    with pytest.raises(error) as info:
        two_phase_properties(_debye(), **kwargs)
    assert fragment in str(info.value) and "\n" not in str(info.value)


@pytest.mark.parametrize(
    "draw, fragment",
    [
        (lambda ds: figures.cumulative_figure(ds, group="nope"), "--group 'nope'"),
        (lambda ds: figures.cumulative_figure(ds, basis="per_gram"), "--basis 'per_gram'"),
        (lambda ds: figures.spectrum_figure(ds, temperature_K=0.0), "--temperature"),
        (lambda ds: figures.spectrum_figure(ds, max_wavenumber_cm=-5.0), "--max-wavenumber"),
        (lambda ds: table.merge_tables([]), "at least one table"),
        (lambda ds: table.read_table("missing.csv"), "'missing.csv' does not exist"),
    ],
)
def test_figure_and_table_bad_input(draw, fragment) -> None:
    with pytest.raises(QcorrError) as info:
        draw(_debye())
    assert fragment in str(info.value) and "\n" not in str(info.value)
