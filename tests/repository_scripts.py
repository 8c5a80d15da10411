"""Import a script of the repository's scripts/ directory as a module (for the tests).

The scripts make the reference data the tests check against (validation set, liquid
references, positions-only data, demo data); the tests call their loaders and read their
settings.  A script is imported once per test process and registered in ``sys.modules``
under its name: dataclasses and worker processes look the module up there.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path
from types import ModuleType

SCRIPTS = Path(__file__).resolve().parent.parent / "scripts"


def load_script(name: str) -> ModuleType:
    """The module of ``scripts/<name>.py`` (its own directory importable while it loads)."""
    module = sys.modules.get(name)
    if module is not None:
        return module
    spec = importlib.util.spec_from_file_location(name, SCRIPTS / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    sys.path.insert(0, str(SCRIPTS))
    try:
        spec.loader.exec_module(module)
    except BaseException:
        del sys.modules[name]
        raise
    finally:
        sys.path.remove(str(SCRIPTS))
    return module
