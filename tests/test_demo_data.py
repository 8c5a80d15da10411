"""The bundled demo trajectories (resources/demo/): present, readable, described, reproducible.

The demo is made by ``scripts/make_demo_data.py`` with ASE (EMT copper) and OpenMM
(flexible TIP3P water).  These tests read the committed files with MDAnalysis – copies in
a temporary directory, so that no offset cache is left in the repository – and check them
against the settings recorded beside them and against physics that does not depend on
qcorr.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
from repository_scripts import load_script

from qcorr.constants import avogadro_per_mol, boltzmann_J_per_K, speed_of_light_cm_per_s

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "resources" / "demo"
SCRIPT = ROOT / "scripts" / "make_demo_data.py"


demo_script = load_script("make_demo_data")
SYSTEMS = list(demo_script.DEMO_SYSTEMS)

#: IUPAC standard atomic weights (abridged, CIAAW), as MDAnalysis tabulates them, in u.
STANDARD_MASSES_U = {"Cu": 63.546, "O": 15.999, "H": 1.008}


def _settings(name: str) -> dict:
    return json.loads((DEMO / name / "settings.json").read_text())


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    """name -> (universe masses, elements, times ps, velocities Å/ps) read from copies."""
    import MDAnalysis as mda

    out = {}
    for name in SYSTEMS:
        tmp = tmp_path_factory.mktemp(name)
        for file_name in ("topology.pdb", "trajectory.trr"):
            shutil.copyfile(DEMO / name / file_name, tmp / file_name)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            u = mda.Universe(str(tmp / "topology.pdb"), str(tmp / "trajectory.trr"))
        times, velocities, has_v = [], [], []
        for ts in u.trajectory:
            times.append(ts.time)
            has_v.append(ts.has_velocities)
            velocities.append(ts.velocities.astype(np.float64))
        out[name] = {
            "masses": u.atoms.masses.copy(),
            "elements": list(u.atoms.elements),
            "n_residues": u.atoms.n_residues,
            "times": np.array(times),
            "has_velocities": has_v,
            "velocities": np.array(velocities),
            "box": u.dimensions.copy(),
        }
        u.trajectory.close()
    return out


def test_demo_files_exist_and_stay_small():
    total = 0
    for name in SYSTEMS:
        for file_name in ("topology.pdb", "trajectory.trr", "settings.json", "energies.csv"):
            path = DEMO / name / file_name
            if file_name == "energies.csv" and not getattr(demo_script.DEMO_SYSTEMS[name], "energy_file", False):
                continue
            assert path.is_file(), f"{path} missing: run scripts/make_demo_data.py"
            total += path.stat().st_size
    assert (DEMO / "README.md").is_file()
    # Issue 4 / the demo brief: the committed demo stays at or below about 8 MB.
    assert total <= 8 * 1024**2, f"demo is {total / 1024**2:.2f} MiB"


@pytest.mark.parametrize("name", SYSTEMS)
def test_settings_describe_the_committed_files(name):
    settings = _settings(name)
    for key in ("topology", "trajectory") + (("energies",) if "energies" in settings["files"] else ()):
        record = settings["files"][key]
        path = DEMO / name / record["name"]
        assert demo_script.engines.file_record(path) == record, f"{path} differs from settings.json"
    spec = demo_script.DEMO_SYSTEMS[name]
    assert settings["settings"] == demo_script.engines.spec_settings(spec)
    assert settings["run"]["seed"] == spec.seed
    assert settings["engine"]["version"]
    assert settings["recommended_analysis"]["segment_ps"] == spec.segment_ps


@pytest.mark.parametrize("name", SYSTEMS)
def test_readable_with_velocities_masses_and_even_time_steps(name, frames):
    data = frames[name]
    settings = _settings(name)
    assert all(data["has_velocities"])
    # masses: IUPAC standard atomic weights for the elements in the topology
    expected = np.array([STANDARD_MASSES_U[e] for e in data["elements"]])
    np.testing.assert_allclose(data["masses"], expected, rtol=0, atol=1e-9)
    assert len(data["masses"]) == settings["state"]["atom_count"]
    assert data["n_residues"] == settings["state"]["molecule_count"]
    assert len(data["times"]) == settings["run"]["frames"]
    # time stamps in ps, evenly spaced by the recorded frame interval; TRR stores them as
    # float32, so each carries a rounding error of up to half a float32 spacing at t_max
    spacing_ps = settings["run"]["frame_interval_fs"] / 1000.0
    float32_step = float(np.spacing(np.float32(data["times"].max())))
    np.testing.assert_allclose(np.diff(data["times"]), spacing_ps, rtol=0, atol=float32_step)
    np.testing.assert_allclose(data["box"][:3], settings["state"]["box_A"], rtol=1e-6)


@pytest.mark.parametrize("name", SYSTEMS)
def test_kinetic_temperature_from_the_file(name, frames):
    """Velocities as MDAnalysis reads them (Å/ps) give the engine's kinetic temperature.

    T_kin = Σ m v² / (dof k) with dof = 3N − 3 (centre of mass fixed, no constraints).
    The file value must equal the engine's own (computed in the engine's units before
    writing) to float32 precision – this catches unit, mass and frame mix-ups – and the
    time average must agree with the thermostat's target within a statistical tolerance:
    the canonical relative fluctuation of T_kin is sqrt(2/dof) (equipartition; e.g.
    McQuarrie, Statistical Mechanics, ch. 3), and with a weak global thermostat the
    kinetic energy decorrelates no slower than the coupling time τ, so the run holds at
    least n = length/(2τ) independent samples; 4 standard errors is the tolerance.
    """
    data = frames[name]
    settings = _settings(name)
    masses_kg = data["masses"] * 1e-3 / avogadro_per_mol
    v_m_per_s = data["velocities"] * 100.0  # Å/ps -> m/s
    dof = settings["state"]["degrees_of_freedom"]
    assert dof == 3 * len(masses_kg) - 3
    t_kin = np.einsum("i,fij->f", masses_kg, v_m_per_s**2) / (dof * boltzmann_J_per_K)
    recorded = settings["observed"]["kinetic_temperature_K"]["mean"]
    assert t_kin.mean() == pytest.approx(recorded, rel=1e-5)

    target = settings["state"]["temperature_K"]
    spec = demo_script.DEMO_SYSTEMS[name]
    coupling_ps = (
        spec.production_coupling_ps if spec.kind == "crystal" else 1.0 / spec.production_collision_per_ps
    )
    samples = max(1.0, spec.production_ps / (2 * coupling_ps))
    tolerance = 4 * math.sqrt(2 / dof) / math.sqrt(samples)
    assert abs(t_kin.mean() / target - 1) < tolerance


@pytest.mark.parametrize("name", SYSTEMS)
def test_sampling_resolves_the_highest_band(name, frames):
    """Frame spacing fine enough: almost no velocity power in the top 20 % below Nyquist.

    Aliasing folds power above Nyquist back into the band (Shannon sampling theorem;
    methods notes §2.6, common practice); a spectrum that has decayed well before
    Nyquist shows that nothing was folded.  The one-sided power spectrum of the mass-
    weighted velocities is estimated with numpy's FFT over the whole run (Hann taper), and
    the fraction of its integral above 0.8 ν_Nyquist must be below 1e-3.
    """
    data = frames[name]
    v = data["velocities"] - data["velocities"].mean(axis=0)
    weighted = v * np.sqrt(data["masses"])[None, :, None]
    window = np.hanning(len(v))[:, None, None]
    power = np.sum(np.abs(np.fft.rfft(weighted * window, axis=0)) ** 2, axis=(1, 2))
    top = power[int(0.8 * len(power)) :].sum() / power.sum()
    assert top < 1e-3
    # and the highest band sits where it should, which catches unit slips (nm/Å, fs/ps) by
    # factors of 10 or more: 90 % of the kinetic power lies below the top of copper's phonon
    # band, ≈ 243 cm⁻¹ (7.3 THz) in neutron data (Svensson, Brockhouse & Rowe, Phys. Rev. 155,
    # 619 (1967); from memory), give or take the EMT potential's error and the anharmonic
    # tail; in flexible water 2 of every 9 degrees of freedom are O–H stretches, so the 90 %
    # point falls in the stretch band (gas fundamentals 3657 and 3756 cm⁻¹, NIST CCCBDB).
    spacing_s = np.diff(data["times"]).mean() * 1e-12
    wavenumber = np.fft.rfftfreq(len(v), spacing_s) / speed_of_light_cm_per_s
    cumulative = np.cumsum(power) / power.sum()
    edge = wavenumber[np.searchsorted(cumulative, 0.9)]
    if name.startswith("copper"):
        assert 200 < edge < 300
    else:
        assert 3000 < edge < 4200


@pytest.mark.slow
def test_regeneration_reproduces_the_demo(tmp_path):
    """``make_demo_data.py --check`` regenerates every system and compares (see its docstring)."""
    result = subprocess.run(
        [sys.executable, str(SCRIPT), "--check"], capture_output=True, text=True, timeout=900,
        check=False,
    )
    assert result.returncode == 0, result.stdout + result.stderr
    lines = [line for line in result.stdout.splitlines() if line.strip()]
    assert len(lines) == len(SYSTEMS)
    assert all(("identical" in line) or ("statistically consistent" in line) for line in lines)


def test_check_detects_a_changed_trajectory(tmp_path):
    """The comparison fails when a committed trajectory differs from its regeneration."""
    name = "copper_100K"
    committed = tmp_path / "committed" / name
    regenerated = tmp_path / "regenerated" / name
    shutil.copytree(DEMO / name, committed)
    shutil.copytree(DEMO / name, regenerated)
    for copy in (committed, regenerated):  # claim one build, CPU code paths included
        record = json.loads((copy / "settings.json").read_text())
        record["software"]["cpu_features"] = "numpy X86_V3; blas Haswell"
        (copy / "settings.json").write_text(json.dumps(record))
    passed, message = demo_script.compare_system(name, committed, regenerated)
    assert passed and "identical" in message
    # change one velocity in the "regenerated" copy while claiming the same software build
    import MDAnalysis as mda

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u = mda.Universe(str(committed / "topology.pdb"), str(committed / "trajectory.trr"))
        with mda.Writer(str(regenerated / "trajectory.trr"), n_atoms=u.atoms.n_atoms) as writer:
            for ts in u.trajectory:
                if ts.frame == 5:
                    ts.velocities[0, 0] += 1.0
                writer.write(u.atoms)
    passed, message = demo_script.compare_system(name, committed, regenerated)
    assert not passed
    assert "frame 5" in message and name in message
    # a record made before CPU code paths were recorded cannot promise bitwise identity:
    # the comparison falls back to statistics (which these two copies share)
    record = json.loads((committed / "settings.json").read_text())
    del record["software"]["cpu_features"]
    (committed / "settings.json").write_text(json.dumps(record))
    passed, message = demo_script.compare_system(name, committed, regenerated)
    assert passed and "statistically consistent" in message


def test_unknown_system_is_refused(capsys):
    assert demo_script.main(["--check", "--systems", "copper_2000K"]) == 2
    err = capsys.readouterr().err
    assert "--systems" in err and "copper_2000K" in err
