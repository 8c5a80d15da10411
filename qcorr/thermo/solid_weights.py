"""Integrals of a density of states against the harmonic weighting functions.

Used for the solid-like parts of two-phase thermodynamics (:mod:`qcorr.thermo.twophase`);
per-mode weights of Berens, Mackay, White, Wilson [1]_ from :mod:`qcorr.thermo.weights`.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, "Thermodynamics
   and quantum corrections from molecular dynamics for liquid water",
   J. Chem. Phys. 79, 2375 (1983).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError
from qcorr.thermo import weights

#: harmonic weights: quantum or classical oscillators
SOLID_WEIGHTS = ("quantum", "classical")

__all__ = ["SOLID_WEIGHTS", "weighted_integral"]


def _weights(u: NDArray[np.float64], kind: str) -> dict[str, NDArray[np.float64]]:
    """Per-mode weights (Berens et al. [1]_, from :mod:`qcorr.thermo.weights`); u > 0.

    Entropy in k, energy in kT (zero-point energy included), heat capacity in k.
    """
    if kind == "classical":
        return {
            "entropy": weights.entropy_classical(u),
            "energy": weights.energy_classical(u),
            "heat_capacity": weights.heat_capacity_classical(u),
            "energy_minus_classical": np.zeros_like(u),
        }
    return {
        "entropy": weights.entropy_quantum(u),
        "energy": weights.energy_quantum(u),
        "heat_capacity": weights.heat_capacity_quantum(u),
        "energy_minus_classical": weights.energy_correction(u),
    }


_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(24)


def weighted_integral(
    wavenumber_cm: ArrayLike,
    dos_cm: ArrayLike,
    temperature_K: float,
    weighting: str = "quantum",
) -> dict[str, float]:
    """Integrals of a DoS against the harmonic weighting functions.

    Parameters
    ----------
    wavenumber_cm : array (n,)
        Evenly or unevenly spaced, increasing grid in cm⁻¹ starting at 0.
    dos_cm : array (..., n)
        DoS per unit wavenumber (cm); leading axes are kept.
    temperature_K : float
        Temperature in K that enters u = hcν̃/kT.
    weighting : {"quantum", "classical"}
        Quantum harmonic oscillator or classical harmonic oscillator weights.

    Returns
    -------
    dict
        ``entropy`` (units of k), ``energy`` (units of kT, zero-point energy
        included for quantum weights; equals the dof for classical weights),
        ``heat_capacity`` (units of k), ``energy_minus_classical`` (kT;
        ∫S (W_E − 1) dν̃), and ``dof`` (∫S dν̃).  Arrays keep the leading axes.

    Notes
    -----
    The entropy weight diverges logarithmically at ν → 0 (``methods.md`` §1.5),
    so it is never evaluated at ν = 0: the interval [ν₀, ν₁] is integrated with
    24-point Gauss–Legendre quadrature of the linearly interpolated DoS (nodes
    avoid the end points), every other interval with the trapezoid rule.
    """
    if weighting not in SOLID_WEIGHTS:
        raise ConfigError(f"weighting={weighting!r} is not one of {SOLID_WEIGHTS}")
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(dos_cm, dtype=float)
    if x.ndim != 1 or x.size < 3 or s.shape[-1] != x.size:
        raise ConfigError("wavenumber grid must be 1-D with >= 3 points matching the DoS")
    if temperature_K <= 0:
        raise ConfigError(f"temperature {temperature_K} K must be positive")
    if x[0] != 0.0:
        raise ConfigError("wavenumber grid must start at 0 cm-1")
    c2 = C.second_radiation_constant_cm_K
    u = c2 * x[1:] / temperature_K
    w = _weights(u, weighting)
    dx = np.diff(x)
    # first interval: Gauss-Legendre on the linear interpolant of S
    xg = 0.5 * x[1] * (_GAUSS_X + 1.0)
    sg = s[..., :1] + (s[..., 1:2] - s[..., :1]) * (xg / x[1])
    wg = _weights(c2 * xg / temperature_K, weighting)
    out: dict[str, float] = {}
    for name in ("entropy", "energy", "heat_capacity", "energy_minus_classical"):
        first = 0.5 * x[1] * np.sum(sg * wg[name] * _GAUSS_W, axis=-1)
        f = s[..., 1:] * w[name]
        rest = np.sum(0.5 * (f[..., 1:] + f[..., :-1]) * dx[1:], axis=-1)
        out[name] = first + rest
    out["dof"] = np.trapezoid(s, x, axis=-1)
    return out
