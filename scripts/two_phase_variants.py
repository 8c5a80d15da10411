"""Every 2PT variant of ``qcorr liquid`` against thermodynamic integration (TI), as a Markdown table.

Runs ``qcorr spectrum --molecular`` on the NVE trajectories of the liquid references
(``scripts/make_liquid_references.py``; made first if missing, ~6 min) with 5 ps and 20 ps
segments, then ``two_phase_properties`` with each hard-sphere entropy form, gas volume and
zero-frequency source, and prints the classical 2PT entropy, its standard error and its
deviation from the TI entropy (J/(mol K) per mole of atoms).  The table in
``docs/liquids.md`` was made with it.  About 1–2 min after the references exist.

Usage: ``python scripts/two_phase_variants.py [--output-dir DIR]``
"""

from __future__ import annotations

import argparse
import importlib.util
import itertools
import sys
import tempfile
import warnings
from pathlib import Path

SCRIPTS = Path(__file__).resolve().parent

SYSTEMS = {
    "argon_liquid_86K": {"groups": [], "mixtures": None},
    "argon_krypton_liquid_117K": {"groups": ["--group", "ar=resname AR", "--group", "kr=resname KR"],
                                  "mixtures": {"total": ["ar", "kr"]}},
}
VARIANTS = list(itertools.product(("published", "constant-volume"), ("all-particles", "gas-particles"),
                                  ("vacf-integral", "msd", "spectrum")))


def _references_module():
    spec = importlib.util.spec_from_file_location("make_liquid_references", SCRIPTS / "make_liquid_references.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    sys.path.insert(0, str(SCRIPTS))
    spec.loader.exec_module(module)
    return module


def variant_rows(output_dir: Path | None = None, segments_ps=(5, 20)) -> list[dict]:
    """One dict per system × segment length × variant: entropy, its standard error, TI, deviation."""
    import xarray as xr

    from qcorr.cli import main
    from qcorr.thermo.twophase_table import two_phase_properties

    refs = _references_module()
    output_dir = output_dir or refs.default_output_dir()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for name, setup in SYSTEMS.items():
            ref = refs.load_liquid_reference(name, output_dir=output_dir)
            s_ti = ref.values["entropy"]["value"]
            for seg in segments_ps:
                path = Path(tmp) / f"{name}_{seg}.nc"
                code = main(["spectrum", "--topology", str(ref.topology), "--trajectory", str(ref.trajectory),
                             "--temperature", f"{ref.record['state']['temperature_K']:g}", "--segment-ps", str(seg),
                             "--molecular", "--progress", "never", "--output", str(path), *setup["groups"]])
                if code != 0:
                    raise SystemExit(f"qcorr spectrum failed on {name}")
                ds = xr.open_dataset(path)
                for form, volume, diffusion in VARIANTS:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        frame = two_phase_properties(ds, hard_sphere_entropy=form, gas_volume=volume,
                                                     diffusion_from=diffusion, mixtures=setup["mixtures"])
                    row = frame[(frame.group == "total") & (frame.property == "entropy")].iloc[0]
                    rows.append({"system": name, "segment_ps": seg, "hard_sphere_entropy": form,
                                 "gas_volume": volume, "diffusion_from": diffusion, "entropy": row.classical,
                                 "entropy_se": row.classical_se, "ti": s_ti,
                                 "ti_se": ref.values["entropy"]["standard_error"],
                                 "deviation": row.classical / s_ti - 1.0})
                ds.close()
    return rows


def markdown(rows: list[dict]) -> str:
    """The rows as a Markdown table (J/(mol K) per mole of atoms)."""
    lines = ["| system | segment | hard-sphere entropy | gas volume | S(0) from | 2PT S | TI S | 2PT − TI |",
             "|---|---|---|---|---|---|---|---|"]
    for r in rows:
        lines.append(f"| {r['system']} | {r['segment_ps']} ps | {r['hard_sphere_entropy']} | {r['gas_volume']} | "
                     f"{r['diffusion_from']} | {r['entropy']:.2f} ± {r['entropy_se']:.2f} | "
                     f"{r['ti']:.2f} ± {r['ti_se']:.2f} | {r['deviation']:+.1%} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output-dir", type=Path, default=None,
                        help="validation directory of the references (default: $QCORR_VALIDATION_DIR or "
                             "~/.cache/qcorr-validation)")
    args = parser.parse_args(argv)
    print(markdown(variant_rows(args.output_dir)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
