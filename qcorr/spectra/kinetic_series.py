"""The per-frame kinetic energy and total momentum of a spectrum file (its layout only).

``qcorr spectrum`` keeps, for every frame it counts, Σ ½ m v² of the whole system after the
centre-of-mass velocity is removed and the total momentum Σ m v before the removal
(:class:`qcorr.reading.stream.FrameStatistics`), stored as :data:`KINETIC_ENERGY` and
:data:`TOTAL_MOMENTUM` along the dimension :data:`FRAME` with the coordinate
:data:`FRAME_TIME` (ps from the first frame of the window).  Frame blocks concatenate along
it.  What is computed from them is in :mod:`qcorr.baselines.kinetic`.
"""

from __future__ import annotations

import numpy as np

from qcorr import constants as C
from qcorr import units
from qcorr.lazy_modules import lazy

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

#: spectrum-file variable: kinetic energy of the whole system per frame, kJ/mol (per mole of systems)
KINETIC_ENERGY = "kinetic_energy"
#: spectrum-file variable: total momentum per frame before the centre-of-mass removal, g/mol Å/ps
TOTAL_MOMENTUM = "total_momentum"
#: the frame dimension and its time coordinate (ps)
FRAME = "frame"
FRAME_TIME = "frame_time"
#: 1 kJ/mol expressed in g/mol Å²/ps² (1e3 J / (1e-3 kg · 1e-20 m² / 1e-24 s²))
KJ_PER_MOL_IN_U_A2_PER_PS2 = 100.0


def kinetic_variables(time_ps, kinetic_u_A2_per_ps2, momentum_u_A_per_ps) -> dict[str, xr.DataArray]:
    """The spectrum-file variables of the per-frame kinetic energy and total momentum.

    Parameters
    ----------
    time_ps : array_like
        Frame times, ps.
    kinetic_u_A2_per_ps2 : array_like
        Σ ½ m v² per frame after the centre-of-mass removal, g/mol Å²/ps².
    momentum_u_A_per_ps : array_like
        Σ m v per frame before the removal, shape (frames, 3), g/mol Å/ps.
    """
    time = np.asarray(time_ps, dtype=float)
    coords = {FRAME_TIME: ((FRAME,), time, {"units": "ps", "long_name": "time of the frame from the first "
                                            "frame of the window"})}
    return {
        KINETIC_ENERGY: xr.DataArray(
            np.asarray(kinetic_u_A2_per_ps2, dtype=float) / KJ_PER_MOL_IN_U_A2_PER_PS2, dims=(FRAME,),
            coords=coords, attrs={"units": units.MOLAR_ENERGY, "long_name": "kinetic energy of the whole system "
                                  "(centre-of-mass motion removed), per mole of systems"}),
        TOTAL_MOMENTUM: xr.DataArray(
            np.asarray(momentum_u_A_per_ps, dtype=float).reshape(-1, 3), dims=(FRAME, "spatial"),
            coords=coords, attrs={"units": units.MOMENTUM,
                                  "long_name": "total momentum before the centre-of-mass removal"}),
    }


def momentum_change_ratio(momentum_u_A_per_ps, total_mass_u: float, temperature_K: float) -> float:
    """Σ_α var(P_α) / (3 M k T): 0 for conserved momentum, about 1 for a thermalised centre of mass."""
    p = np.asarray(momentum_u_A_per_ps, dtype=float).reshape(-1, 3)
    rt = C.gas_constant_J_per_mol_K * temperature_K / 1000.0 * KJ_PER_MOL_IN_U_A2_PER_PS2
    return float(np.sum(np.var(p, axis=0)) / (3.0 * total_mass_u * rt))


def series_diagnostics(ds: xr.Dataset) -> dict[str, object]:
    """Checks of the per-frame series, JSON-ready (empty without the series): frames, the kinetic
    variance ratio x = f⟨δK²⟩/(2⟨K⟩²) with its standard error (1 canonical, < 1 microcanonical),
    the momentum change ratio, and the mean kinetic energy of the two halves of the run."""
    from qcorr.baselines.fluctuations import half_drift, kinetic_variance_ratio

    if KINETIC_ENERGY not in ds or TOTAL_MOMENTUM not in ds or ds.sizes.get(FRAME, 0) < 4:
        return {}
    names = [str(g) for g in ds["group"].values]
    total = "total" if "total" in names else names[0]
    kinetic = np.asarray(ds[KINETIC_ENERGY].values, dtype=float)
    dof = float(ds["degrees_of_freedom"].sel(group=total).item())
    mass = float(ds["group_mass"].sel(group=total).item())
    x, x_se = kinetic_variance_ratio(kinetic, dof)
    drift = half_drift(kinetic)
    return {"frames": int(kinetic.size), "kinetic_variance_ratio": [x, x_se],
            "momentum_change_ratio": momentum_change_ratio(ds[TOTAL_MOMENTUM].values, mass,
                                                           float(ds.attrs["temperature_K"])),
            "kinetic_energy_halves_kJ_per_mol": [drift.first_half, drift.second_half],
            "kinetic_energy_halves_standard_errors_apart": drift.standard_errors_apart}
