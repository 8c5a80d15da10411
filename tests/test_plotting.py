"""Tests of qcorr.outputs.figures and the ``qcorr plot`` command.

Oracles
-------
* Debye solid (P. Debye, Ann. Phys. 39, 789 (1912)): with the spectrum
  S(ν̃) = 9N ν̃²/ν̃_D³ (ν̃ ≤ ν̃_D), the quantum heat capacity is
  Cv = 9R (T/θ)³ ∫_0^{θ/T} x⁴eˣ/(eˣ−1)² dx per mole of atoms, the energy with
  zero-point energy E = 9Rθ/8 + 9RT (T/θ)³ ∫_0^{θ/T} x³/(eˣ−1) dx, and the
  zero-point energy 9Rθ/8; the classical values are 3R and 3RT.  The integrals
  are evaluated in the tests with scipy.integrate.quad (adaptive Gauss–Kronrod),
  independent of the trapezoid rule used by qcorr.
* Debye table value Cv/3Nk = 0.9517 at T = θ_D (Debye-function tables, e.g. the
  AIP Handbook; quoted from memory, checked here against the quad value too).
* R, k, h, c: CODATA via scipy.constants.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from xml.etree import ElementTree

import numpy as np
import pytest
import xarray as xr
from scipy import constants
from scipy.integrate import quad

from qcorr.cli import main
from qcorr.errors import ConfigError
from qcorr.outputs import figures as plotting
from qcorr.spectra.spectrum_file import write_spectrum

R = constants.R  # J/(mol K), CODATA via scipy
C2 = constants.h * constants.c * 100 / constants.k  # second radiation constant, cm K
DEBYE_WAVENUMBER = 240.0  # cm^-1, on the grid below
DEBYE_TEMPERATURE = DEBYE_WAVENUMBER * C2  # K (about 345 K, close to copper's)
STEP = 0.05  # cm^-1


def spectrum_dataset(wavenumber, vdos_by_group, atom_count, molecule_count, temperature_K):
    """A minimal Dataset that follows the spectrum-file contract of DEVELOPERS.md."""
    groups = list(vdos_by_group)
    vdos = np.array([vdos_by_group[g] for g in groups])
    n_segments = 2
    dof = np.array([np.trapezoid(v, wavenumber) for v in vdos])
    ds = xr.Dataset(
        data_vars={
            "vdos": (("group", "wavenumber"), vdos, {"units": "cm", "long_name": "VDOS"}),
            "vdos_segments": (("group", "segment", "wavenumber"),
                              np.repeat(vdos[:, None, :], n_segments, axis=1),
                              {"units": "cm", "long_name": "VDOS per segment"}),
            "vacf": (("group", "lag"), np.ones((len(groups), 3)), {"units": "1"}),
            "degrees_of_freedom": ("group", dof, {"units": "1"}),
            "constraint_count": ("group", np.zeros(len(groups)), {"units": "1"}),
            "kinetic_temperature": ("group", np.full(len(groups), temperature_K), {"units": "K"}),
            "raw_integral": ("group", dof, {"units": "1"}),
            "atom_count": ("group", np.array([atom_count[g] for g in groups]), {"units": "1"}),
            "molecule_count": ("group", np.array([molecule_count[g] for g in groups]),
                               {"units": "1"}),
            "group_mass": ("group", np.ones(len(groups)), {"units": "g mol-1"}),
            "selection": ("group", np.array(["all"] * len(groups))),
        },
        coords={
            "group": groups,
            "wavenumber": ("wavenumber", wavenumber, {"units": "cm-1"}),
            "frequency": ("wavenumber", wavenumber * constants.c * 100 / 1e12, {"units": "THz"}),
            "lag": ("lag", np.arange(3) * 0.01, {"units": "ps"}),
            "segment": ("segment", np.arange(n_segments)),
        },
        attrs={
            "qcorr_file_kind": "spectrum", "qcorr_format_version": 1, "Conventions": "CF-1.11",
            "temperature_K": float(temperature_K), "timestep_ps": 0.01, "frames_used": 100,
            "frame_start": 0, "frame_stop": 100, "frame_step": 1, "segment_frames": 50,
            "segment_length_ps": 0.5, "segment_overlap": 0.5, "taper": "hann",
            "resolution_wavenumber": 66.7, "nyquist_wavenumber": float(wavenumber[-1]),
            "velocity_source": "stored", "input_files": "[]", "diagnostics": "[]",
            "qcorr_version": "test", "mdanalysis_version": "test", "command_line": "test",
            "mean_box_volume_A3": 0.0,
        },
    )
    return ds


def debye_dataset(temperature_K, atoms=4, molecules=2, step=STEP):
    """Debye spectrum of `atoms` atoms (3N dof) on a `step` cm^-1 grid up to 400 cm^-1."""
    wavenumber = np.round(np.arange(0.0, 400.0 + step / 2, step), 10)
    vdos = np.where(wavenumber <= DEBYE_WAVENUMBER + 1e-9,
                    9.0 * atoms * wavenumber**2 / DEBYE_WAVENUMBER**3, 0.0)
    return spectrum_dataset(wavenumber, {"total": vdos}, {"total": atoms},
                            {"total": molecules}, temperature_K)


def debye_heat_capacity_per_mol_atoms(temperature_K):
    x_d = DEBYE_TEMPERATURE / temperature_K
    integral = quad(lambda x: x**4 * np.exp(-x) / (-np.expm1(-x)) ** 2, 0, x_d,
                    epsabs=0, epsrel=1e-13)[0]
    return 9.0 * R / x_d**3 * integral


def debye_energy_per_mol_atoms_kJ(temperature_K):
    x_d = DEBYE_TEMPERATURE / temperature_K
    integral = quad(lambda x: x**3 * np.exp(-x) / (-np.expm1(-x)), 0, x_d,
                    epsabs=0, epsrel=1e-13)[0]
    return (9.0 * R * DEBYE_TEMPERATURE / 8.0 + 9.0 * R * temperature_K / x_d**3 * integral) / 1000


def value_at(running, name, wavenumber):
    return float(running[name].sel(wavenumber=wavenumber, method="nearest"))


@pytest.mark.parametrize("ratio", [0.25, 0.5, 1.0, 2.0])
def test_cumulative_matches_debye_solid(ratio):
    """Debye (1912): ΔCv, ΔE and ZPE per mole of atoms up to ν̃_D vs quad, rel. 1e-6.

    The trapezoid error on the 0.05 cm^-1 grid is ~h²/12·|f''| ≈ 1e-8 relative here."""
    temperature = ratio * DEBYE_TEMPERATURE
    running = plotting.cumulative_corrections(debye_dataset(temperature), basis="per_mole_atoms")
    assert running["heat_capacity"].attrs["units"] == "J mol-1 K-1"
    assert running["energy"].attrs["units"] == "kJ mol-1"
    expected_cv = debye_heat_capacity_per_mol_atoms(temperature) - 3 * R
    expected_e = debye_energy_per_mol_atoms_kJ(temperature) - 3 * R * temperature / 1000
    expected_zpe = 9 * R * DEBYE_TEMPERATURE / 8 / 1000
    got = {name: value_at(running, name, DEBYE_WAVENUMBER) for name in running.data_vars}
    assert got["heat_capacity"] == pytest.approx(expected_cv, rel=1e-6)
    assert got["energy"] == pytest.approx(expected_e, rel=1e-6)
    assert got["zero_point_energy"] == pytest.approx(expected_zpe, rel=1e-6)
    # beyond ν̃_D the spectrum is zero except for the half bin at ν̃_D: the curve is flat after it
    assert value_at(running, "heat_capacity", 399.0) == pytest.approx(
        value_at(running, "heat_capacity", DEBYE_WAVENUMBER + 1.0), rel=1e-12)
    # S = (E − A)/T for every mode, hence for the running integrals (identity W_S = W_E − W_A)
    np.testing.assert_allclose(
        running["entropy"].values,
        (running["energy"].values - running["helmholtz_free_energy"].values) * 1000 / temperature,
        rtol=1e-9, atol=1e-12,
    )


def test_debye_table_value_at_debye_temperature():
    """Cv/3Nk = 0.9517 at T = θ_D (Debye-function tables; value from memory, 4 digits)."""
    running = plotting.cumulative_corrections(debye_dataset(DEBYE_TEMPERATURE), basis="per_mole_atoms")
    ratio = (3 * R + value_at(running, "heat_capacity", DEBYE_WAVENUMBER)) / (3 * R)
    assert ratio == pytest.approx(0.9517, abs=1e-4)


def test_signs_and_monotone_shape():
    """Berens et al. (1983): ΔCv < 0, ΔE, ΔS, ΔA > 0 for every mode, so the running
    integrals of a positive spectrum are monotone from 0."""
    running = plotting.cumulative_corrections(debye_dataset(300.0), basis="per_mole_atoms")
    for name, sign in (("heat_capacity", -1), ("entropy", 1), ("energy", 1),
                       ("helmholtz_free_energy", 1), ("zero_point_energy", 1)):
        values = sign * running[name].values
        assert values[0] == 0.0
        assert np.all(np.diff(values) >= 0)
        assert values[-1] > 0


def test_bases_differ_by_the_counts():
    """per mole of molecules = per mole of atoms × atoms/molecules; per system = × n/N_A."""
    ds = debye_dataset(200.0, atoms=6, molecules=2)
    atoms = plotting.cumulative_corrections(ds, basis="per_mole_atoms")
    molecules = plotting.cumulative_corrections(ds, basis="per_mole_molecules")
    system = plotting.cumulative_corrections(ds, basis="per_system")
    np.testing.assert_allclose(molecules["entropy"].values, atoms["entropy"].values * 3, rtol=1e-12)
    np.testing.assert_allclose(system["energy"].values,
                               atoms["energy"].values * 6 / constants.N_A, rtol=1e-12)
    assert system["entropy"].attrs["units"] == "J K-1" and system["energy"].attrs["units"] == "kJ"


def test_other_temperature_uses_it():
    ds = debye_dataset(100.0)
    running = plotting.cumulative_corrections(ds, temperature_K=DEBYE_TEMPERATURE, basis="per_mole_atoms")
    assert running.attrs["temperature_K"] == DEBYE_TEMPERATURE
    expected = debye_heat_capacity_per_mol_atoms(DEBYE_TEMPERATURE) - 3 * R
    assert value_at(running, "heat_capacity", DEBYE_WAVENUMBER) == pytest.approx(expected, rel=1e-6)


def test_figures_are_written_and_reproducible(tmp_path):
    ds = debye_dataset(300.0, step=1.0)
    first = plotting.save_figure(plotting.spectrum_figure(ds), tmp_path / "a.svg")
    plotting.save_figure(plotting.spectrum_figure(ds), tmp_path / "b.svg")
    root = ElementTree.parse(first).getroot()
    assert root.tag.endswith("svg")
    assert (tmp_path / "a.svg").read_bytes() == (tmp_path / "b.svg").read_bytes()
    png = plotting.save_figure(plotting.cumulative_figure(ds), tmp_path / "c.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(tmp_path.glob("*.part"))


def test_default_axis_end_covers_the_band():
    ds = debye_dataset(300.0)
    upper = plotting.default_upper_wavenumber(ds)
    assert DEBYE_WAVENUMBER < upper <= 1.15 * (DEBYE_WAVENUMBER + STEP) + 1e-9


def test_bad_extension_group_temperature(tmp_path):
    ds = debye_dataset(300.0)
    with pytest.raises(ConfigError, match=r"--spectrum-figure .*\.svg"):
        plotting.save_figure(plotting.spectrum_figure(ds), tmp_path / "a.txt", option="--spectrum-figure")
    with pytest.raises(ConfigError, match="--group 'water'.*groups are: total"):
        plotting.cumulative_corrections(ds, group="water")
    with pytest.raises(ConfigError, match="--temperature"):
        plotting.cumulative_corrections(ds, temperature_K=-1.0)
    assert not list(tmp_path.iterdir())


@pytest.fixture
def spectrum_file(tmp_path):
    path = tmp_path / "debye.nc"
    write_spectrum(debye_dataset(300.0, step=1.0), path)
    return path


def test_command_writes_both_figures(spectrum_file, tmp_path, capsys):
    status = main(["plot", str(spectrum_file), "--spectrum-figure", str(tmp_path / "s.svg"),
                   "--cumulative-figure", str(tmp_path / "c.svg"), "--basis", "per_mole_atoms"])
    assert status == 0
    assert (tmp_path / "s.svg").stat().st_size > 1000
    assert (tmp_path / "c.svg").stat().st_size > 1000
    assert "wrote" in capsys.readouterr().out


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--group", "nope"], "--group 'nope'"),
        (["--temperature", "0"], "--temperature"),
        (["--max-wavenumber", "-5"], "--max-wavenumber"),
    ],
)
def test_command_bad_options_write_nothing(spectrum_file, tmp_path, capsys, extra, message):
    out = tmp_path / "out"
    status = main(["plot", str(spectrum_file), "--spectrum-figure", str(out / "s.svg"),
                   "--cumulative-figure", str(out / "c.svg"), *extra])
    assert status != 0
    err = capsys.readouterr().err
    assert err.startswith("qcorr: error: ") and message in err
    assert len(err.strip().splitlines()) == 1
    assert not out.exists() or not list(out.iterdir())


def test_command_refuses_foreign_file_by_subprocess(tmp_path):
    foreign = tmp_path / "foreign.nc"
    xr.Dataset({"x": ("n", np.arange(3.0))}).to_netcdf(foreign, engine="h5netcdf")
    result = subprocess.run(
        [sys.executable, "-m", "qcorr", "plot", str(foreign), "--spectrum-figure",
         str(tmp_path / "s.svg")], capture_output=True, text=True, check=False)
    assert result.returncode != 0
    assert "qcorr: error:" in result.stderr and "foreign.nc" in result.stderr
    assert not (tmp_path / "s.svg").exists()


def test_command_needs_a_figure(spectrum_file, capsys):
    assert main(["plot", str(spectrum_file)]) != 0
    assert "nothing to draw" in capsys.readouterr().err


def test_right_edge_equals_the_property_table(spectrum_file, tmp_path):
    """The caption's promise: the right end of each curve is the table's whole correction
    (both are the trapezoid integral of S·ΔW on the file's grid; here checked against
    the output of 'qcorr properties' on the same file)."""
    import pandas as pd

    from qcorr.spectra.spectrum_file import read_spectrum

    table_path = tmp_path / "table.csv"
    assert main(["properties", str(spectrum_file), "--output", str(table_path), "--quiet"]) == 0
    table = pd.read_csv(table_path)
    running = plotting.cumulative_corrections(read_spectrum(spectrum_file), basis="per_mole_atoms")
    rows = table[(table["group"] == "total") & (table["method"] == "harmonic")
                 & (table["basis"] == "per_mole_atoms")]
    for name in plotting.CUMULATIVE_PROPERTIES:
        expected = float(rows.loc[rows["property"] == name, "correction"].iloc[0])
        assert float(running[name].values[-1]) == pytest.approx(expected, rel=1e-9), name


def test_figures_get_ordinary_file_permissions(tmp_path):
    """Outputs are shared on clusters: a figure is readable like any new file (0666 minus
    the umask), not owner-only as the temporary file of the atomic write starts out."""
    umask = os.umask(0o022)
    try:
        path = plotting.save_figure(plotting.spectrum_figure(debye_dataset(300.0, step=1.0)),
                                    tmp_path / "s.svg")
    finally:
        os.umask(umask)
    assert stat.S_IMODE(path.stat().st_mode) == 0o644
