"""Heat capacity from a temperature series: C_P(T) = dH/dT over runs of one model, corrected.

Runs of the same model at several temperatures, each with its corrected table (``qcorr
corrected``), give the mean enthalpy ⟨H⟩(T_i) (NPT runs) or the mean energy ⟨E⟩(T_i) (NVT or
NVE runs at one density) with block standard errors.  A polynomial in T − T̄ fitted to them by
weighted least squares (weights 1/SE²) has the derivative

    C_P(T) = d⟨H⟩/dT     (or C_V(T) = d⟨E⟩/dT),

with its standard error from the fit's covariance (g·Cov·g, g the derivative's gradient
with respect to the coefficients).  When χ²/dof of the fit exceeds 1 the covariance is
scaled by it (the Birge ratio squared; R. T. Birge, Phys. Rev. 40, 207 (1932)), and a fit
with p(χ²) < 0.01 is flagged: the polynomial does not describe ⟨H⟩(T) within its errors.
This is usually the steadier classical route to C_P than the fluctuation formula (common
practice; ``shared/methods.md`` §8.2).  The corrected value at each T_i adds the harmonic
correction ΔC_V of the run at T_i: C_P,corr(T_i) = C_P(T_i) + ΔC_V(T_i).

:func:`temperature_series` makes the table rows (method ``corrected``, classical_source
``temperature_series``, system = the series name) and :func:`series_figure` the figure of
the classical (fluctuation and slope) and corrected C_P(T) with error bars and reference
values.
"""

from __future__ import annotations

import math
import os
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

from qcorr import units
from qcorr.errors import ConfigError
from qcorr.outputs.table import TableRow, read_table, rows_to_frame

#: a fit whose χ² has a smaller upper-tail probability than this is flagged (our choice)
FIT_PROBABILITY_LIMIT = 0.01


@dataclass(frozen=True)
class SeriesPoint:
    """One run of a series: its temperature (K), mean H or E (kJ/mol), fluctuation heat
    capacity and harmonic correction (J/(mol K)), and reference, per mole of molecules."""

    system: str
    temperature_K: float
    mean: float
    mean_se: float
    fluctuation: float
    fluctuation_se: float
    fluctuation_source: str
    correction: float
    correction_se: float
    reference: float
    reference_se: float
    reference_source: str


def _row(frame: pd.DataFrame, prop: str) -> pd.Series | None:
    rows = frame[(frame["method"] == "corrected") & (frame["property"] == prop)
                 & (frame["basis"] == "per_mole_molecules")]
    return rows.iloc[0] if len(rows) else None


def series_points(tables: Sequence[pd.DataFrame], names: Sequence[str]) -> tuple[list[SeriesPoint], str, str]:
    """The points of a series from corrected tables: (points sorted by T, heat-capacity property, group).

    Raises
    ------
    ConfigError
        Naming the table: not a corrected table, mixed ensembles or groups, no mean enthalpy
        (NPT) or energy, two runs at one temperature, fewer than two runs.
    """
    if len(tables) < 2:
        raise ConfigError("qcorr series: give the corrected tables of at least two runs at different temperatures")
    kinds, groups, points = set(), set(), []
    for frame, name in zip(tables, names):
        attrs = frame.attrs
        if "harmonic_corrections" not in attrs or "options" not in attrs:
            raise ConfigError(f"table '{name}' is not a 'qcorr corrected' table; give the tables it wrote")
        ensemble, group = attrs["options"]["ensemble"], attrs["options"]["group"]
        kinds.add("npt" if ensemble == "npt" else "fixed volume")
        groups.add(group)
        mean_prop, cap_prop = (("enthalpy", "isobaric_heat_capacity") if ensemble == "npt"
                               else ("energy", "heat_capacity"))
        mean = _row(frame, mean_prop)
        if mean is None or not math.isfinite(float(mean["classical_se"])):
            raise ConfigError(f"table '{name}' has no measured mean {mean_prop} (an energy file of the run): "
                              "the slope needs it")
        cap = _row(frame, cap_prop)
        corr = attrs["harmonic_corrections"]["heat_capacity"]
        nan = math.nan
        points.append(SeriesPoint(
            system=str(mean["system"]), temperature_K=float(attrs["temperature_K"]),
            mean=float(mean["classical"]), mean_se=float(mean["classical_se"]),
            fluctuation=nan if cap is None else float(cap["classical"]),
            fluctuation_se=nan if cap is None else float(cap["classical_se"]),
            fluctuation_source="" if cap is None else str(cap["classical_source"]),
            correction=float(corr["value"]), correction_se=float(corr["standard_error"]),
            reference=nan if cap is None else float(cap["reference"]),
            reference_se=nan if cap is None else float(cap["reference_se"]),
            reference_source="" if cap is None else str(cap["reference_source"]),
        ))
    if len(kinds) > 1:
        raise ConfigError("qcorr series: the tables mix NPT runs with fixed-volume runs; a series is one or the other")
    if len(groups) > 1:
        raise ConfigError(f"qcorr series: the tables use different groups ({', '.join(sorted(groups))}); use one")
    temps = [p.temperature_K for p in points]
    if len(set(np.round(temps, 6))) != len(temps):
        raise ConfigError("qcorr series: two tables are at the same temperature; give one run per temperature")
    kind = "isobaric_heat_capacity" if kinds == {"npt"} else "heat_capacity"
    return sorted(points, key=lambda p: p.temperature_K), kind, groups.pop()


@dataclass(frozen=True)
class SlopeFit:
    """Weighted polynomial fit of the mean (kJ/mol) against T − centre (K)."""

    degree: int
    centre_K: float
    coefficients: np.ndarray
    covariance: np.ndarray
    chi_square: float
    dof: int
    probability: float
    covariance_scale: float

    def derivative(self, temperature_K: float) -> tuple[float, float]:
        """dMean/dT at *temperature_K* and its standard error, J/(mol K)."""
        x = temperature_K - self.centre_K
        grad = np.array([k * x ** (k - 1) if k else 0.0 for k in range(self.degree + 1)])
        value = float(grad @ self.coefficients) * 1000.0
        se = math.sqrt(max(float(grad @ self.covariance @ grad), 0.0)) * 1000.0
        return value, se


def fit_slope(temperature_K: Sequence[float], mean: Sequence[float], mean_se: Sequence[float],
              degree: int) -> SlopeFit:
    """Weighted least-squares polynomial of *degree* through (T, mean ± SE); see module docstring."""
    t, y, s = (np.asarray(v, dtype=float) for v in (temperature_K, mean, mean_se))
    if not (1 <= degree < t.size):
        raise ConfigError(f"--fit-degree {degree}: must be at least 1 and below the number of runs ({t.size})")
    if not np.all(s > 0):
        raise ConfigError("qcorr series: every mean needs a positive standard error for the weighted fit")
    centre = float(t.mean())
    design = np.vander(t - centre, degree + 1, increasing=True) / s[:, None]
    solution, *_ = np.linalg.lstsq(design, y / s, rcond=None)
    covariance = np.linalg.inv(design.T @ design)
    chi2 = float(np.sum((design @ solution - y / s) ** 2))
    dof = t.size - degree - 1
    probability = float(stats.chi2.sf(chi2, dof)) if dof > 0 else math.nan
    scale = max(1.0, chi2 / dof) if dof > 0 else 1.0
    return SlopeFit(degree, centre, solution, covariance * scale, chi2, dof, probability, scale)


def temperature_series(
    tables: Sequence[str | os.PathLike[str] | pd.DataFrame],
    *,
    name: str,
    degree: int | None = None,
) -> pd.DataFrame:
    """C_P(T) (or C_V(T)) from the slope of ⟨H⟩(T) (⟨E⟩(T)) over runs, plus the harmonic correction.

    Parameters
    ----------
    tables : sequence of path-like or pandas.DataFrame
        The ``qcorr corrected`` tables of the runs (one per temperature, same model and group).
    name : str
        The series' name: the ``system`` column of its rows.
    degree : int, optional
        Polynomial degree; default 1 for two or three runs, 2 for four or more.

    Returns
    -------
    pandas.DataFrame
        One row per run temperature (method ``corrected``, classical_source
        ``temperature_series``, J/(mol K) per mole of molecules), with the reference of the
        run's own heat-capacity row; ``attrs`` holds ``members``, ``fit`` and ``cautions``.
    """
    if not str(name).strip():
        raise ConfigError("--name: give the series a non-empty name")
    frames = [t if isinstance(t, pd.DataFrame) else read_table(t) for t in tables]
    labels = [f"table {i + 1} (in memory)" if isinstance(t, pd.DataFrame) else os.fspath(t)
              for i, t in enumerate(tables)]
    points, prop, group = series_points(frames, labels)
    degree = degree if degree is not None else (1 if len(points) <= 3 else 2)
    fit = fit_slope([p.temperature_K for p in points], [p.mean for p in points],
                    [p.mean_se for p in points], degree)
    mean_name = "<H>" if prop == "isobaric_heat_capacity" else "<E>"
    span = f"{points[0].temperature_K:g}-{points[-1].temperature_K:g} K"
    rows = []
    for p in points:
        value, se = fit.derivative(p.temperature_K)
        quantum, quantum_se = value + p.correction, math.hypot(se, p.correction_se)
        ref = {}
        if math.isfinite(p.reference):
            ref_se = p.reference_se if math.isfinite(p.reference_se) else 0.0
            ref = {"reference": p.reference, "reference_se": p.reference_se if math.isfinite(p.reference_se) else None,
                   "reference_source": p.reference_source, "deviation": quantum - p.reference,
                   "deviation_se": math.hypot(quantum_se, ref_se)}
        rows.append(TableRow(
            system=name, group=group, method="corrected", property=prop, temperature_K=p.temperature_K,
            basis="per_mole_molecules", unit=units.MOLAR_HEAT_CAPACITY, classical=value, quantum=quantum,
            correction=p.correction, classical_se=se, quantum_se=quantum_se, correction_se=p.correction_se,
            classical_source="temperature_series",
            note=(f"classical: d{mean_name}/dT of a weighted degree-{degree} polynomial through {len(points)} "
                  f"runs ({span}); correction: Delta C_V of run '{p.system}'"
                  + ("; pV and expansion terms classical" if prop == "isobaric_heat_capacity" else "")),
            **ref))
    cautions = []
    if fit.dof > 0 and fit.probability < FIT_PROBABILITY_LIMIT:
        cautions.append(f"Series '{name}': the degree-{degree} polynomial misses {mean_name}(T) beyond its "
                        f"errors (chi2 = {fit.chi_square:.3g} for {fit.dof} degrees of freedom, p = "
                        f"{fit.probability:.2g}); errors scaled by chi2/dof; consider more runs or --fit-degree")
    if fit.dof == 0:
        cautions.append(f"Series '{name}': as many coefficients as runs, so the fit cannot be checked; "
                        "add runs for a check of the polynomial")
    frame = rows_to_frame(rows)
    frame.attrs = {
        "method": f"heat capacity from the slope of {mean_name}(T) over runs, plus harmonic corrections",
        "members": [{"table": label, "system": p.system, "temperature_K": p.temperature_K}
                    for label, p in zip(labels, sorted(points, key=lambda q: q.temperature_K))],
        "options": {"name": name, "degree": degree},
        "fit": {"degree": degree, "centre_K": fit.centre_K, "coefficients_kJ_per_mol": fit.coefficients.tolist(),
                "chi_square": fit.chi_square, "dof": fit.dof,
                "probability": None if math.isnan(fit.probability) else fit.probability,
                "covariance_scale": fit.covariance_scale},
        "points": [{k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in vars(p).items()}
                   for p in points],
        "cautions": cautions,
    }
    return frame


def series_figure(frame: pd.DataFrame, experiment: Sequence[tuple[float, float, float]] = (),
                  experiment_label: str = "reference") -> Figure:
    """C_P(T) of a series: classical from fluctuations and from the slope, corrected, references.

    Parameters
    ----------
    frame : pandas.DataFrame
        A :func:`temperature_series` table (its ``attrs["points"]`` give the fluctuation values).
    experiment : sequence of (T in K, value, standard error or NaN)
        Extra reference points, drawn with the references of the rows.
    experiment_label : str
        Legend text of those points (their source).
    """
    prop = str(frame["property"].iloc[0])
    symbol = "C_P" if prop == "isobaric_heat_capacity" else "C_V"
    points = frame.attrs.get("points", [])
    figure = Figure(figsize=(6.4, 4.4))
    axes = figure.add_subplot()
    t = frame["temperature_K"].to_numpy()
    fluct = [(p["temperature_K"], p["fluctuation"], p["fluctuation_se"] or 0.0, p["correction"],
              p["correction_se"]) for p in points if p.get("fluctuation") is not None]
    if fluct:
        ft, fv, fe, cv, ce = (np.array(v, dtype=float) for v in zip(*fluct))
        axes.errorbar(ft - 0.6, fv, yerr=fe, fmt="o", mfc="none", color="0.45", capsize=3,
                      label=f"classical {symbol}, fluctuations")
        axes.errorbar(ft - 0.6, fv + cv, yerr=np.hypot(fe, ce), fmt="s", mfc="none", color="tab:orange",
                      capsize=3, label="corrected, from fluctuations")
    axes.errorbar(t, frame["classical"], yerr=frame["classical_se"], fmt="o-", color="0.1", capsize=3,
                  label=f"classical {symbol}, slope of the mean")
    axes.errorbar(t + 0.6, frame["quantum"], yerr=frame["quantum_se"], fmt="s-", color="tab:red", capsize=3,
                  label=f"corrected {symbol} (slope + harmonic correction)")
    refs = [(a, b, c) for a, b, c in zip(t, frame["reference"], frame["reference_se"]) if math.isfinite(b)]
    refs += [tuple(map(float, e)) for e in experiment]
    if refs:
        rt, rv, re = (np.array(v, dtype=float) for v in zip(*refs))
        sources = {s for s in frame["reference_source"] if s} | ({experiment_label} if len(experiment) else set())
        label = "; ".join(sorted(sources)) or experiment_label
        axes.errorbar(rt, rv, yerr=np.nan_to_num(re), fmt="D", color="tab:blue", capsize=3, label=label)
    axes.set_xlabel("temperature / K")
    axes.set_ylabel(f"{symbol} / ({units.pretty(units.MOLAR_HEAT_CAPACITY)}) per mole of molecules")
    axes.set_title(f"{frame['system'].iloc[0]}: {symbol}(T), classical and quantum-corrected")
    axes.legend(fontsize="small")
    axes.grid(alpha=0.3)
    figure.tight_layout()
    return figure
