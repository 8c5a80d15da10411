"""Checks on a finished spectrum: aliasing, resolution, temperature, centre-of-mass drift, sum rule.

Each check returns a :class:`Diagnostic` (check name, ``"ok"`` or ``"warning"``,
one-line message).  :func:`run_diagnostics` runs all of them on a spectrum
dataset (:func:`diagnose` also records them in the dataset); :func:`announce` emits
the warnings as :class:`~qcorr.errors.QcorrWarning`.
The list is stored in the spectrum file as the JSON attribute ``diagnostics``.

Thresholds (module constants): those of the aliasing, resolution and centre-of-mass checks
are common practice, not published standards; the temperature and sum-rule limit is
statistical and derived below ("Kinetic temperature").

* aliasing: more than :data:`ALIASING_FRACTION` of a group's spectral weight
  lies in the top :data:`ALIASING_BAND` of the band below Nyquist.  Aliasing
  folds power above Nyquist back into the band without changing the sum rule,
  so only the *shape* near Nyquist can reveal it (methods notes §2.6; M. P.
  Allen, D. J. Tildesley, *Computer Simulation of Liquids*, 2nd ed., OUP 2017,
  §8.1 on sampling intervals).
* resolution: fewer than :data:`MIN_SEGMENTS` segments give no usable
  standard error; a resolution coarser than :data:`MAX_RESOLUTION_WAVENUMBER`
  blurs low-frequency bands.
* temperature and sum rule: the mean kinetic temperature of a group, T_kin/T =
  raw integral / degrees of freedom, differs from 1 by more than its
  statistical scatter allows (see "Kinetic temperature" below).  Both checks
  use the same ratio and the same limit; the temperature message points at the
  thermostat and equilibration, the sum-rule message at the degree-of-freedom
  count, masses and units.

Kinetic temperature
-------------------
The raw integral of segment s is Σm⟨v²⟩/kT averaged over that segment with the
taper's weights w_n²/Σw_n² (the estimator's Parseval identity), so
x_s = raw_s/dof = T_kin,s/T, and the file's ratio T_kin/T is their mean.  Its
statistical scatter is estimated as follows.

* Standard error from the segments (block averaging, H. Flyvbjerg, H. G.
  Petersen, J. Chem. Phys. 91, 461 (1989), doi:10.1063/1.457480): the scatter
  of the segment means includes the time correlation of the kinetic energy up
  to about a segment length.  Overlapping tapered segments are correlated; with
  a_t the weight of frame t in the overall mean and b_n = w_n²/Σw² the weights
  within a segment, K_eff = Σ_n b_n² / Σ_t a_t² is the number of independent
  segments the mean is worth when the kinetic energy decorrelates within a few
  frames (exact for uncorrelated frames; the same construction as P. D. Welch's
  effective count for averaged periodograms, IEEE Trans. Audio Electroacoust.
  15, 70 (1967), but for a windowed *mean*, whose overlap correlation is
  Σ b_n b_(n+D) / Σ b_n², 3/70 for Hann segments at 50 % overlap, instead of
  Welch's ρ² = 1/36).  The sample variance s² of K correlated segments is low by
  the factor (K/(K−1))(1 − 1/K_eff); correcting for it gives
  SE² = s² (K − 1) / (K (K_eff − 1)), equal to s²/K for independent segments.
* Ideal canonical bounds from the degrees of freedom f: in the canonical
  ensemble 2K/kT is χ²-distributed with f degrees of freedom, so one
  instantaneous T_kin scatters by var(T_kin)/T² = 2/f (D. Frenkel, B. Smit,
  Understanding Molecular Simulation, 2nd ed., Academic Press 2002, section on
  the canonical ensemble's temperature; section number from memory).  If every
  frame were an independent sample, the standard error of the weighted mean
  would be sqrt(2/f · Σ_t a_t²): the *lower* bound (positively correlated
  frames only raise it).  A mean of any stationary series scatters no more
  than one sample, so sqrt(2/f) is the *upper* bound; the microcanonical
  ensemble's kinetic-energy variance is smaller still, by 1 − f k/(2 C_V)
  (J. L. Lebowitz, J. K. Percus, L. Verlet, Phys. Rev. 153, 250 (1967)).
* Warning limit: |T_kin/T − 1| > :data:`KINETIC_TEMPERATURE_FLOOR` + the
  statistical allowance, where the allowance is t·SE with t the quantile of
  Student's t distribution (Student, Biometrika 6, 1 (1908)) for K_eff − 1
  degrees of freedom (an approximation for correlated segments) at the two-sided
  probability :data:`FALSE_WARNING_PROBABILITY` = 0.27 %, the probability of
  a normal deviate beyond 3 standard deviations ("3 standard errors", common
  practice).  The quantile, not 3, is used because the standard error is itself
  estimated from a few segments: with 7 segments t ≈ 5, with 4 about 10, so the
  false-warning rate stays 0.27 % per group for any segment count.  The
  allowance is kept between 3 × the canonical lower bound and 3 × the upper
  bound (sqrt(2/f)); with fewer than two segments (no scatter) it is
  3 × sqrt(2/f).
* :data:`KINETIC_TEMPERATURE_FLOOR` = 1 % is our choice, for systematic
  deviations that are not set-up errors and do not matter: a mismatch δ moves
  every u = hcν̃/kT by the fraction δ, and a heat-capacity correction by about
  1.5 δ between T = 0.25 and 0.5 θ_D (logarithmic slope of the Debye-model ΔCv,
  computed in the methods notes §4.1 table) – 1.5 % for δ = 1 %, below the
  accuracy of the harmonic model itself
  (e.g. 0.5–9.5 % in the entropy of TIP4P water, J. Zielkiewicz, J. Chem. Phys.
  128, 196101 (2008), doi:10.1063/1.2921161).  It is an order of magnitude below the set-up errors the
  check is for: a constraint count off by one per water molecule moves T_kin/T
  by 12–20 % (9/8 for flexible water, 6/7 or 6/5 for rigid water; 6/9 when all
  three are forgotten), velocities read in the wrong length unit by a factor of
  100, hydrogen given deuterium's mass by 67 % in water (each atom carries the
  same 3kT/2, so the ratio is 1/3 + 2/3 · 2).

These checks warn; they never stop a run.  Gross mismatches (a kinetic
temperature off by a factor) are left to a separate refusal.
"""

from __future__ import annotations

import json
import math
import warnings
from dataclasses import asdict, dataclass

import numpy as np
from scipy import special

from qcorr import constants
from qcorr.errors import QcorrWarning
from qcorr.lazy_modules import lazy

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

ALIASING_BAND = 0.05
ALIASING_FRACTION = 1e-3
MIN_SEGMENTS = 4
MAX_RESOLUTION_WAVENUMBER = 20.0
COM_KINETIC_LIMIT = 10.0
#: standard deviations of a normal variable that set the false-warning probability below
#: ("3 standard errors", common practice)
NORMAL_LEVEL = 3.0
#: two-sided probability of a false temperature/sum-rule warning per group: that of a normal
#: deviate beyond NORMAL_LEVEL standard deviations, 2 * scipy.stats.norm.sf(3) = 0.0027
#: (``scipy.special.ndtr(-z)`` is what ``scipy.stats.norm.sf(z)`` evaluates)
FALSE_WARNING_PROBABILITY = float(2.0 * special.ndtr(-NORMAL_LEVEL))


def student_t_quantile(upper_tail: float, dof: float) -> float:
    """The value a Student-t variable with *dof* (> 0) degrees of freedom exceeds with probability *upper_tail*.

    Equal to ``scipy.stats.t.isf(upper_tail, dof)``, which evaluates ``-scipy.special.stdtrit(dof,
    upper_tail)`` (the distribution is symmetric, M. Abramowitz, I. A. Stegun, Handbook of
    Mathematical Functions, NBS (1964), 26.7); called directly because importing
    ``scipy.stats`` costs about 0.6 s of CPU time per ``qcorr spectrum`` run (issue 16).
    """
    return float(-special.stdtrit(dof, upper_tail))


#: relative deviation of T_kin/T always tolerated (systematic, harmless; see module docstring)
KINETIC_TEMPERATURE_FLOOR = 0.01

#: u Å² ps⁻² in J
_U_A2_PER_PS2_J = constants.atomic_mass_kg * (constants.angstrom_m / constants.picosecond_s) ** 2


@dataclass(frozen=True)
class Diagnostic:
    """One check: name, ``"ok"`` or ``"warning"``, and a one-line message."""

    check: str
    status: str
    message: str


def _status(bad: bool) -> str:
    return "warning" if bad else "ok"


def check_aliasing(ds: xr.Dataset) -> Diagnostic:
    """Fraction of each group's spectral weight within the top 5 % band below Nyquist."""
    wn = ds["wavenumber"].values
    nyquist = float(ds.attrs["nyquist_wavenumber"])
    band = wn >= (1.0 - ALIASING_BAND) * nyquist
    worst_name, worst = "", 0.0
    for name in ds["group"].values:
        s = ds["vdos"].sel(group=name).values
        total = np.trapezoid(s, wn)
        if band.sum() >= 2 and total > 0:
            frac = float(np.trapezoid(s[band], wn[band]) / total)
        else:
            frac = float(s[-1] * (wn[1] - wn[0]) / total) if total > 0 else 0.0
        if frac > worst:
            worst_name, worst = str(name), frac
    bad = worst > ALIASING_FRACTION
    msg = (
        f"{worst:.2%} of group {worst_name!r}'s spectral weight lies within {ALIASING_BAND:.0%} of "
        f"the Nyquist frequency ({nyquist:.0f} cm-1)"
    )
    if bad:
        msg += "; power above Nyquist may be folded back (aliased): save frames more often"
    elif not worst_name:
        msg = f"no spectral weight within {ALIASING_BAND:.0%} of the Nyquist frequency ({nyquist:.0f} cm-1)"
    return Diagnostic("aliasing", _status(bad), msg)


def check_resolution(ds: xr.Dataset) -> Diagnostic:
    """Resolution 1/(segment length) against the trajectory length (number of segments)."""
    n_seg = int(ds.sizes["segment"])
    res = float(ds.attrs["resolution_wavenumber"])
    seg_ps = float(ds.attrs["segment_length_ps"])
    used_ps = float(ds.attrs["frames_used"]) * float(ds.attrs["timestep_ps"])
    msg = (
        f"resolution {res:.3g} cm-1 from {seg_ps:g} ps segments; {n_seg} segments over "
        f"{used_ps:g} ps of trajectory"
    )
    bad = False
    window = int(ds.attrs.get("segment_count_window", n_seg) or n_seg)
    if n_seg < MIN_SEGMENTS and int(ds.attrs.get("block_count", 1) or 1) > 1 and window >= MIN_SEGMENTS:
        # one frame block of a split run: its errors come from the joined spectrum
        msg += f"; this block of {int(ds.attrs['block_count'])} holds {n_seg} of the window's {window} segments"
    elif n_seg < MIN_SEGMENTS:
        bad = True
        msg += f"; fewer than {MIN_SEGMENTS} segments give no reliable standard error: use a longer trajectory or a shorter --segment-ps"
    if res > MAX_RESOLUTION_WAVENUMBER:
        bad = True
        msg += f"; coarser than {MAX_RESOLUTION_WAVENUMBER:g} cm-1 blurs low-frequency bands: use a longer --segment-ps"
    return Diagnostic("resolution", _status(bad), msg)


@dataclass(frozen=True)
class KineticTemperatureStatistics:
    """Mean kinetic temperature of one group and its statistical scatter (all relative to T).

    Attributes
    ----------
    group : str
    ratio : float
        T_kin/T = raw integral / degrees of freedom (mean of the segment ratios).
    segments : int
        Segments K in the file.
    effective_segments : float
        K_eff = Σ b² / Σ a² (module docstring); K for non-overlapping segments.
    standard_error : float
        Relative standard error of the ratio from the segment scatter (NaN if K < 2).
    canonical_lower : float
        sqrt(2/f Σa²): the standard error if every frame were an independent canonical sample.
    canonical_single : float
        sqrt(2/f): the canonical scatter of one instantaneous kinetic temperature.
    student_t : float
        Quantile of Student's t for K_eff − 1 degrees of freedom at
        :data:`FALSE_WARNING_PROBABILITY` (NaN if K_eff ≤ 1).
    limit : float
        Warning limit on |ratio − 1|: :data:`KINETIC_TEMPERATURE_FLOOR` + statistical allowance.
    """

    group: str
    ratio: float
    segments: int
    effective_segments: float
    standard_error: float
    canonical_lower: float
    canonical_single: float
    student_t: float
    limit: float

    @property
    def deviation(self) -> float:
        """T_kin/T − 1."""
        return self.ratio - 1.0

    @property
    def standard_errors(self) -> float:
        """Deviation in units of the standard error used (segment estimate or canonical bound)."""
        se = self.standard_error if math.isfinite(self.standard_error) else self.canonical_single
        se = max(se, self.canonical_lower)
        return self.deviation / se if se > 0 else math.inf

    @property
    def exceeded(self) -> bool:
        return abs(self.deviation) > self.limit


def _taper(segment_frames: int, taper: str) -> np.ndarray:
    """The estimator's taper w[n] (periodic Hann or ones; qcorr.spectra.estimator.taper_window)."""
    n = np.arange(segment_frames)
    if taper == "hann":
        return 0.5 - 0.5 * np.cos(2.0 * np.pi * n / segment_frames)
    return np.ones(segment_frames)


def frame_weights(ds: xr.Dataset) -> tuple[np.ndarray, np.ndarray]:
    """(a, b): weight a_t of each frame in the file's mean kinetic temperature, and the weights
    b_n = w_n²/Σw² of the frames within one segment (both sum to 1).

    Segment k (index ``segment`` in the frame window) starts ``k · hop`` frames after the
    window's first segment, hop = L − round(overlap L), as in the estimator.
    """
    L = int(ds.attrs["segment_frames"])
    overlap = float(ds.attrs.get("segment_overlap", 0.0))
    hop = max(1, L - round(overlap * L))
    w2 = _taper(L, str(ds.attrs.get("taper", "none"))) ** 2
    b = w2 / w2.sum()
    index = np.asarray(ds["segment"].values, dtype=np.int64)
    starts = (index - index.min()) * hop
    a = np.zeros(int(starts.max()) + L)
    for start in starts:
        a[start:start + L] += b / len(starts)
    return a, b


def kinetic_temperature_statistics(ds: xr.Dataset) -> list[KineticTemperatureStatistics]:
    """:class:`KineticTemperatureStatistics` of every group with positive degrees of freedom."""
    raw = np.asarray(ds["raw_integral"].values, dtype=float)
    dof = np.asarray(ds["degrees_of_freedom"].values, dtype=float)
    names = [str(g) for g in ds["group"].values]
    per_segment = (np.asarray(ds["raw_integral_segments"].values, dtype=float)
                   if "raw_integral_segments" in ds.variables else None)
    k = int(per_segment.shape[1]) if per_segment is not None else 0
    if k >= 1 and "segment_frames" in ds.attrs:
        a, b = frame_weights(ds)
        sum_a2 = float(np.sum(a * a))
        k_eff = float(np.sum(b * b)) / sum_a2
    else:
        sum_a2, k_eff = math.nan, float(k)
    z = NORMAL_LEVEL
    t_q = student_t_quantile(FALSE_WARNING_PROBABILITY / 2.0, k_eff - 1.0) if k_eff > 1.0 else math.nan
    out = []
    for g, name in enumerate(names):
        if not dof[g] > 0:
            continue
        single = math.sqrt(2.0 / dof[g])
        lower = math.sqrt(2.0 / dof[g] * sum_a2) if math.isfinite(sum_a2) else 0.0
        if per_segment is not None and k >= 2 and k_eff > 1.0:
            x = per_segment[g] / dof[g]
            se = float(np.std(x, ddof=1)) * math.sqrt((k - 1) / (k * (k_eff - 1.0)))
            allowance = min(max(t_q * se, z * lower), z * single)
        else:
            se = math.nan
            allowance = z * single
        out.append(KineticTemperatureStatistics(
            group=name, ratio=float(raw[g] / dof[g]), segments=k, effective_segments=k_eff,
            standard_error=se, canonical_lower=lower, canonical_single=single, student_t=t_q,
            limit=KINETIC_TEMPERATURE_FLOOR + allowance,
        ))
    return out


def _worst(ds: xr.Dataset) -> KineticTemperatureStatistics | None:
    """The group whose deviation is largest relative to its warning limit."""
    found = kinetic_temperature_statistics(ds)
    return max(found, key=lambda s: abs(s.deviation) / s.limit) if found else None


def _scatter_text(s: KineticTemperatureStatistics) -> str:
    """'-2.39 % = -1.6 standard errors (...); warning beyond ±8.6 %' for the messages."""
    if math.isfinite(s.standard_error):
        basis = (f"standard error {s.standard_error:.2%} from the scatter of {s.segments} segments, "
                 f"canonical bound for independent frames {s.canonical_lower:.2%}")
    else:
        basis = (f"no segment scatter ({s.segments} segment(s)): canonical scatter of one sample "
                 f"{s.canonical_single:.2%}")
    return (f"{s.deviation:+.2%} = {s.standard_errors:+.1f} standard errors ({basis}); "
            f"warning beyond ±{s.limit:.1%}")


def check_temperature(ds: xr.Dataset) -> Diagnostic:
    """Mean kinetic temperature of each group against the stated temperature and its scatter."""
    stated = float(ds.attrs["temperature_K"])
    s = _worst(ds)
    if s is None:
        return Diagnostic("temperature", "ok", "no group with degrees of freedom to check")
    msg = (f"kinetic temperature of group {s.group!r} is {s.ratio * stated:.2f} K, stated {stated:g} K: "
           + _scatter_text(s))
    if s.exceeded:
        msg += ("; check --temperature, equilibration and thermostat, or the degrees of freedom "
                "(--constraints)")
    return Diagnostic("temperature", _status(s.exceeded), msg)


def check_centre_of_mass(ds: xr.Dataset) -> Diagnostic:
    """Centre-of-mass kinetic energy before removal against its equipartition share 3kT/2."""
    mv2 = float(ds.attrs["centre_of_mass_mv2_u_A2_per_ps2"])
    kT = constants.boltzmann_J_per_K * float(ds.attrs["temperature_K"])
    ratio = mv2 * _U_A2_PER_PS2_J / (3.0 * kT)
    total_mass = float(ds["group_mass"].sel(group="total"))
    speed = float(np.sqrt(mv2 / total_mass)) if total_mass > 0 else 0.0
    bad = ratio > COM_KINETIC_LIMIT
    msg = (
        f"centre-of-mass speed before removal {speed:.3g} A/ps; its kinetic energy is "
        f"{ratio:.3g} times the equipartition share 3kT/2"
    )
    if bad:
        msg += (
            f" (over {COM_KINETIC_LIMIT:g}): the system drifts; it was removed per frame, but check "
            "the simulation's centre-of-mass motion removal"
        )
    return Diagnostic("centre_of_mass_drift", _status(bad), msg)


def check_sum_rule(ds: xr.Dataset) -> Diagnostic:
    """Raw integral Σm⟨v²⟩/kT against the degrees of freedom of each group and its scatter."""
    s = _worst(ds)
    if s is None:
        return Diagnostic("sum_rule", "ok", "no group with degrees of freedom to check")
    g = [str(x) for x in ds["group"].values].index(s.group)
    raw = float(ds["raw_integral"].values[g])
    dof = float(ds["degrees_of_freedom"].values[g])
    msg = (f"raw integral of group {s.group!r} is {raw:.6g} for {dof:.6g} degrees of freedom: "
           + _scatter_text(s))
    if s.exceeded:
        msg += ("; check constraints (--constraints), masses (--mass), velocity units "
                "(--lammps-units) and --temperature; the spectrum was normalised to the degrees of "
                "freedom anyway")
    return Diagnostic("sum_rule", _status(s.exceeded), msg)


def check_kinetic_series(ds: xr.Dataset) -> Diagnostic:
    """Informational: the per-frame kinetic energy's variance against the canonical one, the
    change of the total momentum and the kinetic energy of the two halves of the run (they back
    up a declared ensemble; judged only when one is declared, :mod:`qcorr.baselines.kinetic`)."""
    from qcorr.spectra.kinetic_series import series_diagnostics

    found = series_diagnostics(ds)
    if not found:
        return Diagnostic("kinetic_energy_series", "ok", "no per-frame kinetic energy in this file")
    x, x_se = found["kinetic_variance_ratio"]
    halves = found["kinetic_energy_halves_kJ_per_mol"]
    return Diagnostic("kinetic_energy_series", "ok", (
        f"over {found['frames']} frames, kinetic-energy variance {x:.3f} ± {x_se:.3f} times the canonical "
        "(f/2)(kT)^2 (1 in NVT/NPT, below 1 in NVE); total-momentum variance "
        f"{found['momentum_change_ratio']:.3g} times 3MkT (0 when conserved); mean kinetic energy "
        f"{halves[0]:.6g} and {halves[1]:.6g} kJ/mol in the two halves "
        f"({found['kinetic_energy_halves_standard_errors_apart']:.1f} standard errors apart)"))


ALL_CHECKS = (check_aliasing, check_resolution, check_temperature, check_centre_of_mass, check_sum_rule,
              check_kinetic_series)


def run_diagnostics(ds: xr.Dataset) -> list[Diagnostic]:
    """Run every check on a spectrum dataset (its ``diagnostics`` attribute is not needed).

    :data:`ALL_CHECKS`, then the checks of how the input was read
    (:func:`qcorr.spectra.input_checks.check_time_axis`, ``check_position_noise``).
    """
    from qcorr.spectra.input_checks import check_position_noise, check_time_axis

    return [check(ds) for check in (*ALL_CHECKS, check_time_axis, check_position_noise)]


def diagnose(ds: xr.Dataset) -> list[Diagnostic]:
    """Run every check and record the list in ``ds.attrs["diagnostics"]`` (JSON); return it.

    Warnings are not emitted here (see :func:`announce`).
    """
    checks = run_diagnostics(ds)
    ds.attrs["diagnostics"] = to_json(checks)
    return checks


def to_json(diagnostics: list[Diagnostic]) -> str:
    """JSON list of ``{"check","status","message"}`` for the ``diagnostics`` attribute."""
    return json.dumps([asdict(d) for d in diagnostics], sort_keys=True)


def announce(diagnostics: list[Diagnostic], stacklevel: int = 2) -> None:
    """Emit every warning as a :class:`~qcorr.errors.QcorrWarning`.

    *stacklevel* is passed to :func:`warnings.warn` (2: the caller of this function).
    """
    for d in diagnostics:
        if d.status != "ok":
            warnings.warn(f"{d.check}: {d.message}", QcorrWarning, stacklevel=stacklevel)
