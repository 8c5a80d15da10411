"""Contract-conforming spectrum Datasets built from analytic spectra, for tests.

The layout follows ``DEVELOPERS.md`` ("The spectrum file"): ``vdos`` per unit
wavenumber (cm) whose trapezoid integral over wavenumber equals the degrees of
freedom, ``vdos_segments`` with the same normalisation (their mean is
``vdos``), the per-group counts, and every global attribute.  Nothing here
calls the estimator; the spectra are closed forms:

* Einstein solid (A. Einstein, Ann. Phys. 22, 180 (1907)): all modes at one
  wavenumber, a single grid bin of height dof/h (the discrete delta function:
  trapezoid integral = dof, and integral S W = dof W(u_E) exactly);
* Debye solid (P. Debye, Ann. Phys. 39, 789 (1912)): S = 3 dof nu~^2 / nu~_D^3
  below the Debye wavenumber, 0 above, with the mean of the one-sided limits
  at a grid point that falls on nu~_D;
* Lorentzian (Ornstein-Uhlenbeck velocity, Langevin free particle): per dof
  S(nu) = (4/gamma) / (1 + (2 pi nu/gamma)^2) (per Hz), the spectrum of a
  diffusing particle (G. E. Uhlenbeck, L. S. Ornstein, Phys. Rev. 36, 823 (1930)).

Use :func:`spectrum_dataset` to assemble groups into a Dataset and
:func:`write_spectrum_file` to put it on disk with the h5netcdf engine.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from qcorr import constants as C

SECOND_RADIATION_CONSTANT_CM_K = C.second_radiation_constant_cm_K


def wavenumber_grid(max_wavenumber_cm: float, points: int) -> np.ndarray:
    """Uniform grid 0 .. max (inclusive), cm^-1."""
    return np.linspace(0.0, max_wavenumber_cm, points)


def normalise(wavenumber_cm: np.ndarray, vdos: np.ndarray, dof: float) -> np.ndarray:
    """Scale so that the trapezoid integral over wavenumber is *dof* (the contract's rule)."""
    return vdos * (dof / np.trapezoid(vdos, wavenumber_cm))


def debye_vdos(wavenumber_cm: np.ndarray, debye_wavenumber_cm: float, dof: float) -> np.ndarray:
    """Debye density of states 3 dof nu~^2 / nu~_D^3 (nu~ < nu~_D), cm; trapezoid-normalised.

    A grid point on nu~_D gets the mean of the one-sided limits (half the
    value below), which makes the trapezoid rule second-order accurate across
    the jump.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.where(x < debye_wavenumber_cm, 3.0 * dof * x**2 / debye_wavenumber_cm**3, 0.0)
    on_edge = np.isclose(x, debye_wavenumber_cm, rtol=1e-12, atol=0)
    s[on_edge] = 0.5 * 3.0 * dof / debye_wavenumber_cm
    return normalise(x, s, dof)


def einstein_vdos(wavenumber_cm: np.ndarray, einstein_wavenumber_cm: float, dof: float) -> np.ndarray:
    """All dof at one wavenumber: one bin of height dof / (bin width), cm.

    The Einstein wavenumber must be an interior grid point; the bin width is
    the trapezoid weight of that point (the spacing on a uniform grid).
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    i = int(np.argmin(np.abs(x - einstein_wavenumber_cm)))
    if not np.isclose(x[i], einstein_wavenumber_cm, rtol=1e-12, atol=0) or i in (0, x.size - 1):
        raise ValueError("put the Einstein wavenumber on an interior grid point")
    s = np.zeros_like(x)
    s[i] = dof / (0.5 * (x[i + 1] - x[i - 1]))
    return s


def lorentzian_vdos(wavenumber_cm: np.ndarray, friction_per_ps: float, dof: float) -> np.ndarray:
    """Ornstein-Uhlenbeck (diffusing) spectrum per wavenumber, trapezoid-normalised to dof.

    S(nu~) = dof * c * (4/gamma) / (1 + (2 pi c nu~ / gamma)^2), with gamma in
    1/s and c in cm/s; S(0) = 4 c dof / gamma.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    gamma = friction_per_ps / C.picosecond_s
    c = C.speed_of_light_cm_per_s
    s = dof * c * (4.0 / gamma) / (1.0 + (2.0 * np.pi * c * x / gamma) ** 2)
    return normalise(x, s, dof)


@dataclass
class GroupSpec:
    """One group of a test spectrum; counts as in the contract."""

    vdos: np.ndarray
    degrees_of_freedom: float
    atom_count: int
    molecule_count: int
    group_mass_g_mol: float
    selection: str = "all"
    kinetic_temperature_K: float | None = None
    segment_scatter: float = 0.0  # relative scatter of the segment spectra (0 = identical)
    segment_spectra: np.ndarray | None = field(default=None)  # explicit (segment, wavenumber)


def _segments(vdos: np.ndarray, n_segments: int, scatter: float, rng: np.random.Generator) -> np.ndarray:
    """Positive segment spectra whose mean is exactly *vdos* (gamma-distributed factors)."""
    if scatter == 0.0:
        return np.tile(vdos, (n_segments, 1))
    shape = 1.0 / scatter**2
    factors = rng.gamma(shape, 1.0 / shape, size=(n_segments, vdos.size))
    factors /= factors.mean(axis=0, keepdims=True)
    return vdos[None, :] * factors


def _vacf(wavenumber_cm: np.ndarray, vdos: np.ndarray, lag_ps: np.ndarray) -> np.ndarray:
    """Normalised VACF as the cosine transform of the spectrum (Wiener-Khinchin)."""
    t = lag_ps * C.picosecond_s
    nu = wavenumber_cm * C.speed_of_light_cm_per_s
    kernel = np.cos(2.0 * np.pi * nu[None, :] * t[:, None])
    acf = np.trapezoid(vdos[None, :] * kernel, wavenumber_cm, axis=1)
    return acf / acf[0]


def spectrum_dataset(
    wavenumber_cm: np.ndarray,
    groups: Mapping[str, GroupSpec],
    *,
    temperature_K: float,
    n_segments: int = 8,
    seed: int = 20261202,
    segment_overlap: float = 0.5,
    taper: str = "hann",
    attrs_override: Mapping[str, object] | None = None,
) -> xr.Dataset:
    """Assemble a spectrum Dataset that follows the contract of ``DEVELOPERS.md``.

    The time-domain attributes are made consistent with the grid: Nyquist =
    last wavenumber, resolution = spacing, timestep = 1/(2 c nyquist).
    ``groups`` must contain ``"total"``.
    """
    if "total" not in groups:
        raise ValueError("the contract requires a group named 'total'")
    x = np.asarray(wavenumber_cm, dtype=float)
    rng = np.random.default_rng(seed)
    names = list(groups)
    nyquist = float(x[-1])
    resolution = float(x[1] - x[0])
    timestep_ps = 1.0 / (2.0 * C.speed_of_light_cm_per_s * nyquist) / C.picosecond_s
    segment_frames = 2 * (x.size - 1)
    lag_ps = np.arange(32) * timestep_ps
    vdos = np.stack([groups[n].vdos for n in names])
    segs = np.stack(
        [
            groups[n].segment_spectra
            if groups[n].segment_spectra is not None
            else _segments(groups[n].vdos, n_segments, groups[n].segment_scatter, rng)
            for n in names
        ]
    )
    n_seg = segs.shape[1]
    hop = segment_frames - round(segment_overlap * segment_frames)
    frames_used = segment_frames + (n_seg - 1) * hop
    dof = np.array([groups[n].degrees_of_freedom for n in names], dtype=float)
    t_kin = np.array(
        [groups[n].kinetic_temperature_K or temperature_K for n in names], dtype=float
    )

    def var(dims, data, units, long_name):
        attrs = {"long_name": long_name}
        if units is not None:
            attrs["units"] = units
        return (dims, data, attrs)

    ds = xr.Dataset(
        data_vars={
            "vdos": var(("group", "wavenumber"), vdos, "cm",
                        "vibrational density of states per unit wavenumber (integral = degrees of freedom)"),
            "vdos_segments": var(("group", "segment", "wavenumber"), segs, "cm",
                                 "vibrational density of states of each segment"),
            "vacf": var(("group", "lag"), np.stack([_vacf(x, v, lag_ps) for v in vdos]), "1",
                        "mass-weighted velocity autocorrelation, normalised to 1 at lag 0"),
            "degrees_of_freedom": var(("group",), dof, "1", "degrees of freedom"),
            "constraint_count": var(("group",), np.zeros(len(names)), "1", "constraints subtracted"),
            "kinetic_temperature": var(("group",), t_kin, "K", "kinetic temperature"),
            "raw_integral": var(("group",), dof * t_kin / temperature_K, "1",
                                "integral of the spectrum before normalisation"),
            "atom_count": var(("group",), np.array([groups[n].atom_count for n in names]), "1",
                              "atoms in the group"),
            "molecule_count": var(("group",), np.array([groups[n].molecule_count for n in names]), "1",
                                  "molecules in the group"),
            "group_mass": var(("group",), np.array([groups[n].group_mass_g_mol for n in names]),
                              "g mol-1", "total mass of the group's atoms"),
            "selection": var(("group",), np.array([groups[n].selection for n in names]), None,
                             "MDAnalysis selection"),
        },
        coords={
            "group": ("group", np.array(names), {"long_name": "atom group"}),
            "wavenumber": ("wavenumber", x, {"units": "cm-1", "long_name": "wavenumber"}),
            "frequency": ("wavenumber", C.wavenumber_to_THz(x), {"units": "THz", "long_name": "frequency"}),
            "lag": ("lag", lag_ps, {"units": "ps", "long_name": "correlation time"}),
            "segment": ("segment", np.arange(n_seg), {"long_name": "segment index"}),
        },
        attrs={
            "qcorr_file_kind": "spectrum",
            "qcorr_format_version": 1,
            "Conventions": "CF-1.11",
            "temperature_K": float(temperature_K),
            "timestep_ps": timestep_ps,
            "frames_used": int(frames_used),
            "frame_start": 0,
            "frame_stop": int(frames_used),
            "frame_step": 1,
            "segment_frames": int(segment_frames),
            "segment_length_ps": segment_frames * timestep_ps,
            "segment_overlap": float(segment_overlap),
            "taper": taper,
            "resolution_wavenumber": resolution,
            "nyquist_wavenumber": nyquist,
            "velocity_source": "stored",
            "input_files": json.dumps([{"name": "analytic-test-spectrum", "size_bytes": 0, "sha256": ""}]),
            "diagnostics": json.dumps([]),
            "qcorr_version": "test",
            "mdanalysis_version": "none",
            "command_line": "tests/spectra.py (analytic spectrum)",
            "mean_box_volume_A3": 0.0,
        },
    )
    if attrs_override:
        ds.attrs.update(attrs_override)
    return ds


def write_spectrum_file(ds: xr.Dataset, path: str | os.PathLike[str]) -> Path:
    """Write with xarray's h5netcdf engine, exactly as the contract says (no checks)."""
    path = Path(path)
    ds.to_netcdf(path, engine="h5netcdf")
    return path


def debye_solid_dataset(
    *, debye_temperature_K: float, temperature_K: float, atoms: int = 4, points_below_debye: int = 20000,
    mass_g_mol: float = 63.546, n_segments: int = 8, segment_scatter: float = 0.0, seed: int = 1,
) -> xr.Dataset:
    """Monatomic Debye solid, dof = 3 x atoms, one molecule per atom; grid to 1.25 nu~_D."""
    nu_d = debye_temperature_K / SECOND_RADIATION_CONSTANT_CM_K
    h = nu_d / points_below_debye
    x = np.arange(0, int(1.25 * points_below_debye) + 1) * h
    dof = 3.0 * atoms
    g = GroupSpec(debye_vdos(x, nu_d, dof), dof, atoms, atoms, mass_g_mol * atoms,
                  selection="all", segment_scatter=segment_scatter)
    return spectrum_dataset(x, {"total": g}, temperature_K=temperature_K, n_segments=n_segments, seed=seed)


def einstein_solid_dataset(
    *, einstein_temperature_K: float, temperature_K: float, atoms: int = 4, points: int = 4001,
    mass_g_mol: float = 63.546, n_segments: int = 8,
) -> xr.Dataset:
    """Monatomic Einstein solid, dof = 3 x atoms; nu~_E is grid point points//4."""
    nu_e = einstein_temperature_K / SECOND_RADIATION_CONSTANT_CM_K
    x = np.arange(points) * (nu_e / (points // 4))
    dof = 3.0 * atoms
    g = GroupSpec(einstein_vdos(x, x[points // 4], dof), dof, atoms, atoms, mass_g_mol * atoms)
    return spectrum_dataset(x, {"total": g}, temperature_K=temperature_K, n_segments=n_segments)
