"""2PT against thermodynamic integration of the same models (issue 14), slow.

The references are made with OpenMM by ``scripts/make_liquid_references.py`` (absolute
classical entropy by thermodynamic integration from the ideal gas; cached, regenerated on
a fresh machine, ~6 min, shared with ``tests/test_liquid_references.py``).  Their 50 ps NVE
trajectories go through ``qcorr spectrum --molecular`` and ``qcorr liquid`` here (about
30 s).  The 2PT entropy in the classical column (classical harmonic weights on the
solid-like part) is compared with the TI entropy, both classical and per mole of atoms.

What is asserted, and why:

* the default is within :data:`DEFAULT_ACCURACY` of TI (plus three combined standard
  errors) on pure argon and on the Ar–Kr mixture: the accuracy ``docs/liquids.md`` states;
* with the gas volume V/(fN) the two hard-sphere entropy forms bracket TI (the same
  bracket as the Johnson–Zollweg–Gubbins test of ``tests/test_liquid_command.py``);
* the mixture rule (components at the total density plus the ideal mixing entropy,
  ``qcorr.thermo.twophase_mixture``) adds no error of its own: the mixture's relative
  error equals pure argon's within :data:`MIXING_RULE_ACCURACY`.  Without the mixing term
  the mixture would be low by R ln 2 = 5.76 J/(mol K) (8 %), far outside it;
* the Green–Kubo (VACF integral over one segment) and Einstein (MSD) diffusion coefficients
  agree within 10 %, and both lie below D from the tapered S(0) (``methods.md`` §8.3).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from repository_scripts import load_script
from scipy import constants as sc

ROOT = Path(__file__).resolve().parent.parent
SCRIPTS = ROOT / "scripts"

#: accuracy of the default 2PT entropy on the Lennard-Jones references (docs/liquids.md)
DEFAULT_ACCURACY = 0.02
#: the mixture's relative error minus pure argon's (percentage points as a fraction)
MIXING_RULE_ACCURACY = 0.015

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def spectra_of_references(tmp_path_factory):
    """Spectrum files (5 ps segments, --molecular) of both references, and the references."""
    from qcorr.cli import main

    refs = load_script("make_liquid_references")
    output_dir = refs.default_output_dir()
    refs.make_references(list(refs.LIQUID_SYSTEMS.values()), output_dir, jobs=2)
    out = tmp_path_factory.mktemp("liquid_validation")
    made = {}
    for name, groups in (("argon_liquid_86K", []),
                         ("argon_krypton_liquid_117K", ["--group", "ar=resname AR", "--group", "kr=resname KR"])):
        ref = refs.load_liquid_reference(name, output_dir=output_dir, make=False)
        path = out / f"{name}.nc"
        code = main(["spectrum", "--topology", str(ref.topology), "--trajectory", str(ref.trajectory),
                     "--temperature", f"{ref.record['state']['temperature_K']:g}",
                     "--segment-ps", "5", "--molecular", "--progress", "never", "--output", str(path), *groups])
        assert code == 0
        made[name] = (path, ref)
    return made, out


def _entropy(path, out, *options, group="total"):
    """(classical entropy, its standard error) in J/(mol K) of *group* from qcorr liquid."""
    from qcorr.cli import main

    table = out / ("t_" + "_".join(o.strip("-").replace("=", "_").replace(",", "_") for o in options) + ".csv")
    assert main(["liquid", str(path), "--output", str(table), "--quiet", *options]) == 0
    frame = pd.read_csv(table)
    row = frame[(frame["group"] == group) & (frame["property"] == "entropy") & (frame["method"] == "2pt")].iloc[0]
    return float(row["classical"]), float(row["classical_se"]), frame


def _tolerance(s_2pt_se, ref, relative):
    return relative * ref.values["entropy"]["value"] + 3 * math.hypot(s_2pt_se, ref.values["entropy"]["standard_error"])


def test_default_argon_entropy_against_thermodynamic_integration(spectra_of_references):
    made, out = spectra_of_references
    path, ref = made["argon_liquid_86K"]
    s, se, _ = _entropy(path, out)
    s_ti = ref.values["entropy"]["value"]
    print(f"argon 2PT default {s:.3f} +- {se:.3f}, TI {s_ti:.3f}: {s / s_ti - 1:+.2%}")
    assert abs(s - s_ti) <= _tolerance(se, ref, DEFAULT_ACCURACY)


def test_hard_sphere_forms_bracket_thermodynamic_integration(spectra_of_references):
    made, out = spectra_of_references
    path, ref = made["argon_liquid_86K"]
    s_pub, _, _ = _entropy(path, out, "--gas-volume", "gas-particles")
    s_cv, _, _ = _entropy(path, out, "--gas-volume", "gas-particles", "--hard-sphere-entropy", "constant-volume")
    assert s_cv < ref.values["entropy"]["value"] < s_pub


def test_mixture_rule_adds_no_error_of_its_own(spectra_of_references):
    made, out = spectra_of_references
    path_ar, ref_ar = made["argon_liquid_86K"]
    path, ref = made["argon_krypton_liquid_117K"]
    s, se, frame = _entropy(path, out, "--mixture", "total=ar,kr")
    s_ti = ref.values["entropy"]["value"]
    s_ar, _, _ = _entropy(path_ar, out)
    err_mix, err_ar = s / s_ti - 1, s_ar / ref_ar.values["entropy"]["value"] - 1
    print(f"Ar-Kr 2PT default {s:.3f} +- {se:.3f}, TI {s_ti:.3f}: {err_mix:+.2%} (argon {err_ar:+.2%})")
    mixing = frame[(frame["group"] == "total") & (frame["property"] == "entropy_mixing")].iloc[0]
    assert mixing["classical"] == pytest.approx(sc.R * math.log(2), rel=1e-12)  # McQuarrie, ideal mixing
    assert abs(err_mix - err_ar) <= MIXING_RULE_ACCURACY
    assert abs(s - s_ti) <= _tolerance(se, ref, DEFAULT_ACCURACY)


def test_diffusion_from_spectrum_and_displacement_agree(spectra_of_references):
    import json

    made, out = spectra_of_references
    for name, (path, _) in made.items():
        table = out / f"{name}_diffusion.csv"
        from qcorr.cli import main

        assert main(["liquid", str(path), "--output", str(table), "--quiet"]
                    + (["--mixture", "total=ar,kr"] if "krypton" in name else [])) == 0
        # one-atom molecules: the centre-of-mass VACF is the atomic VACF (same velocities)
        import xarray as xr

        with xr.open_dataset(path) as ds:
            com, atoms = ds["vacf_translation_segments_raw"].values, ds["vacf_segments_raw"].values
            assert np.allclose(com, atoms, rtol=1e-9, atol=1e-9 * np.abs(atoms).max())
        for group, info in json.loads(table.with_suffix(".json").read_text())["groups"].items():
            d_gk = info["self_diffusion_from_vacf_integral_m2_per_s"]
            d_msd = info["self_diffusion_from_msd_m2_per_s"]
            assert info["diffusion_source_used"] == "vacf-integral"
            assert d_gk == pytest.approx(d_msd, rel=0.10), (name, group)
            # the taper-free value lies below the tapered S(0) (methods.md §8.3: S(0) biased high)
            assert d_gk < info["self_diffusion_from_spectrum_m2_per_s"], (name, group)
