"""The library API :class:`qcorr.spectra.analysis.VibrationalSpectrum` (issue 12).

Checks, each against an outside reference:

* on an in-memory Universe (MDAnalysis MemoryReader) of the antiphase diatomics of
  ``tests/synthetic.py``: every velocity component is a sinusoid at a frequency on the
  segment grid m/(L dt), so analytic results hold exactly up to float32 storage —
  the periodic-Hann periodogram of a sinusoid on bin m is non-zero on bins m-1, m, m+1
  only, in the power ratio 1 : 4 : 1 (F. J. Harris, Proc. IEEE 66, 51 (1978): the window's
  DFT coefficients 1/2 and -1/4); each component holds m a²/2 = kT·(3N−3)/(3N) (time
  average of cos² over whole periods is 1/2), which fixes the raw integral and the
  kinetic temperature; the unbiased VACF of a sinusoid differs from cos(ωk) by at most
  1/((L−k)|sin ω|) (geometric-sum bound of the oscillating term);
* the parallel machinery (MDAnalysis' AnalysisBase.run with qcorr's process backend,
  dask's process scheduler and a dask.distributed LocalCluster) against the serial run
  of the same object (oracle), to 1e-12, with segments that straddle the parts, with
  velocities from positions and with the molecular decomposition of the OpenMM demo
  water (resources/demo);
* the API against ``qcorr spectrum`` on the ASE demo copper: the same file;
* bad inputs: a QcorrError with a one-line message.
"""

from __future__ import annotations

import json
import pathlib
import warnings

import MDAnalysis as mda
import numpy as np
import pytest
import synthetic
import xarray as xr
from conftest import OSC_BINS, OSC_FRAMES, OSC_SEGMENT_FRAMES, OSC_SEGMENT_PS, OSC_TEMPERATURE_K
from scipy import constants as sc

from qcorr.errors import ConfigError, QcorrError, SamplingError, TrajectoryError
from qcorr.spectra.analysis import VibrationalSpectrum
from qcorr.spectra.spectrum_file import read_spectrum

DEMO = pathlib.Path(__file__).resolve().parents[1] / "resources" / "demo"

GROUPS = {"first": "resid 1", "rest": "resid 2 3 4"}


@pytest.fixture(scope="module")
def oscillators(oscillator_scenario):
    """In-memory Universe (MemoryReader, float32 positions and velocities, masses set) of the diatomics."""
    return synthetic.universe_of(oscillator_scenario)


def _spectrum(atoms, **options):
    """VibrationalSpectrum of the oscillator scenario's settings, diagnostics' warnings silenced."""
    options.setdefault("segment_ps", OSC_SEGMENT_PS)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return VibrationalSpectrum(atoms, OSC_TEMPERATURE_K, **options)


def _run(spectrum, **run_options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return spectrum.run(**run_options).results.spectrum


@pytest.fixture(scope="module")
def serial(oscillators):
    """The serial spectrum of the oscillators (groups first, rest; one per dimer)."""
    groups = {**GROUPS, **{f"dimer{k + 1}": f"resid {k + 1}" for k in range(len(OSC_BINS))}}
    return _run(_spectrum(oscillators, groups=groups))


def _assert_same(a: xr.Dataset, b: xr.Dataset, rtol: float = 1e-12) -> None:
    """Every data variable equal to *rtol* of the variable's largest value; integers exactly."""
    assert set(a.data_vars) == set(b.data_vars)
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype.kind == "f":
            finite = np.isfinite(x)
            scale = float(np.max(np.abs(x[finite]))) if finite.any() else 0.0
            np.testing.assert_allclose(y, x, rtol=rtol, atol=rtol * scale, equal_nan=True, err_msg=name)
        else:
            np.testing.assert_array_equal(y, x, err_msg=name)
    for attr in ("frames_used", "statistics_frames", "segment_count_window", "block_index", "block_count",
                 "frame_start", "frame_stop", "frame_step"):
        assert a.attrs[attr] == b.attrs[attr], attr
    for attr in ("mean_box_volume_A3", "centre_of_mass_mv2_u_A2_per_ps2", "timestep_ps"):
        assert b.attrs[attr] == pytest.approx(a.attrs[attr], rel=rtol, abs=1e-300), attr


# ----------------------------------------------------------------------------- analytic results
def test_hann_line_shape_sum_rule_and_temperature(serial, oscillator_scenario):
    ds = serial
    dnu = float(ds.attrs["resolution_wavenumber"])
    n = oscillator_scenario.n_atoms
    for k, m in enumerate(OSC_BINS):
        vdos = ds["vdos"].sel(group=f"dimer{k + 1}").values
        dof = float(ds["degrees_of_freedom"].sel(group=f"dimer{k + 1}"))
        # Harris 1978: bins m-1, m, m+1 in the ratio 1 : 4 : 1; their trapezoid sum is the dof
        expected = np.zeros_like(vdos)
        expected[[m - 1, m, m + 1]] = np.array([1.0, 4.0, 1.0]) * dof / (6.0 * dnu)
        np.testing.assert_allclose(vdos, expected, rtol=1e-5, atol=1e-9 * expected.max())
        # the line sits at the molecule's frequency (Hz -> cm-1 with c in cm/s, CODATA via scipy)
        assert float(ds["wavenumber"][m]) == pytest.approx(oscillator_scenario.frequencies_Hz[k] / (sc.c * 100), rel=1e-6)
    # m a^2/2 = kT (3N-3)/(3N) per component: raw integral 3 N_g (3N-3)/(3N), T_kin = T
    analytic = ds["atom_count"].values * 3.0 * (3 * n - 3) / (3 * n)
    np.testing.assert_allclose(ds["raw_integral"].values, analytic, rtol=1e-6)
    np.testing.assert_allclose(ds["kinetic_temperature"].values, OSC_TEMPERATURE_K, rtol=1e-6)
    np.testing.assert_allclose(ds["degrees_of_freedom"].values,
                               [3 * n - 3, 6 - 3 / 4, 18 - 9 / 4] + [6 - 3 / 4] * len(OSC_BINS))


def test_vacf_of_a_sinusoid(serial, oscillator_scenario):
    ds = serial
    L = OSC_SEGMENT_FRAMES
    k = np.arange(L // 2)
    omega = 2.0 * np.pi * OSC_BINS[0] / L  # phase per frame of dimer 1
    bound = 1.0 / ((L - k) * abs(np.sin(omega)))  # |oscillating term| of the unbiased estimate
    got = ds["vacf"].sel(group="dimer1").values[: L // 2]
    assert got[0] == pytest.approx(1.0, rel=1e-12)
    assert np.all(np.abs(got - np.cos(omega * k)) <= bound + 1e-6)
    assert np.any(np.abs(got - np.cos(omega * k)) > 0)  # the check is not vacuous: the estimate is not exact


def test_atom_group_input_and_group_atom_groups(oscillators, oscillator_scenario):
    # analysing only dimers 1 and 2: the total is their 4 atoms (dof 3*4 - 3); each component
    # still holds kT (3N-3)/(3N) of the whole scenario's N = 8 atoms, so T_kin = T 12 (21/24) / 9
    atoms = oscillators.select_atoms("resid 1 2")
    first = oscillators.select_atoms("resid 1")
    ds = _run(_spectrum(atoms, groups={"first": first}, hash_inputs=False))
    assert list(ds["group"].values) == ["total", "first"]
    assert str(ds["selection"].sel(group="first").values) == "index 0:1"
    n = oscillator_scenario.n_atoms
    share = (3 * n - 3) / (3 * n)
    np.testing.assert_allclose(ds["degrees_of_freedom"].values, [9.0, 6 - 3 / 2])
    np.testing.assert_allclose(ds["kinetic_temperature"].values,
                               [OSC_TEMPERATURE_K * 12 * share / 9, OSC_TEMPERATURE_K * 6 * share / 4.5], rtol=1e-6)
    assert json.loads(ds.attrs["input_files"]) == []  # built in memory: no files


def test_frames_selection_equals_start_stop_step(oscillators):
    a = _run(_spectrum(oscillators, groups=GROUPS, segment_ps=2 * OSC_SEGMENT_PS), start=100, stop=900, step=2)
    b = _run(_spectrum(oscillators, groups=GROUPS, segment_ps=2 * OSC_SEGMENT_PS), frames=np.arange(100, 900, 2))
    mask = np.zeros(OSC_FRAMES, dtype=bool)
    mask[100:900:2] = True
    c = _run(_spectrum(oscillators, groups=GROUPS, segment_ps=2 * OSC_SEGMENT_PS), frames=mask)
    for other in (b, c):
        xr.testing.assert_identical(other.drop_attrs(), a.drop_attrs())
    assert a.attrs["timestep_ps"] == pytest.approx(0.004, rel=1e-6) and a.attrs["frame_step"] == 2


# ----------------------------------------------------------------------------- parallel = serial
@pytest.mark.parametrize("source", ["stored", "positions"])
def test_parallel_backends_equal_the_serial_run(oscillators, source):
    # 9 segments (1000 frames, 200-frame segments, 50 % overlap) cut into 4 parts: every
    # split lies inside a segment that straddles it (read by both neighbours)
    runs = {}
    for label, options in (("serial", {}), ("serial_parts", {"n_parts": 4}),
                           ("multiprocessing", {"backend": "multiprocessing", "n_workers": 2, "n_parts": 4}),
                           ("dask_processes", {"backend": "dask", "n_workers": 2, "n_parts": 4})):
        runs[label] = _run(_spectrum(oscillators, groups=GROUPS, velocities_from=source), **options)
    assert runs["multiprocessing"].attrs["worker_processes"] == 2
    assert runs["serial"].attrs["worker_processes"] == 1
    for label in ("serial_parts", "multiprocessing", "dask_processes"):
        _assert_same(runs["serial"], runs[label])


def test_distributed_local_cluster_equals_serial(oscillators):
    distributed = pytest.importorskip("distributed")
    a = _run(_spectrum(oscillators, groups=GROUPS))
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster):
        spectrum = _spectrum(oscillators, groups=GROUPS)
        b = _run(spectrum, backend="dask", n_parts=3)
    assert b.attrs["worker_processes"] == 2
    _assert_same(a, b)
    # neighbouring parts share frames; each frame read is listed once
    np.testing.assert_array_equal(spectrum.frames, np.arange(OSC_FRAMES))


@pytest.mark.slow
@pytest.mark.parametrize("source", ["stored", "positions"])
def test_molecular_demo_water_in_parallel(source):
    # OpenMM flexible water (resources/demo, 64 molecules, 1001 frames): 9 segments of 200
    # frames in 4 parts; parts 2-4 need the 192-frame look-back of the mean-square
    # displacement.  Elements that are differences of larger numbers (vibration = atoms -
    # translation - rotation) are compared to 1e-12 of the variable's largest value.
    distributed = pytest.importorskip("distributed")
    u = mda.Universe(str(DEMO / "water_flexible_298K" / "topology.pdb"),
                     str(DEMO / "water_flexible_298K" / "trajectory.trr"))
    options = {"groups": {"water": "resname TIP3", "oxygen": "name OH2"}, "segment_ps": 0.6,
               "molecular": True, "velocities_from": source}

    def spectrum():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return VibrationalSpectrum(u, 298.15, **options)

    a = _run(spectrum())
    assert "mean_square_displacement" in a.data_vars and a.attrs["principal_moment_frames"] == 1000
    b = _run(spectrum(), backend="multiprocessing", n_workers=2, n_parts=4)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster):
        c = _run(spectrum(), backend="dask", n_parts=4)
    for other in (b, c):
        _assert_same(a, other)
        assert other.attrs["principal_moment_frames"] == a.attrs["principal_moment_frames"]


def test_bad_frame_in_a_worker_gives_one_error(oscillator_scenario):
    # a NaN velocity in the last part: the worker's TrajectoryError reaches the caller
    velocities = oscillator_scenario.velocities.copy()
    velocities[900, 5, 0] = np.nan
    import dataclasses

    u = synthetic.universe_of(dataclasses.replace(oscillator_scenario, velocities=velocities))
    with pytest.raises(TrajectoryError, match=r"frame 900 .*atom index 5") as info:
        _run(_spectrum(u), backend="multiprocessing", n_workers=2, n_parts=4)
    assert "\n" not in str(info.value)


# ----------------------------------------------------------------------------- API = command
def test_api_and_command_write_the_same_file(tmp_path, run_qcorr):
    # ASE/EMT copper demo (resources/demo): the command and the API on a Universe of the same files
    top, trr = DEMO / "copper_300K" / "topology.pdb", DEMO / "copper_300K" / "trajectory.trr"
    command_file = tmp_path / "command.nc"
    code, _, err = run_qcorr("spectrum", "--topology", top, "--trajectory", trr, "--temperature", 300,
                             "--segment-ps", 1.0, "--group", "half=index 0:53", "--output", command_file,
                             "--progress", "never")
    assert code == 0, err
    u = mda.Universe(str(top), str(trr))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        spectrum = VibrationalSpectrum(u, 300.0, groups={"half": "index 0:53"}, segment_ps=1.0).run()
    api_file = spectrum.save(tmp_path / "api.nc")
    a, b = read_spectrum(command_file), read_spectrum(api_file)
    for name in a.data_vars:
        np.testing.assert_array_equal(b[name].values, a[name].values, err_msg=name)  # bitwise
    assert set(a.attrs) == set(b.attrs)
    for attr in a.attrs:
        if attr != "command_line":
            assert a.attrs[attr] == b.attrs[attr], attr
    assert b.attrs["command_line"].startswith("python: qcorr VibrationalSpectrum(")
    # save refuses to replace an input
    with pytest.raises(ConfigError, match="is also an input file"):
        spectrum.save(trr)


# ----------------------------------------------------------------------------- bad input
def _one_line(error: QcorrError) -> str:
    text = str(error)
    assert text and "\n" not in text
    return text


@pytest.mark.parametrize("options, error, fragments", [
    ({"groups": {"ions": "name NA"}}, ConfigError, ["--group ions=", "selects no atom"]),
    ({"groups": {"total": "all"}}, ConfigError, ["reserved"]),
    ({"temperature": -5.0}, ConfigError, ["--temperature -5", "positive"]),
    ({"segment_ps": 0.0}, ConfigError, ["--segment-ps 0"]),
    ({"overlap": 1.0}, ConfigError, ["--overlap"]),
    ({"taper": "kaiser"}, ConfigError, ["--taper 'kaiser'"]),
    ({"velocities_from": "forces"}, ConfigError, ["--velocities-from 'forces'"]),
    ({"block": (3, 2)}, ConfigError, ["--block", "between 1 and N"]),
    ({"masses_by_type": {"ZZ": 12.0}}, ConfigError, ["--mass ZZ", "no atom has type"]),
    ({"constraints": {"nowhere": 1}}, ConfigError, ["no group named 'nowhere'"]),
    ({"lammps_units": "si"}, ConfigError, ["--lammps-units 'si'"]),
])
def test_bad_settings_fail_at_construction(oscillators, options, error, fragments):
    temperature = options.pop("temperature", OSC_TEMPERATURE_K)
    with pytest.raises(error) as info:
        VibrationalSpectrum(oscillators, temperature, segment_ps=options.pop("segment_ps", OSC_SEGMENT_PS), **options)
    text = _one_line(info.value)
    for fragment in fragments:
        assert fragment in text, (fragment, text)


@pytest.mark.parametrize("run_options, error, fragments", [
    ({"frames": [0, 1, 3, 4]}, ConfigError, ["evenly spaced", "frame 3 follows frame 1"]),
    ({"frames": [5, 4, 3]}, ConfigError, ["ascending"]),
    ({"frames": [0, 2], "start": 0}, ConfigError, ["not both"]),
    ({"backend": "threads"}, ConfigError, ["backend 'threads'"]),
    ({"n_parts": 0}, ConfigError, ["n_parts 0"]),
    ({"verbose": True, "backend": "multiprocessing", "n_workers": 2}, ConfigError, ["serial"]),
    ({"stop": 150}, SamplingError, ["fewer frames than one segment", "needs 200"]),
    ({"start": 5, "stop": 6}, SamplingError, ["holds 1 of its 1000 frames"]),
])
def test_bad_run_arguments(oscillators, run_options, error, fragments):
    spectrum = _spectrum(oscillators)
    with pytest.raises(error) as info:
        spectrum.run(**run_options)
    text = _one_line(info.value)
    for fragment in fragments:
        assert fragment in text, (fragment, text)


def test_missing_velocities_and_other_universes(oscillator_scenario, oscillators):
    no_velocities = synthetic.universe_of(oscillator_scenario, with_velocities=False)
    with pytest.raises(TrajectoryError) as info:
        _spectrum(no_velocities).run(stop=400)
    assert "has no velocities" in _one_line(info.value) and "--velocities-from positions" in str(info.value)
    other = synthetic.universe_of(oscillator_scenario)
    with pytest.raises(ConfigError) as info:
        VibrationalSpectrum(oscillators, 300.0, groups={"x": other.atoms[:2]})
    assert "another Universe" in _one_line(info.value)
    with pytest.raises(ConfigError, match="call run"):
        _spectrum(oscillators).save("never.nc")
    with pytest.raises(ConfigError, match="Universe or a non-empty AtomGroup"):
        VibrationalSpectrum(np.zeros(3), 300.0)
