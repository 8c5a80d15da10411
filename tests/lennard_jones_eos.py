"""Published equations of state of the Lennard-Jones fluid and its second virial coefficient.

Reduced units throughout: energies in ε, lengths in σ, temperatures in ε/k; ``a`` is the
residual Helmholtz energy per atom A_res/N in ε (the excess over the ideal gas at the same
T and ρ).  Everything is written for mpmath numbers, so pressure, energy and heat capacity
come from ``a`` by high-precision numerical differentiation (mpmath.diff):

    P = ρT + ρ² ∂a/∂ρ,   U_res/N = ∂(a/T)/∂(1/T),   C_V,res/N = ∂(U_res/N)/∂T.

Both equations describe the *full* Lennard-Jones potential (their authors fitted simulations
with long-range corrections).

Johnson, Zollweg & Gubbins (JZG)
    J. K. Johnson, J. A. Zollweg, K. E. Gubbins, Mol. Phys. 78, 591 (1993): modified
    Benedict–Webb–Rubin form, a = Σ_{i=1..8} a_i ρ^i / i + Σ_{i=1..6} b_i G_i (their Table 5
    for a_i(T), b_i(T) and Table 6 for G_i), γ = 3, coefficients x_1…x_32 of their Table 10.
    The coefficients were read, through a search of public source code, from several
    independent transcriptions that agree digit for digit (one of them cites Table 10
    explicitly); the functional forms are as we remember the paper and are checked below by
    the agreement with the second virial coefficient and with the other equation.
Kolafa & Nezbeda (KN)
    J. Kolafa, I. Nezbeda, Fluid Phase Equilib. 100, 1 (1994), Eq. 30:
    a = T[a_HS(η) + ρ ΔB₂,hBH(T) exp(−γρ²)] + Σ_ij C_ij T^{i/2} ρ^j, with the
    Boublík–Nezbeda hard-sphere term, the hBH diameter d(T) and γ = 1.92907278; the
    coefficients were read through the same search from a public transcription of the
    paper's Fortran code.

Second virial coefficient (McQuarrie, Statistical Mechanics (Harper & Row, 1976), eq. 12-?
"B₂(T) = −2π ∫₀^∞ (e^{−u(r)/kT} − 1) r² dr"; for a mixture B₂ = Σ_ij x_i x_j B₂,ij):
computed here by mpmath quadrature, for the full potential or for the simulated model
(truncated at r_c, plus the mean-field dispersion correction, whose low-density limit adds
(2π/T) ∫_rc^∞ u r² dr).
"""

from __future__ import annotations

from collections.abc import Callable

import mpmath as mp

mp.mp.dps = 30

# ------------------------------------------------------------------------ Johnson et al. 1993
JZG_GAMMA = 3
JZG_X = (
    0.8623085097507421, 2.976218765822098, -8.402230115796038, 0.1054136629203555,
    -0.8564583828174598, 1.582759470107601, 0.7639421948305453, 1.753173414312048,
    2.798291772190376e3, -4.8394220260857657e-2, 0.9963265197721935, -3.698000291272493e1,
    2.084012299434647e1, 8.305402124717285e1, -9.574799715203068e2, -1.477746229234994e2,
    6.398607852471505e1, 1.603993673294834e1, 6.805916615864377e1, -2.791293578795945e3,
    -6.245128304568454, -8.116836104958410e3, 1.488735559561229e1, -1.059346754655084e4,
    -1.131607632802822e2, -8.867771540418822e3, -3.986982844450543e1, -4.689270299917261e3,
    2.593535277438717e2, -2.694523589434903e3, -7.218487631550215e2, 1.721802063863269e2,
)


def jzg_residual_helmholtz(T, rho):
    """A_res/N in ε at reduced temperature *T* and density *rho* (JZG 1993, Tables 5, 6, 10)."""
    T, rho = mp.mpf(T), mp.mpf(rho)
    x = (None,) + tuple(mp.mpf(v) for v in JZG_X)  # 1-based as in the paper
    a = (
        x[1] * T + x[2] * mp.sqrt(T) + x[3] + x[4] / T + x[5] / T**2,
        x[6] * T + x[7] + x[8] / T + x[9] / T**2,
        x[10] * T + x[11] + x[12] / T,
        x[13],
        x[14] / T + x[15] / T**2,
        x[16] / T,
        x[17] / T + x[18] / T**2,
        x[19] / T**2,
    )
    b = (
        x[20] / T**2 + x[21] / T**3,
        x[22] / T**2 + x[23] / T**4,
        x[24] / T**2 + x[25] / T**3,
        x[26] / T**2 + x[27] / T**4,
        x[28] / T**2 + x[29] / T**3,
        x[30] / T**2 + x[31] / T**3 + x[32] / T**4,
    )
    F = mp.exp(-JZG_GAMMA * rho**2)
    G = [(1 - F) / (2 * JZG_GAMMA)]
    for i in range(2, 7):
        G.append(-(F * rho ** (2 * (i - 1)) - 2 * (i - 1) * G[-1]) / (2 * JZG_GAMMA))
    return sum(a[i] * rho ** (i + 1) / (i + 1) for i in range(8)) + sum(b[i] * G[i] for i in range(6))


# ------------------------------------------------------------------------ Kolafa & Nezbeda 1994
KN_GAMMA = mp.mpf("1.92907278")
#: C_ij of Eq. 30: (i, j) -> C, the term C T^{i/2} ρ^j
KN_C = {
    (0, 2): "2.01546797", (0, 3): "-28.17881636", (0, 4): "28.28313847", (0, 5): "-10.42402873",
    (-1, 2): "-19.58371655", (-1, 3): "75.62340289", (-1, 4): "-120.70586598", (-1, 5): "93.92740328",
    (-1, 6): "-27.37737354",
    (-2, 2): "29.34470520", (-2, 3): "-112.35356937", (-2, 4): "170.64908980", (-2, 5): "-123.06669187",
    (-2, 6): "34.42288969",
    (-4, 2): "-13.37031968", (-4, 3): "65.38059570", (-4, 4): "-115.09233113", (-4, 5): "88.91973082",
    (-4, 6): "-25.62099890",
}


def kn_hbh_diameter(T):
    """Hybrid Barker–Henderson diameter d(T) of KN 1994."""
    T = mp.mpf(T)
    return (mp.mpf("-0.063920968") * mp.log(T) + mp.mpf("0.011117524") / T
            - mp.mpf("0.076383859") / mp.sqrt(T) + mp.mpf("1.080142248") + mp.mpf("0.000693129") * mp.sqrt(T))


def kn_delta_b2(T):
    """ΔB₂,hBH(T) of KN 1994 (second virial coefficient minus that of the hBH hard spheres)."""
    T = mp.mpf(T)
    coefficients = ("-0.58544978", "0.43102052", "0.87361369", "-4.13749995", "2.90616279", "-7.02181962")
    powers = (-3.5, -3, -2.5, -2, -1.5, -1)
    return sum(mp.mpf(c) * T**p for c, p in zip(coefficients, powers)) + mp.mpf("0.02459877")


def kn_residual_helmholtz(T, rho):
    """A_res/N in ε (KN 1994, Eq. 30, with the Boublík–Nezbeda hard-sphere term)."""
    T, rho = mp.mpf(T), mp.mpf(rho)
    eta = mp.pi / 6 * rho * kn_hbh_diameter(T) ** 3
    hard_spheres = mp.mpf(5) / 3 * mp.log(1 - eta) + eta * (34 - 33 * eta + 4 * eta**2) / (6 * (1 - eta) ** 2)
    dispersion = sum(mp.mpf(c) * T ** (mp.mpf(i) / 2) * rho**j for (i, j), c in KN_C.items())
    return T * (hard_spheres + rho * kn_delta_b2(T) * mp.exp(-KN_GAMMA * rho**2)) + dispersion


# ------------------------------------------------------------------------ derived properties
ResidualHelmholtz = Callable[[object, object], object]


def pressure(a: ResidualHelmholtz, T, rho) -> float:
    """P* = ρT + ρ² ∂a/∂ρ."""
    return float(rho * T + mp.mpf(rho) ** 2 * mp.diff(lambda r: a(T, r), mp.mpf(rho)))


def residual_energy(a: ResidualHelmholtz, T, rho) -> float:
    """U_res/N = ∂(a/T)/∂(1/T) in ε."""
    return float(mp.diff(lambda beta: a(1 / beta, rho) * beta, 1 / mp.mpf(T)))


def residual_heat_capacity(a: ResidualHelmholtz, T, rho) -> float:
    """C_V,res/N = ∂U_res/∂T in k: −β² ∂²(βa)/∂β²."""
    beta = 1 / mp.mpf(T)
    return float(-beta**2 * mp.diff(lambda b: a(1 / b, rho) * b, beta, 2))


def residual_entropy(a: ResidualHelmholtz, T, rho) -> float:
    """S_res/(N k) = (U_res − A_res)/(N k T)."""
    return (residual_energy(a, T, rho) - float(a(T, rho))) / float(T)


def low_density_limit(a: ResidualHelmholtz, T) -> float:
    """The equation's second virial coefficient: lim_{ρ→0} a/(ρT), in σ³."""
    rho = mp.mpf("1e-12")
    return float(a(T, rho) / (rho * mp.mpf(T)))


# ------------------------------------------------------------------------ second virial coefficient
def lennard_jones(r, sigma=1, epsilon=1):
    s6 = (mp.mpf(sigma) / r) ** 6
    return 4 * epsilon * (s6 * s6 - s6)


def second_virial_coefficient(T, sigma=1, epsilon=1, cutoff=None) -> float:
    """B₂ (in the length unit of *sigma*, cubed) of a Lennard-Jones pair at temperature *T*
    (in the energy unit of *epsilon*, i.e. kT).

    With *cutoff* None: the full potential, −2π ∫₀^∞ (e^{−u/T} − 1) r² dr (McQuarrie).
    With a cutoff: the model the simulations sample, the potential truncated and shifted
    there, u − u(r_c) for r < r_c, plus OpenMM's dispersion correction C/V, whose
    low-density limit adds (2π/T) ∫_rc^∞ u r² dr to B₂ (A_disp/N = ρ · 2π ∫_rc^∞ u r² dr).
    """
    T = mp.mpf(T)
    if cutoff is None:
        def mayer(r):
            return (mp.exp(-lennard_jones(r, sigma, epsilon) / T) - 1) * r**2

        return float(-2 * mp.pi * mp.quad(mayer, [0, sigma, 2 * sigma, mp.inf]))
    shift = lennard_jones(mp.mpf(cutoff), sigma, epsilon)

    def shifted_mayer(r):
        return (mp.exp(-(lennard_jones(r, sigma, epsilon) - shift) / T) - 1) * r**2

    inner = mp.quad(shifted_mayer, [0, sigma, 2 * sigma, cutoff])
    tail = mp.quad(lambda r: lennard_jones(r, sigma, epsilon) * r**2, [cutoff, mp.inf])
    return float(-2 * mp.pi * inner + 2 * mp.pi * tail / T)
