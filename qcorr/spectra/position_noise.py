"""Rounding noise of stored positions in spectra made from differences of positions.

Model.  A position stored with rounding step p (0.01 Å for GROMACS XTC at its default
precision) carries an error e = Q(x) − x that is uniform on [−p/2, p/2], of variance
σ² = p²/12, white and independent of the motion, as long as the positions spread
smoothly over many steps (Widrow, Kollár & Liu [1]_; Widrow & Kollár [2]_).  The forward
difference v_n = (x_{n+1} − x_n)/Δt turns it into velocity noise with autocovariance
2σ²/Δt² at lag 0, −σ²/Δt² at lag ±1 and 0 beyond.

Expected spectrum [D].  The estimator's one-sided periodogram of a segment tapered by
w_n, P[m] = 2Δt |Σ w_n u_n e^{−2πimn/L}|² / Σ w_n² (:mod:`qcorr.spectra.estimator`), has
for this noise the exact expectation

    E P(ν_m) = 2Δt (σ²/Δt²) [2 − 2 ρ₁ cos(2π ν_m Δt)],   ρ₁ = Σ w_n w_{n+1} / Σ w_n²,

per coordinate (ρ₁ = 1 − O(1/L²) for the Hann taper, (L−1)/L untapered); after the
division by the difference's transfer function sinc²(πνΔt) (:mod:`qcorr.spectra.raw_vdos`)
it is the floor 2σ²·4π²ν²Δt (for ρ₁ = 1) that rises as ν², whose integral up to the
Nyquist frequency is (π²/3)σ²/Δt² per coordinate (methods notes §8.1).  The unbiased
autocorrelation of the untapered data has expectation equal to the autocovariance.

Mass weighting.  The spectrum sums m_j over atoms after removing the centre-of-mass
velocity of all N analysed atoms (total mass M).  Removing it projects the noise, so a
group g receives the noise of the effective mass

    m_g = M_g − 2 Σ_{j∈g} m_j²/M + M_g Σ_k m_k²/M²     [D]

per coordinate (M_g the group's mass; m_g → M_g for large N).

The expected floor is subtracted from every segment's raw spectrum and the expected
autocovariance from every segment's correlation, before normalisation; the noise's
random part stays in the segment scatter and hence in the standard errors.

Validity and refusals [D].  The rounding errors of consecutive frames are independent
only if the displacement between frames is spread over many steps.  For a Gaussian
displacement of standard deviation s (velocity components are Gaussian in equilibrium,
and the displacement over a frame is close to v Δt), the characteristic function of the
error [1]_ gives the correlation of consecutive errors

    c(s/p) = (6/π²) Σ_{k≥1} exp(−2π² k² s²/p²) / k²,

which makes the true floor smaller than the model's by the fraction c.  With
s = Δt (kT/m)^{1/2} per atom this bounds the *model error* of a group: the noise's
share of each atom times its c, over the group's degrees of freedom.  A model error
above :data:`MAX_MODEL_ERROR` (half the 1 % the temperature diagnostic treats as
harmless) is refused: it happens when atoms move less than about half a rounding step
per frame (c(0.5) = 0.0044, c(0.4) = 0.026).  The noise *swamps* the signal when its
expected share of a group's kinetic energy exceeds :data:`MAX_NOISE_SHARE` = 1/2 (a
signal-to-noise ratio below 1); that is refused too, before reading frames (predicted
from the stated temperature) and after (measured).

References
----------
.. [1] B. Widrow, I. Kollár, M.-C. Liu, "Statistical theory of quantization", IEEE Trans.
   Instrum. Meas. 45, 353 (1996), doi:10.1109/19.492748.
.. [2] B. Widrow, I. Kollár, Quantization Noise, Cambridge University Press (2008)
   (citation from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from qcorr import constants
from qcorr.errors import TrajectoryError
from qcorr.spectra.raw_vdos import raw_spectra
from qcorr.spectra.segments import SpectrumSettings, taper_window

__all__ = [
    "MAX_MODEL_ERROR",
    "MAX_NOISE_SHARE",
    "NoiseParts",
    "PositionNoise",
    "lag_one_overlap",
    "noise_masses",
    "rounding_correlation",
    "velocity_noise_power",
]

#: refused above: the expected noise share of a group's kinetic energy (signal-to-noise below 1)
MAX_NOISE_SHARE = 0.5
#: refused above: the rounding model's error bound, as a fraction of a group's kinetic energy
MAX_MODEL_ERROR = 0.005

#: u Å² ps⁻² in J
_U_A2_PER_PS2_J = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2


def lag_one_overlap(settings: SpectrumSettings) -> float:
    """ρ₁ = Σ w_n w_{n+1} / Σ w_n² of the estimator's taper (1 − O(1/L²) for Hann)."""
    w = taper_window(settings)
    return float(np.dot(w[:-1], w[1:]) / np.dot(w, w))


def noise_masses(masses: NDArray[np.float64], members: NDArray[np.bool_]) -> NDArray[np.float64]:
    """Effective noise mass m_g (u) of each group after centre-of-mass removal (module docstring).

    Parameters
    ----------
    masses : ndarray (n_channels,), u
    members : bool ndarray (n_groups, n_channels)
    """
    masses = np.asarray(masses, dtype=float)
    total = float(masses.sum())
    spread = float(np.sum(masses**2)) / total**2
    group_mass = members @ masses
    group_square = members @ masses**2
    return group_mass - 2.0 * group_square / total + group_mass * spread


def velocity_noise_power(frequency_Hz, settings: SpectrumSettings, step_A: float) -> NDArray[np.float64]:
    """Expected periodogram of the differenced rounding noise, per coordinate and unit mass.

    Returns the one-sided density in (Å/ps)²/Hz at *frequency_Hz* (before the transfer
    correction): 2Δt (σ²/Δt²)(2 − 2ρ₁ cos 2πνΔt), σ² = p²/12, Δt the frame spacing.
    """
    sigma2 = step_A**2 / 12.0
    dt_ps = settings.timestep_ps
    dt_s = dt_ps * constants.picosecond_s
    rho = lag_one_overlap(settings)
    nu = np.asarray(frequency_Hz, dtype=float)
    return 2.0 * dt_s * sigma2 / dt_ps**2 * (2.0 - 2.0 * rho * np.cos(2.0 * np.pi * nu * dt_s))


def rounding_correlation(displacement_per_step) -> NDArray[np.float64]:
    """c(s/p): correlation of consecutive rounding errors for Gaussian displacements (module docstring)."""
    r = np.atleast_1d(np.asarray(displacement_per_step, dtype=float))
    k = np.arange(1, 60)[:, None]
    return (6.0 / np.pi**2) * np.sum(np.exp(-2.0 * np.pi**2 * k**2 * r[None, :] ** 2) / k**2, axis=0)


def _kT(temperature_K: float) -> float:
    """kT in u Å² ps⁻²."""
    return constants.boltzmann_J_per_K * temperature_K / _U_A2_PER_PS2_J


@dataclass(frozen=True)
class NoiseParts:
    """What the spectrum file records about the subtracted noise (adds up across blocks: equal in all).

    Attributes
    ----------
    floor : ndarray (n_groups, n_wavenumber), cm
        Expected raw floor subtracted from every segment (same units as raw spectra).
    model_error : ndarray (n_groups,)
        Model-error bound as a fraction of the group's kinetic energy (degrees of freedom).
    step_A : float
        Rounding step, Å.
    """

    floor: NDArray[np.float64]
    model_error: NDArray[np.float64]
    step_A: float


@dataclass(frozen=True)
class PositionNoise:
    """The rounding-noise model of one run (see the module docstring).

    Attributes
    ----------
    step_A : float
        Rounding step p, Å (0: nothing to subtract).
    masses : ndarray (n_channels,), u
    members : bool ndarray (n_groups, n_channels)
    degrees_of_freedom : ndarray (n_groups,)
    settings : SpectrumSettings
    temperature_K : float
    """

    step_A: float
    masses: NDArray[np.float64]
    members: NDArray[np.bool_]
    degrees_of_freedom: NDArray[np.float64]
    settings: SpectrumSettings
    temperature_K: float

    @property
    def group_noise_mass(self) -> NDArray[np.float64]:
        """Effective noise mass of each group, u (:func:`noise_masses`)."""
        return noise_masses(self.masses, self.members)

    def floor(self, frequency_Hz) -> NDArray[np.float64]:
        """Expected raw floor (n_groups, n_freq), cm, after the sinc² division."""
        power = 3.0 * self.group_noise_mass[:, None] * velocity_noise_power(frequency_Hz, self.settings, self.step_A)
        return raw_spectra(power, np.asarray(frequency_Hz, dtype=float), self.temperature_K,
                           finite_difference_timestep_ps=self.settings.timestep_ps)

    def autocovariance(self, n_lag: int) -> NDArray[np.float64]:
        """Expected noise in the unnormalised correlation (n_groups, n_lag), u Å² ps⁻²."""
        out = np.zeros((self.members.shape[0], n_lag))
        per_mass = self.step_A**2 / 12.0 / self.settings.timestep_ps**2
        out[:, 0] = 3.0 * self.group_noise_mass * 2.0 * per_mass
        if n_lag > 1:
            out[:, 1] = -3.0 * self.group_noise_mass * per_mass
        return out

    def expected_share(self) -> NDArray[np.float64]:
        """Predicted noise share of each group's kinetic energy at the stated temperature."""
        noise = 3.0 * self.group_noise_mass * (np.pi**2 / 3.0) * self.step_A**2 / 12.0 \
            / self.settings.timestep_ps**2 / _kT(self.temperature_K)
        return noise / (noise + self.degrees_of_freedom)

    def model_error(self) -> NDArray[np.float64]:
        """Model-error bound of each group: Σ_j 3 n_j c(s_j/p) / dof (module docstring)."""
        if self.step_A == 0:
            return np.zeros(self.members.shape[0])
        kT = _kT(self.temperature_K)
        spread = np.sqrt(kT / self.masses) * self.settings.timestep_ps  # Å per frame
        noise = self.masses * (np.pi**2 / 3.0) * self.step_A**2 / 12.0 / self.settings.timestep_ps**2 / kT
        per_atom = 3.0 * noise * rounding_correlation(spread / self.step_A)
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(self.degrees_of_freedom > 0, self.members @ per_atom / self.degrees_of_freedom, 0.0)

    def parts(self, frequency_Hz) -> NoiseParts:
        """:class:`NoiseParts` on the estimator's frequency grid."""
        return NoiseParts(self.floor(frequency_Hz), self.model_error(), float(self.step_A))

    def check(self, names, where: str) -> None:
        """Refuse before reading frames if the predicted noise share or model error is too large.

        Raises
        ------
        TrajectoryError
            Naming the group, the step, the frame spacing and what to do.
        """
        if self.step_A == 0:
            return
        share, error = self.expected_share(), self.model_error()
        for g, name in enumerate(names):
            if share[g] > MAX_NOISE_SHARE:
                raise TrajectoryError(noise_swamps_message(name, share[g], self.step_A,
                                                           self.settings.timestep_ps, where, predicted=True))
            if error[g] > MAX_MODEL_ERROR:
                raise TrajectoryError(
                    f"the positions of {where} are rounded to {self.step_A:g} Å, and the atoms of group "
                    f"{name!r} move too little between frames ({self.settings.timestep_ps:g} ps apart) for "
                    f"the rounding to act as random noise: the noise model may be off by {error[g]:.1%} of "
                    f"the group's kinetic energy (limit {MAX_MODEL_ERROR:.1%}); save frames less often, at a "
                    "finer precision, or save velocities"
                )


def noise_swamps_message(name: str, share: float, step_A: float, timestep_ps: float, where: str, *,
                         predicted: bool) -> str:
    """The one-line refusal when rounding noise would be most of a group's measured kinetic energy."""
    how = "would be" if predicted else "was"
    return (
        f"the rounding of the positions of {where} to {step_A:g} Å {how} {share:.0%} of group {name!r}'s "
        f"kinetic energy from differences of frames {timestep_ps:g} ps apart (more than "
        f"{MAX_NOISE_SHARE:.0%}: the noise swamps the motion); save frames less often or at a finer "
        "precision, or save velocities"
    )


def measured_shares(raw_integral: NDArray[np.float64], floor_integral: NDArray[np.float64]) -> NDArray[np.float64]:
    """Noise share ∫floor / (raw integral before subtraction) of each group (0 where nothing moved)."""
    before = np.asarray(raw_integral, dtype=float) + np.asarray(floor_integral, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(before > 0, floor_integral / before, 0.0)


def check_measured_shares(names, shares, step_A: float, timestep_ps: float, where: str) -> None:
    """Refuse if the measured noise share of any group exceeds :data:`MAX_NOISE_SHARE`."""
    for name, share in zip(names, shares):
        if share > MAX_NOISE_SHARE and math.isfinite(share):
            raise TrajectoryError(noise_swamps_message(str(name), float(share), step_A, timestep_ps, where,
                                                       predicted=False))
