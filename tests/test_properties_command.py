"""Command-line tests of ``qcorr properties`` and ``qcorr merge``.

Spectra are analytic (tests/spectra.py): a Debye solid (P. Debye, Ann. Phys. 39,
789 (1912)) whose heat capacity is checked against scipy quadrature of the Debye
function, and a liquid-like group with an Ornstein-Uhlenbeck (diffusive) part.
Every bad input must give one ``qcorr: error:`` line naming the file or option,
a non-zero exit status, and no output file.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import spectra
import xarray as xr
from scipy import constants as sc
from scipy.integrate import quad

from qcorr.cli import main


@pytest.fixture(scope="module")
def debye_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("spec") / "copper.nc"
    ds = spectra.debye_solid_dataset(debye_temperature_K=343.0, temperature_K=298.15,
                                     points_below_debye=4000, segment_scatter=0.02, seed=7)
    spectra.write_spectrum_file(ds, path)
    return path


@pytest.fixture(scope="module")
def liquid_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("spec") / "liquid.nc"
    x = np.linspace(0, 800, 801)
    liquid = spectra.normalise(
        x, 0.5 * spectra.debye_vdos(x, 300.0, 30.0) + spectra.lorentzian_vdos(x, 2.0, 15.0), 30.0
    )
    ds = spectra.spectrum_dataset(
        x, {"total": spectra.GroupSpec(liquid, 30.0, 10, 10, 399.48, segment_scatter=0.02)},
        temperature_K=90.0,
    )
    spectra.write_spectrum_file(ds, path)
    return path


def _debye_cv_per_mole_atoms(theta: float, temperature: float) -> float:
    xd = theta / temperature
    integral = quad(lambda x: x**4 * math.exp(x) / math.expm1(x) ** 2, 0, xd, epsrel=1e-13)[0]
    return 3 * sc.R * 3 / xd**3 * integral


def test_properties_writes_table_sidecar_and_prints(debye_file, tmp_path, capsys) -> None:
    out = tmp_path / "cu.csv"
    status = main(["properties", str(debye_file), "--output", str(out), "--system", "cu"])
    assert status == 0
    frame = pd.read_csv(out)
    cv = frame[(frame.property == "heat_capacity") & (frame.basis == "per_mole_atoms")
               & (frame.method == "harmonic")]
    # Debye (1912) Cv by scipy quadrature; the grid's O(h^2) error is ~1e-8
    assert cv.quantum.iloc[0] == pytest.approx(_debye_cv_per_mole_atoms(343.0, 298.15), rel=1e-6)
    assert (frame.system == "cu").all()
    assert set(frame.basis) == {"per_mole_molecules", "per_mole_atoms", "per_system", "atom_mean"}
    assert frame.quantum_se[frame.property == "entropy"].gt(0).all()
    sidecar = json.loads(out.with_suffix(".json").read_text())
    import hashlib

    assert sidecar["input_spectrum"]["sha256"] == hashlib.sha256(debye_file.read_bytes()).hexdigest()
    assert sidecar["command_line"].startswith("qcorr properties")
    assert any("Harmonic approximation" in c for c in sidecar["cautions"])
    assert any("Thermostat" in c for c in sidecar["cautions"])
    assert any("Constrained bonds" in c for c in sidecar["cautions"])
    printed = capsys.readouterr().out
    assert "heat_capacity" in printed and "±" in printed and "support, not replace" in printed


def test_properties_options(debye_file, tmp_path) -> None:
    out = tmp_path / "opt.csv"
    status = main([
        "properties", str(debye_file), "--output", str(out), "--quiet",
        "--temperatures", "298.15", "100",
        "--properties", "heat_capacity", "zero_point_energy",
        "--md-value", "total:heat_capacity=24.44",
        "--frozen-bond-wavenumbers", "total=2000,3000",
    ])
    assert status == 0
    frame = pd.read_csv(out, keep_default_na=False, na_values=[""])
    assert set(frame.temperature_K) == {298.15, 100.0}
    assert set(frame.property) == {"heat_capacity", "zero_point_energy", "mean_square_displacement",
                                   "mean_square_displacement_ratio"}
    md = frame[(frame.property == "heat_capacity") & (frame.temperature_K == 298.15)
               & (frame.basis == "per_mole_molecules") & (frame.method == "harmonic")]
    assert md.classical.iloc[0] == 24.44 and md.classical_source.iloc[0] == "md_value"
    frozen = frame[(frame.method == "frozen_bond_addon") & (frame.property == "zero_point_energy")
                   & (frame.basis == "per_mole_molecules")]
    # ZPE of two modes per molecule: N_A h c (2000 + 3000) cm-1 / 2, exact (CODATA via scipy)
    assert frozen.quantum.iloc[0] == pytest.approx(sc.N_A * sc.h * sc.c * 100 * 2500 / 1000, rel=1e-13)
    scan = frame[(frame.temperature_K == 100.0) & (frame.method == "harmonic")]
    assert scan.note.str.contains("harmonic extrapolation").all()


def test_diffusing_group_via_cli(liquid_file, tmp_path, capsys) -> None:
    out = tmp_path / "liq.csv"
    assert main(["properties", str(liquid_file), "--output", str(out)]) == 0
    frame = pd.read_csv(out, keep_default_na=False, na_values=[""])
    s = frame[(frame.property == "entropy") & (frame.basis == "per_mole_molecules")]
    assert np.isnan(s.quantum.iloc[0]) and s.correction.iloc[0] > 0
    assert "qcorr liquid" in s.note.iloc[0]
    err = capsys.readouterr().err
    assert "qcorr: warning: Group 'total' diffuses" in err


def test_single_segment_spectrum(tmp_path) -> None:
    """A spectrum of one segment has no standard errors: the table says so (empty cells, a
    caution, null in the sidecar, which JSON requires instead of NaN) and the values stay
    right: Debye (1912) Cv by scipy quadrature."""
    ds = spectra.debye_solid_dataset(debye_temperature_K=343.0, temperature_K=298.15,
                                     points_below_debye=4000, n_segments=1)
    path = spectra.write_spectrum_file(ds, tmp_path / "one.nc")
    out = tmp_path / "one.csv"
    assert main(["properties", str(path), "--output", str(out), "--quiet"]) == 0
    frame = pd.read_csv(out, keep_default_na=False, na_values=[""])
    cv = frame[(frame.property == "heat_capacity") & (frame.basis == "per_mole_atoms")]
    assert cv.quantum.iloc[0] == pytest.approx(_debye_cv_per_mole_atoms(343.0, 298.15), rel=1e-6)
    assert frame.quantum_se.isna().all() and "one segment" in cv.note.iloc[0]
    sidecar = json.loads(out.with_suffix(".json").read_text())
    assert sidecar["groups"]["total"]["zero_frequency_se_cm"] is None
    assert any("fewer than two segments" in c for c in sidecar["cautions"])


def test_merge_command(debye_file, tmp_path) -> None:
    a, b, merged = tmp_path / "a.csv", tmp_path / "b.csv", tmp_path / "all.csv"
    assert main(["properties", str(debye_file), "--output", str(a), "--system", "a", "--quiet"]) == 0
    assert main(["properties", str(debye_file), "--output", str(b), "--system", "b", "--quiet"]) == 0
    assert main(["merge", str(a), str(b), "--output", str(merged)]) == 0
    frame = pd.read_csv(merged)
    assert len(frame) == len(pd.read_csv(a)) + len(pd.read_csv(b))
    prov = json.loads(merged.with_suffix(".json").read_text())
    assert [m["table"]["name"] for m in prov["merged_from"]] == [str(a), str(b)]


def test_subprocess_console_entry(debye_file, tmp_path) -> None:
    """The installed command runs in a fresh interpreter and exits 0."""
    out = tmp_path / "sub.csv"
    proc = subprocess.run(
        [sys.executable, "-m", "qcorr", "properties", str(debye_file), "--output", str(out), "--quiet"],
        capture_output=True, text=True, timeout=300, check=False,
    )
    assert proc.returncode == 0, proc.stderr
    assert out.is_file() and out.with_suffix(".json").is_file()


# ------------------------------------------------------------------ bad input
def _expect_error(argv, out, capsys, *fragments):
    status = main(argv)
    captured = capsys.readouterr()
    lines = [line for line in captured.err.splitlines() if line.startswith("qcorr: error:")]
    assert status != 0
    assert len(lines) == 1, captured.err
    for fragment in fragments:
        assert fragment in lines[0], lines[0]
    assert not out.exists() and not out.with_suffix(".json").exists()
    return lines[0]


def _modified(debye_file, tmp_path, name, change):
    ds = xr.open_dataset(debye_file, engine="h5netcdf").load()
    ds = change(ds)
    path = tmp_path / name
    spectra.write_spectrum_file(ds, path)
    return path


def test_bad_not_a_qcorr_file(tmp_path, capsys) -> None:
    foreign = tmp_path / "foreign.nc"
    xr.Dataset({"x": ("t", np.arange(3.0))}).to_netcdf(foreign, engine="h5netcdf")
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(foreign), "--output", str(out)], out, capsys, "foreign.nc")
    text = tmp_path / "text.nc"
    text.write_text("not netcdf")
    _expect_error(["properties", str(text), "--output", str(out)], out, capsys, "text.nc")


def test_bad_missing_variable(debye_file, tmp_path, capsys) -> None:
    path = _modified(debye_file, tmp_path, "novar.nc", lambda ds: ds.drop_vars("vdos_segments"))
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(path), "--output", str(out)], out, capsys, "novar.nc",
                  "vdos_segments")


def test_bad_missing_attribute(debye_file, tmp_path, capsys) -> None:
    def drop(ds):
        del ds.attrs["temperature_K"]
        return ds

    path = _modified(debye_file, tmp_path, "noattr.nc", drop)
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(path), "--output", str(out)], out, capsys, "noattr.nc",
                  "temperature_K")


@pytest.mark.parametrize("value", ["0", "-5"])
def test_bad_temperature_option(debye_file, tmp_path, capsys, value) -> None:
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(debye_file), "--output", str(out), "--temperatures", "300", value],
                  out, capsys, "--temperatures", "positive")


def test_bad_temperature_in_file(debye_file, tmp_path, capsys) -> None:
    def cold(ds):
        ds.attrs["temperature_K"] = -1.0
        return ds

    path = _modified(debye_file, tmp_path, "cold.nc", cold)
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(path), "--output", str(out)], out, capsys, "cold.nc",
                  "temperature_K")


def test_bad_negative_density(debye_file, tmp_path, capsys) -> None:
    def negative(ds):
        ds["vdos_segments"][{"wavenumber": 50}] = -1.0
        ds["vdos"][{"wavenumber": 50}] = -1.0
        return ds

    path = _modified(debye_file, tmp_path, "negative.nc", negative)
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(path), "--output", str(out)], out, capsys, "negative.nc",
                  "negative beyond noise", "'total'")


def test_bad_unknown_property(debye_file, tmp_path, capsys) -> None:
    out = tmp_path / "o.csv"
    line = _expect_error(["properties", str(debye_file), "--output", str(out), "--properties",
                          "enthalpy"], out, capsys, "--properties", "'enthalpy'", "heat_capacity")
    assert "helmholtz_free_energy" in line
    _expect_error(["properties", str(debye_file), "--output", str(out), "--md-value",
                   "total:enthalpy=3"], out, capsys, "--md-value", "'enthalpy'")


@pytest.mark.parametrize(
    "option, fragment",
    [
        (["--md-value", "total=3"], "GROUP:PROPERTY=VALUE"),
        (["--md-value", "water:energy=3"], "no group 'water'"),
        (["--md-value", "total:energy=abc"], "not a number"),
        (["--frozen-bond-wavenumbers", "total=0,3000"], "positive"),
        (["--frozen-bond-wavenumbers", "total"], "GROUP=W1,W2"),
        (["--zero-frequency-threshold", "-1"], "--zero-frequency-threshold"),
    ],
)
def test_bad_options(debye_file, tmp_path, capsys, option, fragment) -> None:
    out = tmp_path / "o.csv"
    _expect_error(["properties", str(debye_file), "--output", str(out), *option], out, capsys, fragment)


def test_output_over_input_refused(debye_file, tmp_path, capsys) -> None:
    before = debye_file.read_bytes()
    status = main(["properties", str(debye_file), "--output", str(debye_file)])
    assert status != 0
    assert "would overwrite the input" in capsys.readouterr().err
    assert debye_file.read_bytes() == before


def test_merge_mismatched_columns(debye_file, tmp_path, capsys) -> None:
    a = tmp_path / "a.csv"
    assert main(["properties", str(debye_file), "--output", str(a), "--quiet"]) == 0
    bad = tmp_path / "bad.csv"
    pd.read_csv(a).drop(columns=["note"]).to_csv(bad, index=False)
    bad.with_suffix(".json").write_text(a.with_suffix(".json").read_text())
    out = tmp_path / "all.csv"
    _expect_error(["merge", str(a), str(bad), "--output", str(out)], out, capsys, "bad.csv", "columns")


def test_end_to_end_from_trajectory(oscillator_files, tmp_path, run_qcorr) -> None:
    """Trajectory -> 'qcorr spectrum' -> 'qcorr properties' on the antiphase-diatomic scenario.

    Sinusoidal velocities exactly on DFT bins m of a periodic-Hann segment put
    their power on bins m and m +- 1 in the ratio 4 : 1 : 1 (Hann window
    transform: amplitudes 1/2, -1/4, -1/4; F. J. Harris, Proc. IEEE 66, 51 (1978)).
    The 21 dof (3N - 3, N = 8) are shared equally by the 4 frequencies, so every
    property is (21/4) sum_i [4 W(u_m) + W(u_m-1) + W(u_m+1)] / 6 in units of k or
    kT, computed here with the textbook oscillator formulas (not qcorr.thermo.weights).
    ZPE, linear in frequency, sees no leakage at all: (21/4) sum_i h nu_i / 2.
    """
    from conftest import OSC_BINS, OSC_MASS_U, OSC_SEGMENT_PS, OSC_TEMPERATURE_K

    spectrum = tmp_path / "dimers.nc"
    code, _, err = run_qcorr(
        "spectrum", "--topology", oscillator_files["topology"], "--trajectory", oscillator_files["trr"],
        "--temperature", OSC_TEMPERATURE_K, "--segment-ps", OSC_SEGMENT_PS, "--mass",
        f"O={OSC_MASS_U}", "--progress", "never", "--output", spectrum,
    )
    assert code == 0, err
    out = tmp_path / "dimers.csv"
    code, _, err = run_qcorr("properties", spectrum, "--output", out, "--quiet")
    assert code == 0, err
    frame = pd.read_csv(out, keep_default_na=False, na_values=[""])
    harmonic_rows = frame[(frame.method == "harmonic") & (frame.basis == "per_system")]

    temperature = OSC_TEMPERATURE_K
    resolution_hz = 1.0 / (OSC_SEGMENT_PS * sc.pico)

    def u_of(bin_index):
        return sc.h * bin_index * resolution_hz / (sc.k * temperature)

    formulas = {  # per mode, units of k (Cv, S) or kT (E, A): McQuarrie, Statistical Mechanics, ch. 8
        "heat_capacity": lambda u: u * u * math.exp(u) / math.expm1(u) ** 2,
        "energy": lambda u: u / 2 + u / math.expm1(u),
        "entropy": lambda u: u / math.expm1(u) - math.log(-math.expm1(-u)),
        "helmholtz_free_energy": lambda u: u / 2 + math.log(-math.expm1(-u)),
        "zero_point_energy": lambda u: u / 2,
    }
    for name, weight in formulas.items():
        modes = sum((4 * weight(u_of(m)) + weight(u_of(m - 1)) + weight(u_of(m + 1))) / 6
                    for m in OSC_BINS) * 21 / 4
        per_k = name in ("heat_capacity", "entropy")  # J/K; the energies are in kJ
        scale = sc.k if per_k else sc.k * temperature / 1000
        row = harmonic_rows[harmonic_rows.property == name].iloc[0]
        assert row.quantum == pytest.approx(modes * scale, rel=1e-9), name
        assert row.quantum_se == pytest.approx(0.0, abs=1e-9 * abs(row.quantum))  # identical segments
    zpe = harmonic_rows[harmonic_rows.property == "zero_point_energy"].quantum.iloc[0]
    exact = 21 / 4 * sum(sc.h * m * resolution_hz / 2 for m in OSC_BINS) / 1000
    assert zpe == pytest.approx(exact, rel=1e-10)


def test_help_states_units(capsys) -> None:
    """Every dimensional option names its unit (house style)."""
    with pytest.raises(SystemExit) as info:
        main(["properties", "--help"])
    assert info.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    for fragment in ("temperatures in K", "J/(mol K)", "kJ/mol", "cm-1", "per mole of molecules"):
        assert fragment in text
    assert "(default: None)" not in text
