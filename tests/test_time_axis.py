"""A time axis that can be trusted, and the inputs that would give a confident wrong number (issue 11).

Inputs are the analytic diatomics of ``tests/synthetic.py`` written by real writers
(MDAnalysis' TRR, DCD and XYZ writers; the LAMMPS dump layout of the LAMMPS manual).

Checks and their references:

* a DCD written with MDAnalysis' default header stores 1 ps per frame (MDAnalysis
  DCDWriter documentation: ``dt=1`` ps by default); an XYZ file stores no time at all:
  both need ``--frame-spacing``, and with it give the spectrum of the same frames read
  from a TRR with time stamps (the same positions: float32 for DCD, 5 decimals for XYZ);
* a reader ``dt`` or a stated spacing that disagrees with a TRR's stamps is refused,
  naming both values; one that agrees is accepted;
* stored velocities against positions: for sinusoids of known frequencies the Simpson
  ratio R is the weighted mean of r(y) = 3 sin y / (y (2 + cos y)), y = 2πνΔt
  (derived in qcorr.reading.velocity_check; r checked against its Taylor series
  1 − y⁴/180 with mpmath and r(π/2) = 3/π); a LAMMPS dump whose ``dt`` is the dump
  interval (4 MD steps) gives R = 1/4 and velocities in a unit 10 times too large
  R = 1/10: both refused;
* all-zero and unchanging velocities are refused; a kinetic temperature a factor 10 off
  the stated one is refused unless allowed.
Every refusal: one ``qcorr: error:`` line, a non-zero exit, no output file.
"""

from __future__ import annotations

import dataclasses
import json
import warnings

import mpmath
import numpy as np
import pytest
import synthetic
from conftest import OSC_BINS, OSC_MASS_U, OSC_SEGMENT_FRAMES, OSC_SEGMENT_PS, OSC_TIMESTEP_PS

from qcorr.reading.velocity_check import simpson_ratio
from qcorr.spectra.spectrum_file import read_spectrum


def _run(run_qcorr, top, traj, out, *extra, temperature=300):
    return run_qcorr("spectrum", "--topology", top, "--trajectory", traj, "--temperature", temperature,
                     "--segment-ps", OSC_SEGMENT_PS, "--mass", f"O={OSC_MASS_U}", "--progress", "never",
                     "--output", out, *extra)


def _refused(result, out, *fragments):
    code, _, err = result
    errors = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code != 0 and len(errors) == 1, err
    for fragment in fragments:
        assert fragment in errors[0], (fragment, errors[0])
    assert "Traceback" not in err and not out.exists()
    return errors[0]


def _write(scn, path, fmt, **kwargs):
    import MDAnalysis as mda

    u = synthetic.universe_of(scn, with_velocities=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with mda.Writer(str(path), n_atoms=scn.n_atoms, format=fmt, **kwargs) as writer:
            for ts in u.trajectory:
                writer.write(u.atoms)
    return path


@pytest.fixture(scope="module")
def reference(oscillator_files, tmp_path_factory):
    """Spectrum from the TRR's positions (time stamps 2 fs apart)."""
    from qcorr.cli import main

    out = tmp_path_factory.mktemp("reference") / "trr_positions.nc"
    args = ["spectrum", "--topology", str(oscillator_files["topology"]), "--trajectory", str(oscillator_files["trr"]),
            "--temperature", "300", "--segment-ps", str(OSC_SEGMENT_PS), "--mass", f"O={OSC_MASS_U}",
            "--progress", "never", "--velocities-from", "positions", "--output", str(out)]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(args) == 0
    return read_spectrum(out)


@pytest.mark.parametrize("fmt", ["DCD", "XYZ"])
def test_formats_without_time_stamps_need_the_frame_spacing(fmt, oscillator_scenario, oscillator_files, reference,
                                                             tmp_path, run_qcorr):
    traj = _write(oscillator_scenario, tmp_path / f"t.{fmt.lower()}", fmt)
    top = oscillator_files["topology"]
    out = tmp_path / "s.nc"
    message = _refused(_run(run_qcorr, top, traj, out, "--velocities-from", "positions"), out,
                       f"t.{fmt.lower()}", "--frame-spacing PS")
    if fmt == "DCD":
        assert "1 ps per frame" in message  # MDAnalysis' default header
    code, _, err = _run(run_qcorr, top, traj, out, "--velocities-from", "positions", "--frame-spacing", OSC_TIMESTEP_PS)
    assert code == 0, err
    ds = read_spectrum(out)
    assert ds.attrs["timestep_ps"] == pytest.approx(OSC_TIMESTEP_PS, rel=1e-12)
    assert "stated frame spacing" in ds.attrs["time_axis"]
    # DCD stores float32 Å like the TRR's float32 nm: 1e-4; MDAnalysis' XYZ writer prints 5 decimals,
    # whose rounding (1e-5 Å) against 0.008 Å steps per frame moves a bin by ~2 (1e-5/sqrt 6)/0.008 = 4e-4
    rtol = 1e-4 if fmt == "DCD" else 2e-3
    np.testing.assert_allclose(ds["vdos"], reference["vdos"], rtol=rtol, atol=rtol * float(reference["vdos"].max()))


def test_dcd_with_its_default_header_as_spacing_is_refused_by_the_temperature(oscillator_scenario, oscillator_files,
                                                                              tmp_path, run_qcorr):
    # the case: frames 2 fs apart read as 1 ps apart give a kinetic temperature 250 000x too low
    traj = _write(oscillator_scenario, tmp_path / "t.dcd", "DCD")
    out = tmp_path / "s.nc"
    args = ["--velocities-from", "positions", "--frame-spacing", 1.0, "--segment-ps", 200]
    message = _refused(_run(run_qcorr, oscillator_files["topology"], traj, out, *args), out,
                       "kinetic temperature of group 'total'", "--frame-spacing", "--allow-temperature-mismatch")
    assert "refused beyond a factor of 2" in message
    code, _, err = _run(run_qcorr, oscillator_files["topology"], traj, out, *args, "--allow-temperature-mismatch")
    assert code == 0 and "qcorr: warning: temperature" in err
    assert read_spectrum(out).attrs["temperature_mismatch_allowed"] == 1


def test_reader_dt_and_frame_spacing_must_agree_with_the_stamps(oscillator_files, tmp_path, run_qcorr):
    top, trr, out = oscillator_files["topology"], oscillator_files["trr"], tmp_path / "s.nc"
    _refused(_run(run_qcorr, top, trr, out, "--reader-option", "dt=0.008"), out,
             "--reader-option dt=0.008", "dimers.trr", "0.002 ps apart", "--frame-spacing")
    _refused(_run(run_qcorr, top, trr, out, "--frame-spacing", 0.004), out,
             "--frame-spacing 0.004 ps", "0.002 ps apart")
    for agreeing in (["--reader-option", "dt=0.002"], ["--frame-spacing", 0.002]):
        code, _, err = _run(run_qcorr, top, trr, out, *agreeing)
        assert code == 0, err
        assert read_spectrum(out).attrs["timestep_ps"] == pytest.approx(0.002, rel=1e-6)
        out.unlink()


def test_simpson_ratio_of_one_mode():
    for y in (0.01, 0.05, 0.1):
        exact = 3 * mpmath.sin(y) / (y * (2 + mpmath.cos(y)))
        assert float(simpson_ratio(y)) == pytest.approx(float(exact), rel=1e-14)
        assert float(exact) == pytest.approx(1 - y**4 / 180, abs=y**6)  # Taylor series
    assert float(simpson_ratio(np.pi / 2)) == pytest.approx(3 / np.pi, rel=1e-14)
    assert float(simpson_ratio(0.0)) == 1.0


def test_ratio_of_the_oscillators_is_the_weighted_mode_ratio(oscillator_files, tmp_path, run_qcorr):
    # each molecule's components carry the same velocity amplitude; Simpson's S of a mode scales as
    # (2 + cos y), so its weight in sum m S^2 as (2 + cos y)^2 (phases average over the 7 pairs
    # only approximately: 1 %)
    out = tmp_path / "s.nc"
    assert _run(run_qcorr, oscillator_files["topology"], oscillator_files["trr"], out)[0] == 0
    y = 2 * np.pi * np.array(OSC_BINS) / OSC_SEGMENT_FRAMES
    weights = (2 + np.cos(y)) ** 2
    expected = float(np.sum(weights * simpson_ratio(y)) / np.sum(weights))
    assert read_spectrum(out).attrs["velocity_position_ratio"] == pytest.approx(expected, rel=0.01)


def test_lammps_dump_interval_given_as_md_step_is_refused(oscillator_scenario, tmp_path, run_qcorr):
    # MD step 0.5 fs, a frame every 4 steps; dt=2 (the dump interval) makes the spacing 8 fs
    dump = synthetic.write_lammps_dump(oscillator_scenario, tmp_path / "d.lammpstrj", units="real",
                                       md_timestep=0.5, steps_per_frame=4)
    out = tmp_path / "s.nc"
    common = ["--lammps-units", "real", "--mass", "1=16"]
    message = _refused(run_qcorr("spectrum", "--topology", dump, "--trajectory", dump, "--temperature", 300,
                                 "--segment-ps", 4 * OSC_SEGMENT_PS, "--output", out, *common,
                                 "--reader-option", "dt=2.0"), out,
                       "d.lammpstrj", "disagree", "MD time step, not the dump interval")
    assert "off by a factor of about 4" in message
    code, _, err = run_qcorr("spectrum", "--topology", dump, "--trajectory", dump, "--temperature", 300,
                             "--segment-ps", OSC_SEGMENT_PS, "--output", out, *common, "--reader-option", "dt=0.5")
    assert code == 0, err


def test_velocities_in_a_wrong_unit_zero_or_unchanging_are_refused(oscillator_scenario, oscillator_files, tmp_path,
                                                                   run_qcorr):
    scn = oscillator_scenario
    top, out = oscillator_files["topology"], tmp_path / "s.nc"
    tenfold = synthetic.write_trr(dataclasses.replace(scn, velocities=10 * scn.velocities), tmp_path / "tenfold.trr")
    assert "off by a factor of about 10" in _refused(_run(run_qcorr, top, tenfold, out), out, "tenfold.trr")
    zero = synthetic.write_trr(dataclasses.replace(scn, velocities=0 * scn.velocities), tmp_path / "zero.trr")
    _refused(_run(run_qcorr, top, zero, out), out, "zero.trr", "are all zero", "--velocities-from positions")
    code, _, err = _run(run_qcorr, top, zero, out, "--velocities-from", "positions")  # positions are fine
    assert code == 0, err
    assert "are all zero" in read_spectrum(out).attrs["velocity_check"]
    out.unlink()
    still = np.repeat(scn.velocities[:1], scn.n_frames, axis=0)
    frozen = synthetic.write_trr(dataclasses.replace(scn, velocities=still), tmp_path / "frozen.trr")
    _refused(_run(run_qcorr, top, frozen, out), out, "frozen.trr", "do not change from frame to frame")


def test_kinetic_temperature_off_by_a_factor_is_refused_unless_allowed(oscillator_files, tmp_path, run_qcorr):
    top, trr, out = oscillator_files["topology"], oscillator_files["trr"], tmp_path / "s.nc"
    message = _refused(_run(run_qcorr, top, trr, out, temperature=30), out, "group 'total'", "300 K", "stated --temperature 30 (in K")
    for cause in ("frame spacing", "--lammps-units", "--mass", "--constraints", "--allow-temperature-mismatch"):
        assert cause in message
    code, _, err = _run(run_qcorr, top, trr, out, "--allow-temperature-mismatch", temperature=30)
    assert code == 0 and "qcorr: warning: temperature" in err
    checks = {c["check"]: c["status"] for c in json.loads(read_spectrum(out).attrs["diagnostics"])}
    assert checks["temperature"] == "warning"
