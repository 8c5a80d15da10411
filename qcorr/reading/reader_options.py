"""Reader options (``--reader-option KEY=VALUE``): only keywords MDAnalysis really takes.

:class:`MDAnalysis.Universe` passes unknown keywords on to its readers and parsers,
which take ``**kwargs`` and ignore what they do not know: a misspelt ``dt`` would be
dropped without a word.  :func:`check_reader_options` accepts a keyword only if

* every trajectory reader accepts it: the keywords of its ``__init__`` (through its
  class hierarchy), the keywords its ``__init__`` reads from ``**kwargs``, and ``dt``
  and ``time_offset`` (read by :class:`MDAnalysis.coordinates.base.ReaderBase` for every
  reader); or the topology parser reads it (e.g. ``atom_style`` of LAMMPS data files);
  or it is one of :data:`UNIVERSE_KEYWORDS`;
* and it is not one that changes what qcorr reads behind its back (:data:`REFUSED`).

Values are checked where their meaning is known: ``dt`` a finite number > 0,
``time_offset`` a finite number, and a keyword whose default in the reader's signature
is a bool (a number) must be given a bool (a number).
"""

from __future__ import annotations

import inspect
import math
import os
import re
from collections.abc import Mapping, Sequence

from qcorr.errors import ConfigError

__all__ = ["REFUSED", "UNIVERSE_KEYWORDS", "accepted_keywords", "check_reader_options"]

#: keywords of MDAnalysis.Universe that only guess topology attributes (bonds for
#: ``--molecules fragment``, masses and types); they do not change the frames read
UNIVERSE_KEYWORDS = ("guess_bonds", "vdwradii", "fudge_factor", "lower_bound", "to_guess",
                     "force_guess", "context")

#: keywords refused, with the reason
REFUSED: dict[str, str] = {
    "convert_units": "qcorr needs MDAnalysis' conversion to A and ps (its units are checked "
                     "and recorded on that basis)",
    "format": "give the trajectory format with --trajectory-format",
    "topology_format": "give the topology format with --topology-format",
    "in_memory": "qcorr streams frames; loading the whole trajectory only costs memory",
    "in_memory_step": "it drops frames; choose frames with --start/--stop/--step",
    "all_coordinates": "it changes which files are read as frames; list them with --trajectory",
    "transformations": "transformations change positions and velocities before qcorr reads them",
}

_KWARGS_KEY = re.compile(r"kwargs(?:\.get|\.pop)\(\s*['\"](\w+)['\"]|kwargs\[\s*['\"](\w+)['\"]\s*\]")


def _keywords_of(cls: type, methods: Sequence[str]) -> dict[str, object]:
    """Keyword -> default (or None) of *methods* of *cls* and its bases, and the keys their
    source reads from ``**kwargs``."""
    found: dict[str, object] = {}
    for klass in cls.__mro__:
        for name in methods:
            method = vars(klass).get(name)
            if method is None:
                continue
            try:
                signature = inspect.signature(method)
            except (TypeError, ValueError):
                signature = None
            if signature is not None:
                for parameter in signature.parameters.values():
                    if parameter.kind in (parameter.POSITIONAL_OR_KEYWORD, parameter.KEYWORD_ONLY) \
                            and parameter.name not in ("self", "filename"):
                        default = None if parameter.default is parameter.empty else parameter.default
                        found.setdefault(parameter.name, default)
            try:
                source = inspect.getsource(method)
            except (OSError, TypeError):
                continue
            for match in _KWARGS_KEY.finditer(source):
                found.setdefault(match.group(1) or match.group(2), None)
    return found


def accepted_keywords(topology: str | os.PathLike[str], trajectories: Sequence[str | os.PathLike[str]],
                      topology_format: str | None = None, trajectory_format: str | None = None) -> dict[str, object]:
    """Keywords a Universe of these files passes to a reader or parser that uses them -> default.

    A trajectory keyword must be taken by the reader of every trajectory file.
    """
    from MDAnalysis.core._get_readers import get_parser_for, get_reader_for

    readers = []
    for path in trajectories:
        try:
            readers.append(get_reader_for(os.fspath(path), format=trajectory_format))
        except (TypeError, ValueError):
            continue  # an unknown format is reported when the files are opened
    common: dict[str, object] | None = None
    for reader in readers:
        keys = {"dt": None, "time_offset": 0.0, **_keywords_of(reader, ("__init__",))}
        common = keys if common is None else {k: v for k, v in common.items() if k in keys}
    accepted = dict(common or {})
    try:
        parser = get_parser_for(os.fspath(topology), format=topology_format)
        accepted.update({k: v for k, v in _keywords_of(parser, ("parse", "__init__")).items() if k not in accepted})
    except (TypeError, ValueError):
        pass
    accepted.update({key: None for key in UNIVERSE_KEYWORDS if key not in accepted})
    for key in ("args", "kwargs", *REFUSED):
        accepted.pop(key, None)
    return accepted


def _check_value(key: str, value: object, default: object) -> None:
    shown = f"--reader-option {key}={value}"
    number = isinstance(value, (int, float)) and not isinstance(value, bool)
    if key == "dt" and not (number and math.isfinite(value) and value > 0):
        raise ConfigError(f"{shown}: dt must be a finite number > 0 (the frame spacing or MD step in the "
                          "reader's time unit)")
    if key == "time_offset" and not (number and math.isfinite(value)):
        raise ConfigError(f"{shown}: time_offset must be a finite number (ps)")
    if isinstance(default, bool) and not isinstance(value, bool):
        raise ConfigError(f"{shown}: {key} takes true or false")
    if isinstance(default, (int, float)) and not isinstance(default, bool) and not number:
        raise ConfigError(f"{shown}: {key} takes a number")


def check_reader_options(options: Mapping[str, object], topology: str | os.PathLike[str],
                         trajectories: Sequence[str | os.PathLike[str]], topology_format: str | None = None,
                         trajectory_format: str | None = None) -> None:
    """Refuse reader options MDAnalysis would ignore or that change what qcorr reads.

    Parameters
    ----------
    options : mapping
        Keyword -> value (already converted by
        :func:`qcorr.reading.options.parse_option_value`).
    topology, trajectories, topology_format, trajectory_format :
        As given to :func:`qcorr.reading.universe.open_trajectory`.

    Raises
    ------
    ConfigError
        Naming ``--reader-option``, the keyword, and the keywords accepted here.
    """
    if not options:
        return
    accepted = accepted_keywords(topology, trajectories, topology_format, trajectory_format)
    for key, value in options.items():
        if key in REFUSED:
            raise ConfigError(f"--reader-option {key}: not allowed: {REFUSED[key]}")
        if key not in accepted:
            raise ConfigError(
                f"--reader-option {key}: no reader or parser of these files takes '{key}' (MDAnalysis "
                f"would ignore it); keywords taken here: {', '.join(sorted(accepted))}"
            )
        _check_value(key, value, accepted[key])
