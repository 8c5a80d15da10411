"""A function for a worker process to run: unpickle a payload and say when (bench_reading_cost.py).

Kept in its own small module so that a worker imports nothing else to find it.
"""

import pickle
import time


def unpickle_timed(payload: bytes) -> tuple[float, float]:
    """(time.time() on entry, time.time() after ``pickle.loads(payload)``)."""
    entered = time.time()
    pickle.loads(payload)
    return entered, time.time()
