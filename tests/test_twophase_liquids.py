"""2PT for mixtures, rigid models and the model's limits (issue 14), on analytic spectra.

Outside references named beside each check: the ideal mixing entropy (McQuarrie,
Statistical Mechanics (2000), ideal-gas mixtures), the Einstein solid (A. Einstein,
Ann. Phys. 22, 180 (1907)) for the temperature scan, CODATA constants via scipy for the
frozen-bond zero-point energy, and independent quadrature (scipy.integrate.quad) for the
share of the Lorentzian gas spectrum above the grid.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import spectra
from scipy import constants as sc
from scipy import integrate

from qcorr.errors import ConfigError
from qcorr.thermo import twophase as tp
from qcorr.thermo.twophase_checks import gas_share_beyond, zero_point_energy_drift_per_efold
from qcorr.thermo.twophase_mixture import ideal_mixing_entropy, mixture_result
from qcorr.thermo.twophase_table import two_phase_properties

R = sc.R
C2 = sc.h * sc.c / sc.k * 100  # second radiation constant, cm K (CODATA via scipy)
T_LIQ = 86.5
MASS_AR = 39.948
VOLUME_PER_ATOM_A3 = 3.405**3 / 0.8442  # LJ argon at rho* = 0.8442 (sigma 3.405 A)


def _liquid_vdos(x, dof):
    """A liquid-like spectrum (cm), zero above 150 cm-1: a diffusive part 0.3 dof with S(0) > 0,
    S(0)(1 - ν/150)², and a Debye band of 0.7 dof to 60 cm-1."""
    diffusive = 0.3 * dof / 50.0 * np.clip(1.0 - x / 150.0, 0.0, None) ** 2
    debye = spectra.debye_vdos(x, 60.0, 0.7 * dof)
    return spectra.normalise(x, diffusive + debye, dof)


def _row(frame, group, prop, temperature=None):
    sel = frame[(frame["group"] == group) & (frame["property"] == prop) & (frame["method"] == "2pt")]
    if temperature is not None:
        sel = sel[np.isclose(sel["temperature_K"], temperature)]
    assert len(sel) == 1, (group, prop)
    return sel.iloc[0]


def _labelled_liquid(counts):
    """One liquid of sum(counts) argon atoms, and groups 'a', 'b' labelling them at random:
    each label's spectrum is its share of the whole (identical per-atom spectra)."""
    n = sum(counts)
    x = np.linspace(0.0, 400.0, 2001)
    whole = _liquid_vdos(x, 3.0 * n)
    groups = {"total": spectra.GroupSpec(whole, 3.0 * n, n, n, MASS_AR * n, segment_scatter=0.01)}
    for name, k in zip(("a", "b"), counts):
        groups[name] = spectra.GroupSpec(whole * k / n, 3.0 * k, k, k, MASS_AR * k, segment_scatter=0.01)
    return spectra.spectrum_dataset(x, groups, temperature_K=T_LIQ, n_segments=4,
                                    attrs_override={"mean_box_volume_A3": n * VOLUME_PER_ATOM_A3})


def test_ideal_mixing_entropy_textbook_values():
    """-sum x ln x (McQuarrie, ideal-gas mixtures): ln 2 for 1:1, and the 1:3 value by hand."""
    assert ideal_mixing_entropy([250, 250]) == pytest.approx(math.log(2), rel=1e-14)
    assert ideal_mixing_entropy([1, 3]) == pytest.approx(-(0.25 * math.log(0.25) + 0.75 * math.log(0.75)),
                                                         rel=1e-14)
    with pytest.raises(Exception, match="positive"):
        ideal_mixing_entropy([0, 3])


@pytest.mark.parametrize("counts", [(500, 500), (300, 700)])
def test_labelled_halves_of_one_liquid_give_the_pure_liquid_plus_ideal_mixing(counts):
    """Identical atoms under two labels: the labelled system's entropy is the pure liquid's plus
    -R sum x ln x (distinguishable labels; McQuarrie, ideal mixtures); energies unchanged."""
    ds = _labelled_liquid(counts)
    pure = two_phase_properties(ds, groups=["total"])
    mixed = two_phase_properties(ds, mixtures={"total": ["a", "b"]})
    x = np.array(counts) / sum(counts)
    s_mix = -R * float(np.sum(x * np.log(x)))
    for column in ("classical", "quantum"):
        assert _row(mixed, "total", "entropy")[column] == pytest.approx(
            _row(pure, "total", "entropy")[column] + s_mix, rel=1e-10)
        for prop in ("heat_capacity", "zero_point_energy"):
            assert _row(mixed, "total", prop)[column] == pytest.approx(_row(pure, "total", prop)[column], rel=1e-10)
        # each component, per mole of its own atoms, is the pure liquid (no mixing term)
        for g in ("a", "b"):
            assert _row(mixed, g, "entropy")[column] == pytest.approx(_row(pure, "total", "entropy")[column],
                                                                       rel=1e-10)
    assert _row(mixed, "total", "entropy_mixing")["classical"] == pytest.approx(s_mix, rel=1e-12)
    assert mixed.attrs["mixtures"]["total"]["molecule_counts"] == list(counts)


def test_a_component_at_its_own_density_would_break_the_labelled_limit():
    """Why components are evaluated at the total density: Δ ∝ S(0)/N × (N/V)^(1/3) (Lin,
    Blanco, Goddard 2003 definition), so at its own density N_i/V a label's Δ is the pure
    liquid's times x^(1/3), and its fluidicity differs from the pure liquid's."""
    n, k = 1000, 250
    x = np.linspace(0.0, 400.0, 2001)
    whole = _liquid_vdos(x, 3.0 * n)
    common = {"temperature_K": T_LIQ, "mass_u": MASS_AR, "volume_A3": n * VOLUME_PER_ATOM_A3}
    pure = tp.two_phase_group(x, {"translation": whole}, molecule_count=n, **common)
    own = tp.two_phase_group(x, {"translation": whole * k / n}, molecule_count=k, **common)
    total = tp.two_phase_group(x, {"translation": whole * k / n}, molecule_count=k,
                               density_molecule_count=n, **common)
    d_pure = pure.components["translation"].normalized_diffusivity
    assert own.components["translation"].normalized_diffusivity == pytest.approx(d_pure * (k / n) ** (1 / 3),
                                                                                  rel=1e-12)
    assert total.components["translation"].normalized_diffusivity == pytest.approx(d_pure, rel=1e-12)
    assert total.entropy == pytest.approx(pure.entropy, rel=1e-12)
    assert abs(own.entropy - pure.entropy) > 1e-3
    combined = mixture_result([total, total], [k, k])
    assert combined.entropy == pytest.approx(pure.entropy + math.log(2), rel=1e-12)


def test_gas_share_beyond_grid_matches_quadrature():
    """Share of a Lorentzian's integral above the grid top: closed form against quad."""
    n = 500
    x = np.linspace(0.0, 300.0, 1501)
    res = tp.two_phase_component("translation", x, _liquid_vdos(x, 3.0 * n), molecule_count=n,
                                 temperature_K=T_LIQ, mass_u=MASS_AR, volume_A3=n * VOLUME_PER_ATOM_A3)
    s0, g = float(res.gas_dos[0]), res.gas_dof

    def lorentzian(v):
        return s0 / (1 + (math.pi * s0 * v / (2 * g)) ** 2)

    tail, _ = integrate.quad(lorentzian, x[-1], np.inf, epsabs=0, epsrel=1e-12)
    assert gas_share_beyond(res, x[-1]) == pytest.approx(tail / g, rel=1e-8)
    assert 0.0 < gas_share_beyond(res, x[-1]) < 0.2


def test_zero_point_energy_drift_matches_a_grid_one_e_fold_longer():
    """The solid-like ZPE on a grid to e·ν_max minus that to ν_max (spectrum zero above its
    band) equals the closed-form drift 2hcG²/(π² S(0)) per e-fold of the Lorentzian's tail."""
    n = 500
    top = 4000.0
    x = np.linspace(0.0, math.e * top, 200001)
    s = _liquid_vdos(x, 3.0 * n)  # zero above 150 cm-1, far below the top
    common = {"molecule_count": n, "temperature_K": T_LIQ, "mass_u": MASS_AR,
              "volume_A3": n * VOLUME_PER_ATOM_A3, "translation_zero_frequency_cm": float(s[0])}
    cut = x <= top
    short = tp.two_phase_group(x[cut], {"translation": s[cut]}, **common)
    long = tp.two_phase_group(x, {"translation": s}, **common)
    to_kJ = R * T_LIQ * 1e-3
    measured = (long.zero_point_energy - short.zero_point_energy) * to_kJ
    assert measured == pytest.approx(zero_point_energy_drift_per_efold(short, n), rel=2e-3)
    assert measured < 0


def test_temperature_scan_gives_einstein_corrections():
    """An Einstein solid has S(0) = 0, so f = 0 and the scan's corrections at T' are the
    Einstein (1907) closed forms 3R(W^q(u') - W^c(u')) with u' = θ_E/T'."""
    theta = 300.0
    ds = spectra.einstein_solid_dataset(einstein_temperature_K=theta, temperature_K=300.0, atoms=4)
    ds.attrs["mean_box_volume_A3"] = 4 * 11.8
    frame = two_phase_properties(ds, temperatures_K=[300.0, 150.0, 600.0])
    nu_e = float(ds["wavenumber"].values[(ds.sizes["wavenumber"]) // 4])
    for t in (150.0, 600.0):
        u = C2 * nu_e / t
        cv = u * u * math.exp(u) / math.expm1(u) ** 2 - 1.0
        s = u / math.expm1(u) - math.log(-math.expm1(-u)) - 1.0 + math.log(u)
        e = u / 2 + u / math.expm1(u) - 1.0
        per_atom = 3.0 / 4 * 4  # 3 modes per atom, per mole of atoms (one-atom molecules)
        assert _row(frame, "total", "heat_capacity", t)["correction"] == pytest.approx(per_atom * R * cv, rel=1e-9)
        assert _row(frame, "total", "entropy", t)["correction"] == pytest.approx(per_atom * R * s, rel=1e-9)
        assert _row(frame, "total", "energy", t)["correction"] == pytest.approx(per_atom * R * t * e / 1e3,
                                                                                rel=1e-9)
        assert _row(frame, "total", "helmholtz_free_energy", t)["correction"] == pytest.approx(
            per_atom * R * t * (e - s) / 1e3, rel=1e-9)
        assert math.isnan(_row(frame, "total", "entropy", t)["classical"])
    assert any("Temperature scan" in c for c in frame.attrs["cautions"])


def test_frozen_bond_addon_rows_in_the_liquid_table():
    """Rigid water: two O-H stretches (3657, 3756 cm-1, gas-phase fundamentals, NIST CCCBDB)
    frozen by constraints: ZPE = N_A h c (3657 + 3756) cm-1 / 2 (CODATA via scipy)."""
    ds = _labelled_liquid((500, 500))
    frame = two_phase_properties(ds, groups=["total"], frozen_bond_wavenumbers_cm={"total": [3657, 3756]})
    rows = frame[(frame["method"] == "frozen_bond_addon") & (frame["property"] == "zero_point_energy")]
    assert len(rows) == 1 and rows.iloc[0]["basis"] == "per_mole_molecules"
    zpe = sc.N_A * sc.h * sc.c * 100 * (3657 + 3756) / 2 / 1e3
    assert rows.iloc[0]["quantum"] == pytest.approx(zpe, rel=1e-12)
    assert rows.iloc[0]["classical"] == 0.0 and "2pt rows" in rows.iloc[0]["note"]


def test_mixture_options_are_checked_with_one_line():
    ds = _labelled_liquid((500, 500))
    for mixtures, words in (({"total": ["a", "zz"]}, "no group 'zz'"),
                            ({"total": ["a"]}, "at least two"),
                            ({"m1": ["a", "b"], "m2": ["b", "total"]}, "component of both"),
                            ({"total": ["a", "a"]}, "at least two different")):
        with pytest.raises(ConfigError, match=words) as info:
            two_phase_properties(ds, mixtures=mixtures)
        assert "\n" not in str(info.value)
    ds2 = _labelled_liquid((500, 500))
    ds2["atom_count"].values[0] = 999
    with pytest.raises(ConfigError, match="999 atoms"):
        two_phase_properties(ds2, mixtures={"total": ["a", "b"]})


def test_mixture_command_line_and_bad_value(tmp_path, run_qcorr):
    path = spectra.write_spectrum_file(_labelled_liquid((400, 600)), tmp_path / "labelled.nc")
    out = tmp_path / "mix.csv"
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet", "--mixture", "total=a,b")
    assert code == 0, err
    frame = pd.read_csv(out)
    assert set(frame["group"]) == {"total", "a", "b"}
    bad = tmp_path / "bad.csv"
    code, _, err = run_qcorr("liquid", path, "--output", bad, "--mixture", "total=a")
    assert code != 0 and "--mixture 'total=a'" in err and len(err.strip().splitlines()) == 1
    assert not bad.exists()


def test_enthalpy_and_gibbs_energy_add_pv_only_for_the_whole_system():
    """H = E + pV, G = A + pV (definitions).  With V = N k T / p (the ideal-gas law at the given
    pressure, CODATA k via scipy) pV per mole is exactly R T; only the whole system or a mixture
    gets the rows (a part's share of the volume is not its molar volume)."""
    n = 1000
    ds = _labelled_liquid((500, 500))
    ds.attrs["mean_box_volume_A3"] = n * sc.k * T_LIQ / 1e5 / 1e-30
    frame = two_phase_properties(ds, md_energies_kJ_per_mol={"total": -4.0, "a": -4.0}, pressure_bar=1.0)
    rt = R * T_LIQ / 1e3
    for column in ("classical", "quantum"):
        assert _row(frame, "total", "enthalpy")[column] == pytest.approx(_row(frame, "total", "energy")[column] + rt,
                                                                         rel=1e-12)
        assert _row(frame, "total", "gibbs_free_energy")[column] == pytest.approx(
            _row(frame, "total", "helmholtz_free_energy")[column] + rt, rel=1e-12)
    assert frame[(frame.group == "a") & (frame.property == "enthalpy")].empty
    mixed = two_phase_properties(ds, mixtures={"total": ["a", "b"]}, md_energies_kJ_per_mol={"total": -4.0},
                                 pressure_bar=1.0)
    assert _row(mixed, "total", "enthalpy")["classical"] == pytest.approx(-4.0 + rt, rel=1e-12)
    with pytest.raises(ConfigError, match="--pressure"):
        two_phase_properties(ds, pressure_bar=-1.0)


# ------------------------------------------------------------ taper-free zero-frequency value
def _exponential_vacf(lag_ps, gamma_per_ps, kt_over_m):
    """<v(0).v(t)> = 3 (kT/m) exp(-γt) of the Langevin free particle (Uhlenbeck, Ornstein, Phys. Rev.
    36, 823 (1930)), Å²/ps²; its Green-Kubo integral to τ is D (1 - exp(-γτ)), D = kT/(mγ)."""
    return 3.0 * kt_over_m * np.exp(-gamma_per_ps * lag_ps)


def test_green_kubo_integral_of_the_langevin_vacf():
    from qcorr.thermo.diffusion import green_kubo_diffusion

    lag = np.arange(2001) * 0.0025  # 5 ps
    gamma, kt_m = 2.0, 1.8  # 1/ps, Å²/ps² (argon at 86.5 K: kT/m = 1.80 Å²/ps²)
    segs = np.stack([_exponential_vacf(lag, gamma, kt_m) * (1 + 0.02 * k) for k in (-1, 0, 1)])
    res = green_kubo_diffusion(lag, segs, 3.0)
    d_exact = kt_m / gamma * (1 - math.exp(-gamma * lag[-1])) * 1e-8  # Å²/ps -> m²/s
    assert res.value == pytest.approx(d_exact, rel=1e-6)
    assert res.window_ps == pytest.approx(5.0)
    # three segments at -2 %, 0, +2 %: standard error = sd / sqrt(3) = 0.02 D / sqrt(3)
    assert res.standard_error == pytest.approx(0.02 * d_exact / math.sqrt(3), rel=1e-6)


def test_alder_wainwright_tail_is_recovered_and_only_reported():
    """C(t) = A t^(-3/2) at long lags (Alder, Wainwright, Phys. Rev. A 1, 18 (1970)): the fit over
    the last half of the lags returns A, and the tail beyond τ is 2Aτ^(-1/2)/3."""
    from qcorr.thermo.diffusion import green_kubo_diffusion

    lag = np.arange(1001) * 0.01
    amplitude = 0.05  # Å²/ps² ps^(3/2)
    vacf = amplitude * np.maximum(lag, 0.5) ** -1.5
    res = green_kubo_diffusion(lag, vacf[None, :], 1.0)
    assert res.tail_estimate == pytest.approx(2 * amplitude / math.sqrt(lag[-1]) / 3 * 1e-8, rel=1e-12)
    assert res.value == pytest.approx(np.trapezoid(vacf, lag) / 3 * 1e-8, rel=1e-12)
    assert math.isnan(res.standard_error)


def test_auto_uses_the_vacf_integral_and_warns_when_msd_disagrees():
    ds = _labelled_liquid((500, 500))
    lag = np.arange(256) * 0.0125
    vacf = _exponential_vacf(lag, 4.0, 1.8)  # D = 0.45 Å²/ps = 4.5e-9 m²/s (window 3.19 ps: 1 - 3e-6)
    n_seg = ds.sizes["segment"]
    raw = np.stack([np.tile(vacf * float(ds["group_mass"].values[i]), (n_seg, 1)) for i in range(3)])
    ds = ds.drop_vars(["vacf", "lag"]).assign_coords(lag=("lag", lag, {"units": "ps"}))
    ds["vacf_segments_raw"] = (("group", "segment", "lag"), raw)
    frame = two_phase_properties(ds, groups=["total"])
    info = frame.attrs["groups"]["total"]
    assert info["diffusion_source_used"] == "vacf-integral"
    assert info["self_diffusion_from_vacf_integral_m2_per_s"] == pytest.approx(
        1.8 / 4.0 * (1 - math.exp(-4.0 * lag[-1])) * 1e-8, rel=5e-4)  # trapezoid error (γΔt)²/12 = 2e-4
    assert not any("disagree" in c for c in frame.attrs["cautions"])
    # an MSD 20 % away (as 'qcorr spectrum --molecular' would record it) is flagged
    from qcorr.thermo import twophase_evaluation as ev

    gin = ev.group_input(ds, 0, "total", "test")
    gin.msd_diffusion_m2_per_s = 1.2 * info["self_diffusion_from_vacf_integral_m2_per_s"]
    opts = ev.checked_options()
    result = ev._evaluate_group(ds, 0, gin, opts, temperature=T_LIQ, volume=1000 * VOLUME_PER_ATOM_A3,
                                with_segments=False)
    assert any("disagree" in n for n in result.notes)


def test_kinetic_temperature_imbalance_warns_only_beyond_two_percent_and_its_scatter():
    """A component's kinetic temperature is T x (its spectrum's integral)/(its dof N): the
    equipartition check of methods.md §6 item 2.  Translation 5 % cold and rotation 5 % hot
    warn; 1 % does not; 5 % within two standard errors of a noisy run does not."""
    from qcorr.thermo.twophase_checks import component_temperatures, result_checks
    from qcorr.thermo.twophase_inputs import GroupInput

    n, t = 1000, 300.0
    x = np.linspace(0.0, 400.0, 2001)
    moments = np.array([0.6, 1.2, 1.8])  # u Å², water-like

    def group(off, scatter):
        trn = _liquid_vdos(x, 3.0 * n) * (1 - off)
        rot = _liquid_vdos(x, 3.0 * n) * (1 + off)
        factors = 1 + scatter * np.array([-1.0, 0.0, 1.0, 0.0])
        segs = {"translation": trn[None] * factors[:, None], "rotation": rot[None] * factors[::-1, None]}
        gin = GroupInput("water", n, 18.015, {"translation": trn, "rotation": rot}, segs, moments, float("nan"),
                         "molecular decomposition", 3)
        res = tp.two_phase_group(x, gin.parts, molecule_count=n, temperature_K=t, mass_u=18.015,
                                 volume_A3=n * 29.9, principal_moments_u_A2=moments, symmetry_number=2)
        return gin, res

    gin, res = group(0.05, 0.0)
    temps = component_temperatures(gin, x, t, 4.0)
    assert temps["translation"][0] == pytest.approx(0.95 * t, rel=1e-9)
    assert temps["rotation"][0] == pytest.approx(1.05 * t, rel=1e-9)
    notes, _ = result_checks(gin, res, [res, res], 4.0, x, t)
    assert sum("not equipartitioned" in n for n in notes) == 2
    gin, res = group(0.01, 0.0)
    assert not any("not equipartitioned" in n for n in result_checks(gin, res, [res, res], 4.0, x, t)[0])
    gin, res = group(0.05, 0.2)  # segments scatter by ±20 %: the 5 % is within two standard errors
    assert not any("not equipartitioned" in n for n in result_checks(gin, res, [res, res], 4.0, x, t)[0])


def test_auto_prefers_the_better_conditioned_route_and_refuses_a_negative_integral():
    """auto: the VACF integral if its relative standard error is below 10 %, else the MSD; an
    explicit vacf-integral that is not positive is refused with one line."""
    from qcorr.errors import PhysicsError
    from qcorr.thermo import twophase_evaluation as ev

    ds = _labelled_liquid((500, 500))
    lag = np.arange(256) * 0.0125
    n_seg = ds.sizes["segment"]
    scatter = np.array([1.0 + 0.6 * (-1) ** k for k in range(n_seg)])  # ±60 %: poorly conditioned
    vacf = _exponential_vacf(lag, 4.0, 1.8)
    raw = np.stack([vacf[None, :] * scatter[:, None] * float(ds["group_mass"].values[i]) for i in range(3)])
    ds = ds.drop_vars(["vacf", "lag"]).assign_coords(lag=("lag", lag, {"units": "ps"}))
    ds["vacf_segments_raw"] = (("group", "segment", "lag"), raw)
    gin = ev.group_input(ds, 0, "total", "test")
    gin.msd_diffusion_m2_per_s = 4.4e-9
    common = {"temperature": T_LIQ, "volume": 1000 * VOLUME_PER_ATOM_A3, "with_segments": False}
    chosen = ev._evaluate_group(ds, 0, gin, ev.checked_options(), **common)
    assert chosen.info["diffusion_source_used"] == "msd"
    ds["vacf_segments_raw"] = (("group", "segment", "lag"), -np.abs(raw))
    with pytest.raises(PhysicsError, match="not positive") as info:
        ev._evaluate_group(ds, 0, gin, ev.checked_options(diffusion_from="vacf-integral"), **common)
    assert "\n" not in str(info.value)
