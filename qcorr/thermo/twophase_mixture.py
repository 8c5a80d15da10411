"""Two-phase thermodynamics (2PT) of a liquid mixture from the 2PT of its components.

The published multi-component 2PT (Lai, Hsieh, Lin, Phys. Chem. Chem. Phys. 14, 15206
(2012); Caro, Laurila, Lopez-Acevedo, J. Chem. Phys. 145, 244504 (2016)) could not be
read for this version (only the abstracts were available), so this module does **not**
implement it.  It implements our own rule, derived here, and validated against
thermodynamic integration of an argon–krypton liquid (``docs/liquids.md``):

* every component i (N_i molecules of one kind, its own translational, rotational and
  vibrational spectra) is evaluated by the one-kind 2PT of :mod:`qcorr.thermo.twophase`
  *as a pure fluid at the total number density* N/V: its normalised diffusivity uses its
  own S_i(0)/N_i and mass with (N/V)^{1/3}, and its gas volume is V/(f_i N) (or V/N);
* the mixture adds the ideal mixing entropy of the molecules,
  ``S_mix = −k Σ_i N_i ln x_i`` with x_i = N_i/N (McQuarrie, Statistical Mechanics,
  University Science Books 2000, ideal-gas mixtures; a textbook result).

Derivation (ours).  Give the molecules of one pure liquid two labels at random, in
proportions x_1, x_2.  Each labelled subset has the per-molecule spectrum, S(0)/N and
mass of the whole, so at the total density each component's Δ, fluidicity and
per-molecule 2PT values are exactly those of the pure liquid; the labelled system's
entropy is that of the pure liquid plus −k Σ N_i ln x_i (the labels are distinguishable).
The rule reproduces this exactly (a test checks it).  Evaluating a component at its own
density N_i/V instead changes Δ_i by x_i^{1/3} and breaks this limit.

Values are per molecule of the mixture (units of k or kT), mole-fraction weighted sums of
the components' per-molecule values; energies, heat capacities and zero-point energies
get no mixing term.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from qcorr.errors import PhysicsError
from qcorr.thermo.twophase import TOTALS, GroupResult

__all__ = ["ideal_mixing_entropy", "mixture_result"]


def ideal_mixing_entropy(molecule_counts: Sequence[float]) -> float:
    """Ideal mixing entropy per molecule of the mixture, in units of k.

    ``−Σ x_i ln x_i`` with x_i = N_i / Σ N (McQuarrie, Statistical Mechanics (2000),
    ideal-gas mixtures); ln 2 = 0.693147 for an equimolar binary mixture.

    Parameters
    ----------
    molecule_counts : sequence of float
        Molecules N_i of each component (count, > 0).
    """
    counts = np.asarray(molecule_counts, dtype=float)
    if counts.size < 1 or np.any(~np.isfinite(counts)) or np.any(counts <= 0):
        raise PhysicsError(f"mixture: molecule counts must be positive; got {counts.tolist()}")
    x = counts / counts.sum()
    return float(-np.sum(x * np.log(x)))


def mixture_result(results: Sequence[GroupResult], molecule_counts: Sequence[float]) -> GroupResult:
    """2PT totals of a mixture, per molecule of the mixture (k or kT units).

    Each total of :data:`qcorr.thermo.twophase.TOTALS` is ``Σ x_i X_i``; both entropies
    (quantum and classical columns) add :func:`ideal_mixing_entropy`, which is classical
    (configurational).  The result's ``components`` is empty: the per-component values
    are the components' own rows.

    Parameters
    ----------
    results : sequence of GroupResult
        One-kind 2PT of each component, evaluated at the total density.
    molecule_counts : sequence of float
        N_i of each component, same order.
    """
    if len(results) != len(molecule_counts) or len(results) < 2:
        raise PhysicsError("mixture: need the 2PT results and molecule counts of at least two components")
    counts = np.asarray(molecule_counts, dtype=float)
    mixing = ideal_mixing_entropy(counts)
    x = counts / counts.sum()
    totals = {name: float(sum(xi * getattr(r, name) for xi, r in zip(x, results))) for name in TOTALS}
    totals["entropy"] += mixing
    totals["entropy_classical"] += mixing
    if not all(math.isfinite(v) for v in totals.values()):
        raise PhysicsError("mixture: a component's 2PT result is not finite")
    return GroupResult(components={}, **totals)
