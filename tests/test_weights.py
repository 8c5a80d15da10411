"""Tests of the harmonic weighting functions (qcorr.thermo.weights).

Outside sources of the expected values:

* an independent 40-digit mpmath evaluation of the textbook harmonic-oscillator
  formulas, made here in the test (McQuarrie, Statistical Mechanics, ch. 8;
  corrections as defined by Berens, Mackay, White, Wilson, J. Chem. Phys. 79,
  2375 (1983));
* thermodynamic identities S = (E - A)/T and Cv = dE/dT (exact);
* the classical (equipartition) limit u -> 0 (exact).
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest

from qcorr.errors import ConfigError, QcorrError
from qcorr.thermo import weights as w

mp.mp.dps = 40


def _mp_reference(u: float) -> dict[str, mp.mpf]:
    """40-digit values of every weighting function at the exact binary value of u."""
    u = mp.mpf(u)
    log1mexp = mp.log1p(-mp.exp(-u))
    bose = u / mp.expm1(u)
    cv = (u / 2 / mp.sinh(u / 2)) ** 2
    return {
        "thermal_energy_quantum": bose,
        "thermal_energy_correction": bose - 1,
        "energy_quantum": u / 2 * mp.coth(u / 2),
        "energy_correction": u / 2 * mp.coth(u / 2) - 1,
        "zero_point_energy_quantum": u / 2,
        "zero_point_energy_correction": u / 2,
        "heat_capacity_quantum": cv,
        "heat_capacity_correction": cv - 1,
        "entropy_quantum": bose - log1mexp,
        "entropy_classical": 1 - mp.log(u),
        "entropy_correction": bose - log1mexp - 1 + mp.log(u),
        "helmholtz_free_energy_quantum": mp.log(2 * mp.sinh(u / 2)),
        "helmholtz_free_energy_classical": mp.log(u),
        "helmholtz_free_energy_correction": mp.log(mp.sinh(u / 2) / (u / 2)),
    }


# log-spaced grid over the required range, plus the roots of ln(2 sinh(u/2))
# (u0 = 2 asinh(1/2)) and of 1 - ln u (u = e), the branch points of the
# implementation (1, 0.5, 2, 1.5, 5, 50, ln 2) and their neighbours
_GRID = np.concatenate(
    [
        np.logspace(-8, 3, 881),
        [float(2 * mp.asinh(mp.mpf(1) / 2)), math.e, 1.0, 0.5, 2.0, 1.5, 5.0, 50.0, math.log(2)],
        np.nextafter([1.0, 0.5, 2.0, 1.5, 5.0, 50.0, math.log(2)], 0),
        np.nextafter([1.0, 0.5, 2.0, 1.5, 5.0, 50.0, math.log(2)], 10),
    ]
)
_REFERENCE = [(float(u), _mp_reference(float(u))) for u in _GRID]
# the largest finite double is ~1.8e308 and the smallest normal one ~2.2e-308:
# values below 1e-300 (Cv and S weights beyond u ~ 700) cannot be held to 1e-12
# relative in binary64, so they are checked for sign and size only
_NORMAL_FLOOR = 1e-300


@pytest.mark.parametrize("name", list(_REFERENCE[0][1]))
def test_weight_matches_40_digit_mpmath(name: str) -> None:
    """Relative error < 1e-12 on u in [1e-8, 1e3] against mpmath at 40 digits."""
    function = getattr(w, name)
    worst = 0.0
    for u, ref in _REFERENCE:
        got = float(function(np.array([u]))[0])
        exact = ref[name]
        if abs(exact) < _NORMAL_FLOOR:
            assert 0.0 <= abs(got) <= 1e-290, (name, u, got)
            continue
        worst = max(worst, float(abs((mp.mpf(got) - exact) / exact)))
    assert worst < 1e-12, f"{name}: worst relative error {worst:.2e}"


def test_methods_oracle_table_values() -> None:
    """Spot checks: Delta W_S(1) = 0.0406518522564 (mpmath, 12 digits) and W_Cv^q(2)."""
    # independent 12-digit values made with mpmath in the test
    assert w.entropy_correction(1.0) == pytest.approx(
        float(_mp_reference(1.0)["entropy_correction"]), rel=1e-14
    )
    assert float(w.entropy_correction(1.0)) == pytest.approx(0.0406518522564, abs=5e-13)
    assert float(w.heat_capacity_quantum(2.0)) == pytest.approx(0.724061660966, abs=5e-13)


def test_no_overflow_up_to_u_1e4() -> None:
    """Finite values, the right signs and the large-u asymptotes up to u = 1e4 (no overflow)."""
    u = np.logspace(-8, 4, 2000)
    with np.errstate(over="raise", invalid="raise", divide="raise"):
        values = {name: p.quantum(u) for name, p in w.PROPERTIES.items()}
        corrections = {name: p.correction(u) for name, p in w.PROPERTIES.items()}
    for arr in [*values.values(), *corrections.values()]:
        assert np.all(np.isfinite(arr))
    # large-u asymptotes (exact limits): E -> u/2, A -> u/2, Cv -> 0, S -> 0
    assert w.energy_quantum(1e4) == pytest.approx(5e3, rel=1e-15)
    assert w.helmholtz_free_energy_quantum(1e4) == pytest.approx(5e3, rel=1e-15)
    assert w.heat_capacity_quantum(1e4) == 0.0
    assert w.entropy_quantum(1e4) == 0.0


def test_entropy_equals_energy_minus_free_energy() -> None:
    """W_S = W_E - W_A for quantum, classical and correction weights (S = (E - A)/T, exact)."""
    u = np.logspace(-8, 3, 500)
    scale = np.abs(w.energy_quantum(u)) + np.abs(w.helmholtz_free_energy_quantum(u))
    np.testing.assert_array_less(
        np.abs(w.entropy_quantum(u) - (w.energy_quantum(u) - w.helmholtz_free_energy_quantum(u))),
        4e-16 * scale + 1e-300,
    )
    np.testing.assert_allclose(
        w.entropy_classical(u), w.energy_classical(u) - w.helmholtz_free_energy_classical(u),
        rtol=0, atol=4e-16 * (1 + np.abs(np.log(u))).max(),
    )
    corr_scale = np.abs(w.energy_correction(u)) + np.abs(w.helmholtz_free_energy_correction(u))
    np.testing.assert_array_less(
        np.abs(
            w.entropy_correction(u)
            - (w.energy_correction(u) - w.helmholtz_free_energy_correction(u))
        ),
        4e-15 * corr_scale + 1e-300,
    )


@pytest.mark.parametrize("u0", [0.05, 0.3, 1.0, 2.5, 7.0, 20.0])
def test_heat_capacity_is_temperature_derivative_of_energy(u0: float) -> None:
    """Cv = dE/dT: with E = kT W_E(theta/T), dE/dT / k = W_E - u W_E'(u) (exact identity).

    Central finite difference in T (theta = 1, T = 1/u0) with step h = 1e-4 T;
    truncation error ~ h^2 E''' / 6 ~ 1e-9 relative, round-off ~ 1e-16/1e-4.
    """
    temperature = 1.0 / u0
    h = 1e-4 * temperature

    def energy(t: float) -> float:  # E/k in units of theta
        return t * float(w.energy_quantum(1.0 / t))

    derivative = (energy(temperature + h) - energy(temperature - h)) / (2 * h)
    assert derivative == pytest.approx(float(w.heat_capacity_quantum(u0)), rel=1e-7, abs=1e-10)


@pytest.mark.parametrize("u0", [0.05, 0.3, 1.0, 2.5, 7.0])
def test_entropy_is_minus_temperature_derivative_of_free_energy(u0: float) -> None:
    """S = -dA/dT (exact identity), central finite difference as above."""
    temperature = 1.0 / u0
    h = 1e-4 * temperature

    def free(t: float) -> float:
        return t * float(w.helmholtz_free_energy_quantum(1.0 / t))

    derivative = -(free(temperature + h) - free(temperature - h)) / (2 * h)
    assert derivative == pytest.approx(float(w.entropy_quantum(u0)), rel=1e-7)


def test_classical_limit_small_u() -> None:
    """u -> 0: quantum weights approach the classical ones; corrections vanish like u^2.

    Leading terms (Bernoulli series, exact): dW_E ~ u^2/12, dW_Cv ~ -u^2/12,
    dW_S ~ u^2/24, dW_A ~ u^2/24.
    """
    u = np.array([1e-8, 1e-6, 1e-4])
    np.testing.assert_allclose(w.energy_correction(u), u**2 / 12, rtol=1e-7)
    np.testing.assert_allclose(w.heat_capacity_correction(u), -(u**2) / 12, rtol=1e-7)
    np.testing.assert_allclose(w.entropy_correction(u), u**2 / 24, rtol=1e-7)
    np.testing.assert_allclose(w.helmholtz_free_energy_correction(u), u**2 / 24, rtol=1e-7)
    np.testing.assert_allclose(w.energy_quantum(u), 1.0, rtol=1e-8)
    np.testing.assert_allclose(w.heat_capacity_quantum(u), 1.0, rtol=1e-8)
    np.testing.assert_allclose(w.entropy_quantum(u), w.entropy_classical(u), rtol=1e-8)
    zero = np.array([0.0])
    for prop in w.PROPERTIES.values():
        assert prop.correction(zero)[0] == 0.0
    assert w.entropy_quantum(zero)[0] == np.inf
    assert w.helmholtz_free_energy_quantum(zero)[0] == -np.inf


def test_signs_of_corrections() -> None:
    """Berens et al. (1983): dE > 0, dA > 0, dS > 0, dCv < 0 for every u > 0."""
    u = np.logspace(-6, 3, 1000)
    assert np.all(w.energy_correction(u) > 0)
    assert np.all(w.helmholtz_free_energy_correction(u) > 0)
    assert np.all(w.entropy_correction(u) > 0)
    assert np.all(w.heat_capacity_correction(u) < 0)
    assert np.all(w.thermal_energy_correction(u) < 0)


def test_negative_u_rejected() -> None:
    with pytest.raises(ValueError, match="must be >= 0"):
        w.energy_quantum(np.array([-1.0]))


def test_registry_and_unknown_property_message() -> None:
    """One registry: each name maps to its units; an unknown name lists the valid ones."""
    assert w.property_names() == [
        "heat_capacity",
        "energy",
        "thermal_energy",
        "zero_point_energy",
        "entropy",
        "helmholtz_free_energy",
    ]
    assert w.get_property("entropy").molar_unit == "J mol-1 K-1"
    assert w.get_property("energy").molar_unit == "kJ mol-1"
    assert w.get_property("energy").system_unit == "kJ"
    assert w.get_property("heat_capacity").system_unit == "J K-1"
    with pytest.raises(ConfigError) as info:
        w.get_property("enthalpy", option="--properties")
    message = str(info.value)
    assert isinstance(info.value, QcorrError)
    assert "--properties" in message and "'enthalpy'" in message
    assert "heat_capacity" in message and "helmholtz_free_energy" in message
    assert "\n" not in message


def test_docstring_examples() -> None:
    """The Examples in qcorr.thermo.weights run and print the values checked against mpmath above."""
    import doctest

    result = doctest.testmod(w)
    assert result.attempted >= 4 and result.failed == 0
