"""From mass-weighted velocity power to the raw VDOS per wavenumber.

:func:`vdos_per_wavenumber` scales a one-sided mass-weighted velocity power density
(u Å² ps⁻² per Hz) by 1/kT and the speed of light, so that its integral over wavenumber
is Σm⟨v²⟩/kT, the degrees of freedom at equipartition (Lin, Blanco, Goddard 2003 [1]_).
Velocities from finite differences of positions are attenuated by the difference's
power transfer function (:func:`finite_difference_power_transfer`); :func:`raw_spectra`
divides it out before any normalisation.

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, "The two-phase model for calculating
   thermodynamic properties of liquids from molecular dynamics", J. Chem. Phys.
   119, 11792 (2003), doi:10.1063/1.1624057.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import constants
from qcorr.errors import ConfigError

__all__ = [
    "FINITE_DIFFERENCE_SCHEMES",
    "finite_difference_power_transfer",
    "raw_spectra",
    "vdos_per_wavenumber",
]

#: accepted values of ``finite_difference_power_transfer(scheme=...)``
FINITE_DIFFERENCE_SCHEMES = ("forward", "central")


def finite_difference_power_transfer(
    frequency_Hz: ArrayLike, timestep_ps: float, scheme: str = "forward"
) -> NDArray[np.float64]:
    """Power transfer ``|H(nu)|^2`` of a finite-difference velocity estimate.

    For ``x(t) = exp(i 2 pi nu t)`` sampled every ``dt``:

    * forward (half-step) difference ``(x[n+1] - x[n])/dt``:
      ``|H|^2 = sinc^2(pi nu dt)``;
    * central difference ``(x[n+1] - x[n-1])/(2 dt)``: ``|H|^2 = sinc^2(2 pi nu dt)``,

    with ``sinc z = sin z / z``.  Dividing a spectrum of differenced positions by
    ``|H|^2`` restores the spectrum of the true velocity (for unaliased signals);
    the central factor vanishes at Nyquist.

    Parameters
    ----------
    frequency_Hz : array_like
        Frequencies, Hz.
    timestep_ps : float
        Spacing of the positions that were differenced, ps.
    scheme : {"forward", "central"}

    Returns
    -------
    ndarray
        Dimensionless factor, same shape as *frequency_Hz*.

    Examples
    --------
    An O-H stretch at 3700 cm^-1 sampled every 1 fs (frequency in Hz = wavenumber x c):

    >>> from qcorr import constants
    >>> nu = 3700.0 * constants.speed_of_light_cm_per_s
    >>> print(f"{finite_difference_power_transfer(nu, 0.001, 'central'):.4f}")
    0.8482
    >>> print(f"{finite_difference_power_transfer(nu, 0.001, 'forward'):.4f}")
    0.9602

    References
    ----------
    A. V. Oppenheim, R. W. Schafer, Discrete-Time Signal Processing, 3rd ed.,
    Pearson (2010), frequency response of a first-difference system (common practice).
    """
    if scheme not in FINITE_DIFFERENCE_SCHEMES:
        raise ConfigError(
            f"finite-difference scheme {scheme!r} is not known; use one of "
            f"{', '.join(FINITE_DIFFERENCE_SCHEMES)}"
        )
    nu_dt = np.asarray(frequency_Hz, dtype=np.float64) * (timestep_ps * constants.picosecond_s)
    if scheme == "central":
        nu_dt = 2.0 * nu_dt
    return np.sinc(nu_dt) ** 2  # numpy sinc(a) = sin(pi a)/(pi a)


#: (u Angstrom^2 ps^-2) expressed in J
_U_A2_PER_PS2_J = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2


def vdos_per_wavenumber(power: ArrayLike, temperature_K: float) -> NDArray[np.float64]:
    """VDOS per unit wavenumber from mass-weighted velocity power.

    ``S_nu = power / (k T)`` per Hz and ``S(wavenumber) = c S_nu`` with ``c`` in cm/s,
    so that the trapezoid integral over wavenumber (cm^-1) equals
    ``sum_j m_j <v_j^2> / (k T)`` (the degrees of freedom at equipartition) [1]_.

    Parameters
    ----------
    power : array_like
        One-sided mass-weighted velocity PSD, (u Angstrom^2 ps^-2)/Hz.
    temperature_K : float
        Temperature, K (> 0).

    Returns
    -------
    ndarray
        VDOS in cm (i.e. per cm^-1), same shape as *power*.

    Examples
    --------
    One argon atom (39.948 u) at equipartition holds ``m <v^2> = 3 kT``; a flat power
    density of that total spread over 0 .. 100 THz integrates to 3 degrees of freedom:

    >>> from qcorr import constants
    >>> kT = constants.boltzmann_J_per_K * 300.0
    >>> u_A2_per_ps2 = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2
    >>> m_v2 = 3 * kT / u_A2_per_ps2  # u (Angstrom/ps)^2
    >>> band_Hz = 100e12
    >>> vdos = vdos_per_wavenumber(m_v2 / band_Hz, 300.0)
    >>> print(f"{vdos * band_Hz / constants.speed_of_light_cm_per_s:.6f}")
    3.000000
    """
    if not (math.isfinite(temperature_K) and temperature_K > 0):
        raise ConfigError(f"--temperature must be positive and finite, got {temperature_K} K")
    kT = constants.boltzmann_J_per_K * temperature_K
    factor = _U_A2_PER_PS2_J / kT * constants.speed_of_light_cm_per_s
    return np.asarray(power, dtype=np.float64) * factor


def raw_spectra(power: np.ndarray, frequency_Hz: np.ndarray, temperature_K: float, *,
                finite_difference_timestep_ps: float | None = None) -> np.ndarray:
    """Raw VDOS per cm⁻¹ from mass-weighted velocity power, corrected for finite differences.

    Parameters
    ----------
    power : ndarray (..., n_freq)
        One-sided mass-weighted velocity PSD, (u Å² ps⁻²)/Hz (:class:`qcorr.spectra.estimator.SegmentPowers`).
    frequency_Hz : ndarray (n_freq,), Hz
    temperature_K : float
        Stated temperature, K.
    finite_difference_timestep_ps : float, optional
        If the velocities were forward differences of positions this far apart (ps),
        the spectrum is divided by the power transfer function sinc²(πνΔt) *before*
        any normalisation, so that the kinetic-energy deficit of the differences is
        restored where it was lost (methods notes §2.7; A. V. Oppenheim, R. W. Schafer,
        *Discrete-Time Signal Processing*, 3rd ed., 2010, first-difference response).

    Returns
    -------
    ndarray, same shape as *power*, cm
    """
    raw = vdos_per_wavenumber(power, temperature_K)
    if finite_difference_timestep_ps is not None:
        raw = raw / finite_difference_power_transfer(frequency_Hz, finite_difference_timestep_ps, "forward")
    return raw
