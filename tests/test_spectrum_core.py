"""Tests of the streaming spectrum estimator (qcorr.spectra.estimator) against outside oracles.

Oracles used here:

* Parseval's theorem and the definition of the DFT (direct O(L^2) sums written
  in this file, independent of the FFT route in qcorr.spectra.estimator);
* scipy.signal.welch (an independent implementation of Welch's method,
  P. D. Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967));
* harmonic oscillators with exactly known frequencies and amplitudes;
* the exact spectrum of a first-order autoregressive process (M. B. Priestley,
  Spectral Analysis and Time Series, Academic Press (1981), section 4.12.3, the
  AR(1) spectral density) -- the sampled Ornstein-Uhlenbeck velocity of a
  Langevin free particle (G. E. Uhlenbeck and L. S. Ornstein, Phys. Rev. 36, 823
  (1930));
* the Green-Kubo relation D = (1/3) int <v(0).v(t)> dt and the one-sided
  zero-frequency value S(0) = 12 m N D/(kT) (S.-T. Lin, M. Blanco, W. A. Goddard
  III, J. Chem. Phys. 119, 11792 (2003));
* the frequency response of first and central differences (A. V. Oppenheim,
  R. W. Schafer, Discrete-Time Signal Processing, 3rd ed. (2010); common practice);
* CODATA constants via scipy.constants.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
import scipy.constants as sc
import scipy.signal
from hypothesis import given
from hypothesis import settings as hyp_settings
from hypothesis import strategies as st

from qcorr.errors import ConfigError, QcorrError, SamplingError, TrajectoryError
from qcorr.spectra.estimator import SegmentAccumulator
from qcorr.spectra.raw_vdos import finite_difference_power_transfer, vdos_per_wavenumber
from qcorr.spectra.segments import (
    SpectrumSettings,
    block_range,
    frames_needed,
    segment_frames_for,
    segment_starts,
)

# k T / (1 u) in (Angstrom/ps)^2, from CODATA via scipy.constants (independent of qcorr.constants)
_A_PER_PS_IN_M_PER_S = sc.angstrom / sc.pico


def kT_in_u_A2_per_ps2(temperature_K: float) -> float:
    return sc.k * temperature_K / (sc.atomic_mass * _A_PER_PS_IN_M_PER_S**2)


# --------------------------------------------------------------------------- direct references


def hann_periodic(L: int) -> np.ndarray:
    """Periodic ('DFT-even') Hann window, F. J. Harris, Proc. IEEE 66, 51 (1978), eq. (27a)."""
    n = np.arange(L)
    return np.sin(np.pi * n / L) ** 2  # = (1 - cos(2 pi n/L))/2, written differently on purpose


def direct_power_spectrum(segment, weights, timestep_s, taper="hann"):
    """One-sided weighted PSD of one segment by an explicit DFT sum (O(L^2)).

    segment: (L, n_channels, n_components); returns (L/2+1,) in weight*value^2/Hz.
    Every bin doubled (continuous one-sided density convention).
    """
    L = segment.shape[0]
    w = hann_periodic(L) if taper == "hann" else np.ones(L)
    n = np.arange(L)
    m = np.arange(L // 2 + 1)
    kernel = np.exp(-2j * np.pi * np.outer(m, n) / L)  # (F, L)
    y = np.einsum("mn,njc->mjc", kernel, w[:, None, None] * segment)
    per_channel = (np.abs(y) ** 2).sum(axis=-1)  # (F, n_channels)
    return 2.0 * timestep_s * (per_channel @ weights) / np.sum(w * w)


def direct_lag_sum(segment, weights):
    """Unbiased weighted autocorrelation by the explicit lag sum (O(L^2))."""
    L = segment.shape[0]
    out = np.empty(L)
    for k in range(L):
        prod = (segment[: L - k] * segment[k:]).sum(axis=(0, 2))  # (n_channels,)
        out[k] = prod @ weights / (L - k)
    return out


def feed(acc: SegmentAccumulator, frames) -> SegmentAccumulator:
    for frame in frames:
        acc.add_frame(frame)
    return acc


def trapezoid(y, x):
    return np.trapezoid(y, x, axis=-1)


# --------------------------------------------------------------------------- FFT route == direct sums


@pytest.mark.parametrize("taper", ["hann", "none"])
@pytest.mark.parametrize("overlap", [0.0, 0.5, 0.7])
def test_fft_route_equals_direct_sums(taper, overlap):
    # Oracle: definition of the DFT periodogram and of the unbiased lag sum, evaluated directly.
    rng = np.random.default_rng(20260101)
    L, n_frames, n_channels = 24, 101, 5
    dt_ps = 0.002
    x = rng.standard_normal((n_frames, n_channels, 3))
    weights = rng.uniform(1.0, 20.0, n_channels)
    members = np.array([[True] * 5, [True, False, True, False, False]])
    s = SpectrumSettings(dt_ps, L, overlap, taper)
    result = feed(SegmentAccumulator(s, weights, members), x).result()
    starts = segment_starts(n_frames, s)
    np.testing.assert_array_equal(result.segment_first_frame, starts)
    for g, mask in enumerate(members):
        for i, start in enumerate(starts):
            seg = x[start : start + L][:, mask]
            ref_p = direct_power_spectrum(seg, weights[mask], dt_ps * 1e-12, taper)
            ref_c = direct_lag_sum(seg, weights[mask])
            np.testing.assert_allclose(
                result.power[g, i], ref_p, rtol=1e-10, atol=1e-10 * ref_p.max()
            )
            np.testing.assert_allclose(
                result.correlation[g, i], ref_c, rtol=1e-10, atol=1e-10 * ref_c[0]
            )


def test_matches_scipy_welch():
    # Oracle: scipy.signal.welch (independent Welch implementation; 'density' scaling doubles
    # every bin except DC and Nyquist, so those two are doubled here to the continuous convention).
    rng = np.random.default_rng(7)
    L, n_frames = 64, 1000
    dt_ps = 0.005
    x = rng.standard_normal((n_frames, 4, 3)).cumsum(axis=0) * 0.1 + rng.standard_normal(
        (n_frames, 4, 3)
    )
    weights = np.array([1.008, 15.999, 1.008, 39.95])
    s = SpectrumSettings(dt_ps, L, 0.5, "hann")
    result = feed(SegmentAccumulator(s, weights, np.ones((1, 4), bool)), x).result()
    f, p = scipy.signal.welch(
        x,
        fs=1.0 / (dt_ps * sc.pico),
        window="hann",
        nperseg=L,
        noverlap=L // 2,
        detrend=False,
        scaling="density",
        axis=0,
    )
    p[0] *= 2.0
    p[-1] *= 2.0
    expected = np.einsum("fjc,j->f", p, weights)
    np.testing.assert_allclose(result.frequency_Hz, f, rtol=1e-14)
    np.testing.assert_allclose(result.power[0].mean(axis=0), expected, rtol=1e-10)


@hyp_settings(max_examples=25, deadline=None)
@given(
    half_L=st.integers(2, 20),
    overlap=st.sampled_from([0.0, 0.25, 0.5, 0.75]),
    extra=st.integers(0, 60),
    taper=st.sampled_from(["hann", "none"]),
    seed=st.integers(0, 2**31 - 1),
)
def test_parseval_trapezoid_equals_window_weighted_mean_square(half_L, overlap, extra, taper, seed):
    # Oracle: Parseval's theorem for the L-point DFT (L even): with every bin doubled, the
    # trapezoid sum over 0..L/2 equals sum w^2 x^2 / sum w^2 exactly (computed here in time domain).
    L = 2 * half_L
    rng = np.random.default_rng(seed)
    n_frames = L + extra
    x = rng.standard_normal((n_frames, 3, 3)) * rng.uniform(0.1, 10.0)
    weights = rng.uniform(0.5, 50.0, 3)
    s = SpectrumSettings(0.001, L, overlap, taper)
    r = feed(SegmentAccumulator(s, weights, np.ones((1, 3), bool)), x).result()
    w = hann_periodic(L) if taper == "hann" else np.ones(L)
    for i, start in enumerate(r.segment_first_frame):
        seg = x[start : start + L]
        direct = np.einsum("n,njc,j->", w * w, seg * seg, weights) / np.sum(w * w)
        assert trapezoid(r.power[0, i], r.frequency_Hz) == pytest.approx(direct, rel=1e-10)
        assert r.mean_square[0, i] == pytest.approx(direct, rel=1e-10)
        # lag-0 correlation is the untapered mean square
        plain = np.einsum("njc,j->", seg * seg, weights) / L
        assert r.correlation[0, i, 0] == pytest.approx(plain, rel=1e-10)


@pytest.mark.parametrize("taper", ["hann", "none"])
def test_half_overlap_route_equals_whole_segment_route(taper):
    # Oracle: the whole-segment route (one 2L transform per segment), itself checked against the
    # direct sums above; the half-segment route (50 % overlap) must agree to rounding.
    rng = np.random.default_rng(44)
    L, n_frames = 40, 333
    x = rng.standard_normal((n_frames, 7, 3)) + 0.3
    weights = rng.uniform(1.0, 30.0, 7)
    members = np.array([[True] * 7, [False, True, True, False, False, False, True]])
    s = SpectrumSettings(0.0025, L, 0.5, taper)
    fast = SegmentAccumulator(s, weights, members)
    assert fast._half_overlap
    slow = SegmentAccumulator(s, weights, members, _route="segment")
    assert not slow._half_overlap
    a, b = feed(fast, x).result(), feed(slow, x).result()
    for name in ("power", "correlation", "mean_square", "segment_first_frame"):
        np.testing.assert_allclose(
            getattr(a, name),
            getattr(b, name),
            rtol=1e-11,
            atol=1e-12 * np.abs(getattr(b, name)).max(),
        )


@pytest.mark.parametrize("stop_segment", [None, 6])
def test_fft_threads_give_the_serial_results(stop_segment):
    # Oracle: the serial run; FFT worker threads split the transforms over channels
    # (pocketfft's own arithmetic per channel is unchanged), so the results are equal to
    # rounding.
    rng = np.random.default_rng(12)
    x = rng.standard_normal((257, 6, 3))
    s = SpectrumSettings(0.001, 20, 0.5)
    members = np.ones((2, 6), bool)
    members[1, :3] = False
    serial = feed(SegmentAccumulator(s, np.arange(1.0, 7.0), members, stop_segment=stop_segment), x)
    threaded_acc = SegmentAccumulator(
        s, np.arange(1.0, 7.0), members, workers=2, stop_segment=stop_segment
    )
    assert threaded_acc._fft_workers == 2
    threaded = feed(threaded_acc, x)
    a, b = serial.result(), threaded.result()
    assert a.power.shape[1] == (6 if stop_segment else 24)
    for name in ("power", "correlation", "mean_square", "segment_first_frame"):
        np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=1e-14, atol=0)


# --------------------------------------------------------------------------- harmonic oscillators


def oscillator_velocities(frequencies_Hz, amplitudes, phases, n_frames, dt_s):
    """v(t) = A cos(2 pi nu t + phi) for every channel/component, shape (n_frames, n, 3)."""
    t = np.arange(n_frames)[:, None, None] * dt_s
    return amplitudes * np.cos(2.0 * np.pi * frequencies_Hz * t + phases)


def test_harmonic_oscillators_peaks_and_sum_rule():
    # Oracle: harmonic oscillators, S(nu) = delta(nu - nu0) per degree of freedom (Lin, Blanco,
    # Goddard 2003, sum rule int S = N_dof); Maxwell velocity amplitudes: each Cartesian velocity of
    # an oscillator at temperature T is a cos + b sin with a, b ~ N(0, kT/m) (equipartition).
    rng = np.random.default_rng(1983)
    T = 300.0
    dt_ps = 0.002
    L = 1000  # 2 ps segments, resolution 0.5 THz = 16.7 cm^-1
    n_frames = 4 * L
    kT = kT_in_u_A2_per_ps2(T)
    wavenumbers = np.array([500.0, 1600.0, 3700.0])  # cm^-1, deliberately off the grid
    nu_Hz = wavenumbers * sc.c * 100.0
    masses = np.array([12.011, 15.999, 1.008])
    n_each = 30
    species = np.repeat(np.arange(3), n_each)
    m = masses[species]
    a = rng.standard_normal((n_each * 3, 3)) * np.sqrt(kT / m)[:, None]
    b = rng.standard_normal((n_each * 3, 3)) * np.sqrt(kT / m)[:, None]
    t = np.arange(n_frames)[:, None, None] * dt_ps * sc.pico
    phase = 2.0 * np.pi * nu_Hz[species][None, :, None] * t
    v = a * np.cos(phase) + b * np.sin(phase)
    members = np.stack([species == k for k in range(3)] + [np.ones(species.size, bool)])
    s = SpectrumSettings(dt_ps, L, 0.5, "hann")
    r = feed(SegmentAccumulator(s, m, members), v).result()
    resolution = s.resolution_Hz
    for k in range(3):
        mean_power = r.power[k].mean(axis=0)
        peak = r.frequency_Hz[np.argmax(mean_power)]
        assert abs(peak - nu_Hz[k]) <= resolution, f"peak of species {k} off by more than one bin"
    # Parseval per segment (trapezoid == directly computed window-weighted mean square)
    w = hann_periodic(L)
    for i, start in enumerate(r.segment_first_frame):
        seg = v[start : start + L]
        direct = np.einsum("n,njc,j->", w * w, seg * seg, m) / np.sum(w * w)
        assert trapezoid(r.power[3, i], r.frequency_Hz) == pytest.approx(direct, rel=1e-10)
    # the VDOS normalised with its raw integral integrates to the dof (3N)
    vdos = vdos_per_wavenumber(r.power[3].mean(axis=0), T)
    wn = r.frequency_Hz / (sc.c * 100.0)
    raw = trapezoid(vdos, wn)
    # raw integral = sum m <v^2>/kT: independent unit arithmetic with scipy.constants
    direct_raw = r.mean_square[3].mean() / kT
    assert raw == pytest.approx(direct_raw, rel=1e-10)
    dof = 3 * species.size
    assert trapezoid(vdos * dof / raw, wn) == pytest.approx(dof, rel=1e-10)


def test_on_grid_oscillators_at_equipartition_integrate_to_dof():
    # Oracle: for a frequency on the DFT grid (bin 2 <= m <= L/2 - 2), the periodic Hann window gives
    # sum w^2 cos^2(2 pi m n/L + phi) / sum w^2 = 1/2 exactly (orthogonality of the DFT basis;
    # Harris 1978). With amplitude sqrt(2kT/m) each component holds exactly kT, so the raw
    # integral of the VDOS per cm^-1 must be 3N (Lin, Blanco, Goddard 2003 sum rule) to rounding.
    rng = np.random.default_rng(11)
    T = 150.0
    dt_ps = 0.001
    L = 512
    n_atoms = 40
    kT = kT_in_u_A2_per_ps2(T)
    m = rng.uniform(1.0, 200.0, n_atoms)
    bins = rng.integers(2, L // 2 - 1, n_atoms)
    nu = bins / (L * dt_ps * sc.pico)
    amplitude = np.sqrt(2.0 * kT / m)[:, None] * np.ones((1, 3))
    phases = rng.uniform(0.0, 2.0 * np.pi, (n_atoms, 3))
    v = oscillator_velocities(nu[:, None], amplitude, phases, 3 * L, dt_ps * sc.pico)
    s = SpectrumSettings(dt_ps, L, 0.5, "hann")
    r = feed(SegmentAccumulator(s, m, np.ones((1, n_atoms), bool)), v).result()
    vdos = vdos_per_wavenumber(r.power[0], T)  # (segments, F)
    wn = r.frequency_Hz / (sc.c * 100.0)
    np.testing.assert_allclose(trapezoid(vdos, wn), 3 * n_atoms, rtol=1e-10)
    # every oscillator's power sits in its bin and the two neighbours (Hann main lobe)
    spectrum = r.power[0, 0]
    lobe = np.zeros(spectrum.size, bool)
    for b in bins:
        lobe[b - 1 : b + 2] = True
    assert spectrum[~lobe].max() < 1e-12 * spectrum.max()


# --------------------------------------------------------------------------- Ornstein-Uhlenbeck / AR(1)


def ar1_spectrum_per_unit_variance(frequency_Hz, a, dt_s):
    """Exact one-sided spectral density of x[n+1] = a x[n] + e[n] with var x = 1, per Hz.

    Derivation (Priestley 1981, section 4.12.3): the autocovariance of the stationary AR(1) is
    R[k] = a^|k| (unit variance). The two-sided density of a sampled process is
    dt * sum_k R[k] exp(-i 2 pi nu k dt); summing the two geometric series,
    sum_k a^|k| z^k = (1 - a^2)/|1 - a z|^2 = (1 - a^2)/(1 - 2 a cos(2 pi nu dt) + a^2)
    with z = exp(-i 2 pi nu dt). Folding onto nu >= 0 doubles it:
    S(nu) = 2 dt (1 - a^2)/(1 - 2 a cos(2 pi nu dt) + a^2); its integral over 0..1/(2 dt) is 1.
    The sampled Ornstein-Uhlenbeck velocity is exactly this process with a = exp(-gamma dt).
    """
    c = np.cos(2.0 * np.pi * frequency_Hz * dt_s)
    return 2.0 * dt_s * (1.0 - a * a) / (1.0 - 2.0 * a * c + a * a)


def expected_windowed_estimate(a, L, dt_s, m):
    """Exact expectation of the Hann periodogram bin m for the unit-variance AR(1) (O(L^2)).

    E|Y[m]|^2 = sum_{n,n'} w_n w_n' a^|n-n'| exp(-i 2 pi m (n-n')/L); this is the spectrum
    convolved with the window's spectral kernel (Welch 1967), i.e. the estimator's known bias.
    """
    n = np.arange(L)
    w = hann_periodic(L)
    e = w * np.exp(-2j * np.pi * m * n / L)
    lag = np.abs(n[:, None] - n[None, :])
    return 2.0 * dt_s * float(np.real(e @ (a**lag) @ e.conj())) / np.sum(w * w)


@pytest.fixture(scope="module")
def ornstein_uhlenbeck_run():
    # Langevin free particles: v[n+1] = a v[n] + sqrt(1 - a^2) sigma xi, sigma^2 = kT/m.
    T = 300.0
    m_u = 39.948  # argon-like mass, u
    gamma_per_ps = 10.0
    dt_ps = 0.01
    L = 512
    n_atoms = 200
    n_segments = 100
    s = SpectrumSettings(dt_ps, L, 0.5, "hann")
    n_frames = (n_segments - 1) * s.hop_frames + L
    kT = kT_in_u_A2_per_ps2(T)
    sigma = math.sqrt(kT / m_u)
    a = math.exp(-gamma_per_ps * dt_ps)
    rng = np.random.default_rng(1930)
    acc = SegmentAccumulator(s, np.full(n_atoms, m_u), np.ones((1, n_atoms), bool))
    v = rng.standard_normal((n_atoms, 3)) * sigma  # stationary start
    kick = math.sqrt(1.0 - a * a) * sigma
    acc.add_frame(v)
    remaining = n_frames - 1
    while remaining:  # v[n] = a v[n-1] + kick xi[n], in chunks of frames
        k = min(2048, remaining)
        xi = rng.standard_normal((k, n_atoms, 3))
        chunk, _ = scipy.signal.lfilter([kick], [1.0, -a], xi, axis=0, zi=(a * v)[None])
        feed(acc, chunk)
        v = chunk[-1]
        remaining -= k
    return {
        "result": acc.result(),
        "a": a,
        "kT": kT,
        "m": m_u,
        "n_atoms": n_atoms,
        "gamma": gamma_per_ps,
        "dt_s": dt_ps * sc.pico,
        "L": L,
        "sigma": sigma,
    }


def test_ornstein_uhlenbeck_spectrum_band_averages(ornstein_uhlenbeck_run):
    # Oracle: exact AR(1) spectrum (Priestley 1981) times 3N m sigma^2 (= 3N kT).
    # Statistics: each bin of one component's periodogram is a scaled chi^2 with 2 dof (relative
    # sd 1); the estimate averages K = 3 x 200 components x 100 half-overlapping Hann segments.
    # Consecutive half-overlapped periodic-Hann segments correlate with rho = sum w_n w_{n+L/2} /
    # sum w_n^2 = (L/8)/(3L/8) = 1/3 (Welch 1967), so the variance of the average is
    # (1 + 2 rho^2) = 1.22 times that of independent segments: per-bin relative sd
    # ~ sqrt(1.22/60000) = 0.45 %. Averaging a band of 16 bins (neighbouring Hann bins
    # correlate, ~8 independent values) gives ~0.16 %.
    # The window bias (spectrum convolved with the Hann kernel, computed exactly below) is
    # < 0.5 % for gamma L dt = 51. The 2 % tolerance is bias + > 10 sd.
    run = ornstein_uhlenbeck_run
    r = run["result"]
    scale = 3 * run["n_atoms"] * run["m"] * run["sigma"] ** 2
    exact = scale * ar1_spectrum_per_unit_variance(r.frequency_Hz, run["a"], run["dt_s"])
    estimate = r.power[0].mean(axis=0)
    bias_dc = expected_windowed_estimate(run["a"], run["L"], run["dt_s"], 0) * scale / exact[0] - 1
    assert abs(bias_dc) < 0.005
    band = 16
    n_bands = (estimate.size - 1) // band
    est_b = estimate[: n_bands * band].reshape(n_bands, band).mean(axis=1)
    exact_b = exact[: n_bands * band].reshape(n_bands, band).mean(axis=1)
    rel = est_b / exact_b - 1.0
    assert np.max(np.abs(rel)) < 0.02, rel


def test_ornstein_uhlenbeck_zero_frequency_green_kubo(ornstein_uhlenbeck_run):
    # Oracle: Green-Kubo, D = kT/(m gamma) for the Langevin free particle (Uhlenbeck & Ornstein
    # 1930), and S(0) = 12 m N D/(kT) (Lin, Blanco, Goddard 2003). The sampled process has the
    # exact zero-frequency density 3N x 2 dt (1+a)/(1-a), which differs from 12 N/gamma by
    # (gamma dt)^2/12 = 0.08 % (coth(x/2) = 2/x + x/6 + ...).
    run = ornstein_uhlenbeck_run
    r = run["result"]
    kT, m, N, gamma = run["kT"], run["m"], run["n_atoms"], run["gamma"]
    D_A2_per_ps = kT / (m * gamma)
    s0_green_kubo = 12.0 * m * N * D_A2_per_ps / kT * sc.pico  # s (per Hz)
    a, dt_s = run["a"], run["dt_s"]
    s0_discrete = 3 * N * 2.0 * dt_s * (1 + a) / (1 - a)
    assert s0_discrete == pytest.approx(
        s0_green_kubo, rel=(gamma * dt_s / sc.pico) ** 2 / 12 * 1.01
    )
    per_segment = r.power[0, :, 0] / kT  # VDOS at zero frequency, per Hz
    # window bias at nu = 0, computed exactly (expected_windowed_estimate)
    bias = expected_windowed_estimate(a, run["L"], dt_s, 0) / (2 * dt_s * (1 + a) / (1 - a)) - 1
    # Standard error from non-overlapping segments (every other one), so that the scatter is
    # that of independent samples; the DC bin of one component is chi^2 with 1 dof, summing 600
    # components gives relative sd ~ sqrt(2/600) = 5.8 % per segment, SE ~ 0.8 % over 50.
    independent = per_segment[::2]
    se = independent.std(ddof=1) / math.sqrt(independent.size)
    estimate = per_segment.mean()
    target = s0_discrete * (1 + bias)
    assert abs(estimate - target) < 4.0 * se, (estimate, target, se)
    assert se / target < 0.015  # the check is sharp enough to see a 6 % error


def test_ornstein_uhlenbeck_correlation_is_exponential(ornstein_uhlenbeck_run):
    # Oracle: C(t) = 3N m sigma^2 exp(-gamma t) (Uhlenbeck & Ornstein 1930). Statistics: by
    # Bartlett's formula for an AR(1) (Priestley 1981, section 5.3.3) the sample autocovariance
    # at small lags has var/C(0)^2 ~ (2/N)(1+a^2)/(1-a^2) = 20/N with a = 0.905, and
    # N = 600 components x 25,856 frames (overlapping segments reuse the same frames), so the sd
    # is ~ 0.11 % of C(0); the tolerance, 1 % of C(0) over the first 50 lags, is ~ 9 sd.
    run = ornstein_uhlenbeck_run
    r = run["result"]
    c = r.correlation[0].mean(axis=0)
    scale = 3 * run["n_atoms"] * run["m"] * run["sigma"] ** 2
    exact = scale * run["a"] ** np.arange(c.size)
    np.testing.assert_allclose(c[:50], exact[:50], atol=0.01 * scale)


# --------------------------------------------------------------------------- finite differences


def test_finite_difference_transfer_of_sampled_sinusoid():
    # Oracle: difference equations applied to x = sin(2 pi nu t) (Oppenheim & Schafer, frequency
    # response of the first difference): forward (x[n+1]-x[n])/dt and central
    # (x[n+1]-x[n-1])/(2 dt) scale the velocity amplitude 2 pi nu by sinc(pi nu dt) and
    # sinc(2 pi nu dt). With nu on the DFT grid, bin 2 <= m <= L/2 - 2 (so that cos^2 at 2m
    # misses the harmonics 0, +-1, +-2 of the squared Hann window), the windowed mean square of
    # each is A^2/2 exactly, so the power ratio must be |H|^2 to rounding.
    dt_ps = 0.004
    dt_s = dt_ps * sc.pico
    L = 256
    s = SpectrumSettings(dt_ps, L, 0.0, "hann")
    for bin_index in (5, 40, 100, 126):  # 2 <= m <= L/2 - 2, see the docstring
        nu = bin_index / (L * dt_s)
        t = np.arange(L + 2) * dt_s
        x = np.sin(2 * np.pi * nu * t)
        exact_v = 2 * np.pi * nu * np.cos(2 * np.pi * nu * t[1:-1])
        forward = (x[2:] - x[1:-1]) / dt_s
        central = (x[2:] - x[:-2]) / (2 * dt_s)
        ms = {}
        for name, series in (("exact", exact_v), ("forward", forward), ("central", central)):
            frames = np.repeat(series[:, None, None], 3, axis=2)
            r = feed(SegmentAccumulator(s, np.ones(1), np.ones((1, 1), bool)), frames).result()
            ms[name] = r.mean_square[0, 0]
        for scheme in ("forward", "central"):
            h2 = finite_difference_power_transfer(np.array([nu]), dt_ps, scheme)[0]
            z = (1 if scheme == "forward" else 2) * math.pi * nu * dt_s
            assert h2 == pytest.approx((math.sin(z) / z) ** 2, rel=1e-13)
            assert ms[scheme] / ms["exact"] == pytest.approx(h2, rel=1e-9)


@pytest.mark.parametrize(
    "dt_fs, wavenumber, central, forward",
    [  # attenuation table (values recomputed below; printed 4-digit values as a cross-check)
        (0.5, 1600, 0.9925, 0.9981),
        (0.5, 3700, 0.9602, 0.9899),
        (1, 1600, 0.9701, 0.9925),
        (1, 3700, 0.8482, 0.9602),
        (2, 1600, 0.8846, 0.9701),
        (2, 3700, 0.4987, 0.8482),
        (4, 1600, 0.6003, 0.8846),
        (4, 3700, 0.0154, 0.4987),
    ],
)
def test_finite_difference_attenuation_table(dt_fs, wavenumber, central, forward):
    # Oracle: sinc^2 recomputed here with math.sin and scipy.constants.c (the 4-digit table was
    # computed the same way, so it is only a cross-check of the digits).
    nu = wavenumber * sc.c * 100.0
    dt_s = dt_fs * sc.femto
    dt_ps = dt_s / sc.pico
    for scheme, printed, factor in (("central", central, 2), ("forward", forward, 1)):
        z = factor * math.pi * nu * dt_s
        h2 = finite_difference_power_transfer(nu, dt_ps, scheme)
        assert h2 == pytest.approx((math.sin(z) / z) ** 2, rel=1e-13)
        assert h2 == pytest.approx(printed, abs=6e-5)


def test_finite_difference_limits():
    # Oracle: sinc(0) = 1; central difference vanishes at Nyquist; forward gives (2/pi)^2 there.
    dt_ps = 0.002
    nyquist = 0.5 / (dt_ps * sc.pico)
    f = np.array([0.0, nyquist])
    np.testing.assert_allclose(
        finite_difference_power_transfer(f, dt_ps, "forward"), [1, 4 / math.pi**2]
    )
    np.testing.assert_allclose(
        finite_difference_power_transfer(f, dt_ps, "central"), [1, 0], atol=1e-30
    )
    with pytest.raises(ConfigError, match="backward"):
        finite_difference_power_transfer(f, dt_ps, "backward")


# --------------------------------------------------------------------------- units


def test_vdos_per_wavenumber_units():
    # Oracle: S(wavenumber) = c S(nu), S(nu) = P/(kT); unit arithmetic redone with scipy.constants:
    # 1 u (Angstrom/ps)^2 = m_u * (1e-10/1e-12)^2 J.
    power = np.array([1.0, 2.5])
    T = 298.15
    expected = power * sc.atomic_mass * 100.0**2 / (sc.k * T) * (sc.c * 100.0)
    np.testing.assert_allclose(vdos_per_wavenumber(power, T), expected, rtol=1e-14)
    with pytest.raises(ConfigError, match="--temperature"):
        vdos_per_wavenumber(power, 0.0)


def test_docstring_examples():
    # The printed values in the docstrings are claims; run them (methods.md 2.7 table values
    # and the equipartition sum rule).
    import doctest

    import qcorr.spectra.raw_vdos

    outcome = doctest.testmod(qcorr.spectra.raw_vdos, optionflags=doctest.ELLIPSIS)
    assert outcome.attempted >= 4 and outcome.failed == 0


# --------------------------------------------------------------------------- bookkeeping


def test_segment_starts_and_hop():
    s = SpectrumSettings(0.002, 10, 0.5)
    assert s.hop_frames == 5
    np.testing.assert_array_equal(segment_starts(30, s), [0, 5, 10, 15, 20])
    np.testing.assert_array_equal(segment_starts(9, s), [])
    assert SpectrumSettings(0.002, 10, 0.0).hop_frames == 10
    assert SpectrumSettings(0.002, 10, 0.75).hop_frames == 2  # round(7.5) = 8 (banker's rounding)
    assert segment_frames_for(5.0, 0.002) == 2500
    assert segment_frames_for(5.0, 0.003) == 1666  # 1666.7 -> nearest even
    assert segment_frames_for(0.001, 0.002) == 4


def test_block_range_partitions_segments():
    for n in (1, 2, 7, 100):
        for count in range(1, n + 1):
            pieces = [block_range(n, i, count) for i in range(count)]
            assert pieces[0][0] == 0 and pieces[-1][1] == n
            for (a0, a1), (b0, b1) in itertools.pairwise(pieces):
                assert a1 == b0
            assert all(b > a for a, b in pieces)
            sizes = [b - a for a, b in pieces]
            assert max(sizes) - min(sizes) <= 1


@pytest.mark.parametrize("overlap", [0.0, 0.5, 0.6])
@pytest.mark.parametrize("block_count", [1, 2, 3, 5])
def test_blocks_concatenate_to_single_pass(overlap, block_count):
    # Oracle: the single-pass result (segments are independent, so splitting the segment list
    # and feeding each block only the frames it needs must reproduce it to rounding).
    rng = np.random.default_rng(5)
    L, n_frames = 16, 130
    x = rng.standard_normal((n_frames, 3, 3))
    weights = np.array([1.0, 2.0, 3.0])
    members = np.array([[True, True, True], [False, True, False]])
    s = SpectrumSettings(0.001, L, overlap)
    full = feed(SegmentAccumulator(s, weights, members), x).result()
    n_segments = segment_starts(n_frames, s).size
    parts = []
    for i in range(block_count):
        first, stop = block_range(n_segments, i, block_count)
        f0, f1 = frames_needed(first, stop, s)
        acc = SegmentAccumulator(s, weights, members, first_segment=first, stop_segment=stop)
        parts.append(feed(acc, x[f0:f1]).result())
    for name in ("power", "correlation", "mean_square"):
        joined = np.concatenate([getattr(p, name) for p in parts], axis=1)
        np.testing.assert_allclose(joined, getattr(full, name), rtol=1e-12, atol=1e-14)
    np.testing.assert_array_equal(
        np.concatenate([p.segment_first_frame for p in parts]), full.segment_first_frame
    )


def test_extra_frames_after_block_are_ignored():
    rng = np.random.default_rng(3)
    s = SpectrumSettings(0.001, 8, 0.5)
    x = rng.standard_normal((60, 2, 3))
    acc = SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool), first_segment=2, stop_segment=4)
    f0, f1 = frames_needed(2, 4, s)
    assert (f0, f1) == (8, 20)
    r = feed(acc, x[f0:]).result()  # feeding past f1 is harmless
    assert r.power.shape[1] == 2
    np.testing.assert_array_equal(r.segment_first_frame, [8, 12])


def test_memory_does_not_grow_with_frames():
    # Structural streaming check: the accumulator's frame storage is one segment whatever the
    # number of frames fed; only the per-segment results (n_groups x n_freq each) accumulate.
    s = SpectrumSettings(0.001, 32, 0.5)
    rng = np.random.default_rng(9)
    sizes = []
    for n_frames in (64, 256):
        acc = SegmentAccumulator(s, np.ones(10), np.ones((2, 10), bool))
        feed(acc, rng.standard_normal((n_frames, 10, 3)))
        assert acc.buffer.shape[0] <= 32 and acc.buffer.shape[1] == 30
        arrays = {k: v.nbytes for k, v in vars(acc).items() if isinstance(v, np.ndarray)}
        sizes.append(arrays)
    assert sizes[0] == sizes[1]


# --------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    "kwargs, option",
    [
        ({"timestep_ps": 0.002, "segment_frames": 3}, "--segment-ps"),
        ({"timestep_ps": 0.002, "segment_frames": 101}, "--segment-ps"),
        ({"timestep_ps": 0.002, "segment_frames": 10.0}, "--segment-ps"),
        ({"timestep_ps": 0.002, "segment_frames": 100, "overlap": 1.0}, "--overlap"),
        ({"timestep_ps": 0.002, "segment_frames": 100, "overlap": -0.1}, "--overlap"),
        ({"timestep_ps": 0.002, "segment_frames": 4, "overlap": 0.9}, "--overlap"),
        ({"timestep_ps": 0.002, "segment_frames": 100, "taper": "hamming"}, "--taper"),
        ({"timestep_ps": 0.0, "segment_frames": 100}, "time step"),
        ({"timestep_ps": float("nan"), "segment_frames": 100}, "time step"),
    ],
)
def test_bad_settings_name_the_option(kwargs, option):
    with pytest.raises(ConfigError, match=option) as info:
        SpectrumSettings(**kwargs)
    assert "\n" not in str(info.value)


def test_block_errors_name_the_option():
    with pytest.raises(ConfigError, match="--block"):
        block_range(10, 3, 3)
    with pytest.raises(ConfigError, match="--block"):
        block_range(2, 0, 3)
    with pytest.raises(ConfigError, match="--block"):
        block_range(2, 0, 0)
    with pytest.raises(SamplingError, match="no full segment.*--segment-ps"):
        block_range(0, 0, 1)


def test_too_few_frames_raises_sampling_error():
    s = SpectrumSettings(0.002, 100, 0.5)
    acc = feed(SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool)), np.zeros((99, 2, 3)))
    with pytest.raises(SamplingError, match=r"got 99 frames, a segment needs 100 \(--segment-ps\)"):
        acc.result()


def test_short_block_raises_sampling_error():
    s = SpectrumSettings(0.002, 10, 0.5)
    acc = SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool), first_segment=0, stop_segment=3)
    feed(acc, np.zeros((15, 2, 3)))
    with pytest.raises(SamplingError, match="block ended early"):
        acc.result()


@pytest.mark.parametrize(("overlap", "threads"), [(0.5, 1), (0.25, 1), (0.5, 2)])
def test_non_finite_values_name_the_frames(overlap, threads):
    s = SpectrumSettings(0.002, 10, overlap)
    x = np.ones((40, 2, 3))
    x[3, 1, 2] = np.nan
    acc = SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool), workers=threads)
    with pytest.raises(TrajectoryError, match=r"not finite \(NaN or Inf\) in frames 0\.\.9"):
        feed(acc, x)
        acc.result()


def test_bad_frames_and_weights():
    s = SpectrumSettings(0.002, 10, 0.5)
    acc = SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool))
    with pytest.raises(TrajectoryError, match="frame 0"):
        acc.add_frame(np.zeros((3, 3)))
    with pytest.raises(ConfigError, match="channel 1"):
        SegmentAccumulator(s, np.array([1.0, -1.0]), np.ones((1, 2), bool))
    with pytest.raises(ConfigError, match="shape"):
        SegmentAccumulator(s, np.ones(2), np.ones((1, 3), bool))
    with pytest.raises(ConfigError, match="--threads"):
        SegmentAccumulator(s, np.ones(2), np.ones((1, 2), bool), workers=0)
    assert issubclass(ConfigError, QcorrError)


# --------------------------------------------------------------------------- single precision


@pytest.mark.parametrize("overlap", [0.5, 0.25])
def test_float32_frames_agree_with_float64_within_fft_rounding(overlap):
    # float32 frames (what MDAnalysis hands over) are buffered and transformed in single
    # precision; the same values given as float64 take the double-precision route.  Oracle:
    # the normwise error bound of the Cooley-Tukey FFT in floating point,
    # ||fl(FFT x) - FFT x|| <= log2(n) * eta * ||FFT x|| with eta ~ 5 u for unit roundoff u
    # (N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., SIAM (2002),
    # section 24.1, Theorem 24.2 -- bound quoted from memory; the factor 5 is generous).
    # Squaring doubles the relative error of the power, so with u = 2^-24 and n <= 2L points the
    # power and the (biased) lag sums may differ by at most 2 log2(2L) 5 u relative to their
    # total; observed differences are ~1e-7.  Band integrals hold a sizeable share of the total,
    # so the same relative bound applies to them.
    rng = np.random.default_rng(5)
    n, L, n_frames = 120, 512, 2048
    a = 0.95  # AR(1) velocities plus one shared oscillation: a spectrum with dynamic range
    x = np.empty((n_frames, n, 3))
    x[0] = rng.standard_normal((n, 3))
    for t in range(1, n_frames):
        x[t] = a * x[t - 1] + np.sqrt(1 - a * a) * rng.standard_normal((n, 3))
    x += 3.0 * np.sin(0.2 * np.pi * np.arange(n_frames))[:, None, None] * rng.standard_normal((1, n, 3))
    frames32 = (5.0 * x).astype(np.float32)
    masses = rng.uniform(1.0, 200.0, n)
    members = np.array([np.ones(n, bool), rng.random(n) < 0.3])
    s = SpectrumSettings(0.002, L, overlap, "hann")
    single = feed(SegmentAccumulator(s, masses, members), frames32)
    double = feed(SegmentAccumulator(s, masses, members), frames32.astype(np.float64))
    assert single.dtype == np.float32 and double.dtype == np.float64
    r32, r64 = single.result(), double.result()
    assert r32.power.dtype == np.float64 and r32.correlation.dtype == np.float64
    tol = 2 * math.log2(2 * L) * 5 * 2.0**-24  # ~1.1e-5
    for lo, hi in [(0, L // 8), (L // 8, L // 4), (L // 4, L // 2 + 1)]:
        np.testing.assert_allclose(r32.power[..., lo:hi].sum(-1), r64.power[..., lo:hi].sum(-1), rtol=tol)
    np.testing.assert_allclose(r32.mean_square, r64.mean_square, rtol=tol)
    peak = r64.power.max(axis=-1, keepdims=True)
    assert np.all(np.abs(r32.power - r64.power) <= tol * peak)
    # unbiased correlation = biased lag sum * L/(L-k): compare the lag sums against C(0)
    lag_weight = (L - np.arange(L)) / L
    c0 = r64.correlation[..., :1]
    assert np.all(np.abs(r32.correlation - r64.correlation) * lag_weight <= tol * c0)
    # and the result is not simply the float64 one (the single-precision route was taken)
    assert not np.array_equal(r32.power, r64.power)
