"""Positions-only XTC trajectories of real engines against the same runs' stored velocities (issue 11).

Data: ``scripts/make_positions_only_data.py`` (cached like the validation set, made here on
a fresh machine): ASE/EMT copper at 297 K (108 atoms, 4 ps) and OpenMM Lennard-Jones argon
at Rahman's liquid state point, 94.4 K (256 atoms, 8 ps), each recorded every 2 fs with
velocities (TRR) and written as positions only (MDAnalysis' XTCWriter, GROMACS rounding to
0.001 nm) every 4, 10 and 20 fs.

Checks, with their outside references:

* acceptance of issue 11 — at every spacing (the physical bands, up to about 250 cm⁻¹ for
  copper and 200 cm⁻¹ for argon, lie below every Nyquist frequency, 834 cm⁻¹ and up): the
  quantum heat capacity from the XTC within 2 % and the zero-point energy within 5 % of
  the values from the stored velocities of the same frames (``--step`` on the TRR), both
  with Berens et al.'s harmonic weights (J. Chem. Phys. 79, 2375 (1983));
* the rounding noise the model subtracts equals the noise measured on the engine file:
  the XTC's kinetic energy before subtraction minus that of the unrounded differences of
  the TRR's positions (same frames), within 5 standard errors of that difference; its
  scatter is dominated by the signal–noise cross term, whose standard error
  2 (S N)^{1/2} / (3 n_atoms n_frames)^{1/2} (S, N the signal and noise kinetic energies
  per coordinate, in units of kT) is computed in the test (uniform-noise model: B. Widrow,
  I. Kollár, M.-C. Liu, IEEE Trans. Instrum. Meas. 45, 353 (1996));
* frames every 2 fs as XTC (written here): the noise would be most of the kinetic energy
  (65 % for copper, 78 % for argon by the closed form π²p²m/(36Δt²kT)): refused with one
  line, no file.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pytest
from repository_scripts import load_script

from qcorr.spectra.spectrum_file import read_spectrum
from qcorr.thermo.harmonic import harmonic_properties

SCRIPTS = Path(__file__).resolve().parent.parent / "scripts"

#: system -> (stated temperature K, segment length ps)
SYSTEMS = {"copper_crystal_297K": (297.0, 1.0), "argon_liquid_94K": (94.4, 2.0)}
SPACINGS_FS = (4, 10, 20)


@pytest.fixture(scope="module")
def data():
    """System name -> directory (made when missing or out of date)."""
    script = load_script("make_positions_only_data")
    return {name: script.load_system(name) for name in SYSTEMS}


def _spectrum(run_qcorr, directory, trajectory, out, *extra):
    temperature, segment = SYSTEMS[directory.name]
    code, _, err = run_qcorr("spectrum", "--topology", directory / "topology.pdb", "--trajectory", trajectory,
                             "--temperature", temperature, "--segment-ps", segment, "--progress", "never",
                             "--output", out, *extra)
    assert code == 0, err
    return read_spectrum(out)


def _quantum(ds):
    """(heat capacity J/(mol K), zero-point energy kJ/mol) per mole of atoms, group total."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = harmonic_properties(ds, include_msd=False)
    rows = table[(table.group == "total") & (table.basis == "per_mole_atoms") & (table.method == "harmonic")]
    value = lambda prop: float(rows[rows.property == prop].quantum.iloc[0])
    return value("heat_capacity"), value("zero_point_energy")


@pytest.mark.slow
@pytest.mark.parametrize("spacing", SPACINGS_FS)
@pytest.mark.parametrize("system", list(SYSTEMS))
def test_xtc_positions_give_the_stored_velocity_results(system, spacing, data, tmp_path, run_qcorr):
    directory = data[system]
    stride = spacing // 2
    stored = _spectrum(run_qcorr, directory, directory / "trajectory.trr", tmp_path / "stored.nc", "--step", stride)
    unrounded = _spectrum(run_qcorr, directory, directory / "trajectory.trr", tmp_path / "trr.nc", "--step", stride,
                          "--velocities-from", "positions")
    xtc = _spectrum(run_qcorr, directory, directory / f"positions_{spacing}fs.xtc", tmp_path / "xtc.nc",
                    "--velocities-from", "positions")
    # where the rounding step came from
    assert xtc.attrs["position_precision_A"] == pytest.approx(0.01)
    assert "XTC file: precision 1000 per nm" in xtc.attrs["position_precision_source"]
    assert unrounded.attrs["position_precision_A"] == 0.0
    assert xtc.attrs["timestep_ps"] == pytest.approx(spacing / 1000, rel=1e-5)
    # acceptance: quantum heat capacity within 2 %, zero-point energy within 5 % of the stored velocities'
    cv_s, zpe_s = _quantum(stored)
    cv_x, zpe_x = _quantum(xtc)
    print(f"{system}, XTC every {spacing} fs: quantum C_V {cv_x:.3f} vs {cv_s:.3f} J/(mol K) ({cv_x / cv_s - 1:+.2%}), "
          f"zero-point energy {zpe_x:.4f} vs {zpe_s:.4f} kJ/mol ({zpe_x / zpe_s - 1:+.2%}), noise share "
          f"{float(xtc['position_noise_share'][0]):.1%}")
    assert cv_x == pytest.approx(cv_s, rel=0.02)
    assert zpe_x == pytest.approx(zpe_s, rel=0.05)
    # the subtracted noise equals the noise measured on the file
    wn = xtc["wavenumber"].values
    floor = xtc["vdos_position_noise"].values[0] * float(xtc["raw_integral"][0] / xtc["degrees_of_freedom"][0])
    predicted = float(np.trapezoid(floor, wn))
    before = float(xtc["raw_integral"][0]) + predicted
    clean = float(unrounded["raw_integral"][0])
    atoms, frames = int(xtc["atom_count"][0]), int(xtc.attrs["frames_used"])
    coordinates = 3 * atoms
    signal, noise = clean / coordinates, predicted / coordinates
    se = 2 * np.sqrt(signal * noise) / np.sqrt(coordinates * frames) * coordinates
    assert abs((before - clean) - predicted) < 5 * se, (before - clean, predicted, se)
    # the diagnostics report it
    checks = {c["check"]: c for c in json.loads(xtc.attrs["diagnostics"])}
    assert "rounding noise was" in checks["position_noise"]["message"]
    assert float(xtc["position_noise_share"][0]) == pytest.approx(predicted / before, rel=1e-9)
    # stored velocities agree with the positions' displacements
    assert 0.99 < stored.attrs["velocity_position_ratio"] < 1.01


@pytest.mark.slow
@pytest.mark.parametrize("system, mass_u", [("copper_crystal_297K", 63.546), ("argon_liquid_94K", 39.948)])
def test_noise_that_swamps_the_motion_is_refused(system, mass_u, data, tmp_path, run_qcorr):
    import re

    import MDAnalysis as mda
    from scipy import constants as sc

    directory = data[system]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u = mda.Universe(str(directory / "topology.pdb"), str(directory / "trajectory.trr"))
        xtc = tmp_path / "every_2fs.xtc"
        with mda.Writer(str(xtc), format="XTC", n_atoms=u.atoms.n_atoms) as writer:
            for _ in u.trajectory[:600]:
                writer.write(u.atoms)
    temperature, _ = SYSTEMS[system]
    out = tmp_path / "out" / "s.nc"
    code, _, err = run_qcorr("spectrum", "--topology", directory / "topology.pdb", "--trajectory", xtc,
                             "--temperature", temperature, "--segment-ps", 0.4, "--progress", "never",
                             "--velocities-from", "positions", "--output", out)
    errors = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code != 0 and len(errors) == 1, err
    assert "every_2fs.xtc" in errors[0] and "0.01 Å" in errors[0] and "0.002 ps" in errors[0]
    # closed form pi^2 p^2 m / (36 dt^2 kT) per coordinate (CODATA via scipy), share = x/(1+x);
    # qcorr's prediction differs by the centre-of-mass terms (1/N of the atoms) only
    kT_over_m = sc.k * temperature / (mass_u * sc.atomic_mass) * (sc.pico / sc.angstrom) ** 2
    excess = np.pi**2 * 0.01**2 / (36 * 0.002**2 * kT_over_m)
    found = re.search(r"would be (\d+)% of group 'total'", errors[0])
    assert found and "swamps" in errors[0], errors[0]
    assert abs(int(found.group(1)) - 100 * excess / (1 + excess)) <= 1.0
    assert not out.exists() and not out.parent.exists()
