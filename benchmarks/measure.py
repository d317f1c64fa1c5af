"""What every benchmark shares: the JSON line it prints and the best-of-N timer.

Not a benchmark itself (``make bench`` runs ``benchmarks/bench_*.py``); each
script imports it from its own folder, which Python puts first on ``sys.path``.
"""

from __future__ import annotations

import json
import time
from typing import Callable


def emit(metric: str, value: float, unit: str, target: float | None, better: str, digits: int | None = None) -> None:
    """Print one figure as the JSON line ``{"metric", "value", "unit", "target", "better"}``."""
    if digits is not None:
        value = round(value, digits)
    print(json.dumps({"metric": metric, "value": value, "unit": unit, "target": target, "better": better}),
          flush=True)


def best_of(fn: Callable[[], object], repeats: int = 3) -> float:
    """The shortest wall time of ``repeats`` calls of ``fn``, in seconds (the least disturbed run)."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)
