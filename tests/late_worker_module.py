"""Helper of tests/test_backends.py: a module that takes 2 s to import (a slow forkserver preload)."""

import os
import time

time.sleep(2.0)


def computing_process(value: int) -> tuple[int, int]:
    """The value squared and the process that computed it."""
    return value * value, os.getpid()
