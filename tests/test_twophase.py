"""Tests of qcorr.thermo.twophase, hard_sphere_gas and rigid_rotor against outside sources (named beside each check)."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as sc
from scipy.integrate import quad

from qcorr.errors import ConfigError, PhysicsError
from qcorr.thermo import hard_sphere_gas as hs
from qcorr.thermo import rigid_rotor as rr
from qcorr.thermo import twophase as tp

R = sc.R
T298 = 298.15


# ---------------------------------------------------------------- fluidicity
def test_fluidicity_at_delta_one_matches_mpmath_root():
    # Oracle: independent root of the universal equation of Lin, Blanco,
    # Goddard, J. Chem. Phys. 119, 11792 (2003), found with mpmath (30 digits);
    # the team notes quote 0.541187.
    mpmath.mp.dps = 30
    d = mpmath.mpf(1)
    eq = lambda f: (2 * d**-4.5 * f**7.5 - 6 * d**-3 * f**5 - d**-1.5 * f**3.5
                    + 6 * d**-1.5 * f**2.5 + 2 * f - 2)
    root = mpmath.findroot(eq, 0.5)
    assert hs.fluidicity(1.0) == pytest.approx(float(root), abs=1e-12)
    assert round(float(root), 6) == 0.541187


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=1e-6, max_value=1e6))
def test_fluidicity_solves_equation_and_closed_form(delta):
    # Closed form f = (1 - y)^3 / (1 - y/2), y = f^{5/2}/delta^{3/2}: the
    # polynomial of Lin et al. (2003) rewritten in y (algebra, methods.md §3.1).
    f = hs.fluidicity(delta)
    assert 0.0 < f < 1.0
    y = hs.gas_packing_fraction(f, delta)
    assert f == pytest.approx((1 - y) ** 3 / (1 - y / 2), rel=1e-9, abs=1e-12)
    assert abs(hs.fluidicity_equation(f, delta)) < 1e-8


def test_fluidicity_limits():
    # Analytic limits of the universal equation: delta -> 0 gives f ~ delta^{3/5}
    # (y -> 1, f -> 2(1-y)^3 ... dominant balance), delta -> inf gives f -> 1.
    for d in (1e-8, 1e-10):
        assert hs.fluidicity(d) / d**0.6 == pytest.approx(1.0, rel=1e-2)
    assert hs.fluidicity(0.0) == 0.0
    assert hs.fluidicity(1e8) == pytest.approx(1.0, abs=1e-8)
    with pytest.raises(PhysicsError, match="normalised diffusivity"):
        hs.fluidicity(-1.0)


def test_normalized_diffusivity_from_D_and_S0_agree():
    # S(0) = 12 m N D / kT (Green-Kubo; Lin et al. 2003) and the two forms of
    # Delta in methods.md §3.1; water example: T = 298.15 K, 997.05 kg/m^3,
    # D = 2.3e-9 m^2/s gives Delta = 0.1452, f = 0.2260 (computed there).
    n, m_u, D = 1000, 18.01528, 2.3e-9
    rho = 997.05 / (m_u * 1e-3) * sc.N_A  # molecules per m^3
    vol_A3 = n / rho / 1e-30
    s0_s = 12 * m_u * sc.atomic_mass * n * D / (sc.k * T298)
    s0_cm = s0_s * sc.c * 100
    delta = hs.normalized_diffusivity(s0_cm, n, T298, m_u, vol_A3)
    assert hs.self_diffusion_from_zero_frequency(s0_cm, n, T298, m_u) == pytest.approx(D)
    alt = (8 / 3) * D * math.sqrt(math.pi * m_u * sc.atomic_mass / (sc.k * T298)) * rho ** (
        1 / 3) * (6 / math.pi) ** (2 / 3)
    assert delta == pytest.approx(alt, rel=1e-12)
    assert delta == pytest.approx(0.1452, abs=5e-4)
    assert hs.fluidicity(delta) == pytest.approx(0.2260, abs=5e-4)


@pytest.mark.parametrize("bad", [0.0, -5.0, float("nan")])
def test_normalized_diffusivity_rejects_bad_volume(bad):
    with pytest.raises(PhysicsError, match="volume"):
        hs.normalized_diffusivity(1.0, 10, 300.0, 40.0, bad)


# ---------------------------------------------------------------- gas DoS
def test_gas_dos_integral_and_zero_value():
    # Lorentzian S0/(1+(pi S0 x/(2G))^2) integrates to G over [0, inf) and
    # equals S0 at 0 (exact integral of a Lorentzian, Lin et al. 2003 Eq. for S_g).
    s0, g = 0.37, 123.0
    val, _ = quad(lambda x: hs.gas_dos(np.array([x]), s0, g)[0], 0, np.inf)
    assert val == pytest.approx(g, rel=1e-9)
    assert hs.gas_dos(np.array([0.0]), s0, g)[0] == s0


# ---------------------------------------------------------------- gas entropies
def test_sackur_tetrode_argon_matches_codata():
    # CODATA key value: Ar(g) S(298.15 K, 1 bar) = 154.846 +- 0.003 J/(mol K)
    # (Cox, Wagman, Medvedev, CODATA Key Values for Thermodynamics, 1989;
    # NIST-JANAF). Ideal gas: y = 0, volume per particle kT/p. Within 0.1 %.
    v_A3 = sc.k * T298 / sc.bar / 1e-30
    for form in hs.HARD_SPHERE_FORMS:
        s = hs.hard_sphere_entropy(T298, 39.948, v_A3, 0.0, form) * R
        assert s == pytest.approx(154.846, rel=1e-3)
        assert s == pytest.approx(154.846, abs=0.01)  # in fact to the stated digits


def test_hard_sphere_forms_differ_by_ln_z():
    # Carnahan & Starling, J. Chem. Phys. 51, 635 (1969): the two forms differ
    # by ln z(y) per particle (methods.md §3.2).
    y = 0.4392
    a = hs.hard_sphere_entropy(300.0, 18.0, 30.0, y, "published")
    b = hs.hard_sphere_entropy(300.0, 18.0, 30.0, y, "constant-volume")
    z = (1 + y + y * y - y**3) / (1 - y) ** 3
    assert a - b == pytest.approx(math.log(z), rel=1e-12)
    with pytest.raises(ConfigError, match="hard-sphere entropy form"):
        hs.hard_sphere_entropy(300.0, 18.0, 30.0, y, "bogus")


def test_cs_excess_entropy_matches_pressure_integral():
    # Independent: the CS excess Helmholtz energy is the integral of (z-1)/y dy
    # (thermodynamics of the Carnahan-Starling EOS); excess S/k = -A_ex/kT at
    # fixed N,V,T for hard spheres.  "constant-volume" minus the ideal part.
    y = 0.3
    a_ex, _ = quad(lambda t: (hs.carnahan_starling_compressibility(t) - 1) / t, 0, y)
    s_cv = hs.hard_sphere_entropy(300.0, 40.0, 50.0, y, "constant-volume")
    s_id = hs.hard_sphere_entropy(300.0, 40.0, 50.0, 0.0, "constant-volume")
    assert s_cv - s_id == pytest.approx(-a_ex, rel=1e-10)


def test_rigid_rotor_entropy_water_cccbdb():
    # NIST CCCBDB rotational constants of H2O: A 27.877, B 14.512, C 9.285 cm^-1,
    # sigma = 2; expected 43.77 J/(mol K) at 298.15 K (methods.md §3.3 [C]).
    # Independent route: S = R d(T ln q)/dT with the classical rotor partition
    # function q = (sqrt(pi)/sigma) prod (T/Theta)^{1/2}, differentiated by mpmath.
    c2 = sc.h * sc.c / sc.k * 100  # cm K
    theta = [c2 * b for b in (27.877, 14.512, 9.285)]
    s = rr.rigid_rotor_entropy(T298, theta, 2) * R

    def t_lnq(t):
        q = mpmath.sqrt(mpmath.pi) / 2 * mpmath.sqrt(t**3 / (theta[0] * theta[1] * theta[2]))
        return t * mpmath.log(q)

    expected = float(mpmath.diff(t_lnq, T298)) * R
    assert s == pytest.approx(expected, rel=1e-10)
    assert s == pytest.approx(43.77, abs=0.005)


def test_rigid_rotor_linear_and_moments():
    # Linear rotor S/k = 1 + ln(T/(sigma Theta)) (McQuarrie, Statistical
    # Mechanics, Ch. 6).  N2: B = 1.998 cm^-1, sigma = 2 -> 41.14 J/(mol K)
    # at 298.15 K (team notes §4.3, [C]); I = h/(8 pi^2 c B) checks the
    # moment -> Theta conversion.
    b = 1.998  # cm^-1
    moment_u_A2 = sc.h / (8 * math.pi**2 * sc.c * 100 * b) / sc.atomic_mass / 1e-20
    theta = rr.rotational_temperatures([moment_u_A2])
    assert theta[0] == pytest.approx(sc.h * sc.c * 100 * b / sc.k, rel=1e-12)
    assert rr.rigid_rotor_entropy(T298, theta, 2) * R == pytest.approx(41.144, abs=0.002)
    with pytest.raises(ConfigError, match="symmetry number"):
        rr.rigid_rotor_entropy(T298, theta, 0)


# ---------------------------------------------------------------- components
def _grid(xmax, n):
    return np.linspace(0.0, xmax, n)


def test_harmonic_crystal_gives_zero_fluidicity_and_debye_entropy():
    # Debye solid (S ~ x^2 up to x_D, no zero-frequency weight): Delta = 0,
    # f = 0, and 2PT is the harmonic solid.  Closed forms (Debye model,
    # e.g. Kittel, Introduction to Solid State Physics, Ch. 5; methods.md §4.1):
    # S/3Nk = (4/3) D3(x) - ln(1 - e^-x),  classical S/3Nk = 4/3 - ln x.
    n_atoms, t, theta = 500, 300.0, 300.0  # T/theta_D = 1
    c2 = sc.h * sc.c / sc.k * 100
    xd = theta / c2  # Debye wavenumber cm^-1
    x = _grid(xd * 1.2, 24001)
    s = np.where(x <= xd, 9 * n_atoms * x**2 / xd**3, 0.0)
    res = tp.two_phase_component("translation", x, s, molecule_count=n_atoms, temperature_K=t,
                                 mass_u=63.5, volume_A3=n_atoms * 11.8)
    assert res.fluidicity == 0.0 and res.normalized_diffusivity == 0.0
    d3 = 3 / 1.0**3 * quad(lambda z: z**3 / math.expm1(z), 0, 1.0)[0]
    s_debye = 3 * ((4 / 3) * d3 - math.log(-math.expm1(-1.0)))
    assert s_debye / 3 == pytest.approx(1.357896, abs=1e-6)  # methods.md §4.1 table
    assert res.entropy == pytest.approx(s_debye, rel=2e-4)  # grid: step discontinuity at x_D
    assert res.entropy_classical == pytest.approx(3 * (4 / 3 - math.log(1.0)), rel=2e-4)
    assert res.heat_capacity / 3 == pytest.approx(0.951732, rel=2e-4)  # Debye Cv, methods §4.1
    assert res.heat_capacity_classical == pytest.approx(3.0, rel=1e-4)
    # E_0 = (9/8) k theta per atom (Debye zero-point energy), in units of kT
    assert res.zero_point_energy == pytest.approx(9 / 8 * theta / t, rel=2e-4)


def test_einstein_vibration_component():
    # A narrow peak at u0 = 2: entropy and Cv per mode equal the quantum
    # oscillator W_S(2) = 0.458448743368, W_Cv(2) = 0.724061660966 (mpmath
    # values, methods.md §1.6).
    t = 300.0
    c2 = sc.h * sc.c / sc.k * 100
    x0 = 2 * t / c2
    x = _grid(3 * x0, 30001)
    width = x0 / 200
    s = np.exp(-0.5 * ((x - x0) / width) ** 2)
    s *= 3 * 100 / np.trapezoid(s, x)
    res = tp.vibrational_component(x, s, molecule_count=100, temperature_K=t)
    assert res.entropy / 3 == pytest.approx(0.458448743368, rel=2e-4)
    assert res.heat_capacity / 3 == pytest.approx(0.724061660966, rel=2e-4)
    assert res.fluidicity == 0.0


def _ou_dos(x, s0, dof):
    # DoS of an Ornstein-Uhlenbeck velocity (exponential VACF): the same
    # Lorentzian shape (methods.md §4.1 synthetic oracles).
    return s0 / (1 + (math.pi * s0 * x / (2 * dof)) ** 2)


def test_dilute_argon_gas_tends_to_sackur_tetrode():
    # Ideal-gas limit: argon at 298.15 K and 1 bar with its kinetic-theory
    # self-diffusion (~1.8e-5 m^2/s, order of magnitude from the Chapman-Enskog
    # theory): f -> 1, y -> 0 and 2PT gives the Sackur-Tetrode entropy,
    # CODATA 154.846 J/(mol K) (Cox, Wagman, Medvedev 1989), within 0.1 %.
    n, m, t = 1000, 39.948, T298
    vol = n * sc.k * t / sc.bar / 1e-30
    d = 1.8e-5
    s0 = 12 * m * sc.atomic_mass * n * d / (sc.k * t) * sc.c * 100
    width = 2 * 3 * n / (math.pi * s0)
    x = np.linspace(0, 4000 * width, 400001)
    s = _ou_dos(x, s0, 3 * n)  # not renormalised: the tail beyond the grid is simply absent
    res = tp.two_phase_component("translation", x, s, molecule_count=n, temperature_K=t,
                                 mass_u=m, volume_A3=vol)
    assert res.fluidicity > 0.99
    assert res.entropy * R == pytest.approx(154.846, rel=1e-3)
    assert res.heat_capacity == pytest.approx(1.5, rel=1e-2)  # monatomic ideal gas Cv = 3k/2


def test_gas_and_solid_split_conserves_dof_and_options():
    # Sum rule: gas dof 3fN plus solid dof 3N(1-f) = 3N (Lin et al. 2003).
    n, m, t, vol = 256, 39.948, 100.0, 256 * 47.0
    x = np.linspace(0, 400, 40001)
    s = 3 * n * (0.3 * _ou_dos(x, 4.0, 1.0) / np.trapezoid(_ou_dos(x, 4.0, 1.0), x)
                 + 0.7 * x**2 * np.exp(-x / 20) / np.trapezoid(x**2 * np.exp(-x / 20), x))
    res = tp.two_phase_component("translation", x, s, molecule_count=n, temperature_K=t,
                                 mass_u=m, volume_A3=vol, gas_volume="gas-particles")
    assert np.trapezoid(res.gas_dos, x) == pytest.approx(3 * n * res.fluidicity, rel=2e-3)
    assert np.trapezoid(res.gas_dos + res.solid_dos, x) == pytest.approx(3 * n, rel=1e-9)
    alt = tp.two_phase_component("translation", x, s, molecule_count=n, temperature_K=t,
                                 mass_u=m, volume_A3=vol, hard_sphere_form="constant-volume",
                                 gas_volume="gas-particles")
    z = hs.carnahan_starling_compressibility(res.packing_fraction)
    assert res.entropy - alt.entropy == pytest.approx(res.fluidicity * math.log(z), rel=1e-9)
    allp = tp.two_phase_component("translation", x, s, molecule_count=n, temperature_K=t,
                                  mass_u=m, volume_A3=vol, gas_volume="all-particles")
    assert res.entropy - allp.entropy == pytest.approx(
        -res.fluidicity * math.log(res.fluidicity), rel=1e-9)
    with pytest.raises(ConfigError, match="gas volume"):
        tp.two_phase_component("translation", x, s, molecule_count=n, temperature_K=t,
                               mass_u=m, volume_A3=vol, gas_volume="nope")


def test_rotation_needs_moments_and_uses_rigid_rotor():
    # Free-rotor limit: a very diffusive rotational DoS has f_r -> 1 and the
    # rotational entropy tends to the rigid-rotor value (water constants above).
    n, t = 500, T298
    c2 = sc.h * sc.c / sc.k * 100
    moments = [sc.h / (8 * math.pi**2 * sc.c * 100 * b) / sc.atomic_mass / 1e-20
               for b in (27.877, 14.512, 9.285)]
    vol = n * sc.k * t / sc.bar / 1e-30 * 1e3
    # S(0) chosen so that Delta = 1e4 (far into the gas-like limit)
    s0 = 1e4 / hs.normalized_diffusivity(1.0, n, t, 18.015, vol)
    x = np.concatenate([[0.0], np.geomspace(1e-6, 1e6, 200001) * 6 * n / (math.pi * s0)])
    s = _ou_dos(x, s0, 3 * n)
    s *= 3 * n / np.trapezoid(s, x)
    with pytest.raises(PhysicsError, match="principal moments"):
        tp.two_phase_component("rotation", x, s, molecule_count=n, temperature_K=t,
                               mass_u=18.015, volume_A3=vol)
    res = tp.two_phase_component("rotation", x, s, molecule_count=n, temperature_K=t,
                                 mass_u=18.015, volume_A3=vol, principal_moments_u_A2=moments,
                                 symmetry_number=2)
    theta = [c2 * b for b in (27.877, 14.512, 9.285)]
    s_rr = rr.rigid_rotor_entropy(t, theta, 2)
    assert res.fluidicity > 0.999
    assert res.entropy == pytest.approx(s_rr, abs=0.01)


def test_linear_rotor_rotation_component():
    # Linear molecule (2 rotational dof): in the gas limit the rotational entropy is
    # the linear rigid rotor 1 + ln(T/(sigma Theta)) (McQuarrie, Statistical
    # Mechanics, Ch. 6); N2 with B = 1.998 cm^-1, sigma = 2: 41.144 J/(mol K) at
    # 298.15 K (team notes §4.3 [C]).  Gas DoS integral = 2 f N.
    n, t = 500, T298
    moment = sc.h / (8 * math.pi**2 * sc.c * 100 * 1.998) / sc.atomic_mass / 1e-20
    vol = n * sc.k * t / sc.bar / 1e-30
    s0 = 1e4 / hs.normalized_diffusivity(1.0, n, t, 28.014, vol)
    x = np.concatenate([[0.0], np.geomspace(1e-6, 1e6, 200001) * 4 * n / (math.pi * s0)])
    s = _ou_dos(x, s0, 2 * n)
    res = tp.two_phase_component("rotation", x, s, molecule_count=n, temperature_K=t, mass_u=28.014,
                                 volume_A3=vol, principal_moments_u_A2=[0.0, moment, moment],
                                 symmetry_number=2)
    assert res.dof_per_molecule == pytest.approx(2.0, rel=1e-6)
    assert np.trapezoid(res.gas_dos, x) == pytest.approx(2 * n * res.fluidicity, rel=1e-4)
    assert res.entropy * R == pytest.approx(41.144, abs=0.01)
    assert res.heat_capacity == pytest.approx(1.0, rel=1e-3)  # 2 x k/2


def test_weighted_integral_keeps_leading_axes_and_refuses_bad_grids():
    # Docstring claims: leading axes are kept; the grid must start at 0 cm^-1.
    x = np.linspace(0, 500, 501)
    s = np.stack([np.exp(-((x - 200) / 30) ** 2), np.exp(-((x - 300) / 20) ** 2)])
    both = tp.weighted_integral(x, s, 300.0)
    for i in range(2):
        one = tp.weighted_integral(x, s[i], 300.0)
        for key in ("entropy", "energy", "heat_capacity", "energy_minus_classical", "dof"):
            assert both[key][i] == pytest.approx(one[key], rel=1e-14)
    with pytest.raises(ConfigError, match="start at 0"):
        tp.weighted_integral(x + 1.0, s[0], 300.0)
    with pytest.raises(ConfigError, match="weighting"):
        tp.weighted_integral(x, s[0], 300.0, "semi-classical")
