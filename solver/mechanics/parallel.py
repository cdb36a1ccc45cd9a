"""One lock for every launch of a parallel compiled kernel.

numba's fallback threading layer (workqueue, used where neither OpenMP nor TBB is present) must
not be entered from two threads at once, and the dashboard serves viewers from several threads.
Each launch uses every core anyway, so serializing launches costs nothing.
"""

from __future__ import annotations

import threading

PARALLEL_LOCK = threading.Lock()

__all__ = ["PARALLEL_LOCK"]
