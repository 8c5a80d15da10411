"""The engines' energy output, read with established libraries, as one series with explicit units.

Every reader returns an :class:`EnergySeries`: energies of the **whole simulated system** in
kJ per mole of systems (the convention GROMACS and OpenMM write; LAMMPS "real" kcal/mol and
"metal"/ASE eV per system are converted), temperature in K, volume in nm³, time in ps.  A
column is only used when its unit is identified: from the file (GROMACS ``.edr`` unit
records via ``pyedr.get_unit_dictionary``; the ``"Name (unit)"`` headers of OpenMM's
``StateDataReporter``), from the format's fixed convention (ASE: eV and Å, the ASE
documentation's units), or from the LAMMPS unit style the user declares (a LAMMPS log has
no units in it; the ``units`` command it echoes is checked against the declaration).  A file
whose energy column cannot be identified is refused.

Formats (:data:`ENERGY_FORMATS`):

``gromacs-edr``
    ``pyedr.edr_to_dict``; columns ``Total Energy`` (or ``Potential`` + ``Kinetic En.``),
    ``Kinetic En.``, ``Potential``, ``Temperature``, ``Volume``, ``pV``.  Files older than
    enx version 2 record every unit as kJ/mol (temperature included), so their units are
    not trusted and the file is refused.  GROMACS writes ``pV`` = V × the barostat's
    reference pressure (checked on the files shipped with pyedr: pV/V = 1 bar in every
    frame), from which the reference pressure is taken.
``lammps-log``
    ``lammps_logfile.File``; the thermo output of the **last run** in the log; keywords
    ``TotEng`` (or ``PotEng`` + ``KinEng``), ``KinEng``, ``PotEng``, ``Temp``, ``Volume``,
    ``Time``.  Unit styles ``real`` (kcal/mol, Å³, fs) and ``metal`` (eV, Å³, ps); a log
    with ``thermo_modify norm yes`` (energies per atom) is refused.
``openmm-csv``
    ``StateDataReporter`` CSV (header line ``#"Time (ps)","Potential Energy (kJ/mole)",...``)
    read with pandas.
``ase``
    any file ``ase.io.read`` reads with energies and momenta per frame (e.g. an ASE
    ``.traj`` written during MD): potential energy, kinetic energy from the momenta, cell
    volume of periodic frames; no time stamps.
"""

from __future__ import annotations

import math
import os
import re
import warnings
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError, UnitsError

FloatArray = NDArray[np.float64]

#: the energy-file formats qcorr reads
ENERGY_FORMATS = ("gromacs-edr", "lammps-log", "openmm-csv", "ase")
#: LAMMPS unit styles whose energy, volume and time units are known here
LAMMPS_STYLES = {
    # style: (kJ/mol per energy unit, nm^3 per volume unit, ps per time unit)
    "real": (C.calorie_J, 1e-3, 1e-3),
    "metal": (C.electron_volt_J * C.avogadro_per_mol / 1000.0, 1e-3, 1.0),
}
#: fewest samples a series must hold to estimate a fluctuation
MINIMUM_SAMPLES = 20


@dataclass(frozen=True)
class EnergySeries:
    """Per-sample energies of a whole simulated system, with explicit units.

    Attributes
    ----------
    path : str
        The file read.
    file_format : str
        One of :data:`ENERGY_FORMATS`.
    total_energy_kJ_per_mol : numpy.ndarray
        Kinetic + potential energy of the whole system, kJ per mole of systems.
    kinetic_energy_kJ_per_mol, potential_energy_kJ_per_mol : numpy.ndarray or None
        Its parts, when the file has them.
    temperature_K : numpy.ndarray or None
        The engine's instantaneous temperature.
    volume_nm3 : numpy.ndarray or None
        Box volume.
    time_ps : numpy.ndarray or None
        Time stamps (None when the format has none).
    reference_pressure_bar : float or None
        Barostat reference pressure recorded in the file (GROMACS ``pV``/``Volume``).
    columns : dict
        Which file column, with its unit, gave each quantity (for the provenance).
    """

    path: str
    file_format: str
    total_energy_kJ_per_mol: FloatArray
    kinetic_energy_kJ_per_mol: FloatArray | None = None
    potential_energy_kJ_per_mol: FloatArray | None = None
    temperature_K: FloatArray | None = None
    volume_nm3: FloatArray | None = None
    time_ps: FloatArray | None = None
    reference_pressure_bar: float | None = None
    columns: dict[str, str] = field(default_factory=dict)

    @property
    def sample_count(self) -> int:
        """Number of samples (rows) in the series."""
        return int(self.total_energy_kJ_per_mol.size)


def _library(module: str, package: str, where: str):
    """Import the reader library of a format, or say which package to install."""
    import importlib

    try:
        return importlib.import_module(module)
    except ImportError:
        raise ConfigError(f"{where}: reading it needs the Python package '{package}' "
                          "(pip install 'qcorr[energy-files]')") from None


def _where(path: str | os.PathLike[str], file_format: str) -> str:
    return f"energy file '{os.fspath(path)}' ({file_format})"


def _array(values, where: str, name: str) -> FloatArray:
    arr = np.asarray(values, dtype=float)
    bad = ~np.isfinite(arr)
    if bad.any():
        raise ConfigError(f"{where}: column {name} has a non-finite value in sample {int(np.argmax(bad))}; "
                          "give a complete energy file")
    return arr


#: first XDR integer of an .edr file of enx version >= 2 (GROMACS enxio; pyedr checks the same)
EDR_MAGIC = -55555
#: an enx version 1 file starts with its number of energy terms instead (a few dozen)
EDR_VERSION_1_TERMS_LIMIT = 10000


def _check_edr_magic(path: Path, where: str) -> None:
    """Refuse a file that does not start like an .edr file before pyedr reads it (pyedr takes any
    positive first integer for the term count of an old file and allocates that many objects)."""
    head = path.open("rb").read(4)
    first = int.from_bytes(head, "big", signed=True) if len(head) == 4 else 0
    if first == EDR_MAGIC:
        return
    if 0 < first < EDR_VERSION_1_TERMS_LIMIT:
        raise UnitsError(f"{where} is an enx version 1 file, which records no units (pyedr reports every unit "
                         "as kJ/mol); give an energy file of enx version 2 or later")
    raise ConfigError(f"{where} is not a readable GROMACS energy file (no .edr magic number); check "
                      "--energy-format")


def _gromacs(path: Path, where: str) -> EnergySeries:
    pyedr = _library("pyedr", "pyedr", where)
    _check_edr_magic(path, where)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pyedr notes the enx file version on every read
        try:
            data = pyedr.edr_to_dict(os.fspath(path))
            found = pyedr.get_unit_dictionary(os.fspath(path))
        except Exception as err:  # pyedr raises several types on files that are not .edr
            raise ConfigError(f"{where} is not a readable GROMACS energy file ({type(err).__name__}); "
                              "check --energy-format") from None
    if found.get("Temperature", "K") != "K":
        raise UnitsError(f"{where}: the file records the unit of Temperature as {found['Temperature']!r} "
                         "(pyedr reports every unit of enx files older than version 2 as kJ/mol), so its "
                         "units cannot be trusted; give an energy file of enx version 2 or later")
    wanted = {"total": "Total Energy", "kinetic": "Kinetic En.", "potential": "Potential",
              "temperature": "Temperature", "volume": "Volume", "time": "Time", "pv": "pV"}
    expected = {"total": "kJ/mol", "kinetic": "kJ/mol", "potential": "kJ/mol", "temperature": "K",
                "volume": "nm^3", "time": "ps", "pv": "kJ/mol"}
    got: dict[str, FloatArray] = {}
    columns: dict[str, str] = {}
    for key, name in wanted.items():
        if name not in data:
            continue
        unit = found.get(name, "ps" if name == "Time" else None)
        if unit != expected[key]:
            if key in ("total", "kinetic", "potential"):
                raise UnitsError(f"{where}: column {name!r} has unit {unit!r}, not kJ/mol; qcorr cannot "
                                 "identify it")
            continue
        got[key] = _array(data[name], where, repr(name))
        columns[key] = f"{name} ({unit})"
    if "total" not in got:
        if "kinetic" in got and "potential" in got:
            got["total"] = got["kinetic"] + got["potential"]
            columns["total"] = "Kinetic En. + Potential (kJ/mol)"
        else:
            raise ConfigError(f"{where} has no 'Total Energy' (nor 'Potential' and 'Kinetic En.'); "
                              f"columns: {', '.join(data)}")
    pressure = None
    if "pv" in got and "volume" in got:
        ratio = got["pv"] / (got["volume"] * C.bar_nm3_kJ_per_mol)
        pressure = float(np.median(ratio))
        columns["reference_pressure"] = "pV / Volume (bar)"
    return EnergySeries(
        path=os.fspath(path), file_format="gromacs-edr", total_energy_kJ_per_mol=got["total"],
        kinetic_energy_kJ_per_mol=got.get("kinetic"), potential_energy_kJ_per_mol=got.get("potential"),
        temperature_K=got.get("temperature"), volume_nm3=got.get("volume"), time_ps=got.get("time"),
        reference_pressure_bar=pressure, columns=columns,
    )


#: LAMMPS input commands that the log echoes and that decide how to read the thermo output
_LAMMPS_UNITS = re.compile(r"^\s*units\s+(\S+)", re.MULTILINE)
_LAMMPS_NORM = re.compile(r"^\s*thermo_modify\s.*\bnorm\s+(yes|no)\b", re.MULTILINE)


def lammps_unit_style(text: str) -> str | None:
    """The unit style of the last ``units`` command a LAMMPS log echoes (None if none)."""
    found = _LAMMPS_UNITS.findall(text)
    return found[-1] if found else None


def _lammps(path: Path, where: str, style: str | None) -> EnergySeries:
    lammps_logfile = _library("lammps_logfile", "lammps-logfile", where)

    text = path.read_text(encoding="utf-8", errors="replace")
    echoed = lammps_unit_style(text)
    if style is None:
        style = echoed
        if style is None:
            raise UnitsError(f"{where}: a LAMMPS log carries no units and this one echoes no 'units' "
                             "command; give the unit style with --lammps-units real|metal")
    if style not in LAMMPS_STYLES:
        raise UnitsError(f"{where}: LAMMPS unit style {style!r} is not supported for energies; "
                         f"use one of {', '.join(LAMMPS_STYLES)}")
    if echoed is not None and echoed != style:
        raise UnitsError(f"{where}: the log's 'units {echoed}' contradicts --lammps-units {style}; "
                         "give the style the run used")
    norm = _LAMMPS_NORM.findall(text)
    if norm and norm[-1] == "yes":
        raise UnitsError(f"{where}: the log sets 'thermo_modify norm yes' (energies per atom); "
                         "rerun or reprint thermo output with 'norm no' (per system)")
    with open(path, encoding="utf-8", errors="replace") as handle:  # the library leaves a path's file open
        log = lammps_logfile.File(handle)
    runs = log.get_num_partial_logs()
    if runs == 0:
        raise ConfigError(f"{where} holds no thermo output; check --energy-format")
    last = runs - 1
    keys = log.get_keywords(run_num=last) or []
    energy, volume, time = LAMMPS_STYLES[style]
    got: dict[str, FloatArray] = {}
    columns: dict[str, str] = {}
    units = {"TotEng": "energy", "KinEng": "energy", "PotEng": "energy", "Temp": "K",
             "Volume": "volume", "Time": "time"}
    names = {"TotEng": "total", "KinEng": "kinetic", "PotEng": "potential", "Temp": "temperature",
             "Volume": "volume", "Time": "time"}
    factors = {"energy": energy, "K": 1.0, "volume": volume, "time": time}
    for keyword, key in names.items():
        if keyword in keys:
            got[key] = _array(log.get(keyword, run_num=last), where, keyword) * factors[units[keyword]]
            columns[key] = f"{keyword} (LAMMPS '{style}' units, run {last + 1} of {runs})"
    if "total" not in got:
        if "kinetic" in got and "potential" in got:
            got["total"] = got["kinetic"] + got["potential"]
            columns["total"] = "KinEng + PotEng"
        else:
            raise ConfigError(f"{where}: the last run's thermo output has no TotEng (nor PotEng and "
                              f"KinEng); keywords: {', '.join(keys)}")
    return EnergySeries(
        path=os.fspath(path), file_format="lammps-log", total_energy_kJ_per_mol=got["total"],
        kinetic_energy_kJ_per_mol=got.get("kinetic"), potential_energy_kJ_per_mol=got.get("potential"),
        temperature_K=got.get("temperature"), volume_nm3=got.get("volume"), time_ps=got.get("time"),
        columns=columns,
    )


#: OpenMM StateDataReporter column names -> (quantity, unit, factor to qcorr's unit)
_OPENMM_COLUMNS = {
    "Total Energy": ("total", {"kJ/mole": 1.0}),
    "Kinetic Energy": ("kinetic", {"kJ/mole": 1.0}),
    "Potential Energy": ("potential", {"kJ/mole": 1.0}),
    "Temperature": ("temperature", {"K": 1.0}),
    "Box Volume": ("volume", {"nm^3": 1.0}),
    "Time": ("time", {"ps": 1.0}),
}
_HEADER_ITEM = re.compile(r"^(?P<name>.*?)\s*\((?P<unit>[^()]*)\)$")


def _openmm(path: Path, where: str) -> EnergySeries:
    with path.open(encoding="utf-8", errors="replace") as handle:
        header = handle.readline().rstrip("\n")
    if not header.startswith('#"') or not header.endswith('"'):
        raise ConfigError(f"{where}: the first line is not an OpenMM StateDataReporter header "
                          '(#"Name (unit)",...); check --energy-format')
    separator = header[2:].split('"', 2)[1] if header.count('"') > 2 else ","
    names = header[2:-1].split(f'"{separator}"')
    try:
        frame = pd.read_csv(path, sep=separator, comment=None, skiprows=1, header=None, names=names)
    except Exception as err:  # pandas raises ParserError, ValueError, ...
        raise ConfigError(f"{where} is not readable as CSV ({type(err).__name__})") from None
    got: dict[str, FloatArray] = {}
    columns: dict[str, str] = {}
    for name in names:
        match = _HEADER_ITEM.match(name)
        if not match or match["name"] not in _OPENMM_COLUMNS:
            continue
        key, known = _OPENMM_COLUMNS[match["name"]]
        if match["unit"] not in known:
            raise UnitsError(f"{where}: column {name!r} has unit {match['unit']!r}, which qcorr cannot "
                             f"identify (expected {', '.join(known)})")
        got[key] = _array(pd.to_numeric(frame[name], errors="coerce"), where, repr(name)) * known[match["unit"]]
        columns[key] = name
    if "total" not in got:
        if "kinetic" in got and "potential" in got:
            got["total"] = got["kinetic"] + got["potential"]
            columns["total"] = "Kinetic Energy + Potential Energy (kJ/mole)"
        else:
            raise ConfigError(f"{where} has no 'Total Energy (kJ/mole)' column (nor potential and "
                              "kinetic energy); write it with StateDataReporter(totalEnergy=True)")
    return EnergySeries(
        path=os.fspath(path), file_format="openmm-csv", total_energy_kJ_per_mol=got["total"],
        kinetic_energy_kJ_per_mol=got.get("kinetic"), potential_energy_kJ_per_mol=got.get("potential"),
        temperature_K=got.get("temperature"), volume_nm3=got.get("volume"), time_ps=got.get("time"),
        columns=columns,
    )


def _ase(path: Path, where: str) -> EnergySeries:
    ase_io = _library("ase.io", "ase", where)

    try:
        frames = ase_io.read(os.fspath(path), index=":")
    except Exception as err:  # ase raises many types for unreadable files
        raise ConfigError(f"{where} is not readable by ase.io.read ({type(err).__name__}); "
                          "check --energy-format") from None
    frames = frames if isinstance(frames, list) else [frames]
    ev = C.electron_volt_J * C.avogadro_per_mol / 1000.0
    potential, kinetic, volume = [], [], []
    for number, atoms in enumerate(frames):
        try:
            potential.append(atoms.get_potential_energy() * ev)
        except Exception:  # no calculator results stored with the frame
            raise ConfigError(f"{where}: frame {number} stores no potential energy; write the "
                              "trajectory with the calculator attached") from None
        if not atoms.has("momenta"):
            raise ConfigError(f"{where}: frame {number} stores no momenta, so no kinetic energy")
        kinetic.append(atoms.get_kinetic_energy() * ev)
        volume.append(atoms.get_volume() * 1e-3 if all(atoms.pbc) else math.nan)
    potential_arr = _array(potential, where, "potential energy")
    kinetic_arr = _array(kinetic, where, "kinetic energy")
    volume_arr = np.asarray(volume) if np.all(np.isfinite(volume)) else None
    return EnergySeries(
        path=os.fspath(path), file_format="ase", total_energy_kJ_per_mol=potential_arr + kinetic_arr,
        kinetic_energy_kJ_per_mol=kinetic_arr, potential_energy_kJ_per_mol=potential_arr,
        volume_nm3=volume_arr,
        columns={"total": "potential + kinetic energy (eV, ASE units)", "kinetic": "from momenta (eV)",
                 "potential": "calculator energy (eV)", **({"volume": "cell volume (Å^3)"} if volume_arr is not None else {})},
    )


def read_energy_file(
    path: str | os.PathLike[str],
    file_format: str,
    *,
    lammps_units: str | None = None,
    start_ps: float = 0.0,
) -> EnergySeries:
    """Read an engine's energy output.

    Parameters
    ----------
    path : str or path-like
        The file.
    file_format : str
        One of :data:`ENERGY_FORMATS`.
    lammps_units : str, optional
        LAMMPS unit style (``real`` or ``metal``) of a ``lammps-log``; default the ``units``
        command the log echoes.
    start_ps : float
        Samples before this time (ps) are dropped (equilibration); needs time stamps.

    Returns
    -------
    EnergySeries
        Energies of the whole system in kJ per mole of systems, K, nm³, ps.

    Raises
    ------
    ConfigError
        Missing or unreadable file, unknown format, no energy column, too few samples.
    UnitsError
        A column whose unit cannot be identified, or a LAMMPS style that contradicts the log.
    """
    path = Path(path)
    if file_format not in ENERGY_FORMATS:
        raise ConfigError(f"--energy-format {file_format!r}: choose one of {', '.join(ENERGY_FORMATS)}")
    where = _where(path, file_format)
    if not path.is_file():
        raise ConfigError(f"{where} does not exist; check --energy-file")
    if lammps_units is not None and file_format != "lammps-log":
        raise ConfigError(f"--lammps-units applies to lammps-log energy files, not {file_format}")
    reader = {"gromacs-edr": _gromacs, "openmm-csv": _openmm, "ase": _ase}
    series = (_lammps(path, where, lammps_units) if file_format == "lammps-log"
              else reader[file_format](path, where))
    if not (math.isfinite(start_ps) and start_ps >= 0):
        raise ConfigError(f"--energy-start {start_ps}: give a time >= 0 ps")
    if start_ps > 0:
        if series.time_ps is None:
            raise ConfigError(f"{where} has no time stamps, so --energy-start cannot select samples")
        series = select_samples(series, series.time_ps >= start_ps)
    if series.sample_count < MINIMUM_SAMPLES:
        raise ConfigError(f"{where} holds {series.sample_count} samples (after --energy-start); at least "
                          f"{MINIMUM_SAMPLES} are needed for a fluctuation or a mean with an error")
    return series


def select_samples(series: EnergySeries, keep: NDArray[np.bool_]) -> EnergySeries:
    """The samples of *series* where *keep* is true (a copy)."""

    def cut(values):
        return None if values is None else np.asarray(values)[keep]

    return replace(series, total_energy_kJ_per_mol=cut(series.total_energy_kJ_per_mol),
                   kinetic_energy_kJ_per_mol=cut(series.kinetic_energy_kJ_per_mol),
                   potential_energy_kJ_per_mol=cut(series.potential_energy_kJ_per_mol),
                   temperature_K=cut(series.temperature_K), volume_nm3=cut(series.volume_nm3),
                   time_ps=cut(series.time_ps))
