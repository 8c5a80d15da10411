"""What ``qcorr spectrum`` and ``qcorr combine`` print when they write a spectrum file."""

from __future__ import annotations

import sys


def write_with_report(ds, checks, output: str, save=None) -> None:
    """Print the passed checks, write the file (*save*, default the spectrum-file writer), print a summary.

    Shared with ``qcorr combine``; warnings were emitted where the checks ran.
    """
    from qcorr.spectra.spectrum_file import write_spectrum

    for check in checks:
        if check.status == "ok":
            print(f"qcorr: {check.check}: {check.message}", file=sys.stderr)
    (save or (lambda path: write_spectrum(ds, path)))(output)
    groups = ", ".join(
        f"{g} ({float(dof):g} dof, {float(t):.1f} K)"
        for g, dof, t in zip(ds["group"].values, ds["degrees_of_freedom"].values,
                             ds["kinetic_temperature"].values)
    )
    print(f"qcorr: wrote {output}: {ds.sizes['segment']} segments; groups {groups}", file=sys.stderr)
