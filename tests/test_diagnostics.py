"""Temperature and sum-rule diagnostics judged against the statistical scatter of the mean
kinetic temperature (qcorr.spectra.diagnostics; issue 17).

References used by the checks below:

* block averaging of correlated data: H. Flyvbjerg, H. G. Petersen, J. Chem. Phys. 91, 461
  (1989) – the scatter of block (segment) means estimates the standard error of the mean;
* Student's t distribution (Student, Biometrika 6, 1 (1908)), evaluated with scipy.stats;
* canonical scatter of the kinetic temperature, var(T_kin)/T² = 2/f for f degrees of freedom
  (2K/kT is chi-squared with f degrees of freedom; D. Frenkel, B. Smit, Understanding
  Molecular Simulation, 2nd ed. (2002), section on the canonical ensemble – section number
  from memory).
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
import xarray as xr
from scipy import stats

from qcorr.spectra import diagnostics
from qcorr.spectra.assemble import assemble_spectrum, group_table

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "resources" / "demo"

FLOOR = diagnostics.KINETIC_TEMPERATURE_FLOOR
P_FALSE = diagnostics.FALSE_WARNING_PROBABILITY


def test_false_warning_probability_is_three_normal_standard_deviations():
    """0.27 % two-sided: the normal distribution beyond ±3 standard deviations (scipy.stats)."""
    assert 2 * stats.norm.sf(3.0) == pytest.approx(P_FALSE, rel=1e-3)


# ------------------------------------------------------------------ datasets with known scatter
def _segments_dataset(values: np.ndarray, dof: np.ndarray, *, segment_frames: int, overlap: float,
                      taper: str) -> xr.Dataset:
    """The items the kinetic-temperature statistics read: groups x segments of raw integrals."""
    values = np.atleast_2d(values)
    n_groups, n_segments = values.shape
    raw = values * dof[:, None]
    return xr.Dataset(
        {
            "raw_integral_segments": (("group", "segment"), raw),
            "raw_integral": (("group",), raw.mean(axis=1)),
            "degrees_of_freedom": (("group",), dof),
        },
        coords={"group": [f"g{i}" for i in range(n_groups)], "segment": np.arange(n_segments)},
        attrs={"segment_frames": segment_frames, "segment_overlap": overlap, "taper": taper},
    )


def _spectrum(per_segment_ratio: np.ndarray, dof: float, *, temperature: float = 300.0,
              segment_frames: int = 100) -> xr.Dataset:
    """A spectrum file made by assemble_spectrum (the command's own builder): non-overlapping,
    untapered segments whose raw integrals are dof x the given ratios (T_kin/T per segment)."""
    wn = np.linspace(0.0, 1000.0, 201)  # cm-1
    line = np.exp(-0.5 * ((wn - 300.0) / 30.0) ** 2)
    line /= np.trapezoid(line, wn)
    k = len(per_segment_ratio)
    raw = (dof * np.asarray(per_segment_ratio))[None, :, None] * line[None, None, :]
    groups = [SimpleNamespace(name="total", selection="all", degrees_of_freedom=dof, constraints=0.0,
                              atom_count=int(dof // 3 + 1), molecule_count=int(dof // 3 + 1), mass=1.0)]
    attrs = {
        "temperature_K": temperature, "nyquist_wavenumber": 1000.0, "resolution_wavenumber": 5.0,
        "segment_length_ps": 2.0, "frames_used": k * segment_frames, "timestep_ps": 0.02,
        "frame_step": 1, "segment_frames": segment_frames, "segment_overlap": 0.0, "taper": "none",
        "velocity_source": "stored", "block_index": 1, "block_count": 1, "segment_count_window": k,
        "statistics_frames": k * segment_frames, "centre_of_mass_mv2_u_A2_per_ps2": 0.0,
        "finite_difference_correction": "none", "mean_box_volume_A3": 1000.0,
    }
    return assemble_spectrum(
        raw_segments=raw, correlation_segments=np.ones((1, k, 3)), wavenumber=wn,
        lag_ps=np.arange(3) * 0.02, table=group_table(groups), segment_index=np.arange(k),
        segment_first_frame=np.arange(k) * segment_frames, attrs=attrs,
    )


# ------------------------------------------------------------------ the standard error
@pytest.mark.parametrize("overlap", [0.5, 0.75])
def test_standard_error_matches_the_scatter_of_white_noise_means(overlap):
    """Monte Carlo: uncorrelated frames, Hann-weighted overlapping segments as the estimator
    makes them.  The mean of the squared standard errors must equal the observed variance of
    the overall mean (the claim 'exact for uncorrelated frames' of the module docstring).

    Tolerance: 4 combined standard errors of the two Monte Carlo estimates (variance of a
    normal sample: relative SE sqrt(2/(R-1)); mean of SE²: its sample SE), from the sample.
    The naive s/sqrt(K) (overlap ignored) must fall outside it, so the check can fail.
    """
    rng = np.random.default_rng(17)
    L, K, R = 64, 12, 20000
    hop = L - round(overlap * L)
    w2 = (0.5 - 0.5 * np.cos(2 * np.pi * np.arange(L) / L)) ** 2
    b = w2 / w2.sum()
    frames = 1.0 + 0.05 * rng.standard_normal((R, (K - 1) * hop + L))
    x = np.stack([frames[:, s * hop: s * hop + L] @ b for s in range(K)], axis=1)  # R x K
    ds = _segments_dataset(x, np.ones(R), segment_frames=L, overlap=overlap, taper="hann")
    found = diagnostics.kinetic_temperature_statistics(ds)
    se2 = np.array([s.standard_error**2 for s in found])
    var_mean = float(np.var(x.mean(axis=1), ddof=1))
    rel = math.sqrt(2.0 / (R - 1) + (np.std(se2, ddof=1) / math.sqrt(R) / se2.mean()) ** 2)
    assert se2.mean() / var_mean == pytest.approx(1.0, abs=4 * rel)
    naive = float(np.mean(np.var(x, axis=1, ddof=1) / K))
    assert abs(naive / var_mean - 1.0) > 4 * rel
    # K_eff for Hann at 50 % overlap: 7 segments -> 6.52 (overlap correlation 3/70, module docstring)
    ds7 = _segments_dataset(np.ones((1, 7)), np.ones(1), segment_frames=100, overlap=0.5, taper="hann")
    assert diagnostics.kinetic_temperature_statistics(ds7)[0].effective_segments == pytest.approx(
        7 / (1 + 2 * (6 / 7) * 3 / 70), rel=1e-3)


# ------------------------------------------------------------------ the warning limit
SCATTER = np.array([0.012, -0.012, 0.006, -0.006, 0.0, 0.009, -0.009, 0.0])  # mean 0
DOF = 9000.0


def _expected_limit() -> float:
    """Floor + Student-t quantile x s/sqrt(K) for independent (non-overlapping, untapered)
    segments, K_eff = K; the canonical bounds do not bind for these numbers (checked)."""
    k = len(SCATTER)
    se = np.std(SCATTER, ddof=1) / math.sqrt(k)
    allowance = stats.t.isf(P_FALSE / 2, k - 1) * se
    lower = 3 * math.sqrt(2 / DOF / (k * 100))  # every frame an independent canonical sample
    upper = 3 * math.sqrt(2 / DOF)
    assert lower < allowance < upper
    return FLOOR + allowance


@pytest.mark.parametrize("side", [+1, -1])
def test_warns_beyond_the_limit_and_not_below(side):
    limit = _expected_limit()
    status = {}
    for label, offset in (("below", 0.98 * limit), ("beyond", 1.02 * limit)):
        ds = _spectrum(1.0 + side * offset + SCATTER, DOF)
        checks = {d.check: d for d in diagnostics.run_diagnostics(ds)}
        status[label] = (checks["temperature"].status, checks["sum_rule"].status)
        stats_ = diagnostics.kinetic_temperature_statistics(ds)[0]
        assert stats_.limit == pytest.approx(limit, rel=1e-9)
        assert stats_.deviation == pytest.approx(side * offset, abs=1e-12)
        message = checks["temperature"].message
        assert f"{side * offset:+.2%}" in message and f"±{limit:.1%}" in message
        assert "\n" not in message and "\n" not in checks["sum_rule"].message
    assert status == {"below": ("ok", "ok"), "beyond": ("warning", "warning")}


def test_a_deviation_below_the_floor_never_warns():
    """Zero segment scatter: the statistical allowance is the canonical lower bound (frames as
    independent samples), 3 sqrt(2/(f K L)) for non-overlapping untapered segments; the floor
    (1 %) is added to it."""
    k, L = 8, 100
    lower = 3 * math.sqrt(2 / DOF / (k * L))
    ds = _spectrum(np.full(k, 1.0 + 0.999 * (FLOOR + lower)), DOF, segment_frames=L)
    s = diagnostics.kinetic_temperature_statistics(ds)[0]
    assert s.limit == pytest.approx(FLOOR + lower, rel=1e-9)
    assert not s.exceeded
    ds = _spectrum(np.full(k, 1.0 + 1.001 * (FLOOR + lower)), DOF, segment_frames=L)
    assert diagnostics.check_sum_rule(ds).status == "warning"


def test_one_segment_uses_the_canonical_scatter_of_one_sample():
    """No segment scatter to estimate: the allowance is 3 sqrt(2/f), the canonical scatter of an
    instantaneous kinetic temperature, an upper bound for the scatter of any mean."""
    dof = 321.0
    s = diagnostics.kinetic_temperature_statistics(_spectrum(np.array([1.05]), dof))[0]
    assert math.isnan(s.standard_error)
    assert s.limit == pytest.approx(FLOOR + 3 * math.sqrt(2 / dof), rel=1e-9)


def test_large_scatter_is_capped_at_the_canonical_single_sample_limit():
    """Segment means scattering more than single canonical samples (a drifting run) cannot widen
    the limit beyond 3 sqrt(2/f): the drift then warns."""
    dof = 321.0
    drift = np.linspace(-0.3, 0.3, 8)  # far beyond sqrt(2/321) = 7.9 %
    s = diagnostics.kinetic_temperature_statistics(_spectrum(1.0 + drift, dof))[0]
    assert s.limit == pytest.approx(FLOOR + 3 * math.sqrt(2 / dof), rel=1e-9)


# ------------------------------------------------------------------ the bundled demo
def _demo_diagnostics(run_qcorr, tmp_path, *extra):
    settings = json.loads((DEMO / "copper_100K" / "settings.json").read_text())
    out = tmp_path / "copper_100K.nc"
    code, _, err = run_qcorr(
        "spectrum", "--topology", DEMO / "copper_100K" / "topology.pdb",
        "--trajectory", DEMO / "copper_100K" / "trajectory.trr",
        "--temperature", settings["recommended_analysis"]["temperature_K"],
        "--segment-ps", settings["recommended_analysis"]["segment_ps"],
        "--output", out, "--progress", "never", *extra,
    )
    assert code == 0, err
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        checks = {c["check"]: c for c in json.loads(ds.attrs["diagnostics"])}
        found = diagnostics.kinetic_temperature_statistics(ds.load())[0]
    return checks, found, err


def test_demo_copper_100K_runs_without_a_temperature_warning(run_qcorr, tmp_path):
    """108-atom EMT copper, 8 ps, 7 Hann segments: its mean kinetic temperature is 2.4 % below
    100 K (the issue's example), about 1.5 standard errors from the segment scatter – chance,
    not a set-up error.  The engine's own record agrees: 98.05 ± 1.10 K (uniform frame mean,
    10 blocks; resources/demo/copper_100K/settings.json)."""
    checks, found, err = _demo_diagnostics(run_qcorr, tmp_path)
    assert checks["temperature"]["status"] == "ok" and checks["sum_rule"]["status"] == "ok"
    assert "warning: sum_rule" not in err and "warning: temperature" not in err
    assert found.deviation == pytest.approx(-0.024, abs=0.001)
    assert 1.0 < abs(found.standard_errors) < 2.5


def test_demo_copper_100K_with_a_wrong_constraint_count_still_warns(run_qcorr, tmp_path):
    """100 constraints that copper does not have: dof 321 -> 221, T_kin/T = 313.3/221 = 1.42."""
    checks, found, err = _demo_diagnostics(run_qcorr, tmp_path, "--constraints", "total=100")
    assert checks["temperature"]["status"] == "warning" and checks["sum_rule"]["status"] == "warning"
    assert found.ratio == pytest.approx(313.342 / 221.0, rel=1e-3)
    assert "--constraints" in checks["sum_rule"]["message"]
    assert "warning: sum_rule" in err and "warning: temperature" in err  # printed to the user
