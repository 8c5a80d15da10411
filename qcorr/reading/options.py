"""Values of repeated ``KEY=VALUE`` options (``--group``, ``--mass``, ``--reader-option``, ...).

Pure string handling: nothing here opens a file.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

from qcorr.errors import ConfigError

__all__ = ["parse_block", "parse_key_values", "parse_option_value"]


def parse_option_value(text: str) -> int | float | bool | str:
    """Interpret a ``KEY=VALUE`` option value: int, then float, then true/false, else text.

    Parameters
    ----------
    text : str
        The value as typed.

    Returns
    -------
    int, float, bool or str
        ``"3"`` -> 3, ``"0.5"`` -> 0.5, ``"true"``/``"yes"`` -> True,
        ``"false"``/``"no"`` -> False, anything else unchanged.
    """
    for kind in (int, float):
        try:
            return kind(text)
        except ValueError:
            pass
    if text.lower() in ("true", "yes"):
        return True
    if text.lower() in ("false", "no"):
        return False
    return text


def parse_key_values(items: Sequence[str] | None, option: str) -> dict[str, str]:
    """Split repeated ``KEY=VALUE`` options into a dict (keys unique, order kept).

    Parameters
    ----------
    items : sequence of str, optional
        The values given to the option, e.g. ``["water=resname SOL", "ions=name NA"]``.
    option : str
        The option's name, for messages (e.g. ``"--group"``).

    Raises
    ------
    ConfigError
        If an item has no ``=``, an empty key, or a key repeats.
    """
    result: dict[str, str] = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep or not key:
            raise ConfigError(f"{option} expects KEY=VALUE, got {item!r}")
        if key in result:
            raise ConfigError(f"{option} gives {key!r} twice; give each name once")
        result[key] = value.strip()
    return result


def parse_block(text: str | None) -> tuple[int, int]:
    """Frame block ``"I-of-N"`` (option ``--block``) -> ``(I, N)``, 1-based; None -> ``(1, 1)``.

    Raises
    ------
    ConfigError
        If the text is not ``I-of-N`` with ``1 <= I <= N``.
    """
    if text is None:
        return 1, 1
    match = re.fullmatch(r"\s*(\d+)\s*-of-\s*(\d+)\s*", text)
    if not match:
        raise ConfigError(f"--block {text!r}: expected I-of-N, e.g. 2-of-8")
    index, count = int(match.group(1)), int(match.group(2))
    if count < 1 or not 1 <= index <= count:
        raise ConfigError(f"--block {text!r}: I must be between 1 and N")
    return index, count
