"""One analytic scenario written in four real trajectory formats must give the same, analytic spectrum.

Scenario: ``tests/synthetic.py`` — four antiphase diatomics whose velocity components are
sinusoids at known frequencies placed on the frequency grid m/(L dt) of the segments.
Analytic facts checked (harmonic oscillator, common practice):

* each molecule's spectrum peaks at its own frequency (within one resolution bin);
* ∫ vdos dν̃ = degrees of freedom (sum rule of the VDOS, Lin, Blanco, Goddard,
  J. Chem. Phys. 119, 11792 (2003)) to 1e-6 relative;
* the raw integral Σ m⟨v²⟩/kT equals its analytic value: each component holds
  m a²/2 = kT·(3N−3)/(3N) exactly (time average of cos² over whole periods is 1/2),
  so the raw integral equals the degrees of freedom; tolerance 1e-6 covers the float32
  storage of TRR/H5MD/NetCDF (relative rounding 6e-8) and the 10-digit text of the dump;
* the time step is read from the time stamps (2 fs) whatever the reader's own ``dt``
  (for H5MD MDAnalysis reports a fallback of 1 ps, ecosystem notes §3).
"""

from __future__ import annotations

import numpy as np
import pytest
import synthetic
import xarray as xr
from conftest import OSC_BINS, OSC_MASS_U, OSC_SEGMENT_PS, OSC_TEMPERATURE_K, OSC_TIMESTEP_PS
from scipy import constants as sc


def _write(fmt, scn, d):
    top = synthetic.write_gro(scn, d / "dimers.gro")
    if fmt == "trr":
        return ["--topology", top, "--trajectory", synthetic.write_trr(scn, d / "t.trr"), "--mass", f"O={OSC_MASS_U}"]
    if fmt == "amber_netcdf":
        return ["--topology", top, "--trajectory", synthetic.write_ncdf(scn, d / "t.nc"), "--mass", f"O={OSC_MASS_U}"]
    if fmt == "h5md":
        return ["--topology", top, "--trajectory", synthetic.write_h5md(scn, d / "t.h5md"), "--mass", f"O={OSC_MASS_U}"]
    if fmt == "lammps_real":  # 1 fs MD step, dumped every 2 steps; velocities in Å/fs
        dump = synthetic.write_lammps_dump(scn, d / "t.lammpstrj", units="real", md_timestep=1.0, steps_per_frame=2)
        return ["--topology", dump, "--trajectory", dump, "--lammps-units", "real",
                "--reader-option", "dt=1.0", "--mass", f"1={OSC_MASS_U}"]
    if fmt == "lammps_metal":  # 0.5 fs MD step (ps units), dumped every 4 steps; Å/ps
        dump = synthetic.write_lammps_dump(scn, d / "t.lammpstrj", units="metal", md_timestep=0.0005, steps_per_frame=4)
        return ["--topology", dump, "--trajectory", dump, "--lammps-units", "metal",
                "--reader-option", "dt=0.0005", "--mass", f"1={OSC_MASS_U}"]
    if fmt == "lammps_data_and_dump":  # masses and molecules from a LAMMPS data file (atom_style full)
        data = synthetic.write_lammps_data(scn, d / "dimers.data")
        dump = synthetic.write_lammps_dump(scn, d / "t.lammpstrj", units="metal", md_timestep=0.001, steps_per_frame=2)
        return ["--topology", data, "--trajectory", dump, "--lammps-units", "metal", "--reader-option", "dt=0.001",
                "--reader-option", "atom_style=id resid type charge x y z"]
    raise AssertionError(fmt)


@pytest.mark.parametrize(
    "fmt",
    # MDAnalysis' H5MD reader takes ~15 ms per frame here (h5py per-frame reads), hence "slow"
    ["trr", "amber_netcdf", pytest.param("h5md", marks=pytest.mark.slow), "lammps_real", "lammps_metal",
     "lammps_data_and_dump"],
)
def test_analytic_spectrum_in_every_format(fmt, oscillator_scenario, tmp_path, run_qcorr):
    scn = oscillator_scenario
    inputs = _write(fmt, scn, tmp_path)
    out = tmp_path / "spectrum.nc"
    groups = []
    for k in range(len(OSC_BINS)):
        groups += ["--group", f"dimer{k + 1}=index {2 * k} {2 * k + 1}" if fmt in ("lammps_real", "lammps_metal") else f"dimer{k + 1}=resid {k + 1}"]
    code, _, err = run_qcorr(
        "spectrum", *inputs, "--temperature", OSC_TEMPERATURE_K, "--output", out,
        "--segment-ps", OSC_SEGMENT_PS, "--progress", "never", *groups,
    )
    assert code == 0, err
    ds = xr.open_dataset(out)
    # time step from the time stamps (2 fs), to float32 rounding of the stamps
    assert ds.attrs["timestep_ps"] == pytest.approx(OSC_TIMESTEP_PS, rel=1e-6)
    resolution = float(ds.attrs["resolution_wavenumber"])
    for k, bin_index in enumerate(OSC_BINS):
        spectrum = ds["vdos"].sel(group=f"dimer{k + 1}")
        peak = float(ds["wavenumber"][int(np.argmax(spectrum.values))])
        expected = scn.frequencies_Hz[k] / (sc.c * 100.0)  # Hz -> cm-1, c in cm/s (CODATA via scipy)
        assert abs(peak - expected) <= resolution, (fmt, k, peak, expected)
    integral = ds["vdos"].integrate("wavenumber")
    np.testing.assert_allclose(integral, ds["degrees_of_freedom"], rtol=1e-6)
    # analytic raw integral = 3N_g (3N-3)/(3N); equals dof for equal-mass groups
    n = scn.n_atoms
    analytic = ds["atom_count"].values * 3.0 * (3 * n - 3) / (3 * n)
    np.testing.assert_allclose(ds["raw_integral"].values, analytic, rtol=1e-6)
    np.testing.assert_allclose(ds["kinetic_temperature"].values, OSC_TEMPERATURE_K, rtol=1e-6)
    # degrees of freedom 3N - 3 for the total, 3N_g - 3 M_g/M for each dimer (no constraints)
    np.testing.assert_allclose(ds["degrees_of_freedom"].values, [3 * n - 3] + [6 - 3 / len(OSC_BINS)] * len(OSC_BINS))
