"""Human-facing summaries of a property table: printed text, Markdown and HTML.

The CSV keeps full precision for machines; a summary is for people and shows each value
only to the digits its standard error supports.  The rounding rule is the one of the
Particle Data Group (R. L. Workman et al. (Particle Data Group), Prog. Theor. Exp.
Phys. 2022, 083C01, Introduction, section 5.3, "Rounding"): the standard error keeps two
significant digits when its three leading digits are 100-354, one digit when they are
355-949, and 950-999 round up to 1000 with two digits; the value is rounded to the same
decimal place.  A value without a standard error (one segment, or none defined) keeps
six significant digits; an exact value (standard error 0) is shown without one.

:func:`summary_text` is what ``qcorr properties`` and ``qcorr liquid`` print;
:func:`summary_markdown` and :func:`summary_html` are the files ``qcorr merge`` writes
beside the merged table for reports (the HTML table sorts by a click on a column head).
"""

from __future__ import annotations

import html
import math

import pandas as pd

from qcorr import units
from qcorr.outputs.table import BASES

#: the basis a summary shows (with every row whose basis is not a value basis)
SUMMARY_BASIS = "per_mole_molecules"


def _finite(x: object) -> bool:
    return isinstance(x, (int, float)) and math.isfinite(float(x))


def round_to_error(value: float, error: float | None) -> str:
    """*value* ± *error*, each to the digits the standard error supports (PDG rule).

    >>> round_to_error(24.3712, 0.0234)
    '24.371 ± 0.023'
    >>> round_to_error(1.2345, 0.56)
    '1.2 ± 0.6'
    >>> round_to_error(3.14159e-21, 2.5e-23)
    '(3.142 ± 0.025)e-21'
    """
    if not _finite(value):
        return ""
    value = float(value)
    if not _finite(error) or float(error) < 0:
        return f"{value:.6g}"
    error = float(error)
    if error == 0.0:
        return f"{value:.6g}"
    exponent = math.floor(math.log10(error))
    leading = error / 10.0 ** (exponent - 2)  # 100 <= leading < 1000
    if leading >= 999.5 or round(leading) >= 950:
        error = 10.0 ** (exponent + 1)
        exponent, digits = exponent + 1, 2
    else:
        digits = 2 if round(leading) < 355 else 1
    place = exponent - digits + 1  # power of ten of the last digit shown
    if -6 <= place <= 3 and abs(value) < 1e7:
        decimals = max(0, -place)
        v = round(value, -place) if place < 0 else round(value / 10.0**place) * 10.0**place
        e = round(error, -place) if place < 0 else round(error / 10.0**place) * 10.0**place
        return f"{v:.{decimals}f} ± {e:.{decimals}f}"
    scale = math.floor(math.log10(abs(value))) if value != 0 else exponent
    decimals = max(0, scale - place)
    return (f"({value / 10.0**scale:.{decimals}f} ± {error / 10.0**scale:.{decimals}f})"
            f"e{scale:+d}".replace("e+", "e"))


def _cell(value: float, error: float, note: str) -> str:
    text = round_to_error(value, error)
    if not text and "refused" in str(note):
        return "refused (see CSV note)"
    return text


#: rows of these methods come first in a summary: they are the answer (issue 13)
ANSWER_METHODS = ("corrected",)


def summary_frame(frame: pd.DataFrame, basis: str = SUMMARY_BASIS) -> pd.DataFrame:
    """The rows of one basis (and the rows without a value basis), as rounded text.

    Rows of :data:`ANSWER_METHODS` (corrected observables) come first, in their table order;
    the columns ``reference`` and ``deviation`` are shown when a row has a reference value.
    """
    keep = frame[(frame["basis"] == basis) | ~frame["basis"].isin(BASES)]
    first = keep["method"].isin(ANSWER_METHODS)
    keep = pd.concat([keep[first], keep[~first]])
    shown = pd.DataFrame(
        {
            "system": keep["system"],
            "group": keep["group"],
            "method": keep["method"],
            "T/K": keep["temperature_K"].map(lambda t: f"{t:g}"),
            "property": keep["property"],
            "unit": keep["unit"].map(units.pretty),
            "classical": [_cell(v, e, n) for v, e, n in
                          zip(keep["classical"], keep["classical_se"], keep["note"])],
            "quantum": [_cell(v, e, n) for v, e, n in
                        zip(keep["quantum"], keep["quantum_se"], keep["note"])],
            "correction": [round_to_error(v, e) for v, e in
                           zip(keep["correction"], keep["correction_se"])],
            "note": keep["note"].fillna(""),
        }
    ).reset_index(drop=True)
    if "reference" in keep.columns and keep["reference"].notna().any():
        position = list(shown.columns).index("correction") + 1
        shown.insert(position, "reference", [
            round_to_error(v, e) + (f" ({src})" if src else "")
            for v, e, src in zip(keep["reference"], keep["reference_se"], keep["reference_source"])])
        shown.insert(position + 1, "deviation", [
            round_to_error(v, e) for v, e in zip(keep["deviation"], keep["deviation_se"])])
    return shown


def format_table(frame: pd.DataFrame, basis: str = SUMMARY_BASIS) -> str:
    """Readable text table of one basis (values rounded to their standard errors).

    Rows of the chosen basis, plus rows whose basis is not one of
    :data:`qcorr.outputs.table.BASES` (e.g. the mean-square displacement, ``atom_mean``).
    """
    shown = summary_frame(frame, basis).drop(columns="note")
    if shown.empty:
        return "(no rows)"
    return shown.to_string(index=False)


def summary_text(frame: pd.DataFrame, heading: str, basis: str = SUMMARY_BASIS) -> str:
    """What the property commands print: the table of one basis (:func:`format_table`),
    then *heading* and the cautions of ``frame.attrs``, one per line."""
    lines = [format_table(frame, basis), "", f"{heading} Cautions:"]
    lines += [f"- {caution}" for caution in frame.attrs.get("cautions", [])]
    return "\n".join(lines)


_BASIS_WORDS = {
    "per_mole_molecules": "per mole of molecules",
    "per_mole_atoms": "per mole of atoms",
    "per_system": "per simulated system",
}


def _intro(basis: str) -> str:
    return (f"Values {_BASIS_WORDS.get(basis, basis)} (mean-square displacements as mass-weighted "
            "atom means), each rounded to the digits its standard error supports (± one "
            "standard error from the scatter between spectrum segments, or from block averages "
            "of the energy files). Rows of method 'corrected' come first: classical values "
            "measured from the runs plus the quantum correction, the numbers to publish. Full "
            "precision, every basis and the provenance are in the CSV table and its JSON sidecar.")


def summary_markdown(frame: pd.DataFrame, title: str = "Corrected properties",
                     basis: str = SUMMARY_BASIS) -> str:
    """A Markdown page: heading, how to read it, the rounded table, the cautions."""
    shown = summary_frame(frame, basis)
    columns = list(shown.columns)

    def row(cells) -> str:
        return "| " + " | ".join(str(c).replace("|", "\\|").replace("\n", " ") for c in cells) + " |"

    lines = [f"# {title}", "", _intro(basis), "", row(columns), row(["---"] * len(columns))]
    lines += [row(r) for r in shown.itertuples(index=False, name=None)]
    cautions = frame.attrs.get("cautions", [])
    if cautions:
        lines += ["", "## Cautions", ""] + [f"- {c}" for c in cautions]
    return "\n".join(lines) + "\n"


#: sorts a table by the column whose head is clicked (numbers by value, text A-Z),
#: a second click reverses; no external files, so the page works inside a report
_SORT_SCRIPT = """
document.querySelectorAll("table.sortable th").forEach(function (th, col) {
  th.addEventListener("click", function () {
    var table = th.closest("table"), body = table.tBodies[0];
    var up = th.getAttribute("data-order") !== "up";
    table.querySelectorAll("th").forEach(function (h) { h.removeAttribute("data-order"); });
    th.setAttribute("data-order", up ? "up" : "down");
    var rows = Array.prototype.slice.call(body.rows);
    function key(row) {
      var text = row.cells[col].textContent.trim();
      var number = parseFloat(text.replace(/^\\(/, "").replace("\\u2212", "-"));
      return isNaN(number) ? text.toLowerCase() : number;
    }
    rows.sort(function (a, b) {
      var x = key(a), y = key(b);
      if (typeof x !== typeof y) { x = String(x); y = String(y); }
      return (x < y ? -1 : x > y ? 1 : 0) * (up ? 1 : -1);
    });
    rows.forEach(function (r) { body.appendChild(r); });
  });
});
"""

_STYLE = """
body { font-family: sans-serif; margin: 1em; }
table.sortable { border-collapse: collapse; font-size: 0.9em; }
table.sortable th, table.sortable td { border: 1px solid #ccc; padding: 0.2em 0.5em; }
table.sortable th { background: #eee; cursor: pointer; position: sticky; top: 0; }
table.sortable th[data-order="up"]::after { content: " \\25B2"; }
table.sortable th[data-order="down"]::after { content: " \\25BC"; }
td.number { text-align: right; white-space: nowrap; }
"""


def summary_html(frame: pd.DataFrame, title: str = "Corrected properties",
                 basis: str = SUMMARY_BASIS) -> str:
    """A self-contained HTML page: the rounded table (sortable by column) and the cautions."""
    shown = summary_frame(frame, basis)
    numeric = {"T/K", "classical", "quantum", "correction", "deviation"}
    esc = html.escape
    head = "".join(f"<th>{esc(c)}</th>" for c in shown.columns)
    body = []
    for values in shown.itertuples(index=False, name=None):
        cells = "".join(
            f'<td class="number">{esc(str(v))}</td>' if c in numeric else f"<td>{esc(str(v))}</td>"
            for c, v in zip(shown.columns, values)
        )
        body.append(f"<tr>{cells}</tr>")
    cautions = "".join(f"<li>{esc(c)}</li>" for c in frame.attrs.get("cautions", []))
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f"<title>{esc(title)}</title>\n<style>{_STYLE}</style>\n</head>\n<body>\n"
        f"<h1>{esc(title)}</h1>\n<p>{esc(_intro(basis))} Click a column head to sort.</p>\n"
        f'<table class="sortable">\n<thead><tr>{head}</tr></thead>\n<tbody>\n'
        + "\n".join(body)
        + "\n</tbody>\n</table>\n"
        + (f"<h2>Cautions</h2>\n<ul>{cautions}</ul>\n" if cautions else "")
        + f"<script>{_SORT_SCRIPT}</script>\n</body>\n</html>\n"
    )
