"""The rounding-noise model of positions (qcorr.spectra.position_noise) against outside references.

* Uniform quantisation noise has variance p²/12 and is white when the signal spreads
  over many steps (B. Widrow, I. Kollár, M.-C. Liu, IEEE Trans. Instrum. Meas. 45, 353
  (1996)); the expected floor of the estimator is derived from that (module docstring).
  Checked here by simulation, with numpy's random numbers, through the whole
  VibrationalSpectrum path (centre-of-mass removal, taper, sinc² division): positions that
  oscillate at known frequencies, rounded to a 0.01 Å grid, must give the unrounded
  spectrum plus the predicted floor, and, after subtraction, the unrounded spectrum.
* The floor's integral up to Nyquist is (π²/3)(p²/12)/Δt² per coordinate for an
  untapered estimator up to the taper term ρ₁ (closed form, integrated here with mpmath).
* The correlation c(s/p) of consecutive rounding errors of a Gaussian random walk,
  against a Monte Carlo walk (numpy).
* The effective noise mass after centre-of-mass removal, against a Monte Carlo of
  independent noise with the centre-of-mass velocity removed (numpy).
* The predicted kinetic-temperature excess π² p² m / (36 Δt² k T) (the closed form of the
  floor's integral over k T per coordinate) for argon (39.948 u, 94.4 K, 10 fs) and copper
  (63.546 u, 297 K, 4 fs) at p = 0.01 Å, computed here with CODATA constants via scipy:
  14.0 % and 44 % (methods notes §8.1 record the same numbers measured on engine XTCs).
"""

from __future__ import annotations

import warnings

import MDAnalysis as mda
import mpmath
import numpy as np
import pytest
from MDAnalysis.coordinates.memory import MemoryReader
from scipy import constants as sc

from qcorr.errors import ConfigError
from qcorr.spectra.analysis import VibrationalSpectrum
from qcorr.spectra.position_noise import PositionNoise, noise_masses, rounding_correlation
from qcorr.spectra.segments import SpectrumSettings
from qcorr.spectra.spectrum_file import raw_segments_of, read_spectrum

STEP_A = 0.01
#: kT/m in (Å/ps)² per K and u (CODATA via scipy)
KT_OVER_M = sc.k / sc.atomic_mass * (sc.pico / sc.angstrom) ** 2


def _oscillating_universe(n_atoms=300, n_frames=3000, dt_ps=0.004, temperature=300.0, rounded=False, seed=5):
    """Atoms of mass 1 and 16 u, each coordinate a sum of 6 sinusoids of random (incommensurate)
    frequencies below a quarter of Nyquist and random phases, mean square velocity kT/m
    (equipartition); positions optionally rounded to STEP_A (float32 MemoryReader, no box).

    A single sinusoid on the segment grid would not do: its positions repeat exactly, so its
    rounding errors repeat too (a deterministic, periodic error: Widrow's conditions fail)."""
    rng = np.random.default_rng(seed)
    masses = np.where(np.arange(n_atoms) % 3 == 0, 16.0, 1.0)
    k = 6
    nyquist = 0.5 / dt_ps  # 1/ps
    omega = 2 * np.pi * rng.uniform(0.02, 0.25, size=(n_atoms, 3, k)) * nyquist  # rad/ps
    speed = np.sqrt(2 * KT_OVER_M * temperature / masses / k)[:, None, None]  # per component
    amp = speed / omega  # Å
    phase = rng.uniform(0, 2 * np.pi, size=(n_atoms, 3, k))
    t = np.arange(n_frames) * dt_ps
    x = rng.uniform(5, 45, size=(n_atoms, 3))[None] + np.einsum(
        "ijk,tijk->tij", amp, np.sin(omega[None] * t[:, None, None, None] + phase[None]))
    if rounded:
        x = np.round(x / STEP_A) * STEP_A
    u = mda.Universe.empty(n_atoms, n_residues=n_atoms, atom_resindex=np.arange(n_atoms), trajectory=False)
    u.add_TopologyAttr("masses", masses)
    u.add_TopologyAttr("names", ["A"] * n_atoms)
    u.add_TopologyAttr("types", ["A"] * n_atoms)
    u.load_new(x.astype(np.float32), format=MemoryReader, dt=dt_ps)
    return u, masses


def _spectrum(u, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = VibrationalSpectrum(u, 300.0, velocities_from="positions", segment_ps=1.0, **options)
        return s.run().results.spectrum


@pytest.fixture(scope="module")
def pair():
    """(unrounded, rounded) spectra of the same motion."""
    clean, _ = _oscillating_universe()
    rounded, _ = _oscillating_universe(rounded=True)
    return _spectrum(clean), _spectrum(rounded)


def test_rounded_positions_give_the_unrounded_spectrum_plus_the_predicted_floor(pair):
    clean, rounded = pair
    assert clean.attrs["position_precision_A"] == 0.0
    assert rounded.attrs["position_precision_A"] == pytest.approx(STEP_A)
    assert "detected" in rounded.attrs["position_precision_source"]
    wn = clean["wavenumber"].values
    floor = rounded["vdos_position_noise"].values * (rounded["raw_integral"] / rounded["degrees_of_freedom"]).values[:, None]
    raw_clean = raw_segments_of(clean).mean(axis=1)
    raw_rounded = raw_segments_of(rounded).mean(axis=1)  # after subtraction
    for g in range(2):  # total and nothing else: one group
        noise = np.trapezoid(floor[g], wn)
        # measured noise = rounded (with the floor added back) - clean; cross terms average out.
        # Tolerance 3 % of the noise: the noise integral's own scatter is ~0.1 % (900 coordinates,
        # 3000 frames) and the signal-noise cross term's ~0.5 % (2 sqrt(S/N)/sqrt(coordinates x frames))
        measured = np.trapezoid(raw_rounded[g] + floor[g] - raw_clean[g], wn)
        assert measured == pytest.approx(noise, rel=0.03)
        # after subtraction the kinetic energy equals the unrounded one to a fraction of the noise
        assert abs(np.trapezoid(raw_rounded[g] - raw_clean[g], wn)) < 0.03 * noise
        # the floor's shape: in the upper half of the band (no signal) bands of 10 bins agree to 10 %
        upper = np.flatnonzero(wn > 0.5 * wn[-1])
        for band in np.array_split(upper, len(upper) // 10):
            got = np.mean(raw_rounded[g][band] + floor[g][band] - raw_clean[g][band])
            assert got == pytest.approx(np.mean(floor[g][band]), rel=0.10)
        if g == 0:
            break


def test_vacf_noise_removed_at_lags_zero_and_one(pair):
    clean, rounded = pair
    a = clean["vacf_segments_raw"].values[0].mean(axis=0)
    b = rounded["vacf_segments_raw"].values[0].mean(axis=0)
    noise0 = 3 * noise_masses(np.where(np.arange(300) % 3 == 0, 16.0, 1.0), np.ones((1, 300), bool))[0] \
        * 2 * STEP_A**2 / 12 / 0.004**2
    # the lag-0 noise is ~1/6 of the signal here; after subtraction lags 0 and 1 agree to 1 % of it
    assert abs(b[0] - a[0]) < 0.01 * noise0 and abs(b[1] - a[1]) < 0.01 * noise0


def test_floor_integral_closed_form():
    # the model floor (untapered: rho_1 = (L-1)/L) integrates over 0..Nyquist to
    # int 2 dt (s2/dt^2)(2 - 2 rho cos 2 pi nu dt)/sinc^2(pi nu dt) dnu per coordinate and unit
    # noise mass, over kT and per wavenumber (mpmath quadrature); with rho = 1 that integral is the
    # closed form (pi^2/3) s2/dt^2 of the methods notes (exact, 1e-12)
    dt_ps, L, m, temperature = 0.01, 200, 39.948, 94.4
    settings = SpectrumSettings(dt_ps, L, 0.0, "none")
    masses, members = np.array([m, 2 * m, 3 * m]), np.array([[True, False, False]])
    model = PositionNoise(STEP_A, masses, members, np.array([3.0]), settings, temperature)
    s2, dt = STEP_A**2 / 12, dt_ps * 1e-12

    def integral(rho):
        f = lambda nu: 2 * dt * s2 / dt_ps**2 * (2 - 2 * rho * mpmath.cos(2 * mpmath.pi * nu * dt)) \
            / mpmath.sinc(mpmath.pi * nu * dt) ** 2
        return float(mpmath.quad(f, [0, 0.5 / dt]))

    assert integral(1.0) == pytest.approx(np.pi**2 / 3 * s2 / dt_ps**2, rel=1e-12)
    nu = np.arange(L // 2 + 1) / (L * dt)
    wn = nu / (sc.c * 100)
    got = np.trapezoid(model.floor(nu)[0], wn)
    m_eff = noise_masses(masses, members)[0]
    expected = 3 * m_eff * integral((L - 1) / L) / (KT_OVER_M * temperature)
    assert got == pytest.approx(expected, rel=2e-3)  # trapezoid rule on 101 bins of a smooth curve


def test_rounding_correlation_of_a_gaussian_walk_by_monte_carlo():
    rng = np.random.default_rng(7)
    for ratio in (0.3, 0.4, 0.5):
        walk = np.cumsum(rng.normal(0, ratio * STEP_A, (400, 20000)), axis=0) + rng.uniform(0, 1, 20000)
        e = np.round(walk / STEP_A) * STEP_A - walk
        corr = float(np.mean(e[1:] * e[:-1]) / np.var(e))
        se = 1.0 / np.sqrt(e[1:].size)
        assert abs(corr - rounding_correlation(ratio)[0]) < 5 * se, (ratio, corr)
    assert rounding_correlation(0.0)[0] == pytest.approx(1.0, rel=2e-2)  # sum 1/k^2 -> pi^2/6


def test_effective_noise_mass_by_monte_carlo():
    rng = np.random.default_rng(3)
    masses = rng.uniform(1, 40, 9)
    members = np.array([np.ones(9, bool), np.arange(9) < 3])
    e = rng.normal(size=(200000, 9))  # unit variance per atom and coordinate
    com = e @ masses / masses.sum()
    per_group = ((e - com[:, None]) ** 2 * masses) @ members.T.astype(float)
    expected = noise_masses(masses, members)
    se = per_group.std(axis=0) / np.sqrt(len(e))
    assert np.all(np.abs(per_group.mean(axis=0) - expected) < 5 * se)


def test_predicted_excess_of_argon_and_copper():
    # pi^2 p^2 m / (36 dt^2 kT), CODATA via scipy
    for mass, temperature, dt_ps, expected in ((39.948, 94.4, 0.010, 0.140), (63.546, 297.0, 0.004, 0.44)):
        closed = np.pi**2 * STEP_A**2 / (36 * dt_ps**2 * KT_OVER_M * temperature) * mass
        assert closed == pytest.approx(expected, abs=0.005)
        n = 500
        settings = SpectrumSettings(dt_ps, 400, 0.5, "hann")
        model = PositionNoise(STEP_A, np.full(n, mass), np.ones((1, n), bool), np.array([3.0 * n - 3]),
                              settings, temperature)
        share = model.expected_share()[0]
        assert share / (1 - share) == pytest.approx(closed, rel=0.01)  # 3N-3 and m_eff = M(1 - 1/N)


def test_stated_precision_must_agree_with_the_positions_and_need_positions():
    rounded, _ = _oscillating_universe(n_atoms=30, n_frames=600, rounded=True)
    with pytest.raises(ConfigError, match=r"--position-precision 0.001 Å disagrees .*0.01 Å"):
        VibrationalSpectrum(rounded, 300.0, velocities_from="positions", position_precision=0.001)
    with pytest.raises(ConfigError, match="only with --velocities-from positions"):
        VibrationalSpectrum(rounded, 300.0, position_precision=0.01)
    with pytest.raises(ConfigError, match="--molecular with positions .* rounded to 0.01"):
        VibrationalSpectrum(rounded, 300.0, velocities_from="positions", molecular=True)


def _assert_same(a, b, rtol=1e-12):
    """Every data variable equal to *rtol* of its largest value (as tests/test_spectrum_api.py)."""
    assert set(a.data_vars) == set(b.data_vars)
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype.kind == "f":
            scale = float(np.max(np.abs(x))) if x.size else 0.0
            np.testing.assert_allclose(y, x, rtol=rtol, atol=rtol * scale, err_msg=name)
        else:
            np.testing.assert_array_equal(y, x, err_msg=name)


def test_noise_subtraction_keeps_blocks_and_parallel_parts_exact(tmp_path):
    # the subtracted floor is the same for every segment, so frame blocks joined by combine and
    # parts joined by the process backend must equal the single serial run to 1e-12
    from qcorr.spectra.blocks import combine_blocks
    from qcorr.spectra.spectrum_file import write_spectrum

    u, _ = _oscillating_universe(n_atoms=60, n_frames=1200, rounded=True)
    serial = _spectrum(u)
    assert serial.attrs["position_precision_A"] == pytest.approx(STEP_A)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parts = VibrationalSpectrum(u, 300.0, velocities_from="positions", segment_ps=1.0).run(
            backend="multiprocessing", n_workers=2, n_parts=3).results.spectrum
    _assert_same(serial, parts)
    names, blocks = [], []
    for i in (1, 2, 3):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            s = VibrationalSpectrum(u, 300.0, velocities_from="positions", segment_ps=1.0, block=(i, 3))
            names.append(str(write_spectrum(s.run().results.spectrum, tmp_path / f"b{i}.nc")))
    blocks = [read_spectrum(n) for n in names]
    joined = combine_blocks(blocks, names, "combine")
    _assert_same(serial, joined)
